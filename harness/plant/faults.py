"""Fault windows of B scenarios: which faults are active at a given time."""

import numpy as np

from harness.scenario.specs import FAULT_KINDS


class FaultSchedule:
    """Faults of B scenarios, each active over the half-open window [at_s, until_s).

    What is active changes only at the window edges, so both queries answer from the last
    result while the time stays between the same two edges.

    Parameters
    ----------
    faults : sequence of sequence of harness.scenario.specs.FaultSpec
        Per scenario, its faults (may be empty).
    """

    def __init__(self, faults):
        self.n_batch = n = len(faults)
        rows = [(b, f) for b, fs in enumerate(faults) for f in fs]
        self._b = np.array([b for b, _ in rows], dtype=np.int64)
        self._at = np.array([f.at_s for _, f in rows], dtype=float)
        self._until = np.array([f.until_s for _, f in rows], dtype=float)
        self._kind = np.array([f.kind for _, f in rows], dtype=object)
        stuck = self._kind == "adc_stuck"
        self._stuck_v = stuck & np.array([f.channel == "v" for _, f in rows], dtype=bool)
        self._stuck_i = stuck & ~self._stuck_v
        self._code = np.array([f.code if f.code is not None else -1 for _, f in rows], dtype=np.int64)
        # Sorted without repeats; np.unique would import numpy.ma, a sizeable part of start-up.
        self.edges_s = np.array(sorted({*self._at.tolist(), *self._until.tolist(), np.inf}), dtype=float)
        self.has_stuck = bool(stuck.any())
        self._none = {k: np.zeros(n, dtype=bool) for k in FAULT_KINDS}
        self._active = self._stuck = None
        self._active_win = self._stuck_win = (np.inf, -np.inf)

    def _window(self, t_s):
        """Edges [lo, hi) around ``t_s`` between which nothing changes."""
        j = int(np.searchsorted(self.edges_s, t_s, side="right"))
        return (self.edges_s[j - 1] if j else -np.inf), self.edges_s[j]

    @property
    def valid_until_s(self):
        """Time (s) at which the last :meth:`active` answer next changes."""
        return self._active_win[1]

    def _on(self, t_s):
        return (self._at <= t_s) & (t_s < self._until)

    def active(self, t_s):
        """Active plant faults at ``t_s`` (s).

        Returns
        -------
        dict
            For each kind in FAULT_KINDS, a (B,) bool array (read-only, shared between calls).
        """
        lo, hi = self._active_win
        if not lo <= t_s < hi:
            on = self._on(t_s)
            out = {}
            for k in FAULT_KINDS:
                sel = on & (self._kind == k)
                out[k] = self._none[k]
                if sel.any():
                    out[k] = np.zeros(self.n_batch, dtype=bool)
                    out[k][self._b[sel]] = True
                out[k].flags.writeable = False
            self._active, self._active_win = out, self._window(t_s)
        return self._active

    def stuck_codes(self, t_s):
        """ADC codes forced by ``adc_stuck`` faults at ``t_s`` (s).

        Returns
        -------
        v_code, i_code : ndarray of int64, shape (B,), or None
            Forced code per scenario and channel, -1 where the channel is not stuck (read-only,
            shared between calls); None where no scenario has a stuck channel at ``t_s``.
        """
        lo, hi = self._stuck_win
        if not lo <= t_s < hi:
            on = self._on(t_s)
            codes = []
            for chan in (self._stuck_v, self._stuck_i):
                sel = on & chan
                if not sel.any():
                    codes.append(None)
                    continue
                c = np.full(self.n_batch, -1, dtype=np.int64)
                c[self._b[sel]] = self._code[sel]
                c.flags.writeable = False
                codes.append(c)
            self._stuck, self._stuck_win = tuple(codes), self._window(t_s)
        return self._stuck
