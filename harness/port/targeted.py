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
#: In-phase ratio (share of r_max) and current level (share of adc_max) of the ringing
#: correction, and the ratio of the settled one under the ceiling.
RING_R, CEILING_R = 0.3, 0.275
#: Period current levels of the ring-guard trip, as multiples of the steady level.
RING_PATTERN = (0.7, 0.2, 2.5)
#: Current levels (shares of adc_max) the ring-guard vector tries, in order.
RING_LEVELS = tuple(0.2 + 0.01 * k for k in range(20))
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

    def windows(self, count, r, i0=None, amp=None, v0=None, periods=None, x=0.0, lead=0):
        """``count`` windows of current ``i0 + amp sin`` and voltage ``v0 + amp (r sin + x cos)``.

        ``r`` and ``x`` are the in-phase and quadrature ratios, V-codes per I-code (r_raw =
        r 2**r_frac); ``periods`` optionally gives each period's current level instead of ``i0``
        (a list, cycled); ``lead`` shifts both sines by that many samples against the table.
        """
        top = self.p.adc_max
        i0 = I_LEVEL * top if i0 is None else i0
        amp = self.min_amp() if amp is None else amp
        v0 = 0.5 * top if v0 is None else v0
        n = count * self.window
        t = np.arange(n)
        s = self.sin[(t + lead) % self.period]
        c = self.sin[(t + lead + self.period // 4) % self.period]
        level = np.full(n, float(i0))
        if periods is not None:
            level = np.asarray(periods, dtype=float)[(t // self.period) % len(periods)]
        self.add(v0 + amp * (r * s + x * c), level + amp * s)

    def codes(self):
        return np.concatenate(self.v), np.concatenate(self.i)

    def poke(self, offset_from_end, v=None, i=None):
        """Set one sample, ``offset_from_end`` samples before the end, to the codes given."""
        if v is not None:
            self.v[-1][-offset_from_end] = v
        if i is not None:
            self.i[-1][-offset_from_end] = i


def _top(p, pert):
    """The correction's ceiling (Q corr_frac) with the perturbation at ``pert`` (ld_corr_ceiling)."""
    return min(max(p.cmd_max - p.target_code - pert, 0) << p.corr_frac, p.corr_max_q)


def _level_for(p, target_q, r):
    """Current level (codes) whose period drop at in-phase ratio ``r`` is ``target_q`` (Q corr_frac)."""
    return target_q * (1 << (24 - p.corr_frac)) / (r * 256 * p.corr_gain_q)


def estimate_jump(p):
    """A valid window at a tenth of r_max, then valid windows near r_max: the second is further
    than r_step_max from the first and replaces it (valid_run stays 1), the third confirms it."""
    b = Builder(p)
    r_max = p.r_max_q / (1 << p.r_frac)
    b.windows(1, 0.1 * r_max)
    b.windows(3, 0.9 * r_max)
    return b


def zero_resistance(p):
    """A flat voltage under a current sine: r_raw 0, a valid estimate of 0, the correction
    running with the estimate at (not above) the ESR allowance."""
    b = Builder(p)
    b.windows(4, 0.0)
    return b


def valid_run_saturates(p):
    """Valid windows at a steady quarter of r_max until valid_run saturates at 255 and beyond."""
    b = Builder(p)
    b.windows(258, 0.25 * p.r_max_q / (1 << p.r_frac), i0=p.adc_max / 4)
    return b


def ring_guard(p):
    """Three valid windows at about a third of r_max, whose correction rings (kp + ki above 1),
    then periods at RING_PATTERN times the level (a little low, far low, far high): two growing
    reversals in a row trip the ring guard (kp_off 2) from a correction above 0, and the
    proportional part stays off for the rest of that window; a valid window turns it back on. Where the
    ringing stands after three windows depends on the params, so the first of RING_LEVELS that
    trips the guard in the model is kept (the last one if none does)."""
    from algo import step as model
    r = RING_R * p.r_max_q / (1 << p.r_frac)
    for share in RING_LEVELS:
        b, level = Builder(p), share * p.adc_max
        b.windows(3, r, i0=level)
        b.windows(1, r, periods=[k * level for k in RING_PATTERN] + [level] * 5)
        b.windows(2, r, i0=level)
        s = model.init(p)
        if any(model.step(p, s, int(v), int(i)) is not None and s.kp_off == 2 for v, i in zip(*b.codes())):
            break
    return b


def ceiling_drops(p):
    """The correction settled between the ceiling with the perturbation at pert_min and at
    pert_max: four windows with one current code at adc_max halve the perturbation to its floor
    (raising the ceiling), a valid window sets it back to pert_max (the ceiling falls below the
    integral), then the current falls a little: the output is above the ceiling with the error
    negative, and the integral moves."""
    b = Builder(p)
    r = CEILING_R * p.r_max_q / (1 << p.r_frac)
    level = _level_for(p, (_top(p, p.pert_min) + _top(p, p.pert_max)) / 2, r)
    b.windows(3, r, i0=level)
    for _ in range(4):
        b.windows(1, r, i0=level)
        b.poke(b.window // 2, i=p.adc_max)
    b.windows(1, r, i0=level)
    b.windows(1, r, i0=0.99 * level)
    return b


def rail_combinations(p):
    """Valid windows, then one window per rail combination of the current: at 0 only, at adc_max
    only (both hold the estimate), at both (a fault window), and the voltage at adc_max with
    each (fault windows); a valid window between each."""
    b = Builder(p)
    b.windows(2, 0.25 * p.r_max_q / (1 << p.r_frac))
    for v, i in ((None, [0]), (None, [p.adc_max]), (None, [0, p.adc_max]), (p.adc_max, [0]),
                 (p.adc_max, [p.adc_max])):
        b.windows(1, 0.25 * p.r_max_q / (1 << p.r_frac))
        for k, code in enumerate(i):
            b.poke(b.window // 2 - 3 * k, v=v, i=code)
        b.windows(1, 0.25 * p.r_max_q / (1 << p.r_frac))
    return b


def reactive_edge(p):
    """Current sines an eighth of a period early (both demodulation parts equal) under a
    voltage with a small in-phase and a large quadrature part: at 0.7 x_max (valid) and at
    1.1 x_max (reactive), which tests the quadrature limit's scale and its cross product."""
    b = Builder(p)
    x_max = p.x_max_q / (1 << p.r_frac)
    lead, amp = b.period // 8, 3 * b.min_amp()
    for x in (0.7 * x_max, 1.1 * x_max, 0.7 * x_max):
        b.windows(1, 0.1 * x_max, x=x, lead=lead, amp=amp)
    return b


def step_threshold(p):
    """Flat current whose period sums differ by exactly step_min, then by step_min + 1: the
    load-step test is strict (no swing yet, so the threshold is the floor step_min)."""
    b = Builder(p)
    n, top = b.period, p.adc_max
    base = top // 4
    for extra in (0, p.step_min, 0, p.step_min + 1, 0):
        each, rest = divmod(extra, n)
        level = np.full(n, base + each)
        level[:rest] += 1
        b.add(np.full(n, top // 2), level)
    return b


#: ``(vector name, builder, one-line description)`` of every targeted vector, in order.
TARGETED = [
    ("estimate_jump", estimate_jump, "open loop: a valid window, then ones further than r_step_max "
                                     "from it (replaced, then confirmed)"),
    ("zero_resistance", zero_resistance, "open loop: flat voltage under a current sine (estimate 0)"),
    ("valid_run_saturates", valid_run_saturates, "open loop: 258 valid windows (valid_run saturates)"),
    ("ring_guard", ring_guard, "open loop: a ringing correction, two growing reversals (P off), "
                               "then valid windows"),
    ("ceiling_drops", ceiling_drops, "open loop: the correction's ceiling falls below its integral "
                                     "with the error negative"),
    ("rail_combinations", rail_combinations, "open loop: each rail combination of one window, "
                                             "between valid windows"),
    ("reactive_edge", reactive_edge, "open loop: quadrature voltage at 0.7 and 1.1 x_max, current "
                                     "an eighth of a period early"),
    ("step_threshold", step_threshold, "open loop: period sums differing by exactly step_min, then "
                                       "step_min + 1"),
]


def targeted(p):
    """``(name, description, adc_v, adc_i)`` of every targeted vector for params ``p``."""
    out = []
    for name, build, text in TARGETED:
        v, i = build(p).codes()
        out.append((name, text, v, i))
    return out
