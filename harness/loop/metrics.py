"""Figures of merit of a closed-loop run: load error, improvement, settling, ripple, fault recovery.

Every figure is accumulated chunk by chunk (:class:`Accumulator`), so a run too long to hold in
memory gets the same figures as one held whole (:func:`metrics`): maxima, minima, the last
value before or inside a span, the first or last sample out of a band and the window counts
are exact whatever the chunks, and the tail means are exact sums rounded once
(:class:`ExactSum`), so they do not depend on the chunks either.
"""
import math
from fractions import Fraction

import numpy as np

from algo.state import STATUS_NAMES, STATUS_NONE

#: Share of the run at its end over which steady figures are averaged.
TAIL = 0.2
#: Settling band around the target, as a fraction of target_v.
SETTLE_BAND = 0.01
#: A fault's correction has fallen when it is below this share of its pre-fault value.
FALL_FRACTION = 0.05
#: float64 significand bits, and the exponent (frexp's) of the smallest subnormal.
_MANT, _EMIN = 53, -1073


def last_event_s(scenario):
    """Time of the last load step or fault end (s); 0 when there is none."""
    times = [t for t, _ in scenario.load.steps]
    times += [f.until_s for f in scenario.faults if math.isfinite(f.until_s)]
    times = [t for t in times if t < scenario.run.duration_s]
    return max(times, default=0.0)


class ExactSum:
    """Exact sum of float64 values, added array by array; :meth:`mean` rounds once at the end.

    Each finite value is an integer significand times a power of two; the significands are
    split in two halves of at most 27 bits and summed per exponent in int64 (exact for arrays
    shorter than 2**36), and the per-exponent sums are carried as one Python int.
    """

    def __init__(self):
        self.total, self.count, self._other = 0, 0, 0.0

    def add(self, x):
        x = np.asarray(x, dtype=np.float64).ravel()
        self.count += x.size
        finite = np.isfinite(x)
        if not finite.all():      # inf or nan: the mean is what float arithmetic makes of them
            self._other += float(np.sum(x[~finite]))
            x = x[finite]
        if not x.size:
            return
        m, e = np.frexp(x)
        sig = np.ldexp(m, _MANT).astype(np.int64)
        order = np.argsort(e, kind="stable")
        e, sig = e[order], sig[order]
        starts = np.flatnonzero(np.diff(e, prepend=e[0] - 1))
        hi = np.add.reduceat(sig >> 26, starts).tolist()
        lo = np.add.reduceat(sig & ((1 << 26) - 1), starts).tolist()
        for exp, h, low in zip(e[starts].tolist(), hi, lo):
            self.total += ((h << 26) + low) << (exp - _EMIN)

    def mean(self):
        """The mean, rounded once (nan for no values)."""
        if self._other or not self.count:
            return self._other / self.count if self.count else math.nan
        return float(Fraction(self.total, self.count << (_MANT - _EMIN)))


class Settling:
    """Time after ``since_s`` from which a signal stays within SETTLE_BAND of ``target``."""

    def __init__(self, target, since_s):
        self.target, self.since_s = target, since_s
        self.last_out, self.last_t, self.t_after_out = None, None, None

    def add(self, t_s, v):
        out = (t_s > self.since_s) & (np.abs(v - self.target) > SETTLE_BAND * self.target)
        if self.t_after_out is None and self.last_out is not None and t_s.size:
            self.t_after_out = float(t_s[0])    # the sample after a chunk's last one out
        if out.any():
            last = np.flatnonzero(out)[-1]
            self.last_out = True
            self.t_after_out = float(t_s[last + 1]) if last + 1 < t_s.size else None

    def result(self):
        """Seconds (0.0: never out), or None when the last sample is out."""
        if self.last_out is None:
            return 0.0
        if self.t_after_out is None:
            return None
        return float(self.t_after_out - self.since_s)


def settling_s(t_s, v_load, target, since_s):
    """Time after ``since_s`` from which v_load stays within SETTLE_BAND of target; None if never."""
    s = Settling(target, since_s)
    s.add(np.asarray(t_s), np.asarray(v_load))
    return s.result()


class FaultFigures:
    """Correction at a fault's end (V) and time for it to fall below 5 % of its pre-fault value (s)."""

    def __init__(self, fault):
        self.fault, self.pre, self.at_end, self.fall_s, self.last = fault, 0.0, None, None, None

    def add(self, t_s, corr_v):
        f = self.fault
        before = np.flatnonzero(t_s < f.at_s)
        if before.size:
            self.pre = float(corr_v[before[-1]])
        during = (t_s >= f.at_s) & (t_s < f.until_s)
        inside = np.flatnonzero(during)
        if inside.size:
            self.at_end = float(corr_v[inside[-1]])
        fallen = np.flatnonzero(during & (corr_v <= FALL_FRACTION * self.pre))
        if self.fall_s is None and fallen.size:
            self.fall_s = float(t_s[fallen[0]] - f.at_s)
        if corr_v.size:
            self.last = float(corr_v[-1])

    def result(self):
        f = self.fault
        return {"kind": f.kind, "at_s": f.at_s, "until_s": f.until_s, "correction_before_v": self.pre,
                "correction_at_end_v": self.last if self.at_end is None else self.at_end,
                "fall_time_s": self.fall_s}


