"""Open-loop vectors aimed at paths the closed loop reaches rarely or never.

Each is built window by window from sines on the params' own reference table, so a window's
outcome is chosen (harness/port/vector_builder.py): a valid window of a given in-phase ratio
(resistance), a window with a code at a rail, a flat voltage (zero resistance), and windows or
periods found by a search on the model to hit a limit exactly. They reach what the closed loop
reaches rarely or never (each recipe's docstring says what), so the C reference's reachable
branches are all taken and its behaviour-changing one-token mutants caught (c_coverage,
c_mutants). Everything follows from the params (no randomness).
"""
import functools

import numpy as np

from algo.params import GAIN_FRAC
from harness.port.vector_builder import (EXTRA_RANGE, Builder, exact_candidates, exact_window,
                                         first_accepted, period_with_step, run_model, swing_at_floor,
                                         tuned_period)


#: In-phase ratio (share of r_max) and current level (share of adc_max) of the ringing
#: correction, and the ratio of the settled one under the ceiling.
RING_R, CEILING_R = 0.3, 0.275
#: Period current levels of the ring-guard trip, as multiples of the steady level.
RING_PATTERN = (0.7, 0.2, 2.5)
#: First steps (Q corr_frac) of the two ring-guard edge cases: one below half the size floor,
#: one above it (ring_edges).
RING_EDGES = (60, 130)
#: In-phase ratio (share of r_max) and correction steps (Q corr_frac) before proportional_off's trip.
P_OFF_R, P_OFF_STEPS = 0.6, (3000, 200, -500)
#: Current levels (shares of adc_max) the ring-guard vector tries, in order.
RING_LEVELS = tuple(0.2 + 0.01 * k for k in range(20))


def _top(p, pert):
    """The correction's ceiling (Q corr_frac) with the perturbation at ``pert`` (ld_corr_ceiling)."""
    return min(max(p.cmd_max - p.target_code - pert, 0) << p.corr_frac, p.corr_max_q)


def _level_for(p, target_q, r):
    """Current level (codes) whose period drop at in-phase ratio ``r`` is ``target_q`` (Q corr_frac)."""
    return target_q * (1 << (24 - p.corr_frac)) / (r * 256 * p.corr_gain_q)


