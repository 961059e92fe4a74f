"""Batched plant: supply, cable, load end and loads of B scenarios advanced in lockstep."""

import numpy as np
from harness.plant.roots import brentq

from harness.plant.cable import CableBank, CableResistance
from harness.plant.faults import FaultSchedule
from harness.plant.linear_model import N_STATE, DiscreteSystems
from harness.plant.loads import LoadBank
from harness.scenario.specs import CAP_OPEN_RESIDUAL_F, LOAD_SHORT_OHM

#: A folded load conductance is refreshed when the load's tangent conductance has moved by more
#: than this fraction; the remainder is applied as a zero-order-hold current each sample.
REFOLD_REL = 0.01
#: The discretisation is refreshed when the cable resistance drifts by more than this fraction
#: (temperature ramps), so R is piecewise constant with steps of at most 0.01 %.
R_REFRESH_REL = 1e-4


class Observation:
    """True plant quantities at time ``t_s`` (s); arrays of shape (B,).

    ``v_supply_v`` and ``i_supply_a`` are at the supply terminals (V, A), ``v_load_v`` at the
    load end (V), ``r_cable_ohm`` the loop resistance wanted over the sample (ohm),
    ``current_limited`` whether the supply is in current limit. ``r_cable_ohm`` may be given as
    a function of time, evaluated at ``r_t_s`` when first read (most steps never read it).
    """

    __slots__ = ("t_s", "v_supply_v", "i_supply_a", "v_load_v", "current_limited", "_r", "_r_t_s")

    def __init__(self, t_s, v_supply_v, i_supply_a, v_load_v, r_cable_ohm, current_limited, r_t_s=None):
        self.t_s, self.v_supply_v, self.i_supply_a, self.v_load_v = t_s, v_supply_v, i_supply_a, v_load_v
        self.current_limited, self._r, self._r_t_s = current_limited, r_cable_ohm, r_t_s

    @property
    def r_cable_ohm(self):
        if callable(self._r):
            self._r = self._r(self._r_t_s)
        return self._r


def _highest_root(f, lo, hi, n=1000):
    """Highest root of ``f`` in [lo, hi], scanning down from ``hi``; ``f(hi) >= 0`` returns hi,
    None when the scan finds no sign change (or ``hi < lo``)."""
    if hi < lo:
        return None
    if f(hi) >= 0.0:
        return hi
    grid = np.linspace(hi, lo, n)
    prev = grid[0]
    for v in grid[1:]:
        if f(v) >= 0.0:
            return brentq(f, v, prev, xtol=1e-13, rtol=1e-13)
        prev = v
    return None


