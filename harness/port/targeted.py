"""Open-loop vectors aimed at paths the closed loop reaches rarely or never.

Each is built window by window from sines on the params' own reference table, so a window's
outcome is chosen: a valid window of a given in-phase ratio (resistance), a window with a code
at a rail, a flat voltage (zero resistance). They reach the estimate's replace-on-jump, the
valid-window count saturating, a zero estimate below the ESR allowance, the ring guard
tripping and staying tripped, the correction's ceiling falling below its integral, and one
window per channel-rail combination of the fault counter. Everything follows from the params
(no randomness).
"""
import copy
import functools
import itertools

import numpy as np

#: Current level of the targeted windows, as a fraction of adc_max.
I_LEVEL = 0.5
#: In-phase ratio (share of r_max) and current level (share of adc_max) of the ringing
#: correction, and the ratio of the settled one under the ceiling.
RING_R, CEILING_R = 0.3, 0.275
#: Period current levels of the ring-guard trip, as multiples of the steady level.
RING_PATTERN = (0.7, 0.2, 2.5)
#: First steps (Q corr_frac) of the two ring-guard edge cases: one below half the size floor,
#: one above it (ring_edges).
RING_EDGES = (60, 130)
#: Largest extra codes (summed over a period) the ring-edge search tries either way.
EXTRA_RANGE = 20000
#: Current levels (shares of adc_max) the ring-guard vector tries, in order.
RING_LEVELS = tuple(0.2 + 0.01 * k for k in range(20))
#: Period level dithers (fractions of a code per period) the exact-swing search tries, in order.
DITHERS = (0.37, 0.41, 0.53, 0.29, 0.61, 0.17, 0.73, 0.11, 0.83, 0.07)
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
    """Valid windows at about a quarter of r_max until valid_run saturates at 255 and beyond, then
    one whose raw estimate is exactly 1 LSB above the settled estimate and one back at the old
    value: steps that round to 0 and move by the 1-LSB minimum, up and down. The two windows
    are a pair of _exact_candidates settings whose raw estimates differ by 1 (the first pair
    found in the model)."""
    from algo import step as model
    level, r = p.adc_max / 4, 0.25 * p.r_max_q / (1 << p.r_frac)
    make = _exact_window(p, r, level)
    raw = {}
    for c in _exact_candidates(Builder(p)):
        raw.setdefault(_run(p, model.init(p), make(c)).r_raw, c)
    low = next((x for x in sorted(raw) if x + 1 in raw), min(raw))
    b = Builder(p)
    for c in [raw[low]] * 258 + [raw.get(low + 1, raw[low]), raw[low]]:
        w = make(c)
        b.v += w.v
        b.i += w.i
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


def _run(p, s, b):
    """The model state ``s`` (changed in place) after the codes of builder ``b``."""
    from algo import step as model
    for v, i in zip(*(c.tolist() for c in b.codes())):
        model.step(p, s, v, i)
    return s


def _first(p, prefix, make, candidates, ok):
    """The first of ``candidates`` whose window (``make(candidate)``, a Builder) leaves the
    model, run from the end of ``prefix`` (a Builder), in a state ``ok(state)`` accepts; the last
    candidate if none does (the vector is then still well-formed, only the aim is missed)."""
    from algo import step as model
    start = _run(p, model.init(p), prefix) if prefix.v else model.init(p)
    for c in candidates:
        b = make(c)
        if ok(_run(p, copy.deepcopy(start), b)):
            return b
    return b