def estimate_jump(p):
    """A valid window at a tenth of r_max, then valid windows near r_max: the second is further
    than r_step_max from the first and replaces it (valid_run stays 1), the third confirms it.
    Then a window at a twentieth of the current: the perturbation the drop asks for is below
    half the last one, so it falls by half (its floor per window), not further."""
    b = Builder(p)
    r_max = p.r_max_q / (1 << p.r_frac)
    b.windows(1, 0.1 * r_max)
    b.windows(3, 0.9 * r_max)
    b.windows(1, 0.9 * r_max, i0=0.05 * p.adc_max)
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
    are a pair of exact_candidates settings whose raw estimates differ by 1 (the first pair
    found in the model)."""
    from algo import step as model
    level, r = p.adc_max / 4, 0.25 * p.r_max_q / (1 << p.r_frac)
    make = exact_window(p, r, level)
    raw = {}
    for c in exact_candidates(Builder(p)):
        raw.setdefault(run_model(p, model.init(p), make(c)).r_raw, c)
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
    b, r, level = _under_ceiling(p)
    b.windows(1, r, i0=level)
    b.windows(1, r, i0=0.99 * level)
    return b


def _under_ceiling(p):
    """Three valid windows settling the correction between the ceilings at pert_max and pert_min,
    then four with one current code at adc_max (the perturbation halves to its floor). Returns
    the Builder, the in-phase ratio and the current level."""
    b = Builder(p)
    r = CEILING_R * p.r_max_q / (1 << p.r_frac)
    level = _level_for(p, (_top(p, p.pert_min) + _top(p, p.pert_max)) / 2, r)
    b.windows(3, r, i0=level)
    for _ in range(4):
        b.windows(1, r, i0=level)
        b.poke(b.window // 2, i=p.adc_max)
    return b, r, level


def ceiling_edge(p):
    """From the settled correction of ceiling_drops, one period whose law output is exactly the
    ceiling with the error above 1: the anti-windup holds the integral only above the ceiling,
    so here it still moves. The period's current is found by a bisection on the model (the law's
    output, worked from the state before and after it, grows with the current); not found, the
    period is left at the level."""
    from algo import step as model
    from algo.fixed import rshift_round
    b, r, level = _under_ceiling(p)
    s = run_model(p, model.init(p), b)
    kp = min(rshift_round(s.r_est * p.kc_q, p.r_frac), p.kp_max_q) if s.kp_off < 2 else 0
    top, amp = _top(p, s.pert_amp), b.min_amp()

    def law(extra):
        w, after = tuned_period(p, b, s, level, amp, r, extra)
        e = after.corr_target - s.corr
        return w, e, rshift_round(kp * e, GAIN_FRAC) + s.integ + rshift_round(p.ki_q * e, GAIN_FRAC)

    lo, hi = -EXTRA_RANGE, EXTRA_RANGE
    while hi - lo > 1:
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if law(mid)[2] < top else (lo, mid)
    hit = next((w for w, e, u in map(law, range(hi - 30, hi + 30)) if u == top and e > 1), None)
    rest = b.window
    if hit is not None:
        b.v += hit.v
        b.i += hit.i
        rest -= b.period
    b.windows(1, r, i0=level)
    b.v[-1], b.i[-1] = b.v[-1][:rest], b.i[-1][:rest]
    b.windows(1, r, i0=level)
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


def exact_limits(p):
    """Valid windows whose raw estimate equals r_max_q exactly (a real part at the limit is not
    above it), then one exactly r_step_max_q above the first after it (within the step, so it
    is averaged in, not taken as it is), then one whose current swing equals swing_min exactly
    (enough swing). Each is found by a search on the model over amplitudes, offsets and small
    changes of the ratio, in a fixed order."""
    from algo import step as model
    b = Builder(p)
    r_max = p.r_max_q / (1 << p.r_frac)
    window = functools.partial(exact_window, p)

    def ok_raw(want):
        return lambda s: s.r_raw == want and s.status == 1

    first = first_accepted(p, b, window(r_max), exact_candidates(b), ok_raw(p.r_max_q))
    b.v += first.v
    b.i += first.i
    b.windows(1, 0.5 * r_max)
    start = run_model(p, model.init(p), b)
    step = first_accepted(p, b, window((start.r_raw + p.r_step_max_q) / (1 << p.r_frac)),
                          exact_candidates(b), ok_raw(start.r_raw + p.r_step_max_q))
    b.v += step.v
    b.i += step.i

    b.add(*swing_at_floor(p))
    return b


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
    state = run_model(p, model.init(p), b)
    floor = p.corr_max_q >> 6
    for first, second in ((RING_EDGES[0], -floor), (RING_EDGES[1], -2 * RING_EDGES[1])):
        one = period_with_step(p, b, state, level, amp, r, first)
        two = one and period_with_step(p, b, one[1], level, amp, r, second)
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


def proportional_off(p):
    """A large estimate (P_OFF_R of r_max) and correction steps P_OFF_STEPS found by a search on
    the model, then two periods at nearly full-scale current: the first reverses the last step
    by more than double and trips the ring guard, the second runs with the proportional part off
    and an error above 2**15 (where a stray unit gain would show). Steps not found are left
    out."""
    from algo import step as model
    b = Builder(p)
    r = P_OFF_R * p.r_max_q / (1 << p.r_frac)
    level, amp = _level_for(p, 6000, r), b.min_amp()
    b.windows(3, r, i0=level)
    s = run_model(p, model.init(p), b)
    periods = []
    for want in P_OFF_STEPS:
        found = period_with_step(p, b, s, level, amp, r, want)
        if found is None:
            break
        periods.append(found[0])
        s = found[1]
    full = b.period * (p.adc_max - 2 - round(level))
    for _ in range(2):
        w, s = tuned_period(p, b, s, level, amp, r, full)
        periods.append(w)
    for w in periods:
        b.v += w.v
        b.i += w.i
    b.windows(1, r, i0=level)
    rest = b.window - b.period * len(periods)
    b.v[-1], b.i[-1] = b.v[-1][:rest], b.i[-1][:rest]
    b.windows(1, r, i0=level)
    return b


#: ``(vector name, builder, one-line description)`` of every targeted vector, in order.
TARGETED = [
    ("estimate_jump", estimate_jump, "open loop: a valid window, then ones further than r_step_max "
                                     "from it (replaced, then confirmed), then a current far lower"),
    ("zero_resistance", zero_resistance, "open loop: flat voltage under a current sine (estimate 0)"),
    ("ring_guard", ring_guard, "open loop: a ringing correction, two growing reversals (P off), "
                               "then valid windows"),
    ("ring_edges", ring_edges, "open loop: correction steps reversing to exactly the ring guard's size "
                               "floor and to exactly twice the step before"),
    ("proportional_off", proportional_off, "open loop: a large estimate, the ring guard tripped, "
                                           "then an error above 2**15 with the proportional part off"),
    ("ceiling_drops", ceiling_drops, "open loop: the correction's ceiling falls below its integral "
                                     "with the error negative"),
    ("ceiling_edge", ceiling_edge, "open loop: the correction law's output exactly at the ceiling "
                                   "with the error positive"),
    ("rail_combinations", rail_combinations, "open loop: each rail combination of one window, "
                                             "between valid windows"),
    ("reactive_edge", reactive_edge, "open loop: quadrature voltage at 0.7 and 1.1 x_max, current "
                                     "an eighth of a period early"),
    ("exact_limits", exact_limits, "open loop: raw estimate exactly r_max, a step exactly "
                                   "r_step_max, a current swing exactly swing_min"),
    ("step_threshold", step_threshold, "open loop: period sums differing by exactly step_min, then "
                                       "step_min + 1"),
    # The long one last, so the short ones come early in the set.
    ("valid_run_saturates", valid_run_saturates, "open loop: 258 valid windows (valid_run saturates)"),
]


def targeted(p):
    """``(name, description, adc_v, adc_i)`` of every targeted vector for params ``p``."""
    out = []
    for name, build, text in TARGETED:
        v, i = build(p).codes()
        out.append((name, text, v, i))
    return out
