"""Shared machinery of the proof suite: batched lockstep runs, window arithmetic, reproducers.

Every drawn batch runs through harness.loop.lockstep (model and C reference in lock step, every
state field range-checked every sample), grouped by sample rate so each group is one closed-loop
call. A failing check raises AssertionError carrying the scenario as TOML and the command that
replays it (``linedrop simulate FILE``); the file is also written under PROOF_FAILURES_DIR.
"""
import hashlib
import math
import os
import tempfile
from collections import Counter, defaultdict
from dataclasses import replace
from pathlib import Path

import numpy as np

from harness.proof import bounds as bd
from harness.scenario.algo_setup import algo_config
from harness.scenario.conductors import temperature_scale
from harness.design.operating_point import load_current
from harness.loop.lockstep import Mismatch, run_lockstep
from harness.scenario.write import scenario_to_toml
from harness.proof.strategies import window_s

PROOF_FAILURES_DIR = Path(os.environ.get("LINEDROP_PROOF_FAILURES",
                                          os.path.join(tempfile.gettempdir(), "linedrop-proof-failures")))
ALGOS = ("model", "c")


def reproducer(sc, why):
    """Message with a replayable scenario file (written to PROOF_FAILURES_DIR) and its command."""
    text = scenario_to_toml(sc, comment=f"Proof-suite failure: {why}")
    name = hashlib.sha256(text.encode()).hexdigest()[:12] + ".toml"
    try:
        PROOF_FAILURES_DIR.mkdir(parents=True, exist_ok=True)
        (PROOF_FAILURES_DIR / name).write_text(text)
        where = PROOF_FAILURES_DIR / name
    except OSError:
        where = Path(name)
    return (f"{why}\n--- reproduce: linedrop simulate {where} (or save the TOML below) ---\n{text}")


def run_groups(scenarios, algos=ALGOS):
    """Run scenarios grouped by sample rate (durations padded to the group's longest).

    Returns a list of (LockstepRun, b) per scenario, in order; ``lr.run.scenarios[b]`` is the
    scenario as run (its duration padded). A lockstep mismatch
    or range violation is re-raised with the reproducer of the scenario it names.
    """
    groups = defaultdict(list)
    for n, sc in enumerate(scenarios):
        groups[(sc.sensing.sample_rate_hz, sc.run.start)].append(n)
    out = [None] * len(scenarios)
    for idx in groups.values():
        dur = max(scenarios[n].run.duration_s for n in idx)
        batch = [replace(scenarios[n], run=replace(scenarios[n].run, duration_s=dur)) for n in idx]
        try:
            lr = run_lockstep(batch, algos=algos)
        except Mismatch as exc:
            b = int(str(exc).split("scenario ")[1].split(":")[0])
            raise AssertionError(reproducer(batch[b], f"lockstep/range check: {exc}")) from None
        for b, n in enumerate(idx):
            out[n] = (lr, b)
    return out


def settle_windows(sc):
    """Windows after which the settle bound applies to ``sc`` (bounds.settle_s), an int."""
    win = window_s(sc)
    return int(math.ceil(bd.settle_s(sc, win) / win - 1e-9))


def window_ends(lr, b):
    """Sample indices at which scenario ``b`` finished a window (0-based window k at entry k)."""
    w = lr.trace["windows"][:, b]
    return np.flatnonzero(np.diff(np.concatenate(([0], w))) != 0)


def amplitude_in_force(lr, b, period_samples):
    """Per sample, the perturbation amplitude (DAC codes, int64) the correction in force for
    scenario ``b`` was computed with: that of sample j - 1 for the last period end j (a window
    end at j moves the amplitude after the correction)."""
    pert = lr.trace["pert_amp"][:, b].astype(np.int64)
    j = (np.arange(pert.size) + 1) // period_samples * period_samples - 1
    return pert[np.maximum(j - 1, 0)]


def corr_ceiling_q(lr, b, p):
    """Per sample, the correction's ceiling (algo.step.corr_ceiling, Q corr_frac DAC codes) that
    bounded the correction in force for scenario ``b`` under Params ``p``."""
    room = np.maximum(p.cmd_max - p.target_code - amplitude_in_force(lr, b, 1 << p.period_log2), 0)
    return np.minimum(p.corr_max_q, room << p.corr_frac)


def samples_between(lr, b, w0, w1):
    """Slice of samples from the end of window w0 to the end of window w1 of scenario b."""
    ends = window_ends(lr, b)
    return slice(int(ends[w0 - 1]) + 1 if w0 > 0 else 0, int(ends[min(w1, len(ends)) - 1]) + 1)


def r_cable_at(sc, t_s):
    """Loop resistance of scenario ``sc`` at time ``t_s`` (linear temperature ramp over the run), ohm."""
    c = sc.cable
    if c.temperature_end_c is None:
        return c.resistance_ohm
    temp = c.temperature_c + (c.temperature_end_c - c.temperature_c) * min(t_s / sc.run.duration_s, 1.0)
    return c.resistance_ohm * float(temperature_scale(c.material, c.temperature_c, temp))


def settled_load_v(lr, b, sc, w_from, w_to):
    """expected_load_v over windows [w_from, w_to) of scenario b (for the overshoot base), V."""
    cfg = algo_config(sc)
    sl = samples_between(lr, b, w_from, w_to)
    t_end = lr.run.t_s[sl.stop - 1]
    r_end = r_cable_at(sc, t_end)
    i_mean = float(lr.run.channels["i_supply_a"][sl, b].mean())
    v_mean = float(lr.run.channels["v_load_v"][sl, b].mean())
    value = [sc.load.value] + [v for t_s, v in sc.load.steps if t_s <= t_end]
    g = load_current(sc.load, value[-1], v_mean)[1]
    return bd.expected_load_v(cfg, r_end, bd.measured_r_ohm(sc, r_end, cfg.perturbation_hz, g), i_mean)


