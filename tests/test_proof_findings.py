"""Reproducers of the design failures the proof suite found (harness/proof/PROOFS.md, "Open findings").

Each scenario file in tests/proof_findings/ is a plant the sizing rules admit on which the
recommended configuration does not converge. They are strict xfails: the day the design is
fixed the test XPASSes, strict makes that a failure, and the finding's predicate in
tests/support/proof_support.py (which keeps the property tests from re-finding it meanwhile) is deleted
together with the marker. Replay one with ``linedrop simulate tests/proof_findings/<file>``.
"""
import math
from dataclasses import replace
from pathlib import Path

import pytest

from harness.design.calculator import recommend
from harness.scenario.read import load_scenario
from support.proof_support import KNOWN_FINDINGS, run_groups, settle_windows, settled_failures
from harness.proof import bounds as bd

HERE = Path(__file__).parent / "proof_findings"
FILES = sorted(HERE.glob("*.toml"))
STEP_FINDINGS = ("d7", "d10")       # broken promise: the transient bound, not convergence
CALCULATOR_FINDINGS = ("d1", "d2", "d3", "d4")   # findings in the design calculator's choices
FIXED = ("d1", "d2", "d4")          # fixed in the calculator (fc379ac): regression tests now
# Fixed in the calculator by keeping the cable's wL below R / 3 (design.L_SHORT); the rest of
# D3 (x_max leaves out wL) stays open.
FIXED_FILES = ("d3_inductive_reactance_noisy_estimate",)
FIXED_STEP = ("d10", "d7")          # fixed in the algorithm: load-step windows do not count as
                                    # faults (d10); the trend removal and the swing-relative step
                                    # detector of 0.4.0 keep a spread-out step out of the estimate (d7)


def _fixed(p):
    return p.stem.split("_")[0] in FIXED or p.stem in FIXED_FILES


OPEN = [p for p in FILES if p.stem.split("_")[0] not in STEP_FINDINGS and not _fixed(p)]
RECOGNISED = [p for p in FILES if not _fixed(p) and p.stem.split("_")[0] not in FIXED_STEP]


@pytest.mark.parametrize("path", RECOGNISED, ids=[p.stem for p in RECOGNISED])
def test_finding_is_still_recognised_by_its_predicate(path):
    sc = load_scenario(path)
    assert KNOWN_FINDINGS[path.stem.split('_')[0].upper()](sc)


def _converges(path):
    sc = load_scenario(path)
    if path.stem.split("_")[0] in CALCULATOR_FINDINGS:      # re-design: the fix is in the calculator
        rec, fs = recommend(replace(sc, algorithm={}))
        sc = replace(sc, algorithm=rec, sensing=replace(sc.sensing, sample_rate_hz=fs))
    (lr, b), = run_groups([sc])
    total = int(lr.trace["windows"][-1, b])
    n = min(settle_windows(sc), total - bd.CHECK_WINDOWS)
    if sc.load.steps:       # a short reproducer: check after its last load step, not across it
        win = sc.algorithm["period_samples"] * sc.algorithm["periods_per_window"] / sc.sensing.sample_rate_hz \
            if sc.algorithm else None
        if win:
            after = int(math.ceil(max(t for t, _ in sc.load.steps) / win)) + 1
            n = max(n, min(after, total - 2))
    assert settled_failures(lr, b, lr.run.scenarios[b], n, min(n + bd.CHECK_WINDOWS, total)) == []


@pytest.mark.parametrize("path", [p for p in FILES if _fixed(p)],
                         ids=[p.stem for p in FILES if _fixed(p)])
def test_fixed_finding_converges_with_the_recommended_settings(path):
    _converges(path)


@pytest.mark.xfail(strict=True, reason="open design findings D3, D6, D8, D9, reported to the algo owner")
@pytest.mark.parametrize("path", OPEN, ids=[p.stem for p in OPEN])
def test_open_finding_scenario_converges(path):
    _converges(path)


def _estimate_holds_through_the_steps(path):
    sc = load_scenario(path)
    (lr, b), = run_groups([sc])
    r = lr.run.channels["r_estimate_ohm"][:, b]
    win = lr.run.cfgs[b].window_samples
    first = int(sc.load.steps[0][0] * sc.sensing.sample_rate_hz) // win * win
    allowed = bd.TRANSIENT_R_REL * (sc.cable.resistance_ohm + sc.load_end.esr_ohm) \
        + bd.R_LSB_SLACK * bd.r_lsb_ohm(lr.run.cfgs[b])
    assert float(abs(r[first:] - r[first - 1]).max()) <= allowed


# No load-step finding is open (D7 was the last): the strict xfail for them went with it. A new
# one would get back a strict xfail here, parametrised over its reproducers.


@pytest.mark.parametrize("path", [p for p in FILES if p.stem.split("_")[0] in FIXED_STEP],
                         ids=[p.stem for p in FILES if p.stem.split("_")[0] in FIXED_STEP])
def test_fixed_step_finding_keeps_the_estimate_within_the_transient_bound(path):
    _estimate_holds_through_the_steps(path)
