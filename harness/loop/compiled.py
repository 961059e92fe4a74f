"""The closed loop in C: the numpy plant's per-sample update, its converters and ld_step, many samples per call.

The numpy plant (harness.plant.plant.Plant) stays the reference and keeps the decisions taken
at a fault or load window edge: there the C loop stops before the sample,
:meth:`CompiledLoop._prepare` runs exactly the preamble of ``Plant.step`` (window, companion,
discretisation refresh by subset) and the C loop carries on from that sample. Between edges
the C loop refolds a load conductance past the tolerance and follows a cable ramp itself
(``Plant._sync``, with the discretisation of c_ref/host/plant_systems.c), writing the plant's
own resistance, folded conductance and step matrices in place. The C code follows the numpy
operations one for one (c_ref/host/plant_loop.c); tests/test_compiled_loop.py holds the two
together.
"""
import numpy as np

from harness.loop import backends
from harness.plant.plant import REFOLD_REL, R_REFRESH_REL
from harness.plant.loads import LAMP_R_EXPONENT, LAMP_U_AMBIENT
from harness.scenario.conductors import T_REF_C
from harness.scenario.specs import LOAD_SHORT_OHM

#: Recorded channels in the C loop's order (c_ref/host/plant_loop.h, ldp_batch_t.rec).
REC_ORDER = ("v_supply_v", "i_supply_a", "v_load_v", "command_v", "r_estimate_ohm", "correction_v",
             "windows", "status", "kp_off", "adc_v_code", "adc_i_code", "command_code")
#: Compensations the C loop runs: linedrop's algorithm on the C backend, or none.
PLANT_CHOICES = ("auto", "numpy", "compiled")


def why_not(backend, compensation):
    """Why the compiled loop cannot run this combination, or None when it can."""
    if compensation == "linedrop" and backend != "c":
        return f"the {backend} backend is Python (the compiled loop holds the C algorithm only)"
    if compensation not in ("linedrop", "none"):
        return f"the {compensation} baseline is Python (the compiled loop runs linedrop or none)"
    return backends.compiled_loop_missing()


def _u8(a):
    return np.ascontiguousarray(a, dtype=np.uint8)


def _f64(a):
    return np.ascontiguousarray(a, dtype=np.float64)


