"""Cable loop resistance over time (a conductor-temperature ramp), one cable or a vectorised bank."""

import numpy as np

from harness.scenario.conductors import MATERIALS, T_REF_C, temperature_scale


class CableResistance:
    """Loop resistance as a function of time, for a linear conductor-temperature ramp.

    Parameters
    ----------
    r_start_ohm : float
        Loop resistance at t = 0 (conductor at ``temperature_c``), ohm.
    material : str
        Conductor material, sets the temperature coefficient.
    temperature_c : float
        Conductor temperature at t = 0, degC.
    temperature_end_c : float or None
        Conductor temperature reached at ``ramp_s``, degC; None for a constant temperature.
    ramp_s : float
        Duration of the ramp (the scenario's run duration), s. Held at the end value after it.
    """

    def __init__(self, r_start_ohm, material, temperature_c, temperature_end_c, ramp_s):
        self.r_start_ohm = float(r_start_ohm)
        self.material = material
        self.temperature_c = float(temperature_c)
        self.temperature_end_c = self.temperature_c if temperature_end_c is None else float(temperature_end_c)
        self.ramp_s = float(ramp_s)

    def temperature_at(self, t_s):
        """Conductor temperature at time ``t_s`` (s), degC."""
        frac = np.clip(np.asarray(t_s, dtype=float) / self.ramp_s, 0.0, 1.0) if self.ramp_s > 0 else 1.0
        return self.temperature_c + (self.temperature_end_c - self.temperature_c) * frac

    def r_ohm(self, t_s):
        """Loop resistance at time ``t_s`` (s), ohm."""
        return self.r_start_ohm * temperature_scale(self.material, self.temperature_c, self.temperature_at(t_s))


class CableBank:
    """Loop resistances of B cables over time, vectorised, and when each next needs a refresh.

    ``r_at`` evaluates exactly the operations of :meth:`CableResistance.r_ohm` elementwise, so
    it agrees with it to the last bit. A ramp's resistance is monotonic in time (every step of
    the formula is a monotonic rounding), which :meth:`first_drift_k` relies on.

    Parameters
    ----------
    cables : sequence of CableResistance
    """

    def __init__(self, cables):
        self.cables = list(cables)
        rho_alpha = np.array([MATERIALS[c.material] for c in self.cables], dtype=float).reshape(-1, 2)
        self.rho20, self.alpha = rho_alpha[:, 0], rho_alpha[:, 1]
        self.r_start = np.array([c.r_start_ohm for c in self.cables], dtype=float)
        self.t0_c = np.array([c.temperature_c for c in self.cables], dtype=float)
        self.t1_c = np.array([c.temperature_end_c for c in self.cables], dtype=float)
        self.ramp_s = np.array([c.ramp_s for c in self.cables], dtype=float)
        self.ramps = np.flatnonzero(self.t1_c != self.t0_c)
        self._rho0 = self.rho20 * (1.0 + self.alpha * (self.t0_c - T_REF_C))
        self.r_const = self.r_start.copy()
        self.r_const.flags.writeable = False

    def r_at(self, t_s, idx=None):
        """Loop resistance (ohm) at time ``t_s`` (s, scalar or array broadcasting with idx) of cables ``idx``."""
        if idx is None:
            if self.ramps.size == 0:
                return self.r_const
            r = self.r_start.copy()
            r[self.ramps] = self.r_at(t_s, self.ramps)
            return r
        ramp_s = self.ramp_s[idx]
        frac = np.where(ramp_s > 0, np.clip(t_s / np.where(ramp_s > 0, ramp_s, 1.0), 0.0, 1.0), 1.0)
        temp = self.t0_c[idx] + (self.t1_c[idx] - self.t0_c[idx]) * frac
        rho = self.rho20[idx] * (1.0 + self.alpha[idx] * (temp - T_REF_C))
        return self.r_start[idx] * (rho / self._rho0[idx])

    def first_drift_k(self, idx, r_ref, rel, k_from, dt_s):
        """First sample index k >= ``k_from`` at which |r(k dt) - r_ref| > rel * r_ref, per cable.

        Parameters
        ----------
        idx : ndarray of int, shape (m,)
            Ramping cables.
        r_ref : ndarray, shape (m,)
            Resistance each was last synchronised to, ohm.
        rel : float
            Relative drift that triggers a refresh.
        k_from : int
            Earliest sample index to consider.
        dt_s : float
            Sample period, s; sample k is at time ``k * dt_s``.

        Returns
        -------
        ndarray of float, shape (m,)
            The sample index, or inf where the ramp never drifts that far.
        """
        def drifted(k):
            return np.abs(self.r_at(k * dt_s, idx) - r_ref) > rel * r_ref

        r0, r1 = self.r_at(0.0, idx), self.r_at(np.inf, idx)
        never = ~(np.abs(r1 - r_ref) > rel * r_ref)
        # Resistance is affine in time until the ramp ends: guess, then walk to the exact sample.
        slope = (r1 - r0) / np.where(self.ramp_s[idx] > 0, self.ramp_s[idx], 1.0)
        target = r_ref * (1.0 + np.sign(slope) * rel)
        with np.errstate(divide="ignore", invalid="ignore"):
            t_hit = np.where(slope != 0, (target - r0) / slope, 0.0)
        k = np.maximum(np.where(never, k_from, np.ceil(t_hit / dt_s)), k_from)
        k = np.where(np.isfinite(k), k, k_from)
        for _ in range(10_000):
            back = ~never & (k > k_from) & drifted(k - 1)
            ahead = ~never & ~drifted(k)
            if not (back.any() or ahead.any()):
                break
            k = k - back + ahead
        return np.where(never, np.inf, k)
