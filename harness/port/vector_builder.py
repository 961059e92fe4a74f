"""Open-loop window building for targeted vectors: sines on the params' own table, and searches
on the model for windows and periods that hit an exact value.

A :class:`Builder` lays ADC codes one window (or period) at a time, phase-aligned with the
state's reference table from ld_init; the searches run the model from a state and keep the first
candidate, in a fixed order, whose outcome is the one wanted (no randomness).
"""
import copy
import itertools

import numpy as np

#: Current level of the targeted windows, as a fraction of adc_max.
I_LEVEL = 0.5
#: Current sine amplitude, as a multiple of the smallest swing the classifier accepts.
SWING_MARGIN = 4.0
#: Period level dithers (fractions of a code per period) the exact-swing search tries, in order.
DITHERS = (0.37, 0.41, 0.53, 0.29, 0.61, 0.17, 0.73, 0.11, 0.83, 0.07)
#: Largest extra codes (summed over a period) the exact-step search tries either way.
EXTRA_RANGE = 20000


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


def run_model(p, s, b):
    """The model state ``s`` (changed in place) after the codes of builder ``b``."""
    from algo import step as model
    for v, i in zip(*(c.tolist() for c in b.codes())):
        model.step(p, s, v, i)
    return s


def first_accepted(p, prefix, make, candidates, ok):
    """The first of ``candidates`` whose window (``make(candidate)``, a Builder) leaves the
    model, run from the end of ``prefix`` (a Builder), in a state ``ok(state)`` accepts; the last
    candidate if none does (the vector is then still well-formed, only the aim is missed)."""
    from algo import step as model
    start = run_model(p, model.init(p), prefix) if prefix.v else model.init(p)
    for c in candidates:
        b = make(c)
        if ok(run_model(p, copy.deepcopy(start), b)):
            return b
    return b


def exact_window(p, r, i0=None):
    """A maker of one window near in-phase ratio ``r`` (current level ``i0``) from an
    exact_candidates setting."""
    def make(c):
        amp, frac, tweak = c
        w = Builder(p)
        w.windows(1, r * (1 + 3e-4 * tweak), amp=amp, v0=p.adc_max // 2 + frac, i0=i0)
        return w
    return make


def exact_candidates(b):
    """Window settings to search for an exact value: current amplitude, voltage offset fraction,
    a small change of the ratio (``(amp, frac, tweak)``), in a fixed order."""
    amps = [round(b.min_amp() * 13) + k for k in range(24)]
    return itertools.product(amps, (0.0, 0.2, 0.4, 0.6, 0.8), (-2, -1, 0, 1, 2))


def swing_of(p, i):
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


def nudge(p, i, target):
    """Codes ``i`` changed one code at a time, greedily, toward a magnitude of exactly ``target``;
    then one pair of changes if that is one step short. None if neither reaches it."""
    i = i.copy()
    moves = [(k, dv) for k in range(len(i)) for dv in (1, -1)]

    def after(changes):
        j = i.copy()
        for k, dv in changes:
            j[k] += dv
        return swing_of(p, j) - target

    while True:
        d = swing_of(p, i) - target
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
        i = nudge(p, np.rint(level + scale * amp * s).astype(np.int64), p.swing_min)
        if i is None:
            continue
        st = model.init(p)
        for a, c in zip(v.tolist(), i.tolist()):
            model.step(p, st, a, c)
        if st.status == 1 and st.swing == p.swing_min:
            return v, i
    return v, np.rint(p.adc_max // 2 + amp * s).astype(np.int64)


def tuned_period(p, b, state, level, amp, r, extra):
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
    return w, run_model(p, copy.deepcopy(state), w)


def period_with_step(p, b, state, level, amp, r, want):
    """The period (see tuned_period) whose correction step du is exactly ``want``: a bisection on
    the extra codes (du grows with the current), then a scan around it. None if none is found."""
    lo, hi = -EXTRA_RANGE, EXTRA_RANGE
    while hi - lo > 1:
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if tuned_period(p, b, state, level, amp, r, mid)[1].du_prev < want else (lo, mid)
    for extra in range(hi - 30, hi + 30):
        w, after = tuned_period(p, b, state, level, amp, r, extra)
        if after.du_prev == want:
            return w, after
    return None