class CompiledLoop:
    """Steps a reset rig in closed loop with ``comp`` (a c_ref CBatch or NoCompensation) in C.

    Parameters
    ----------
    rig : harness.plant.rig.Rig
        Reset by the caller.
    comp : c_ref.binding.CBatch or harness.loop.baselines.NoCompensation
    r_unit, corr_unit : ndarray, shape (B,)
        Factors turning the state's r_est into ohm and corr into volts.
    """

    def __init__(self, rig, comp, r_unit, corr_unit):
        self.rig, self.plant, self.adc, self.dac = rig, rig.plant, rig.adc, rig.dac
        p, loads, n, cables = self.plant, self.plant.loads, self.plant.n_batch, self.plant.cables
        self.n = n
        self.cmd = np.array(comp.field("cmd"), dtype=np.float64)
        self._ramp = np.zeros(n, dtype=np.uint8)
        self._ramp[cables.ramps] = 1
        self._ramp_k = np.full(n, np.inf)
        self._b = b = backends.compiled_loop().LoopBatch(n, p.dt_s)
        b.set(l_h=_f64(p.l_h), g_leak=_f64(p.g_leak), omega=_f64(p.omega), ramp=self._ramp,
              r_start=_f64(cables.r_start), t0_c=_f64(cables.t0_c), t1_c=_f64(cables.t1_c),
              ramp_s=_f64(cables.ramp_s), rho20=_f64(cables.rho20), alpha=_f64(cables.alpha),
              rho0=_f64(cables._rho0), t_ref_c=float(T_REF_C), r_refresh_rel=R_REFRESH_REL,
              ramp_k=self._ramp_k)
        b.set(z=p._z, max_v=_f64(p.max_v), i_lim=_f64(p.i_lim),
              has_limit=int(p._limited), g_short=1.0 / LOAD_SHORT_OHM,
              kind=np.ascontiguousarray(loads.kind, dtype=np.int32), lockout=_u8(loads.lockout),
              cutoff_v=_f64(loads.cutoff_v), restart_v=_f64(loads.restart_v), r_hot=_f64(loads.r_hot),
              rated_w=_f64(loads.rated_w), lamp_tc=_f64(loads.lamp_tc), u=loads.u,
              lamp_exp=LAMP_R_EXPONENT, lamp_u_amb=LAMP_U_AMBIENT, lamp_u_amb4=LAMP_U_AMBIENT**4,
              refold_rel=REFOLD_REL, lsb=_f64(self.adc._lsb), gain=_f64(self.adc.gain),
              offset=_f64(self.adc.offset), adc_max=_f64(self.adc._code_max),
              v_per_code=_f64(self.dac.v_per_code), dac_max=self.dac.code_max.astype(np.float64),
              cmd=self.cmd, r_unit=_f64(r_unit), corr_unit=_f64(corr_unit))
        self._refresh_cb = b.on_refresh(self._numpy_refresh)
        if hasattr(comp, "_states"):
            b.set_algorithm(comp._params, comp._states)
            b.set(cmd_const=None)
        else:
            b.set(params=None, states=None, cmd_const=_f64(comp.cmd))
        self._v_load = np.zeros(n)
        self._on = np.zeros(n, dtype=np.uint8)
        self._mode = np.zeros(n, dtype=np.uint8)
        self._zeros = np.zeros(n, dtype=np.uint8)
        self.reasons = {}

    def _numpy_refresh(self, j):
        """``DiscreteSystems.refresh`` of scenario ``j`` from the parameters the C loop holds
        (called from C where the load end is unstable; c_ref/host/plant_loop.c, ldp_refresh)."""
        p = self.plant
        idx = np.array([j])
        p.systems.refresh(idx, p._r, p.l_h, p._c, p._esr, p._g + p.g_leak, p.omega, p._open)

    def _prepare(self, k):
        """``Plant.step``'s preamble at sample ``k``: the window, the companion, the refresh."""
        p = self.plant
        p.k = k
        t = k * p.dt_s
        full = t >= p._t_next
        if full:
            p._t_next = p._window(t)
        g, _ = p._wanted(t, p.v_load)
        p._sync(t, g, full)

    def _push(self, k):
        """Point the C loop at what the numpy plant now holds for sample ``k``."""
        p, loads, b = self.plant, self.plant.loads, self._b
        np.copyto(self._v_load, p.v_load)
        np.copyto(self._on, loads.on)
        np.copyto(self._mode, p.mode)
        val, prof = _f64(loads._val), np.zeros(self.n, dtype=np.uint8)
        slope, x0, y0 = np.zeros(self.n), np.zeros(self.n), np.zeros(self.n)
        if loads._profiles[0].size:
            val = _f64(loads._base)
            rows = loads._prof_rows
            prof[rows], slope[rows], x0[rows], y0[rows] = 1, loads._prof_slope, loads._prof_x0, loads._prof_y0
        stuck_v, stuck_i = self.rig.plant.faults.stuck_codes((k + 1) * p.dt_s)
        lo, hi = self.rig.plant.faults._stuck_win
        noise = self.adc.noise_ahead()
        # The plant's own arrays where the C loop refreshes them in place (float64 already).
        b.set(w0=p.systems.w[0], w1=p.systems.w[1], r=p._r, g_fold=p._g, c_f=p._c, esr=p._esr,
              open=_u8(p._open))
        b.set(v_load=self._v_load, on=self._on, mode=self._mode,
              closed=_u8(p._closed), shorted=self._zeros if p._short is None else _u8(p._short),
              val_base=val, prof=prof, slope=slope, x0=x0, y0=y0,
              stuck_v=None if stuck_v is None else np.ascontiguousarray(stuck_v, dtype=np.int64),
              stuck_i=None if stuck_i is None else np.ascontiguousarray(stuck_i, dtype=np.int64),
              stuck_lo=float(lo), stuck_hi=float(hi), noise=noise, noise_rows=noise.shape[0],
              t_next_s=float(p._t_next))

    def _pull(self, k):
        """Hand the C loop's state back to the numpy plant, now at sample ``k``."""
        p, loads = self.plant, self.plant.loads
        p.k = k
        p.v_load = self._v_load.copy()
        loads.on = self._on.astype(bool)
        mode = self._mode.astype(bool)
        mode.flags.writeable = False
        p.mode, p._in_limit = mode, bool(mode.any())
        if p.cables.ramps.size:
            p._ramp_due = self._ramp_k[p.cables.ramps].min()

    @property
    def refreshes(self):
        """Discretisations the C loop refreshed itself (refolds and cable-ramp refreshes)."""
        return self._b.refreshes()

    def run(self, k0, n_samples, rec, row0, trace=None):
        """Run samples ``k0 .. k0 + n_samples - 1``, recording into rows ``row0 ..`` of ``rec``.

        ``rec`` maps channel names of :data:`REC_ORDER` to float32 arrays (rows, B); ``trace``,
        if given, a float64 array (rows, 4, B) gets v_supply (V), i_supply (A), v_load (V) and
        the next command code at full precision. Returns the command codes in force after the last sample."""
        self._b.set_recording([rec.get(name) for name in REC_ORDER])
        self._b.set(trace=trace)
        done = 0
        while done < n_samples:
            k = k0 + done
            self._prepare(k)
            self._push(k)
            ran, why = self._b.run(k, n_samples - done, row0 + done)
            self.adc.take(ran)
            done += ran
            self._pull(k0 + done)
            self.reasons[why] = self.reasons.get(why, 0) + 1
        return self.cmd

    def r_cable_ohm(self):
        """True loop resistance over the last sample run (ohm, (B,)), as the Observation gives it."""
        p = self.plant
        if p.cables.ramps.size == 0:
            return p.cables.r_const
        return p.cables.r_at((p.k - 1) * p.dt_s)
