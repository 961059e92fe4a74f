"""Batched nonlinear loads, each reduced per sample to a Norton companion (conductance + current)."""

import numpy as np
from harness.plant.roots import brentq

from harness.scenario.specs import restart_voltage

#: Filament cold-to-hot resistance ratio (about 1/15 for tungsten lamps, from memory).
LAMP_COLD_RATIO = 1.0 / 15.0
#: Exponent of tungsten resistance vs absolute temperature, R ~ T**1.2 (from memory).
LAMP_R_EXPONENT = 1.2
#: Ambient temperature over hot filament temperature implied by the two values above.
LAMP_U_AMBIENT = LAMP_COLD_RATIO ** (1.0 / LAMP_R_EXPONENT)

_CC, _RES, _CP, _LAMP = range(4)
_KIND_CODE = {"constant_current": _CC, "resistive": _RES, "constant_power": _CP, "lamp": _LAMP}


def _lamp_loss(u):
    """Radiated power over rated power at normalised filament temperature ``u`` (1 at rated)."""
    return (u**4 - LAMP_U_AMBIENT**4) / (1.0 - LAMP_U_AMBIENT**4)


def lamp_steady_u(v_ratio):
    """Steady normalised filament temperature at voltage ``v_ratio`` = V / rated_v (>= 0)."""
    if v_ratio <= 0.0:
        return LAMP_U_AMBIENT
    def balance(u):
        return v_ratio**2 * u ** (-LAMP_R_EXPONENT) - _lamp_loss(u)
    return brentq(balance, LAMP_U_AMBIENT, 1.0 + 2.0 * v_ratio, xtol=1e-14, rtol=1e-14)


def _selector(mask):
    """Index for the scenarios in ``mask``: None for none, a slice for all, else an index array."""
    if not mask.any():
        return None
    return slice(None) if mask.all() else np.flatnonzero(mask)


def _padded(pairs_per_load):
    """Loads with (time, value) pairs as (rows, times, values); times padded with inf and values
    with each row's last value, shapes (m,), (m, L), (m, L)."""
    rows = np.array([b for b, p in enumerate(pairs_per_load) if p], dtype=np.int64)
    width = max((len(p) for p in pairs_per_load), default=0)
    times = np.full((rows.size, width), np.inf)
    values = np.zeros((rows.size, width))
    for r, b in enumerate(rows):
        p = np.array(pairs_per_load[b], dtype=float)
        times[r, :len(p)], values[r, :len(p)], values[r, len(p):] = p[:, 0], p[:, 1], p[-1, 1]
    return rows, times, values