_PLANT_EVENTS = []     # labels counted for the plants of the running example (count_plant)
_COUNTING_FOR = [None]  # the test they were counted in: a test that failed mid-example leaves some


def count_plant(label):
    """Count ``label`` for one plant of the running example; report_shares turns the counts into
    hypothesis events."""
    test = os.environ.get("PYTEST_CURRENT_TEST", "").split(" (")[0]
    if test != _COUNTING_FOR[0]:
        _PLANT_EVENTS.clear()
        _COUNTING_FOR[0] = test
    _PLANT_EVENTS.append(label)


def report_shares(n_plants):
    """hypothesis.event("LABEL: k of n plants") per label counted since the last call (inside a
    property test; outside one the counts are dropped), so --hypothesis-show-statistics gives the
    share of plants, not of batches, that took each branch."""
    from hypothesis import event
    from hypothesis.errors import InvalidArgument
    counts = Counter(_PLANT_EVENTS)
    _PLANT_EVENTS.clear()
    for label, k in sorted(counts.items()):
        try:
            event(f"{label}: {k} of {n_plants} plants")
        except InvalidArgument:
            return


MARGINS_FILE = os.environ.get("LINEDROP_PROOF_MARGINS")


def _record_margins(*figures):
    """Append the settled check's figures (estimate error, Re Z, its tolerance; load error, (R +
    ESR) I, its tolerance; period-mean swing, drop, its bound) as one line to $LINEDROP_PROOF_MARGINS,
    when set: what the bounds are measured against (harness/proof/PROOFS.md)."""
    if MARGINS_FILE:
        with open(MARGINS_FILE, "a") as f:
            f.write(" ".join(f"{x:.6g}" for x in figures) + "\n")


def settled_failures(lr, b, sc, w_from, w_to):
    """Reasons (list of str) the run is not settled over windows [w_from, w_to) (bounds.py)."""
    cfg = algo_config(sc)
    ch = {k: v[:, b].astype(np.float64) for k, v in lr.run.channels.items()}
    sl = samples_between(lr, b, w_from, w_to)
    t = lr.run.t_s
    t_end = t[sl.stop - 1]
    win = window_s(sc)
    r_end = r_cable_at(sc, t_end)
    drift = abs(r_end - r_cable_at(sc, max(t_end - bd.R_TRACK_WINDOWS * win, 0.0)))
    r_true = r_end + sc.load_end.esr_ohm
    out = []
    i_mean = float(ch["i_supply_a"][sl].mean())
    v_mean = float(ch["v_load_v"][sl].mean())
    drop = r_end * i_mean
    value = [sc.load.value] + [v for t_s, v in sc.load.steps if t_s <= t_end]
    g = load_current(sc.load, value[-1], v_mean)[1]
    r_meas = bd.measured_r_ohm(sc, r_end, cfg.perturbation_hz, g)
    r_hat = float(ch["r_estimate_ohm"][sl.stop - 1])
    tol = bd.r_tolerance_ohm(cfg, r_meas, drift)
    want = bd.expected_load_v(cfg, r_end, r_meas, i_mean)
    ltol = bd.load_tolerance_v(cfg, sc.sensing, r_true, i_mean) + cfg.compensation * drift * i_mean
    light = i_mean < bd.light_load_a(cfg, sc, r_true)
    count_plant("light load: the fallback bound" if light else "load above the light-load current")
    n = cfg.period_samples
    v = ch["v_load_v"][sl]
    v = v[: len(v) // n * n].reshape(-1, n).mean(axis=1)   # period means: the ripple removed
    if light:   # the estimate may be held or unset; every period mean between bare and expected
        pert_v = float(lr.trace["pert_amp"][sl.stop - 1, b]) * bd.dac_lsb_v(cfg)
        bare = bd.bare_load_v(cfg, pert_v, r_end, i_mean)
        lo, hi = min(bare, want), max(bare, want)
        if v.size and not (lo - ltol <= float(v.min()) and float(v.max()) <= hi + ltol):
            out.append(f"light load {i_mean:.4g} A: period means of the load {float(v.min()):.6g} to "
                       f"{float(v.max()):.6g} V outside [{lo:.6g}, {hi:.6g}] V (uncompensated, expected) by "
                       f"more than {ltol:.3g} V")
        return out
    osc = bd.OSCILLATION_REL * abs(drop) + bd.DAC_LSB_SLACK * bd.dac_lsb_v(cfg) \
        + bd.correction_noise_v(cfg, sc.sensing, r_true)
    _record_margins(abs(r_hat - r_meas), r_meas, tol, abs(v_mean - want), r_true * i_mean, ltol,
                    float(np.ptp(v)) if v.size else 0.0, abs(drop), osc)
    if abs(r_hat - r_meas) > tol:
        out.append(f"estimate {r_hat:.6g} ohm vs Re(Z) {r_meas:.6g} ohm (R_cable+ESR {r_true:.6g}): off "
                   f"by more than {tol:.3g} ohm")
    if abs(v_mean - want) > ltol:
        out.append(f"load {v_mean:.6g} V vs expected {want:.6g} V (target {cfg.target_v:.6g}, drop "
                   f"{drop:.4g}): off by more than {ltol:.3g} V")
    if v.size and float(np.ptp(v)) > osc:
        out.append(f"load swings {float(np.ptp(v)):.4g} V peak-to-peak period to period "
                   f"(> {osc:.3g} V): oscillating")
    return out


