"""Evaluate word-length configurations in closed loop: fixed-point model or float ideal, batched.

One *job* is one scenario run with one setting of the tuned knobs on one backend. A chunk of
jobs from the same scenario runs in lockstep (harness.loop.closed_loop.drive),
each instance with its own configuration. ADC and DAC bits are properties of the simulated
converters, so a job changes ``sensing.adc_bits`` and ``supply.dac_bits`` as well; the ADC's
noise and offset are held constant in volts (rescaled from the scenario's LSB figures), so a
wider ADC resolves quantisation, not the analog noise, and every job of a scenario sees the same
noise realisation (same seed). The float ideal runs with a 16-bit ADC and an unrounded command.
"""
from dataclasses import dataclass, replace
import hashlib
import math

import numpy as np

from algo.batch import BatchModel
from algo.config import ConfigError
from algo.ideal import IdealBatch
from algo.params import derive
from harness.tune import range_check
from harness.scenario.algo_setup import algo_config
from harness.errors import InputError
from harness.loop.closed_loop import drive
from harness.plant.rig import build_rig
from harness.loop.metrics import TAIL, last_event_s, settling_s

#: Bump when the meaning of a cached result changes (2: the run length is the scenario's
#: run.duration_s, part of the key; version 1 keys left it out).
CACHE_VERSION = 2
#: Knobs the tuner may change: (lowest, generous start, cost weight per bit).
KNOBS = {
    "adc_bits": (8, 16, 2),        # two converter channels
    "dac_bits": (8, 16, 1),
    "table_bits": (8, 16, 1),
    "acc_bits": (20, 32, 1),
    "r_frac_bits": (8, 16, 1),
    "corr_frac_bits": (0, 8, 1),
    # The filter shift costs no memory or cycles, so it weighs nothing: it is swept for the
    # error-vs-shift plot and moves only where that lowers the error, never to save cost.
    "r_filter_shift": (0, None, 0),   # None: start from the scenario's own value
}
#: Settings of every ideal run (irrelevant to the float algorithm except the converters).
IDEAL_WIDTHS = {"adc_bits": 16, "dac_bits": 16, "table_bits": 16, "acc_bits": 32, "r_frac_bits": 16,
                "corr_frac_bits": 8}
#: Estimate convergence band, share of its final value.
EST_BAND = 0.02
_ACCS = ("acc_vi", "acc_vq", "acc_ii", "acc_iq")


def cost(settings):
    """Cost of a configuration: the weighted sum of its knob values (see KNOBS)."""
    return sum(KNOBS[k][2] * int(v) for k, v in settings.items() if k in KNOBS)


@dataclass(frozen=True)
class Job:
    """One run: ``scenario`` (harness.scenario.specs.Scenario, run for its run.duration_s) with
    ``settings`` on ``backend``."""
    scenario: object
    settings: tuple     # sorted (key, value) pairs
    backend: str        # "model" or "ideal"

    @property
    def key(self):
        text = repr((CACHE_VERSION, replace(self.scenario, source=""), self.scenario.algorithm,
                     self.settings, self.backend))
        return hashlib.sha256(text.encode()).hexdigest()[:24]


def ideal_settings(settings):
    """Settings of the float yardstick for a fixed-point configuration: same filters, no widths."""
    return dict(settings, **IDEAL_WIDTHS)


def variant(scenario, settings, duration_s):
    """The scenario with the knobs applied: converters in [sensing]/[supply], the rest in [algorithm]."""
    s = dict(settings)
    sen, sup = scenario.sensing, scenario.supply
    adc = int(s.pop("adc_bits", sen.adc_bits))
    scale = 2.0 ** (adc - sen.adc_bits)
    sen = replace(sen, adc_bits=adc, noise_lsb_rms=sen.noise_lsb_rms * scale, offset_lsb=sen.offset_lsb * scale)
    sup = replace(sup, dac_bits=int(s.pop("dac_bits", sup.dac_bits)))
    return replace(scenario, sensing=sen, supply=sup, run=replace(scenario.run, duration_s=duration_s),
                   algorithm=dict(scenario.algorithm, **s))


