"""Regulation benchmark: linedrop with ``design``'s own settings beside every baseline, one run.

For each scenario: the recommended [algorithm] settings and sample rate, faults dropped, a
steady start, and one load step ``windows`` measurement windows later (the scenario's first
step's value, or one derived by :func:`harness.scenario.variants.with_load_step`); the run
lasts twice that, or the scenario's own duration where that is longer. A lamp string takes no
step (a lamp is switched, not stepped): it starts steady with its filament warm at the
uncompensated voltage, so its convergence is the loop's, and its dip and settling are None; its
cold switch-on is a start-up of the lamp's own (``linedrop simulate`` of a scenario with
``start = "cold"`` shows it). Then one closed-loop run per
compensation on the same plant and the same ADC noise. The figures per run:

- ``improvement``: the uncompensated (``none``) steady load error over this run's, both
  measured over the last TAIL share of the run (``inf`` when the error is zero);
- ``dip_v``: how far the load falls below target after the step, V;
- ``settle_ms``: time after the step from which the load stays within the 1 % band of target
  (harness.loop.metrics.SETTLE_BAND);
- ``overshoot_v``: the highest load voltage above target over the whole run, start included, V;
- ``converge_ms``, ``converge_windows``: from the steady start, time until the load stays
  within SETTLE_BAND of target up to the step (windows of the recommended setting).

``None`` marks a figure that never happened inside the run.
"""
from dataclasses import replace

import numpy as np

from harness.design.settings import recommended
from harness.loop.closed_loop import COMPENSATIONS, simulate
from harness.loop.metrics import TAIL, settling_s
from harness.scenario.algo_setup import algo_config
from harness.scenario.variants import with_load_step

#: Windows (of the recommended setting) from the steady start to the load step.
STEP_WINDOWS = 32

#: Columns of the table, with their units.
FIGURES = (("improvement", "x"), ("dip_v", "V"), ("settle_ms", "ms"), ("overshoot_v", "V"),
           ("converge_ms", "ms"), ("converge_windows", "windows"))


def bench_scenario(scenario, windows=STEP_WINDOWS):
    """The scenario as the benchmark runs it (module docstring), and the recommended settings."""
    sc = recommended(scenario)
    sc = replace(sc, faults=(), run=replace(sc.run, start="steady"))
    cfg = algo_config(sc)
    step_s = round(windows * cfg.window_samples / cfg.sample_rate_hz, 9)
    sc = replace(sc, run=replace(sc.run, duration_s=max(2 * step_s, scenario.run.duration_s)))
    if scenario.load.steps:
        return replace(sc, load=replace(sc.load, steps=((step_s, scenario.load.steps[0][1]),))), sc.algorithm
    if sc.load.kind == "lamp":
        return sc, sc.algorithm
    sc, _ = with_load_step(replace(sc, load=replace(sc.load, steps=())), sc.run.duration_s)
    return sc, sc.algorithm


def figures(run, err_none_v):
    """The FIGURES of a one-scenario Run, given the uncompensated steady error (V)."""
    sc, cfg = run.scenarios[0], run.cfgs[0]
    t, v = run.t_s, run.channels["v_load_v"][:, 0].astype(np.float64)
    target = sc.supply.target_v
    step_s = min(at for at, _ in sc.load.steps) if sc.load.steps else t[-1]
    tail = t >= t[-1] * (1 - TAIL)
    err = abs(target - float(v[tail].mean()))
    after = t > step_s
    settle = settling_s(t, v, target, step_s) if after.any() else None
    before = t < step_s           # from the steady start up to the step
    conv = settling_s(t[before], v[before], target, 0.0) if before.any() else None
    window_s = cfg.window_samples / cfg.sample_rate_hz
    return {"improvement": abs(err_none_v) / err if err > 0 else float("inf"),
            "steady_error_v": err,
            "dip_v": max(0.0, target - float(v[after].min())) if after.any() else None,
            "settle_ms": None if settle is None else 1e3 * settle,
            "overshoot_v": max(0.0, float(v.max()) - target),
            "converge_ms": None if conv is None else 1e3 * conv,
            "converge_windows": None if conv is None else conv / window_s}


def regulation(scenarios, backend="model", compensations=COMPENSATIONS, windows=STEP_WINDOWS, progress=None):
    """Figures for every scenario and compensation: ``{name: {compensation: figures}}``.

    Parameters
    ----------
    scenarios : dict of str to harness.scenario.specs.Scenario
    backend : {"model", "c", "ideal"}
        linedrop's implementation (the baselines run in float).
    compensations : sequence of str
        Any of harness.loop.closed_loop.COMPENSATIONS; ``none`` always runs (the yardstick).
    windows : int
        Measurement windows from the start to the load step.
    progress : callable, optional
        Called with (scenario name, compensation) before each run.
    """
    out = {}
    for name, scenario in scenarios.items():
        sc, _ = bench_scenario(scenario, windows)
        runs = {}
        for comp in ("none",) + tuple(c for c in compensations if c != "none"):
            if progress:
                progress(name, comp)
            runs[comp] = simulate([sc], backend=backend, compensation=comp, channels=("v_load_v",))
        t = runs["none"].t_s
        tail = t >= t[-1] * (1 - TAIL)
        err_none = sc.supply.target_v - float(runs["none"].channels["v_load_v"][tail, 0].mean())
        out[name] = {c: figures(r, err_none) for c, r in runs.items() if c in compensations}
    return out
