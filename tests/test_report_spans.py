"""The spans the simulation report shades, worked by hand on small built traces."""
from dataclasses import replace

import numpy as np
import pytest

from algo.state import STATUS_LOW_SWING, STATUS_TRANSIENT, STATUS_VALID
from harness.loop.closed_loop import drive, make_compensator
from harness.loop.spans import (current_limit_spans, fault_spans, load_step_times, rejected_spans,
                                sample_runs)
from harness.plant.rig import build_rig
from harness.scenario.algo_setup import algo_config
from harness.scenario.read import load_scenario
from harness.scenario.specs import FaultSpec
from harness.design.settings import with_settings

MAST_FAULTS = "harness/scenario/scenarios/mast_faults.toml"
#: Ten samples at 10 Hz: sample k is recorded at (k + 1) / 10 s and covers the 0.1 s before it.
T = (np.arange(10) + 1) * 0.1


def _approx(spans):
    return [pytest.approx(s) for s in spans]


def test_a_run_of_samples_covers_from_the_start_of_its_first_to_the_end_of_its_last():
    mask = [False, True, True, False, True, False, False, False, False, True]
    # samples 1-2 cover (0.1, 0.3], sample 4 (0.4, 0.5], sample 9 (0.9, 1.0]
    assert sample_runs(mask, T) == _approx([(0.1, 0.3), (0.4, 0.5), (0.9, 1.0)])
    assert sample_runs([False] * 10, T) == []


def test_rejected_windows_are_shaded_by_outcome_and_valid_ones_not():
    # Windows of three samples end at samples 2, 5 and 8 (the counter moves there); sample 9
    # belongs to no finished window. Outcomes: valid, low_swing, transient.
    windows = [0, 0, 1, 1, 1, 2, 2, 2, 3, 3]
    status = [0, 0, STATUS_VALID, STATUS_VALID, STATUS_VALID, STATUS_LOW_SWING, STATUS_LOW_SWING,
              STATUS_LOW_SWING, STATUS_TRANSIENT, STATUS_TRANSIENT]
    spans = rejected_spans(T, windows, status)
    assert set(spans) == {"low_swing", "transient"}
    assert spans["low_swing"] == _approx([(0.3, 0.6)])      # samples 3-5
    assert spans["transient"] == _approx([(0.6, 0.9)])      # samples 6-8


def test_neighbouring_windows_with_the_same_outcome_make_one_span():
    windows = [0, 1, 1, 2, 2, 3, 3, 4, 4, 4]
    status = [0, STATUS_VALID, STATUS_VALID, STATUS_LOW_SWING, STATUS_LOW_SWING, STATUS_LOW_SWING,
              STATUS_LOW_SWING, STATUS_VALID, STATUS_VALID, STATUS_VALID]
    # windows end at 1, 3, 5, 7: samples 2-3 and 4-5 are low_swing windows, one span (0.2, 0.6]
    assert rejected_spans(T, windows, status) == {"low_swing": _approx([(0.2, 0.6)])}


def test_faults_are_cut_at_the_run_end_and_load_steps_after_it_left_out():
    sc = load_scenario(MAST_FAULTS)                       # duration_s = 2.0
    sc = replace(sc, faults=(FaultSpec("cable_open", 0.5, 0.8), FaultSpec("cap_open", 1.2)),
                 load=replace(sc.load, steps=((0.5, 2.2), (3.0, 1.0))))
    assert fault_spans(sc) == [("cable_open", (0.5, 0.8)), ("cap_open", (1.2, 2.0))]
    assert load_step_times(sc) == [0.5]


def test_current_limit_spans_are_where_the_current_sits_at_the_limit():
    i = np.array([1.0, 3.0, 3.0, 2.9, 3.0, 1.0, 1.0, 1.0, 1.0, 1.0], dtype=np.float32)
    assert current_limit_spans(T, i, 3.0) == _approx([(0.1, 0.3), (0.4, 0.5)])
    assert current_limit_spans(T, i, None) == []


def test_the_derived_current_limit_holds_every_sample_the_plant_itself_limits():
    # The plant's own current-limit flag (Observation.current_limited) is the reference: every
    # sample it flags must be shaded, and any other shaded sample must carry at least the limit.
    sc, _ = with_settings(load_scenario(MAST_FAULTS))
    sc = replace(sc, run=replace(sc.run, duration_s=0.05))   # the start-up charge hits 3 A
    rig = build_rig([sc])
    comp, _ = make_compensator("linedrop", "model", [algo_config(sc)], [sc])
    rig.reset()
    n = int(round(0.05 * sc.sensing.sample_rate_hz))
    flagged, i = np.zeros(n, bool), np.zeros(n, np.float32)
    for k, _, obs, _, _, _ in drive(rig, comp.step, comp.field("cmd"), n):
        flagged[k], i[k] = obs.current_limited[0], obs.i_supply_a[0]
    t = (np.arange(n) + 1) / sc.sensing.sample_rate_hz
    shaded = np.zeros(n, bool)
    for a, e in current_limit_spans(t, i, 3.0):
        shaded |= (t > a + 1e-12) & (t <= e + 1e-12)
    assert flagged.sum() > 10
    assert not (flagged & ~shaded).any()
    assert (i[shaded & ~flagged] >= 3.0).all()
