"""Batched nonlinear loads, each reduced per sample to a Norton companion (conductance + current)."""

import numpy as np
from scipy.optimize import brentq

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


class LoadBank:
    """Loads of B scenarios, advanced in lockstep.

    Each sample the plant asks for a Norton companion ``i = i_n + g * v`` valid near the
    present load-end voltage: exact for resistive loads, the tangent of ``i = P / v`` for a
    constant-power load, ``g = 0`` for a constant-current load. Below ``cutoff_v`` constant
    current and constant power loads turn resistive (the resistance they show at the cut-off),
    so a discharged load end draws no current from nothing. A lamp is a resistance
    ``R = R_hot * u**1.2`` set by its normalised filament temperature ``u``, which follows the
    power balance ``tc * du/dt = (v**2 / R) / rated_w - loss(u)`` with radiated loss ~ u**4,
    ``tc`` chosen so the small-signal time constant at the rated point is ``thermal_tau_s``.

    Parameters
    ----------
    loads : sequence of harness.specs.LoadSpec
        One load per scenario.
    """

    def __init__(self, loads):
        self.specs = list(loads)
        n = len(self.specs)
        self.kind = np.array([_KIND_CODE[s.kind] for s in self.specs])
        self.cutoff_v = np.array([s.cutoff_v for s in self.specs], dtype=float)
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
        self._steps = [(np.array([p[0] for p in s.steps]), np.array([p[1] for p in s.steps])) for s in self.specs]
        self._profiles = [(np.array([p[0] for p in s.profile]), np.array([p[1] for p in s.profile])) for s in self.specs]

    def value_at(self, t_s):
        """Main quantity of each load at time ``t_s`` (A, ohm, W, or rated W for lamps), shape (B,)."""
        out = self.value.copy()
        for b, (st, sv) in enumerate(self._steps):
            if st.size:
                k = np.searchsorted(st, t_s, side="right")
                if k:
                    out[b] = sv[k - 1]
        for b, (pt, pi) in enumerate(self._profiles):
            if pt.size:
                out[b] = np.interp(t_s, pt, pi)
        return out

    def lamp_resistance(self):
        """Present filament resistance of every lamp (meaningless for other kinds), ohm, (B,)."""
        return self.r_hot * self.u**LAMP_R_EXPONENT

    def companion(self, t_s, v_load):
        """Norton companion of each load near ``v_load``.

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
        val = self.value_at(t_s)
        v = np.asarray(v_load, dtype=float)
        vc = np.where(self.cutoff_v > 0, self.cutoff_v, 1.0)
        low = v < self.cutoff_v
        g = np.zeros_like(v)
        i_n = np.zeros_like(v)
        cc = self.kind == _CC
        g = np.where(cc & low, val / vc, g)
        i_n = np.where(cc & ~low, val, i_n)
        res = self.kind == _RES
        g = np.where(res, 1.0 / np.where(res, val, 1.0), g)
        cp = self.kind == _CP
        v_safe = np.where(low | ~(self.kind == _CP), 1.0, v)
        g = np.where(cp & low, val / vc**2, np.where(cp, -val / v_safe**2, g))
        i_n = np.where(cp & ~low, 2.0 * val / v_safe, i_n)
        lamp = self.kind == _LAMP
        g = np.where(lamp, 1.0 / self.lamp_resistance(), g)
        return g, i_n

    def current(self, t_s, v_load):
        """Load current at ``v_load`` (V), A, (B,)."""
        g, i_n = self.companion(t_s, v_load)
        return i_n + g * np.asarray(v_load, dtype=float)

    def advance(self, v_load, dt_s):
        """Advance lamp filament temperatures by ``dt_s`` (s) with ``v_load`` (V) held (forward Euler)."""
        lamp = self.kind == _LAMP
        if not lamp.any():
            return
        p = v_load**2 / self.lamp_resistance() / self.rated_w
        du = (p - _lamp_loss(self.u)) / self.lamp_tc
        self.u = np.where(lamp, np.maximum(self.u + dt_s * du, LAMP_U_AMBIENT), self.u)

    def set_steady(self, v_load):
        """Set lamp filament temperatures to their steady values at ``v_load`` (V), (B,)."""
        for b in np.flatnonzero(self.kind == _LAMP):
            self.u[b] = lamp_steady_u(max(float(v_load[b]), 0.0) / self.rated_v[b])

    def set_cold(self):
        """Set every lamp filament to ambient temperature."""
        self.u[:] = LAMP_U_AMBIENT

    def steady_current(self, t_s, v_load, b):
        """Steady-state current (A) of load ``b`` at ``v_load`` (V), lamps at thermal equilibrium."""
        if self.kind[b] == _LAMP:
            u = lamp_steady_u(max(v_load, 0.0) / self.rated_v[b])
            return v_load / (self.r_hot[b] * u**LAMP_R_EXPONENT)
        v = np.full(len(self.specs), v_load)
        return float(self.current(t_s, v)[b])
