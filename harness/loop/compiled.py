"""The closed loop in C: the numpy plant's per-sample update, its converters and ld_step, many samples per call.

The numpy plant (harness.plant.plant.Plant) stays the reference and keeps every decision that
is not per sample: at a fault or load window edge, a cable-ramp refresh or a load conductance
past the refold tolerance, the C loop stops before the sample, :meth:`CompiledLoop._prepare`
runs exactly the preamble of ``Plant.step`` (window, companion, discretisation refresh by
subset) and the C loop carries on from that sample. The C code follows the numpy operations one
for one (c_ref/host/plant_loop.c); tests/test_compiled_loop.py holds the two together.
"""
import numpy as np

from harness.loop import backends
from harness.plant.plant import REFOLD_REL
from harness.plant.loads import LAMP_R_EXPONENT, LAMP_U_AMBIENT
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
        p, loads, n = self.plant, self.plant.loads, self.plant.n_batch
        self.n = n
        self.cmd = np.array(comp.field("cmd"), dtype=np.float64)
        self._b = b = backends.compiled_loop().LoopBatch(n, p.dt_s)
        b.set(w0=p.systems.w[0], w1=p.systems.w[1], z=p._z, max_v=_f64(p.max_v), i_lim=_f64(p.i_lim),
              has_limit=int(p._limited), g_short=1.0 / LOAD_SHORT_OHM,
              kind=np.ascontiguousarray(loads.kind, dtype=np.int32), lockout=_u8(loads.lockout),
              cutoff_v=_f64(loads.cutoff_v), restart_v=_f64(loads.restart_v), r_hot=_f64(loads.r_hot),
              rated_w=_f64(loads.rated_w), lamp_tc=_f64(loads.lamp_tc), u=loads.u,
              lamp_exp=LAMP_R_EXPONENT, lamp_u_amb=LAMP_U_AMBIENT, lamp_u_amb4=LAMP_U_AMBIENT**4,
              refold_rel=REFOLD_REL, lsb=_f64(self.adc._lsb), gain=_f64(self.adc.gain),
              offset=_f64(self.adc.offset), adc_max=_f64(self.adc._code_max),
              v_per_code=_f64(self.dac.v_per_code), dac_max=self.dac.code_max.astype(np.float64),
              cmd=self.cmd, r_unit=_f64(r_unit), corr_unit=_f64(corr_unit),
              g_scratch=np.zeros(n), i_scratch=np.zeros(n))
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
        b.set(v_load=self._v_load, on=self._on, mode=self._mode, g_fold=_f64(p._g),
              closed=_u8(p._closed), shorted=self._zeros if p._short is None else _u8(p._short),
              val_base=val, prof=prof, slope=slope, x0=x0, y0=y0,
              stuck_v=None if stuck_v is None else np.ascontiguousarray(stuck_v, dtype=np.int64),
              stuck_i=None if stuck_i is None else np.ascontiguousarray(stuck_i, dtype=np.int64),
              stuck_lo=float(lo), stuck_hi=float(hi), noise=noise, noise_rows=noise.shape[0],
              t_next_s=float(p._t_next), ramp_due_k=float(p._ramp_due))

    def _pull(self, k):
        """Hand the C loop's state back to the numpy plant, now at sample ``k``."""
        p, loads = self.plant, self.plant.loads
        p.k = k
        p.v_load = self._v_load.copy()
        loads.on = self._on.astype(bool)
        mode = self._mode.astype(bool)
        mode.flags.writeable = False
        p.mode, p._in_limit = mode, bool(mode.any())

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