class _Observed:
    """Records accumulator peaks (before each window's reset) and the per-window filter states.

    ``t`` is the index of the sample being stepped; ``hist[b]`` lists (t, corr, corr_target,
    r_est) at each of instance b's window ends.
    """

    def __init__(self, *args):
        super().__init__(*args)
        self.t = 0
        self.acc_peak = np.zeros(self.n)
        self.isum_peak = np.zeros(self.n)
        self.hist = [[] for _ in range(self.n)]

    def _window_end(self, k):
        for name in _ACCS:
            self.acc_peak[k] = np.maximum(self.acc_peak[k], np.abs(self.field(name)[k]))
        self.isum_peak[k] = np.maximum(self.isum_peak[k], self.field("isum")[k])
        super()._window_end(k)
        corr, tgt, r = self.field("corr"), self.field("corr_target"), self.field("r_est")
        for j in k:
            self.hist[j].append((self.t, float(corr[j]), float(tgt[j]), float(r[j])))


class ObservedModel(_Observed, BatchModel):
    pass


class ObservedIdeal(_Observed, IdealBatch):
    pass


def _rejected(job, reason):
    return {"key": job.key, "status": "rejected", "reason": reason}


def _limit_cycle(hist, tail_t, lsb):
    """Limit-cycle figures of the correction over the tail windows.

    Returns (toggle share, smallest |corr - target| in DAC LSB, flag). The flag is set when the
    correction is stuck (no step in any tail window) while more than one DAC LSB off its target,
    or keeps toggling: it steps in at least 3/4 of the windows, reverses direction on at least
    3/4 of its steps and stays within 2 DAC LSB peak to peak (a dead-band cycle, not tracking).
    """
    rows = [h for h in hist if h[0] >= tail_t]
    if len(rows) < 4:
        return 0.0, 0.0, False
    corr = np.array([r[1] for r in rows])
    off = np.abs(corr - np.array([r[2] for r in rows])) * lsb
    d = np.diff(corr)
    nz = d[d != 0]
    toggles = float(np.mean(np.sign(nz[1:]) != np.sign(nz[:-1]))) if nz.size > 1 else 0.0
    stuck = nz.size == 0 and bool((off > 1.0).all())
    toggling = nz.size >= 0.75 * d.size and toggles >= 0.75 and np.ptp(corr) * lsb <= 2.0
    return toggles, float(off.min()), bool(stuck or toggling)


def _figures(job, sc, cfg, t_s, v_load, r_cable, hist, fixed):
    target = sc.supply.target_v
    tail = t_s >= t_s[-1] * (1 - TAIL)
    since = last_event_s(sc)
    settle = settling_s(t_s, v_load, target, since)
    r_unit = cfg.v_full_scale_v / cfg.i_full_scale_a / ((1 << cfg.r_frac_bits) if fixed else 1)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    c_lsb = 1.0 / (1 << cfg.corr_frac_bits) if fixed else 1.0
    tail_t = int(np.flatnonzero(tail)[0])
    r = np.array([h[3] for h in hist]) * r_unit
    times = np.array([h[0] for h in hist]) / cfg.sample_rate_hz
    r_tail = r[times >= t_s[tail_t]] if r.size else r
    r_final = float(r_tail.mean()) if r_tail.size else float("nan")
    out = np.flatnonzero((times > since) & (np.abs(r - r_final) > EST_BAND * abs(r_final)))
    after = times[times > since]
    converge = None
    if after.size and (not out.size or out[-1] + 1 < times.size):
        converge = float((times[out[-1] + 1] if out.size else after[0]) - since)
    toggles, off, cycle = _limit_cycle(hist, tail_t, c_lsb)
    return {"key": job.key, "status": "ok", "reason": "",
            "error_mv": 1e3 * abs(target - float(v_load[tail].mean())),
            "ripple_mv": 1e3 * float(np.ptp(v_load[tail])),
            "settle_ms": None if settle is None else 1e3 * settle,
            "converge_ms": None if converge is None else 1e3 * converge,
            "r_est_ohm": r_final, "r_true_ohm": r_cable + sc.load_end.esr_ohm,
            "toggle_share": toggles, "off_target_lsb": off, "limit_cycle": cycle,
            "dac_lsb_mv": 1e3 * dac_lsb}


