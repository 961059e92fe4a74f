"""Fault windows of B scenarios: which faults are active at a given time."""

import numpy as np

from harness.specs import FAULT_KINDS


class FaultSchedule:
    """Faults of B scenarios, each active over the half-open window [at_s, until_s).

    Parameters
    ----------
    faults : sequence of sequence of harness.specs.FaultSpec
        Per scenario, its faults (may be empty).
    """

    def __init__(self, faults):
        self.n_batch = len(faults)
        self._rows = [(b, f) for b, fs in enumerate(faults) for f in fs]

    def active(self, t_s):
        """Active plant faults at ``t_s`` (s).

        Returns
        -------
        dict
            For each kind in FAULT_KINDS, a (B,) bool array.
        """
        out = {k: np.zeros(self.n_batch, dtype=bool) for k in FAULT_KINDS}
        for b, f in self._rows:
            if f.at_s <= t_s < f.until_s:
                out[f.kind][b] = True
        return out

    def stuck_codes(self, t_s):
        """ADC codes forced by ``adc_stuck`` faults at ``t_s`` (s).

        Returns
        -------
        v_code, i_code : ndarray of int64, shape (B,)
            Forced code per scenario and channel, -1 where the channel is not stuck.
        """
        v_code = np.full(self.n_batch, -1, dtype=np.int64)
        i_code = np.full(self.n_batch, -1, dtype=np.int64)
        for b, f in self._rows:
            if f.kind == "adc_stuck" and f.at_s <= t_s < f.until_s:
                (v_code if f.channel == "v" else i_code)[b] = f.code
        return v_code, i_code