class LoadBank:
    """Loads of B scenarios, advanced in lockstep.

    Each sample the plant asks for a Norton companion ``i = i_n + g * v`` valid near the
    present load-end voltage: exact for resistive loads, the tangent of ``i = P / v`` for a
    constant-power load, ``g = 0`` for a constant-current load. Constant-current and
    constant-power loads with a ``cutoff_v`` have an undervoltage lockout with hysteresis: an
    on load turns off when its load-end voltage falls below ``cutoff_v``, an off load turns on
    when it rises to ``restart_v`` or above, and an off load draws nothing (``g = 0``,
    ``i_n = 0``). The on/off flag is state, updated once per sample by :meth:`update_lockout`.
    A lamp is a resistance ``R = R_hot * u**1.2`` set by its normalised filament temperature
    ``u``, which follows the power balance ``tc * du/dt = (v**2 / R) / rated_w - loss(u)`` with
    radiated loss ~ u**4, ``tc`` chosen so the small-signal time constant at the rated point is
    ``thermal_tau_s``.

    Parameters
    ----------
    loads : sequence of harness.scenario.specs.LoadSpec
        One load per scenario.
    target_v : sequence of float, optional
        supply.target_v of each scenario, V: caps the default restart voltage (see
        harness.scenario.specs.restart_voltage); no cap when omitted.
    """

    def __init__(self, loads, target_v=None):
        self.specs = list(loads)
        n = len(self.specs)
        self.kind = np.array([_KIND_CODE[s.kind] for s in self.specs])
        self.cutoff_v = np.array([s.cutoff_v for s in self.specs], dtype=float)
        caps = [np.inf] * n if target_v is None else list(target_v)
        self.restart_v = np.array([restart_voltage(s, t) for s, t in zip(self.specs, caps)], dtype=float)
        #: Loads with an undervoltage lockout, and whether each load is on (always, without one).
        self.lockout = ((self.kind == _CC) | (self.kind == _CP)) & (self.cutoff_v > 0)
        self.on = np.ones(n, dtype=bool)
        self.value = np.array([s.value for s in self.specs], dtype=float)
        rated_v = np.array([s.rated_v or 1.0 for s in self.specs], dtype=float)
        self.rated_w = np.where(self.kind == _LAMP, self.value, 1.0)
        self.r_hot = rated_v**2 / self.rated_w
        self.rated_v = rated_v
        d_gain = LAMP_R_EXPONENT
        d_loss = 4.0 / (1.0 - LAMP_U_AMBIENT**4)
        tau = np.array([s.thermal_tau_s for s in self.specs], dtype=float)
        self.lamp_tc = tau * (d_gain + d_loss)
        self.u = np.full(n, LAMP_U_AMBIENT)
        self._steps = _padded([s.steps for s in self.specs])
        self._profiles = _padded([s.profile for s in self.specs])
        edges = [p[0] for s in self.specs for p in (*s.steps, *s.profile)]
        self.edges_s = np.array(sorted({*map(float, edges), np.inf}), dtype=float)    # not np.unique: see faults
        self._cp = _selector(self.kind == _CP)
        self._lamp = _selector(self.kind == _LAMP)
        self._has_lockout = bool(self.lockout.any())
        self._win = (np.inf, -np.inf)

    def _window(self, t_s):
        """Values of steps and profile segments for the window of edges around ``t_s``."""
        j = int(np.searchsorted(self.edges_s, t_s, side="right"))
        self._win = (self.edges_s[j - 1] if j else -np.inf), self.edges_s[j]
        self._base = self.value.copy()
        rows, times, values = self._steps
        if rows.size:
            k = (times <= t_s).sum(axis=1)
            on = k > 0
            self._base[rows[on]] = values[on, k[on] - 1]
        rows, times, values = self._profiles
        if rows.size:
            # np.interp's own formula within the segment [x0, x1): slope * (t - x0) + y0, with
            # slope 0 (exactly the end value) before the first and from the last breakpoint.
            j = (times <= t_s).sum(axis=1) - 1
            last = (np.isfinite(times)).sum(axis=1) - 1
            inside = (j >= 0) & (j < last)
            jj = np.clip(j, 0, None)
            jn = np.minimum(jj + 1, times.shape[1] - 1)
            r = np.arange(rows.size)
            with np.errstate(invalid="ignore"):
                slope = (values[r, jn] - values[r, jj]) / (times[r, jn] - times[r, jj])
            self._prof_rows = rows
            self._prof_slope = np.where(inside, slope, 0.0)
            self._prof_x0 = np.where(inside, times[r, jj], 0.0)
            self._prof_y0 = np.where(j < 0, values[:, 0], values[r, jj])
        self._statics(self._base)

    def _statics(self, val):
        """Companion parts of on loads that depend only on the load values."""
        self._val = val
        cc, res = self.kind == _CC, self.kind == _RES
        self._g_hi = np.where(res, 1.0 / np.where(res, val, 1.0), 0.0)
        self._i_hi = np.where(cc, val, 0.0)
        self._neg_p = -val[self._cp]
        self._two_p = 2.0 * val[self._cp]

    @property
    def valid_until_s(self):
        """Time (s) at which step values or profile segments next change after the last query."""
        return self._win[1]

    def value_at(self, t_s):
        """Main quantity of each load at time ``t_s`` (A, ohm, W, or rated W for lamps), shape (B,)."""
        lo, hi = self._win
        if not lo <= t_s < hi:
            self._window(t_s)
        if self._profiles[0].size == 0:
            return self._val
        val = self._base.copy()
        val[self._prof_rows] = self._prof_slope * (t_s - self._prof_x0) + self._prof_y0
        self._statics(val)
        return val

    def lamp_resistance(self):
        """Present filament resistance of every lamp (meaningless for other kinds), ohm, (B,)."""
        return self.r_hot * self.u**LAMP_R_EXPONENT

    def companion(self, t_s, v_load):
        """Norton companion of each load near ``v_load``, in its present on/off state.

        Does not change the on/off state, so it may be called with trial voltages.

        Parameters
        ----------
        t_s : float
            Time, s (selects step / profile values).
        v_load : ndarray, shape (B,)
            Load-end voltage, V.

        Returns
        -------
        g : ndarray, shape (B,)
            Incremental conductance, S (negative for constant power).
        i_n : ndarray, shape (B,)
            Current at zero volts of the tangent line, A.
        """
        self.value_at(t_s)
        v = np.asarray(v_load, dtype=float)
        g, i_n = self._g_hi, self._i_hi
        cp, lamp = self._cp, self._lamp
        if cp is not None:
            g, i_n = g.copy(), i_n.copy()
            v_cp = v[cp]
            with np.errstate(divide="ignore", invalid="ignore"):
                g[cp] = self._neg_p / v_cp**2
                i_n[cp] = self._two_p / v_cp
        if self._has_lockout and not self.on.all():
            g = np.where(self.on, g, 0.0)
            i_n = np.where(self.on, i_n, 0.0)
        if lamp is not None:
            g = g.copy() if g is self._g_hi else g
            g[lamp] = 1.0 / (self.r_hot[lamp] * self.u[lamp] ** LAMP_R_EXPONENT)
        return g, i_n

    def current(self, t_s, v_load):
        """Load current at ``v_load`` (V), A, (B,)."""
        g, i_n = self.companion(t_s, v_load)
        return i_n + g * np.asarray(v_load, dtype=float)

    def advance(self, v_load, dt_s):
        """Advance lamp filament temperatures by ``dt_s`` (s) with ``v_load`` (V) held (forward Euler)."""
        lamp = self._lamp
        if lamp is None:
            return
        u = self.u[lamp]
        p = v_load[lamp] ** 2 / (self.r_hot[lamp] * u**LAMP_R_EXPONENT) / self.rated_w[lamp]
        du = (p - _lamp_loss(u)) / self.lamp_tc[lamp]
        self.u[lamp] = np.maximum(u + dt_s * du, LAMP_U_AMBIENT)

    def update_lockout(self, v_load):
        """Take up the load-end voltage ``v_load`` (V, (B,)) at the end of a sample: on loads
        below their cut-off turn off, off loads at or above their restart voltage turn on.

        Call exactly once per plant sample, with the voltage the next sample starts from."""
        if not self._has_lockout:
            return
        v = np.asarray(v_load, dtype=float)
        self.on = np.where(self.on, v >= self.cutoff_v, v >= self.restart_v) | ~self.lockout

    def set_steady(self, v_load, on=None):
        """Set lamp filament temperatures to their steady values at ``v_load`` (V), (B,), and
        the lockout state: ``on`` (bool, (B,)) where given, else on at or above the cut-off."""
        for b in np.flatnonzero(self.kind == _LAMP):
            self.u[b] = lamp_steady_u(max(float(v_load[b]), 0.0) / self.rated_v[b])
        if on is None:
            on = np.asarray(v_load, dtype=float) >= self.cutoff_v
        self.on = np.asarray(on, dtype=bool) | ~self.lockout

    def set_cold(self):
        """Set every lamp filament to ambient temperature and every load with a lockout off."""
        self.u[:] = LAMP_U_AMBIENT
        self.on = ~self.lockout

    def steady_current(self, t_s, v_load, b, on=True):
        """Steady-state current (A) of load ``b`` at ``v_load`` (V), lamps at thermal equilibrium;
        ``on`` False: the load is held off by its lockout (ignored for loads without one)."""
        if self.kind[b] == _LAMP:
            u = lamp_steady_u(max(v_load, 0.0) / self.rated_v[b])
            return v_load / (self.r_hot[b] * u**LAMP_R_EXPONENT)
        val = float(self.value_at(t_s)[b])
        kind = self.kind[b]
        if not on and self.lockout[b]:
            return 0.0 + 0.0 * v_load
        if kind == _RES:
            return 0.0 + 1.0 / val * v_load
        if kind == _CC:
            return val + 0.0 * v_load
        return 2.0 * val / v_load + -val / (v_load * v_load) * v_load