def _prepare(job):
    """(variant scenario, AlgoConfig, Params or None, bounds, or a rejected result)."""
    sc = variant(job.scenario, dict(job.settings), job.scenario.run.duration_s)
    try:
        cfg = algo_config(sc)
    except InputError as exc:
        return None, _rejected(job, str(exc).split("algorithm.", 1)[-1])
    if job.backend == "ideal":
        return (sc, cfg, None, None), None
    try:
        params = derive(cfg)
    except ConfigError as exc:
        return None, _rejected(job, f"derive: {exc}")
    bounds = range_check.analyse(params)
    bad = range_check.overflows(bounds)
    if bad:
        return None, _rejected(job, "range: " + "; ".join(f"{b.name} [{b.lo}, {b.hi}] > {b.word}" for b in bad))
    return (sc, cfg, params, bounds), None


def evaluate(jobs):
    """Run ``jobs`` (one scenario, one backend) in lockstep; returns one result dict each.

    Rejected configurations (derive raised ConfigError, or the range analysis shows a possible
    overflow) are reported as ``status: rejected`` and never simulated.
    """
    results, live = {}, []
    for job in jobs:
        prep, rej = _prepare(job)
        if rej:
            results[job.key] = rej
        else:
            live.append((job, prep))
    if live:
        backend = live[0][0].backend
        scs = [p[0] for _, p in live]
        cfgs = [p[1] for _, p in live]
        rig = build_rig(scs)
        comp = ObservedIdeal(cfgs) if backend == "ideal" else ObservedModel([p[2] for _, p in live])
        n_t = int(round(scs[0].run.duration_s * cfgs[0].sample_rate_hz))
        v_load = np.empty((n_t, len(live)))
        obs = rig.reset()

        def step(v_code, i_code):
            cmd = comp.step(v_code, i_code)
            comp.t += 1
            return cmd

        for t, _, obs, _, _, _ in drive(rig, step, comp.field("cmd"), n_t):
            v_load[t] = obs.v_load_v
        t_s = (np.arange(n_t) + 1) / cfgs[0].sample_rate_hz
        r_cable = np.asarray(obs.r_cable_ohm, dtype=float)
        for b, (job, (sc, cfg, params, bounds)) in enumerate(live):
            res = _figures(job, sc, cfg, t_s, v_load[:, b], float(r_cable[b]), comp.hist[b],
                           backend != "ideal")
            if bounds is not None:
                acc = range_check.bound(bounds, range_check.ACC)
                peak = int(comp.acc_peak[b])
                res.update(acc_peak=peak, acc_bound=max(-acc.lo, acc.hi),
                           acc_headroom_bits=(cfg.acc_bits - 1) - max(peak, 1).bit_length(),
                           isum_peak=int(comp.isum_peak[b]),
                           within_bounds=bool(peak <= max(-acc.lo, acc.hi) and
                                              comp.isum_peak[b] <= range_check.bound(bounds, range_check.ISUM).hi))
            results[job.key] = res
    return [results[j.key] for j in jobs]


def severity(res, spec, ideal=None):
    """How far a result is from the spec (> 1 fails): the largest of error / max_error_mv,
    settle / max_settle_ms and, given the ideal's result and a max_ideal_ratio, the error over
    the ideal's error / max_ideal_ratio."""
    if res is None or res.get("status") != "ok":
        return math.inf
    settle = res["settle_ms"]
    s = max(res["error_mv"] / spec["max_error_mv"],
            math.inf if settle is None else settle / spec["max_settle_ms"])
    ratio = spec.get("max_ideal_ratio")
    if ideal is not None and ratio:
        s = max(s, res["error_mv"] / max(ideal["error_mv"], 1e-9) / ratio)
    return s