def _exact_window(p, r, i0=None):
    """A maker of one window near in-phase ratio ``r`` (current level ``i0``) from an
    _exact_candidates setting."""
    def make(c):
        amp, frac, tweak = c
        w = Builder(p)
        w.windows(1, r * (1 + 3e-4 * tweak), amp=amp, v0=p.adc_max // 2 + frac, i0=i0)
        return w
    return make


def _exact_candidates(b):
    """Window settings to search for an exact value: current amplitude, voltage offset fraction,
    a small change of the ratio (``(amp, frac, tweak)``), in a fixed order."""
    amps = [round(b.min_amp() * 13) + k for k in range(24)]
    return itertools.product(amps, (0.0, 0.2, 0.4, 0.6, 0.8), (-2, -1, 0, 1, 2))


def _swing(p, i):
    """The detrended current demodulation magnitude m of one phase-aligned window of codes ``i``
    (what ld_classify compares with swing_min), from the model's own detrend."""
    from algo.estimator import detrend
    b = Builder(p)
    t = np.arange(len(i))
    tab = np.array(p.ref_tab[:b.period], dtype=np.int64)
    sn, cs = tab[t % b.period], tab[(t + b.period // 4) % b.period]
    half, ds = (1 << p.demod_shift) >> 1, p.demod_shift
    di = int(i.sum() - 2 * i[:len(i) // 2].sum())
    return max(abs(detrend(int(((i * sn + half) >> ds).sum()), di, p.kt_s_q)),
               abs(detrend(int(((i * cs + half) >> ds).sum()), di, p.kt_c_q)))


def _nudge(p, i, target):
    """Codes ``i`` changed one code at a time, greedily, toward a magnitude of exactly ``target``;
    then one pair of changes if that is one step short. None if neither reaches it."""
    i = i.copy()
    moves = [(k, dv) for k in range(len(i)) for dv in (1, -1)]

    def after(changes):
        j = i.copy()
        for k, dv in changes:
            j[k] += dv
        return _swing(p, j) - target

    while True:
        d = _swing(p, i) - target
        if d == 0:
            return i
        best = min(moves, key=lambda mv: abs(after([mv])))
        if abs(after([best])) >= abs(d):
            break
        i[best[0]] += best[1]
    single = {}
    for mv in moves:
        single.setdefault(after([mv]) - d, []).append(mv)
    for delta, mvs in single.items():
        for a in mvs:
            for b in single.get(-d - delta, []):
                if a[0] != b[0] and after([a, b]) == 0:
                    i[a[0]] += a[1]
                    i[b[0]] += b[1]
                    return i
    return None


def swing_at_floor(p):
    """One valid window whose current swing equals swing_min exactly: a sine just above the floor
    with the period levels dithered (so each period rounds differently), nudged a code at a time.
    Tries dithers and amplitudes in a fixed order; the first the model accepts as valid with
    swing == swing_min is returned as ``(adc_v, adc_i)``."""
    from algo import step as model
    b = Builder(p)
    n = b.window
    t = np.arange(n)
    s = b.sin[t % b.period]
    amp = b.min_amp() / SWING_MARGIN
    r = 0.2 * p.r_max_q / (1 << p.r_frac)
    v = np.rint(p.adc_max // 2 + r * amp * s).astype(np.int64)
    for dither, scale in itertools.product(DITHERS, (1.01, 1.02, 1.005)):
        level = p.adc_max // 2 + ((t // b.period) * dither) % 1
        i = _nudge(p, np.rint(level + scale * amp * s).astype(np.int64), p.swing_min)
        if i is None:
            continue
        st = model.init(p)
        for a, c in zip(v.tolist(), i.tolist()):
            model.step(p, st, a, c)
        if st.status == 1 and st.swing == p.swing_min:
            return v, i
    return v, np.rint(p.adc_max // 2 + amp * s).astype(np.int64)


def exact_limits(p):
    """Valid windows whose raw estimate equals r_max_q exactly (a real part at the limit is not
    above it), then one exactly r_step_max_q above the first after it (within the step, so it
    is averaged in, not taken as it is), then one whose current swing equals swing_min exactly
    (enough swing). Each is found by a search on the model over amplitudes, offsets and small
    changes of the ratio, in a fixed order."""
    b = Builder(p)
    r_max = p.r_max_q / (1 << p.r_frac)
    window = functools.partial(_exact_window, p)

    def ok_raw(want):
        return lambda s: s.r_raw == want and s.status == 1

    first = _first(p, b, window(r_max), _exact_candidates(b), ok_raw(p.r_max_q))
    b.v += first.v
    b.i += first.i
    low = Builder(p)
    low.windows(1, 0.5 * r_max)
    start = _run(p, copy.deepcopy(_run(p, __import__("algo.step", fromlist=["init"]).init(p), b)), low)
    b.v += low.v
    b.i += low.i
    step = _first(p, b, window(start.r_raw / (1 << p.r_frac) + p.r_step_max_q / (1 << p.r_frac)),
                  _exact_candidates(b), ok_raw(start.r_raw + p.r_step_max_q))
    b.v += step.v
    b.i += step.i

    b.add(*swing_at_floor(p))
    return b


def _tuned_period(p, b, state, level, amp, r, extra):
    """Codes of one period at ``level`` with ``extra`` codes spread over its samples, and the model
    state after it (``state`` is left as it was)."""
    n = b.period
    i = np.rint(level + amp * b.sin).astype(np.int64)
    q, rem = divmod(abs(extra), n)
    sign = 1 if extra >= 0 else -1
    i += sign * q
    i[:rem] += sign
    v = np.rint(p.adc_max // 2 + r * amp * b.sin).astype(np.int64)
    w = Builder(p)
    w.add(v, np.clip(i, 1, p.adc_max - 1))
    return w, _run(p, copy.deepcopy(state), w)


def _period_for(p, b, state, level, amp, r, want):
    """The period (see _tuned_period) whose correction step du is exactly ``want``: a bisection on
    the extra codes (du grows with the current), then a scan around it. None if none is found."""
    lo, hi = -EXTRA_RANGE, EXTRA_RANGE
    while hi - lo > 1:
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if _tuned_period(p, b, state, level, amp, r, mid)[1].du_prev < want else (lo, mid)
    for extra in range(hi - 30, hi + 30):
        w, after = _tuned_period(p, b, state, level, amp, r, extra)
        if after.du_prev == want:
            return w, after
    return None


def ring_edges(p):
    """The ring guard's growth test at its two edges: from a ringing correction, a step of
    RING_EDGES[0] then its reversal to exactly -(corr_max_q >> 6) (the size floor: not above
    it), and a step of RING_EDGES[1] then exactly twice it reversed (not more than double).
    Neither counts as a growing reversal. Each period's current is found by a search on the
    model; a pair not found is left out."""
    from algo import step as model
    b = Builder(p)
    r, level, amp = RING_R * p.r_max_q / (1 << p.r_frac), RING_LEVELS[0] * p.adc_max, b.min_amp()
    b.windows(3, r, i0=level)
    state = _run(p, model.init(p), b)
    floor = p.corr_max_q >> 6
    for first, second in ((RING_EDGES[0], -floor), (RING_EDGES[1], -2 * RING_EDGES[1])):
        one = _period_for(p, b, state, level, amp, r, first)
        two = one and _period_for(p, b, one[1], level, amp, r, second)
        if two:
            for w, after in (one, two):
                b.v += w.v
                b.i += w.i
            state = two[1]
    rest = b.window - sum(len(x) for x in b.v) % b.window
    b.windows(1, r, i0=level)
    b.v[-1], b.i[-1] = b.v[-1][:rest], b.i[-1][:rest]
    b.windows(1, r, i0=level)
    return b


#: ``(vector name, builder, one-line description)`` of every targeted vector, in order.
TARGETED = [
    ("estimate_jump", estimate_jump, "open loop: a valid window, then ones further than r_step_max "
                                     "from it (replaced, then confirmed)"),
    ("zero_resistance", zero_resistance, "open loop: flat voltage under a current sine (estimate 0)"),
    ("valid_run_saturates", valid_run_saturates, "open loop: 258 valid windows (valid_run saturates)"),
    ("ring_guard", ring_guard, "open loop: a ringing correction, two growing reversals (P off), "
                               "then valid windows"),
    ("ring_edges", ring_edges, "open loop: correction steps reversing to exactly the ring guard's size "
                               "floor and to exactly twice the step before"),
    ("ceiling_drops", ceiling_drops, "open loop: the correction's ceiling falls below its integral "
                                     "with the error negative"),
    ("rail_combinations", rail_combinations, "open loop: each rail combination of one window, "
                                             "between valid windows"),
    ("reactive_edge", reactive_edge, "open loop: quadrature voltage at 0.7 and 1.1 x_max, current "
                                     "an eighth of a period early"),
    ("exact_limits", exact_limits, "open loop: raw estimate exactly r_max, a step exactly "
                                   "r_step_max, a current swing exactly swing_min"),
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
