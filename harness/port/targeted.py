"""Open-loop vectors aimed at paths the closed loop reaches rarely or never.

Each is built window by window from sines on the params' own reference table, so a window's
outcome is chosen: a valid window of a given in-phase ratio (resistance), a window with a code
at a rail, a flat voltage (zero resistance). They reach the estimate's replace-on-jump, the
valid-window count saturating, a zero estimate below the ESR allowance, the ring guard
tripping and staying tripped, the correction's ceiling falling below its integral, and one
window per channel-rail combination of the fault counter. Everything follows from the params
(no randomness).
"""
import numpy as np

#: Current level of the targeted windows, as a fraction of adc_max.
I_LEVEL = 0.5
#: Current sine amplitude, as a multiple of the smallest swing the classifier accepts.
SWING_MARGIN = 4.0


class Builder:
    """ADC codes built one window at a time, phase-aligned with the state's reference table."""

    def __init__(self, p):
        self.p = p
        self.period = 1 << p.period_log2
        self.window = 1 << p.window_log2
        self.sin = np.array(p.ref_tab[:self.period], dtype=float) / ((1 << (p.tab_bits - 1)) - 1)
        self.v, self.i = [], []

    def min_amp(self):
        """Current sine amplitude (codes) whose demodulated swing is SWING_MARGIN times swing_min."""
        per_code = self.window / 2 * ((1 << (self.p.tab_bits - 1)) - 1) / (1 << self.p.demod_shift)
        return SWING_MARGIN * self.p.swing_min / per_code

    def add(self, v, i):
        top = self.p.adc_max
        self.v.append(np.clip(np.rint(v), 0, top).astype(np.int64))
        self.i.append(np.clip(np.rint(i), 0, top).astype(np.int64))

    def windows(self, count, r, i0=None, amp=None, v0=None, periods=None):
        """``count`` windows of current ``i0 + amp sin`` and voltage ``v0 + r amp sin``.

        ``r`` is the in-phase ratio, V-codes per I-code (r_raw = r 2**r_frac); ``periods``
        optionally gives each period's current level instead of ``i0`` (a list, cycled).
        """
        top = self.p.adc_max
        i0 = I_LEVEL * top if i0 is None else i0
        amp = self.min_amp() if amp is None else amp
        v0 = 0.5 * top if v0 is None else v0
        n = count * self.window
        t = np.arange(n)
        s = self.sin[t % self.period]
        level = np.full(n, float(i0))
        if periods is not None:
            level = np.asarray(periods, dtype=float)[(t // self.period) % len(periods)]
        self.add(v0 + r * amp * s, level + amp * s)

    def codes(self):
        return np.concatenate(self.v), np.concatenate(self.i)

    def poke(self, offset_from_end, v=None, i=None):
        """Set one sample, ``offset_from_end`` samples before the end, to the codes given."""
        if v is not None:
            self.v[-1][-offset_from_end] = v
        if i is not None:
            self.i[-1][-offset_from_end] = i