class Plant:
    """B scenarios' supplies, cables, load ends and loads, stepped once per ADC sample.

    Linear parts are discretised exactly (zero-order hold on the command and on the load's
    current-source part, matrix exponential); a load's conductance near the operating point is
    folded into the linear system, the rest is held over each sample. The current limit
    switches the supply to a current source at the limit for whole samples (entered when the
    voltage-mode step would exceed the limit, left when holding the limit would need more than
    the voltage loop's output). The supply sources current only up to its limit and may sink
    current freely. Faults change the system for the samples whose start lies in their window.

    Parameters
    ----------
    scenarios : sequence of harness.scenario.specs.Scenario
        All with the same ``sensing.sample_rate_hz``.
    """

    def __init__(self, scenarios):
        self.scenarios = list(scenarios)
        rates = {s.sensing.sample_rate_hz for s in self.scenarios}
        if len(rates) != 1:
            raise ValueError(f"scenarios in one batch must share sample_rate_hz, got {sorted(rates)}")
        self.dt_s = 1.0 / rates.pop()
        self.n_batch = n = len(self.scenarios)

        def arr(fn):
            return np.array([fn(s) for s in self.scenarios], dtype=float)

        self.cables = CableBank([CableResistance(s.cable.resistance_ohm, s.cable.material, s.cable.temperature_c,
                                                 s.cable.temperature_end_c, s.run.duration_s)
                                 for s in self.scenarios])
        self.l_h = arr(lambda s: s.cable.inductance_h)
        self.c_f = arr(lambda s: s.load_end.capacitance_f)
        self.esr_ohm = arr(lambda s: s.load_end.esr_ohm)
        self.g_leak = arr(lambda s: 1.0 / s.load_end.leakage_ohm if s.load_end.leakage_ohm else 0.0)
        self.omega = arr(lambda s: 2.0 * np.pi * s.supply.loop_bandwidth_hz)
        self.max_v = arr(lambda s: s.supply.max_v)
        self.target_v = arr(lambda s: s.supply.target_v)
        self.i_lim = arr(lambda s: np.inf if s.supply.current_limit_a is None else s.supply.current_limit_a)
        self._limited = bool(np.isfinite(self.i_lim).any())
        self.loads = LoadBank([s.load for s in self.scenarios], self.target_v)
        self.faults = FaultSchedule([s.faults for s in self.scenarios])
        self.systems = DiscreteSystems(n, self.dt_s)
        # z = [v_int, i_cable, v_cap, v_cmd, i_src, i_lim] per scenario: the product's right side.
        self._z = np.zeros((N_STATE + 3, n))
        self._z[5] = np.where(np.isfinite(self.i_lim), self.i_lim, 0.0)
        self._x, self._cmd, self._i_src, self._z5 = self._z[:N_STATE], self._z[3], self._z[4], self._z[:5]
        self.reset_cold()

    # -- parameters in use -------------------------------------------------------------
    def _wanted(self, t_s, v_load):
        """Load conductance and current source wanted at ``t_s`` (faults of the present window)."""
        g, i_n = self.loads.companion(t_s, v_load)
        if self._short is not None:
            g = np.where(self._short, 1.0 / LOAD_SHORT_OHM, g)
            i_n = np.where(self._short, 0.0, i_n)
        return g, i_n

    def _window(self, t_s):
        """Take up the faults and load values of the edges around ``t_s``; returns when they next change."""
        active = self.faults.active(t_s)
        self._short = active["load_short"] if active["load_short"].any() else None
        cap_open = active["cap_open"]
        self._c_want = np.where(cap_open, CAP_OPEN_RESIDUAL_F, self.c_f)
        self._esr_want = np.where(cap_open, 0.0, self.esr_ohm)
        self._open_want = active["cable_open"]
        self._closed = ~self._open_want
        self.loads.value_at(t_s)
        return min(self.faults.valid_until_s, self.loads.valid_until_s)

    def _sync(self, t_s, g, full, force=False):
        """Refresh the discrete systems of scenarios whose parameters moved past the tolerances.

        Only ``g`` is compared unless ``full`` (faults may have changed) or a cable ramp is due;
        ``force`` refreshes every scenario."""
        stale = np.abs(g - self._g) > REFOLD_REL * np.maximum(np.abs(g), np.abs(self._g))
        if force:
            stale[:] = True
        elif full:
            stale |= ((self._open_want != self._open) | (self._c_want != self._c)
                      | (self._esr_want != self._esr))
        ramps = self.cables.ramps
        if self.k >= self._ramp_due:
            r = self.cables.r_at(t_s, ramps)
            stale[ramps] |= np.abs(r - self._r[ramps]) > R_REFRESH_REL * self._r[ramps]
        idx = np.flatnonzero(stale)
        if idx.size:
            self._r[idx] = self.cables.r_at(t_s, idx)
            self._c[idx], self._esr[idx] = self._c_want[idx], self._esr_want[idx]
            self._g[idx], self._open[idx] = g[idx], self._open_want[idx]
            self.systems.refresh(idx, self._r, self.l_h, self._c, self._esr, self._g + self.g_leak,
                                 self.omega, self._open)
        if ramps.size and (self.k >= self._ramp_due or np.isin(idx, ramps).any()):
            # The first sample at which each ramp next drifts past the tolerance, exactly.
            k_due = self.cables.first_drift_k(ramps, self._r[ramps], R_REFRESH_REL, self.k, self.dt_s)
            self._ramp_due = k_due.min()
        self._g_seen, self._dg = g, g - self._g

    def _start(self, x, mode, v_load, y):
        self._x[:] = x.T
        self.v_load, self.k = v_load, 0
        self.mode = mode
        self.mode.flags.writeable = False
        n = self.n_batch
        self._r, self._c, self._esr = np.ones(n), np.ones(n), np.zeros(n)
        self._g, self._open = np.zeros(n), np.zeros(n, dtype=bool)
        self._in_limit = bool(mode.any())
        self._ramp_due = 0 if self.cables.ramps.size else np.inf
        self._t_next = self._window(0.0)
        g, _ = self._wanted(0.0, v_load)
        self._sync(0.0, g, full=True, force=True)
        r = self.cables.r_at(0.0)
        self.last = Observation(0.0, y[:, 0], y[:, 1], y[:, 2], r, self.mode)
        return self.last

    # -- public API ----------------------------------------------------------------------
    @property
    def t_s(self):
        """Time of the present state, s."""
        return self.k * self.dt_s

    @property
    def x(self):
        """Present state [v_int, i_cable, v_cap] of each scenario (V, A, V), a (B, 3) copy."""
        return self._x.T.copy()

    def reset_cold(self):
        """Start discharged: every voltage and current zero, lamp filaments cold. Returns the Observation."""
        self.loads.set_cold()
        n = self.n_batch
        return self._start(np.zeros((n, N_STATE)), np.zeros(n, dtype=bool), np.zeros(n), np.zeros((n, 3)))

    def reset_steady(self, v_supply=None):
        """Start at the DC operating point with the supply at ``v_supply``.

        Parameters
        ----------
        v_supply : float or ndarray of shape (B,), optional
            Supply output voltage, V; defaults to each scenario's ``supply.target_v``. Faults are
            ignored for the operating point. A constant-power load takes the higher of its two
            operating points. A load with an undervoltage lockout starts on where it has an
            operating point at or above its cut-off, else off. Returns the Observation at t = 0.
        """
        n = self.n_batch
        vs = np.broadcast_to(self.target_v if v_supply is None else np.asarray(v_supply, float), (n,)).copy()
        vs = np.clip(vs, 0.0, self.max_v)
        x, y = np.zeros((n, N_STATE)), np.zeros((n, 3))
        mode, on = np.zeros(n, dtype=bool), np.ones(n, dtype=bool)
        r0 = self.cables.r_at(0.0)
        solved = {}  # identical scenarios share one operating point
        for b in range(n):
            key = (vs[b], r0[b], self.g_leak[b], self.i_lim[b], self.loads.specs[b])
            if key not in solved:
                solved[key] = self._operating_point(b, vs[b], r0[b])
            mode[b], on[b], x[b], y[b] = solved[key]
        self.loads.set_steady(y[:, 2], on)
        return self._start(x, mode, y[:, 2].copy(), y)

    def _operating_point(self, b, vs, r):
        """DC operating point of scenario ``b`` at supply ``vs`` (V) and loop resistance ``r`` (ohm):
        (current-limited, load on, state, outputs).

        A load with an undervoltage lockout is on if it has an operating point at or above its
        cut-off, else off; a load without one is on (at 0 V where it has no operating point)."""
        if self.loads.lockout[b]:
            point = self._branch_point(b, vs, r, True, self.loads.cutoff_v[b])
            on = point is not None
            if not on:
                point = self._branch_point(b, vs, r, False, 0.0)    # an off load always has one
        else:
            on, point = True, self._branch_point(b, vs, r, True, 0.0, missing=0.0)
        return (point[0], on) + point[1:]

    def _branch_point(self, b, vs, r, on, lo, missing=None):
        """Operating point of scenario ``b`` with its load held ``on`` or off and the load-end
        voltage at or above ``lo`` (V): (current-limited, state, outputs), None where there is
        none (or the load-end voltage ``missing`` in its place, when given)."""
        def i_total(v):
            return self.loads.steady_current(0.0, v, b, on) + self.g_leak[b] * v

        def root(f, hi):
            v = _highest_root(f, lo, hi)
            return missing if v is None else v

        v_load = root(lambda v: vs - v - r * i_total(v), vs)
        if v_load is None:
            return None
        i = i_total(v_load)
        v_term = vs
        limited = bool(i > self.i_lim[b])
        if limited:
            i = self.i_lim[b]
            v_load = root(lambda v: i - i_total(v), max(vs - r * i, 0.0))
            if v_load is None:
                return None
            v_term = r * i + v_load
        return limited, (vs, i, v_load), (v_term, i, v_load)

    def step(self, command_v):
        """Advance one sample with ``command_v`` held (zero-order hold).

        Parameters
        ----------
        command_v : float or ndarray of shape (B,)
            Supply voltage command, V; clamped to [0, supply.max_v].

        Returns
        -------
        Observation
            True quantities at the end of the sample.
        """
        k = self.k
        t = k * self.dt_s
        cmd, v_load = self._cmd, self.v_load
        np.maximum(command_v, 0.0, out=cmd)
        np.minimum(cmd, self.max_v, out=cmd)
        full = t >= self._t_next
        if full:
            self._t_next = self._window(t)
        g, i_n = self._wanted(t, v_load)
        if full or g is not self._g_seen or k >= self._ramp_due:
            self._sync(t, g, full)
        np.multiply(self._dg, v_load, out=self._i_src)
        np.add(i_n, self._i_src, out=self._i_src)
        out = self.systems.advance(0, self._z5)
        mode = self.mode
        if self._limited:
            to_cc = out[1] > self.i_lim
            if self._in_limit or to_cc.any():
                mode = self._limit(out, to_cc)
        self.loads.advance(v_load, self.dt_s)
        self._x[...] = out[:N_STATE]
        self.v_load = out[4]
        self.loads.update_lockout(self.v_load)
        self.k = k + 1
        r = self.cables.r_const if self.cables.ramps.size == 0 else self.cables.r_at
        self.last = Observation((k + 1) * self.dt_s, out[3], out[1], out[4], r, mode, t)
        return self.last

    def _limit(self, out, to_cc):
        """Current-limit transitions of one step: computes the limited system only where the
        supply is or enters current limit, and writes its outputs into ``out`` where it holds."""
        mode = self.mode
        idx = np.flatnonzero(mode | to_cc)
        out_c = self.systems.advance(1, self._z[:, idx], idx)
        was = mode[idx]
        to_v = was & (out_c[3] > out[3, idx])
        now = (was | to_cc[idx]) & ~to_v & self._closed[idx]
        out[:, idx[now]] = out_c[:, now]
        if not np.array_equal(now, was):
            mode = mode.copy()
            mode[idx] = now
            mode.flags.writeable = False
            self.mode = mode
            self._in_limit = bool(mode.any())
        return mode
