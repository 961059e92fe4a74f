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
from collections import defaultdict
from dataclasses import replace
from pathlib import Path

import numpy as np

from algo.params import derive
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
    if abs(r_hat - r_meas) > tol:
        out.append(f"estimate {r_hat:.6g} ohm vs Re(Z) {r_meas:.6g} ohm (R_cable+ESR {r_true:.6g}): off by "
                   f"more than {tol:.3g} ohm")
    want = bd.expected_load_v(cfg, r_end, r_meas, i_mean)
    ltol = bd.load_tolerance_v(cfg, sc.sensing, r_true, i_mean) + cfg.compensation * drift * i_mean
    if abs(v_mean - want) > ltol:
        out.append(f"load {v_mean:.6g} V vs expected {want:.6g} V (target {cfg.target_v:.6g}, drop "
                   f"{drop:.4g}): off by more than {ltol:.3g} V")
    n = cfg.period_samples
    v = ch["v_load_v"][sl]
    v = v[: len(v) // n * n].reshape(-1, n).mean(axis=1)   # period means: the ripple removed
    osc = bd.OSCILLATION_REL * abs(drop) + bd.DAC_LSB_SLACK * bd.dac_lsb_v(cfg) \
        + bd.correction_noise_v(cfg, sc.sensing, r_true)
    if v.size and float(np.ptp(v)) > osc:
        out.append(f"load swings {float(np.ptp(v)):.4g} V peak-to-peak period to period "
                   f"(> {osc:.3g} V): oscillating")
    return out


# -- Known design failures, reported to the algorithm owner (harness/proof/PROOFS.md, "Open findings").
# Each predicate names a plant the design currently fails on; the property tests skip those
# draws (counted with hypothesis.event) and the strict-xfail reproducers in
# tests/test_proof_findings.py turn into failures as soon as the design is fixed, which is the
# signal to delete the predicate here.

def finding_d3_x_max_ignores_inductance(sc):
    """D3: x_max_ohm = max(3 / (w C), R_max / 2) leaves out the cable's w L; where w L dominates
    the quadrature part every window is REACTIVE and the correction never starts."""
    cfg = algo_config(sc)
    w = 2 * math.pi * cfg.perturbation_hz
    x = w * sc.cable.inductance_h - 1.0 / (w * sc.load_end.capacitance_f)
    # Also where w L outgrows R + ESR, short of x_max: the in-phase part is then a small
    # projection of a large quadrature one, and ADC noise makes the estimate wander by 10-25 %.
    return abs(x) > 0.9 * cfg.x_max_ohm or w * sc.cable.inductance_h > sc.cable.resistance_ohm + sc.load_end.esr_ohm


def finding_d6_light_load_clips_the_current_swing(sc):
    """D6: at a load lighter than the perturbation's current swing, the supply current swings
    negative and the (unipolar) current ADC clips it at code 0; the demodulated current halves and
    the estimate reads up to twice R_cable + ESR, VALID, so the next load step overcorrects."""
    cfg = algo_config(sc)
    ld = sc.load
    values = [ld.value] + [v for _, v in ld.steps]
    v = sc.supply.target_v
    if ld.kind == "constant_current":
        currents = values
    elif ld.kind == "resistive":
        currents = [v / x for x in values]
    elif ld.kind == "constant_power":
        currents = [p / v for p in values]
    else:
        currents = [current_at_target(sc)]
    r = sc.cable.resistance_ohm + sc.load_end.esr_ohm
    w = 2 * math.pi * cfg.perturbation_hz
    z = abs(complex(r, -1.0 / (w * sc.load_end.capacitance_f)))
    return any(i < 1.2 * max(cfg.pert_min_v, cfg.pert_fraction * r * i) / z for i in currents)


def finding_d8_cap_open_constant_power(sc):
    """D8: capacitor open with a constant-power load: the real part R + (-V**2/P) is negative or
    small, the windows are VALID (r_raw clamps to 0), so bad_windows never counts and the
    correction is not forced to zero; with a heavy load the plant itself diverges (inf V)."""
    return sc.load.kind == "constant_power" and any(f.kind == "cap_open" for f in sc.faults)


def finding_d9_constant_power_restart(sc):
    """D9: after a cable-open fault a constant-power load restarts below its cut-off (resistive),
    latches on the low-voltage branch, and the headroom cannot pull it back: no re-convergence."""
    return sc.load.kind == "constant_power" and any(f.kind == "cable_open" for f in sc.faults)


def current_at_target(sc):
    ld = sc.load
    values = [ld.value] + [v for _, v in ld.steps]
    v = sc.supply.target_v
    if ld.kind == "constant_current":
        return max(values)
    if ld.kind == "resistive":
        return v / min(values)
    if ld.kind == "constant_power":
        return max(values) / v
    return ld.value / ld.rated_v


# D1 (pert_min below one DAC code), D2 (corr_max from the uncompensated current) and D4 (perturbation
# floor below the voltage ADC's LSB) were fixed in the design calculator (commit fc379ac); their
# reproducers stay as regression tests in tests/test_proof_findings.py. D10 (TRANSIENT windows
# counted toward fault_windows) was fixed in the algorithm: load-step windows no longer count. D7
# (a step the cable and capacitor spread over several periods moved the estimate) was fixed in
# algorithm 0.4.0 by the trend removal and the swing-relative step detector.
KNOWN_FINDINGS = {"D3": finding_d3_x_max_ignores_inductance,
                  "D6": finding_d6_light_load_clips_the_current_swing,
                  "D8": finding_d8_cap_open_constant_power, "D9": finding_d9_constant_power_restart}


def known_finding(sc):
    """Name of the first known design finding ``sc`` falls under, or None."""
    return next((k for k, f in KNOWN_FINDINGS.items() if f(sc)), None)


def admitted(scenarios):
    """The scenarios no known finding covers; each draw is counted with hypothesis.event."""
    from hypothesis import event
    kept = []
    for sc in scenarios:
        finding = known_finding(sc)
        event(f"known finding {finding}" if finding else "admitted")
        if finding is None:
            kept.append(sc)
    return kept
