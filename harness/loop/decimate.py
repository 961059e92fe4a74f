"""A bounded copy of a long run for its report: min and max per plot bucket, and the spans it shades.

:class:`Decimated` takes a run chunk by chunk (a ``harness.loop.closed_loop.stream`` sink) and
keeps, per bucket of samples along the time axis, each plotted channel's minimum and maximum
(so a one-sample peak still shows), and the spans :func:`harness.loop.spans.shading` would
find in the whole run, exactly (the windows the algorithm rejected, the spells at the current
limit). Its memory does not grow with the run's length but for one entry per span.
"""
import numpy as np

from algo.state import STATUS_NAMES, STATUS_NONE, STATUS_VALID
from harness.loop.closed_loop import Run, sample_times
from harness.loop.spans import LIMIT_REL_TOL, fault_spans, load_step_times

#: Buckets along the time axis: about two per pixel column of the report's plots.
BUCKETS = 2000
#: The channels the report plots.
PLOTTED = ("v_load_v", "v_supply_v", "i_supply_a", "r_estimate_ohm", "correction_v")


class _Runs:
    """Runs of consecutive sample indices, ``[first, last]``, merged where they touch."""

    def __init__(self):
        self.runs = []

    def span(self, a, e):
        if self.runs and self.runs[-1][1] == a - 1:
            self.runs[-1][1] = e
        else:
            self.runs.append([a, e])

    def mask(self, k0, mask):
        edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
        for a, e in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1):
            self.span(k0 + int(a), k0 + int(e))


class Decimated:
    """Sink of ``stream`` for scenario ``b``: min/max per bucket and the shaded spans.

    Parameters
    ----------
    scenario : harness.scenario.specs.Scenario
    n_t : int
        Samples in the run.
    sample_rate_hz : float
    b : int
        Column of the channels to take.
    buckets : int
        Buckets along the time axis (at most one sample each for a short run).
    """

    def __init__(self, scenario, n_t, sample_rate_hz, b=0, buckets=BUCKETS):
        self.sc, self.n_t, self.fs, self.b = scenario, n_t, sample_rate_hz, b
        self.size = max(1, -(-n_t // buckets))
        nb = -(-n_t // self.size)
        self.ext = {}   # name -> (lo, lo_at, hi, hi_at), one entry per bucket
        for name in PLOTTED:
            self.ext[name] = (np.full(nb, np.inf), np.zeros(nb, np.int64),
                              np.full(nb, -np.inf), np.zeros(nb, np.int64))
        self.limit = _Runs()
        self.windows, self.window_start = 0, 0
        self.rejected = {}

    def __call__(self, k0, t_s, channels):
        n = len(t_s)
        first = k0 // self.size
        cuts = [0] + list(range((first + 1) * self.size - k0, n, self.size)) + [n]
        for name, (lo, lo_at, hi, hi_at) in self.ext.items():
            if name not in channels:
                continue
            x = channels[name][:, self.b].astype(np.float64)
            for j, (a, e) in enumerate(zip(cuts[:-1], cuts[1:]), start=first):
                seg = x[a:e]
                i, m = int(np.argmin(seg)), int(np.argmax(seg))
                if seg[i] < lo[j]:
                    lo[j], lo_at[j] = seg[i], k0 + a + i
                if seg[m] > hi[j]:
                    hi[j], hi_at[j] = seg[m], k0 + a + m
        limit = self.sc.supply.current_limit_a
        if limit is not None:
            i_a = channels["i_supply_a"][:, self.b].astype(np.float64)
            self.limit.mask(k0, i_a >= limit * (1.0 - LIMIT_REL_TOL))
        if "windows" in channels and "status" in channels:
            self._windows(k0, channels["windows"][:, self.b].astype(np.int64),
                          channels["status"][:, self.b].astype(np.int64))

    def _windows(self, k0, w, status):
        """A window covers the samples after the previous one's end up to its own (spans.outcome_per_sample)."""
        ends = np.flatnonzero(np.diff(np.concatenate([[self.windows], w])) != 0)
        for end in ends.tolist():
            code = int(status[end])
            if code not in (STATUS_NONE, STATUS_VALID):
                self.rejected.setdefault(code, _Runs()).span(self.window_start, k0 + end)
            self.window_start = k0 + end + 1
        if w.size:
            self.windows = w[-1]

    def _spans(self, runs):
        """Index runs as (start_s, end_s) spans, as harness.loop.spans.sample_runs makes them."""
        t = sample_times(0, 2, self.fs)
        dt = float(t[1] - t[0]) if self.n_t > 1 else float(t[0])
        return [(float(sample_times(a, 1, self.fs)[0]) - dt, float(sample_times(e, 1, self.fs)[0]))
                for a, e in runs.runs]

    def shading(self):
        """The dict harness.loop.spans.shading returns for the whole run."""
        rejected = {STATUS_NAMES[c]: self._spans(self.rejected[c]) for c in sorted(self.rejected)}
        return {"rejected": rejected, "faults": fault_spans(self.sc), "load_steps": load_step_times(self.sc),
                "current_limit": self._spans(self.limit)}

    def run(self, header):
        """A Run for the report: two points per bucket (its first and last sample's times), each
        channel's min and max in the order they came, and the shading of the whole run.

        ``header`` is the Run ``stream`` returned (scenarios, settings, the true resistance).
        """
        first = np.arange(len(self.ext["v_load_v"][0])) * self.size
        last = np.minimum(first + self.size, self.n_t) - 1
        t_s = np.column_stack([(first + 1) / self.fs, (last + 1) / self.fs]).ravel()
        channels = {}
        for name, (lo, lo_at, hi, hi_at) in self.ext.items():
            low_first = lo_at <= hi_at
            pair = np.where(low_first[:, None], np.column_stack([lo, hi]), np.column_stack([hi, lo]))
            channels[name] = pair.ravel().astype(np.float32)[:, None]
        return Run(t_s=t_s, channels=channels, scenarios=header.scenarios, cfgs=header.cfgs,
                   r_cable_ohm=header.r_cable_ohm, backend=header.backend,
                   compensation=header.compensation, shading=[self.shading()])
