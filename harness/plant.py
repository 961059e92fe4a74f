"""Batched plant: supply, cable, load end and loads of B scenarios advanced in lockstep."""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from harness.cable import CableResistance
from harness.faults import FaultSchedule
from harness.linear_model import N_STATE, DiscreteSystems
from harness.loads import LoadBank
from harness.specs import CAP_OPEN_RESIDUAL_F, LOAD_SHORT_OHM

#: A folded load conductance is refreshed when the load's tangent conductance has moved by more
#: than this fraction; the remainder is applied as a zero-order-hold current each sample.
REFOLD_REL = 0.01
#: The discretisation is refreshed when the cable resistance drifts by more than this fraction
#: (temperature ramps), so R is piecewise constant with steps of at most 0.01 %.
R_REFRESH_REL = 1e-4


@dataclass(frozen=True)
class Observation:
    """True plant quantities at time ``t_s`` (s); arrays of shape (B,).

    ``v_supply_v`` and ``i_supply_a`` are at the supply terminals (V, A), ``v_load_v`` at the
    load end (V), ``r_cable_ohm`` the loop resistance in use (ohm), ``current_limited`` whether
    the supply is in current limit.
    """

    t_s: float
    v_supply_v: np.ndarray
    i_supply_a: np.ndarray
    v_load_v: np.ndarray
    r_cable_ohm: np.ndarray
    current_limited: np.ndarray