class WindowOutcomes:
    """Windows finished per outcome: a window ends where the window counter moves, with the status left there."""

    def __init__(self):
        self.prev, self.counts = 0, np.zeros(len(STATUS_NAMES), dtype=np.int64)

    def add(self, windows, status):
        w = windows.astype(np.int64)
        ends = np.flatnonzero(np.diff(np.concatenate([[self.prev], w])) != 0)
        self.counts += np.bincount(status.astype(np.int64)[ends], minlength=len(STATUS_NAMES))
        if w.size:
            self.prev = w[-1]

    def result(self):
        return {STATUS_NAMES[k]: int(self.counts[k]) for k in sorted(STATUS_NAMES) if k != STATUS_NONE}


class Accumulator:
    """The metrics of scenario ``b`` of a run, fed chunk by chunk with :meth:`add`.

    Parameters
    ----------
    scenario : harness.scenario.specs.Scenario
    t_end_s : float
        Time of the run's last sample (s): the tail is the samples at or after (1 - TAIL) of it.
    b : int
        Column of the channels to take.
    """

    def __init__(self, scenario, t_end_s, b=0):
        self.sc, self.b = scenario, b
        self.tail_from = t_end_s * (1 - TAIL)
        self.i_tail, self.v_tail = ExactSum(), ExactSum()
        self.ext = {}
        self.settling = Settling(scenario.supply.target_v, last_event_s(scenario))
        self.faults = [FaultFigures(f) for f in scenario.faults]
        self.outcomes = None
        self.r_estimate = None

    def _extreme(self, key, fn, x):
        if x.size:
            v = fn(x)
            self.ext[key] = v if key not in self.ext else fn([self.ext[key], v])

    def add(self, t_s, channels):
        """One chunk: its times (s, (n,)) and ``{name: (n, B) array}`` (a closed_loop.Run's channels)."""
        ch = {k: v[:, self.b].astype(np.float64) for k, v in channels.items()}
        tail = t_s >= self.tail_from
        v_load = ch["v_load_v"]
        self.i_tail.add(ch["i_supply_a"][tail])
        self.v_tail.add(v_load[tail])
        for key, fn, x in (("max_load", np.max, v_load), ("min_load", np.min, v_load),
                           ("max_supply", np.max, ch["v_supply_v"]),
                           ("tail_max", np.max, v_load[tail]), ("tail_min", np.min, v_load[tail])):
            self._extreme(key, fn, x)
        self.settling.add(t_s, v_load)
        for f in self.faults:
            f.add(t_s, ch["correction_v"])
        if "windows" in ch:
            self.outcomes = self.outcomes or WindowOutcomes()
            self.outcomes.add(ch["windows"], ch["status"])
        if t_s.size:
            self.r_estimate = float(ch["r_estimate_ohm"][-1])

    def result(self, r_cable_ohm):
        """The metrics dict (JSON-ready), given the true loop resistance at the run's end (ohm)."""
        target = self.sc.supply.target_v
        r_cable = float(r_cable_ohm)
        uncomp = r_cable * self.i_tail.mean()
        err = target - self.v_tail.mean()
        settle = self.settling.result()
        return {
            "r_cable_ohm": r_cable,
            "r_estimate_ohm": self.r_estimate,
            "uncompensated_drop_v": uncomp,
            "load_error_v": err,
            "improvement": abs(uncomp) / abs(err) if err != 0 else math.inf,
            "max_load_v": float(self.ext["max_load"]),
            "min_load_v": float(self.ext["min_load"]),
            "max_supply_v": float(self.ext["max_supply"]),
            "ripple_load_v_pp": float(self.ext["tail_max"] - self.ext["tail_min"]),
            "settling_s": settle,
            "converged": bool(settle is not None and abs(err) <= SETTLE_BAND * target),
            "faults": [f.result() for f in self.faults],
            "window_outcomes": self.outcomes.result() if self.outcomes else None,
        }


def metrics(run, b=0):
    """The metrics dict of scenario ``b`` of a harness.loop.closed_loop.Run (JSON-ready)."""
    acc = Accumulator(run.scenarios[b], run.t_s[-1], b)
    acc.add(run.t_s, run.channels)
    return acc.result(run.r_cable_ohm[b])
