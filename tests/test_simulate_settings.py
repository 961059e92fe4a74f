"""simulate says which [algorithm] settings it ran, takes design's file, and warns on a failed job."""
import json
from pathlib import Path

import pytest

from harness.cli.main import main
from harness.scenario.read import DEMO


@pytest.fixture
def short_demo(tmp_path):
    path = tmp_path / "demo_short.toml"
    path.write_text(Path(DEMO).read_text().replace("duration_s = 1.0", "duration_s = 0.3")
                    .replace("steps = [[0.5, 2.2]]", "steps = [[0.2, 2.2]]"))
    return path


def _json(capsys, argv):
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def test_without_an_algorithm_table_simulate_says_it_runs_designs_recommendation(capsys, short_demo):
    doc = _json(capsys, ["simulate", str(short_demo), "--json"])
    assert "recommended by linedrop design" in doc["settings"] and "design --algorithm-out" in doc["settings"]
    assert doc["warnings"] == []                                            # the demo is compensated


def test_design_file_runs_through_simulate_and_changes_the_run(capsys, short_demo, tmp_path):
    algo = tmp_path / "algo.toml"
    assert main(["design", str(short_demo), "--algorithm-out", str(algo)]) == 0
    capsys.readouterr()
    with_file = _json(capsys, ["simulate", str(short_demo), "--algorithm", str(algo), "--json"])
    recommended = _json(capsys, ["simulate", str(short_demo), "--json"])
    assert with_file["settings"] == f"settings: {algo}"
    # No [algorithm] table: simulate runs design's recommendation, the same settings as the file.
    assert with_file["r_estimate_ohm"] == recommended["r_estimate_ohm"]


def test_an_algorithm_file_that_sets_nothing_is_named_in_the_settings_line(capsys, short_demo, tmp_path):
    algo = tmp_path / "algo.toml"
    algo.write_text("[algorithm]\n")
    doc = _json(capsys, ["simulate", str(short_demo), "--algorithm", str(algo), "--json"])
    assert f"({algo} sets no key)" in doc["settings"] and "has no [algorithm] table" not in doc["settings"]


def test_an_algorithm_file_may_not_set_what_the_plant_fixes(capsys, short_demo, tmp_path):
    algo = tmp_path / "algo.toml"
    algo.write_text("[algorithm]\ntarget_v = 30.0\n")
    assert main(["simulate", str(short_demo), "--algorithm", str(algo)]) == 2
    err = capsys.readouterr().err
    assert str(algo) in err and "algorithm.target_v" in err and len(err.strip().splitlines()) == 1


def test_a_load_left_far_from_target_is_a_warning(capsys, short_demo, tmp_path):
    # An estimate ceiling below the cable's 3.2 ohm rejects every window: no correction at all.
    algo = tmp_path / "algo.toml"
    algo.write_text("[algorithm]\nr_max_ohm = 1.0\n")
    doc = _json(capsys, ["simulate", str(short_demo), "--algorithm", str(algo), "--json"])
    assert doc["load_error_v"] > 0.05 * 24.0                               # 7 V uncompensated
    assert any("below target" in w for w in doc["warnings"])
    assert doc["window_outcomes"]["valid"] == 0 and doc["window_outcomes"]["r_high"] > 0
    assert any("windows gave no valid estimate (r_high" in w for w in doc["warnings"])


def test_window_outcomes_count_every_window_of_the_run(capsys, short_demo):
    from harness.scenario.algo_setup import algo_config
    from harness.scenario.read import load_scenario
    doc = _json(capsys, ["simulate", str(short_demo), "--json"])
    cfg = algo_config(load_scenario(short_demo))
    n_windows = int(0.3 * cfg.sample_rate_hz) // cfg.window_samples
    assert sum(doc["window_outcomes"].values()) == n_windows
    # A steady demo: every window valid but the first (no estimate yet) and the few the start of
    # the correction flags as transient (its own charging current moves the period sums).
    outcomes = doc["window_outcomes"]
    assert outcomes["valid"] >= n_windows - 6
    assert {k for k, n in outcomes.items() if n and k != "valid"} <= {"transient", "none"}
    baseline = _json(capsys, ["simulate", str(short_demo), "--compensation", "fixed", "--json"])
    assert baseline["window_outcomes"] is None


def test_a_partial_table_takes_the_keys_it_does_not_set_from_design(capsys, short_demo, tmp_path):
    """A scenario table setting one key runs design's recommendation for every other key (and its
    sample rate); one that sets the timing (period_samples) runs as written, defaults elsewhere."""
    from harness.design.settings import with_settings
    from harness.scenario.read import load_scenario
    base = load_scenario(str(short_demo))
    rec, _ = with_settings(base)
    partial = tmp_path / "partial.toml"
    partial.write_text(short_demo.read_text() + "\n[algorithm]\nfault_windows = 9\n")
    sc, line = with_settings(load_scenario(str(partial)))
    assert sc.algorithm == {**rec.algorithm, "fault_windows": 9}
    assert sc.sensing.sample_rate_hz == rec.sensing.sample_rate_hz
    assert "fault_windows from the scenario's [algorithm] table" in line and "the rest recommended" in line
    timed = tmp_path / "timed.toml"
    timed.write_text(short_demo.read_text() + "\n[algorithm]\nperiod_samples = 64\n")
    sc, line = with_settings(load_scenario(str(timed)))
    assert sc.algorithm == {"period_samples": 64} and "as written" in line
    assert sc.sensing.sample_rate_hz == base.sensing.sample_rate_hz