def _highest_root(f, lo, hi, n=1000):
    """Highest root of ``f`` in [lo, hi], scanning down from ``hi``; ``f(hi) >= 0`` returns hi."""
    if f(hi) >= 0.0:
        return hi
    grid = np.linspace(hi, lo, n)
    prev = grid[0]
    for v in grid[1:]:
        if f(v) >= 0.0:
            return brentq(f, v, prev, xtol=1e-13, rtol=1e-13)
        prev = v
    return lo


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
    scenarios : sequence of harness.specs.Scenario
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

        self.cables = [CableResistance(s.cable.resistance_ohm, s.cable.material, s.cable.temperature_c,
                                       s.cable.temperature_end_c, s.run.duration_s) for s in self.scenarios]
        self._ramps = np.array([c.temperature_end_c != c.temperature_c for c in self.cables])
        self._r_const = np.array([c.r_start_ohm for c in self.cables])
        self.l_h = arr(lambda s: s.cable.inductance_h)
        self.c_f = arr(lambda s: s.load_end.capacitance_f)
        self.esr_ohm = arr(lambda s: s.load_end.esr_ohm)
        self.g_leak = arr(lambda s: 1.0 / s.load_end.leakage_ohm if s.load_end.leakage_ohm else 0.0)
        self.omega = arr(lambda s: 2.0 * np.pi * s.supply.loop_bandwidth_hz)
        self.max_v = arr(lambda s: s.supply.max_v)
        self.target_v = arr(lambda s: s.supply.target_v)
        self.i_lim = arr(lambda s: np.inf if s.supply.current_limit_a is None else s.supply.current_limit_a)
        self.loads = LoadBank([s.load for s in self.scenarios])
        self.faults = FaultSchedule([s.faults for s in self.scenarios])
        self.systems = DiscreteSystems(n, self.dt_s)
        self.reset_cold()

    # -- parameters in use -------------------------------------------------------------
    def _wanted(self, t_s, v_load):
        """Resistance, capacitance, ESR, load companion and open flag wanted at ``t_s``."""
        active = self.faults.active(t_s)
        r = self._r_const.copy()
        for b in np.flatnonzero(self._ramps):
            r[b] = self.cables[b].r_ohm(t_s)
        g, i_n = self.loads.companion(t_s, v_load)
        short = active["load_short"]
        g = np.where(short, 1.0 / LOAD_SHORT_OHM, g)
        i_n = np.where(short, 0.0, i_n)
        cap_open = active["cap_open"]
        c = np.where(cap_open, CAP_OPEN_RESIDUAL_F, self.c_f)
        esr = np.where(cap_open, 0.0, self.esr_ohm)
        return r, c, esr, g, i_n, active["cable_open"]

    def _sync(self, r, c, esr, g, is_open, force=False):
        """Refresh the discrete systems of scenarios whose parameters moved past the tolerances."""
        if force:
            stale = np.ones(self.n_batch, dtype=bool)
        else:
            stale = ((is_open != self._open) | (c != self._c) | (esr != self._esr)
                     | (np.abs(r - self._r) > R_REFRESH_REL * self._r)
                     | (np.abs(g - self._g) > REFOLD_REL * np.maximum(np.abs(g), np.abs(self._g))))
        idx = np.flatnonzero(stale)
        if idx.size == 0:
            return
        self._r[idx], self._c[idx], self._esr[idx] = r[idx], c[idx], esr[idx]
        self._g[idx], self._open[idx] = g[idx], is_open[idx]
        self.systems.refresh(idx, self._r, self.l_h, self._c, self._esr, self._g + self.g_leak,
                             self.omega, self._open)

    def _start(self, x, mode, v_load, y):
        self.x, self.mode, self.v_load, self.k = x, mode, v_load, 0
        n = self.n_batch
        self._r, self._c, self._esr = np.ones(n), np.ones(n), np.zeros(n)
        self._g, self._open = np.zeros(n), np.zeros(n, dtype=bool)
        r, c, esr, g, _, is_open = self._wanted(0.0, v_load)
        self._sync(r, c, esr, g, is_open, force=True)
        self.last = Observation(0.0, y[:, 0], y[:, 1], y[:, 2], r, mode.copy())
        return self.last

    # -- public API ----------------------------------------------------------------------
    @property
    def t_s(self):
        """Time of the present state, s."""
        return self.k * self.dt_s

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
            operating points. Returns the Observation at t = 0.
        """
        n = self.n_batch
        vs = np.broadcast_to(self.target_v if v_supply is None else np.asarray(v_supply, float), (n,)).copy()
        vs = np.clip(vs, 0.0, self.max_v)
        x, y = np.zeros((n, N_STATE)), np.zeros((n, 3))
        mode = np.zeros(n, dtype=bool)
        for b in range(n):
            r = self.cables[b].r_ohm(0.0)

            def i_total(v, b=b):
                return self.loads.steady_current(0.0, v, b) + self.g_leak[b] * v

            v_load = _highest_root(lambda v: vs[b] - v - r * i_total(v), 0.0, vs[b])
            i = i_total(v_load)
            v_term = vs[b]
            if i > self.i_lim[b]:
                mode[b] = True
                i = self.i_lim[b]
                v_load = _highest_root(lambda v: i - i_total(v), 0.0, max(vs[b] - r * i, 0.0))
                v_term = r * i + v_load
            x[b] = (vs[b], i, v_load)
            y[b] = (v_term, i, v_load)
        self.loads.set_steady(y[:, 2])
        return self._start(x, mode, y[:, 2].copy(), y)

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
        t = self.t_s
        cmd = np.clip(np.broadcast_to(np.asarray(command_v, dtype=float), (self.n_batch,)), 0.0, self.max_v)
        r, c, esr, g, i_n, is_open = self._wanted(t, self.v_load)
        self._sync(r, c, esr, g, is_open)
        i_src = i_n + (g - self._g) * self.v_load
        u = np.stack([cmd, i_src, np.where(np.isfinite(self.i_lim), self.i_lim, 0.0)], axis=1)
        x_v, y_v = self.systems.advance(0, self.x, u)
        x_c, y_c = self.systems.advance(1, self.x, u)
        to_cc = ~self.mode & (y_v[:, 1] > self.i_lim)
        to_v = self.mode & (y_c[:, 0] > y_v[:, 0])
        self.mode = (self.mode | to_cc) & ~to_v & ~is_open
        pick = self.mode[:, None]
        x = np.where(pick, x_c, x_v)
        y = np.where(pick, y_c, y_v)
        x[:, 1] = y[:, 1]
        self.loads.advance(self.v_load, self.dt_s)
        self.x, self.v_load = x, y[:, 2].copy()
        self.k += 1
        self.last = Observation(self.t_s, y[:, 0], y[:, 1], y[:, 2], r, self.mode.copy())
        return self.last
