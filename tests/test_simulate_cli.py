"""linedrop simulate: JSON keys, waveform file, report folder, bad scenario exits 2."""
import csv
import json
import os

import pytest

from harness.cli.main import main

SHORT = """
[supply]
target_v = 12.0
max_v = 15.0
[cable]
resistance_ohm = 1.0
[load_end]
capacitance_f = 4.7e-3
esr_ohm = 0.02
[load]
kind = "constant_current"
current_a = 1.0
steps = [[0.15, 1.5]]
[run]
duration_s = 0.3
seed = 5
"""
KEYS = ("r_cable_ohm", "r_estimate_ohm", "uncompensated_drop_v", "load_error_v", "improvement",
        "max_load_v", "min_load_v", "ripple_load_v_pp", "settling_s", "converged", "faults")


@pytest.fixture
def scenario(tmp_path):
    path = tmp_path / "short.toml"
    path.write_text(SHORT)
    return path


def test_json_has_the_documented_keys_and_baselines(scenario, tmp_path, capsys):
    out_dir = tmp_path / "report"
    assert main(["simulate", str(scenario), "--backend", "c", "--json", "--out", str(out_dir)]) == 0
    doc = json.loads(capsys.readouterr().out)
    for key in KEYS:
        assert key in doc
    assert set(doc["baselines"]) == {"none", "fixed", "difference", "sense"}
    assert doc["r_cable_ohm"] == pytest.approx(1.0)
    assert doc["uncompensated_drop_v"] == pytest.approx(1.5, rel=0.05)
    for name in ("waveforms.png", "comparison.png", "report.md", "metrics.json"):
        assert (out_dir / name).stat().st_size > 0
    report = (out_dir / "report.md").read_text()
    assert "Cautions" in report and "extra-low-voltage" in report


def test_waveform_file_has_the_documented_header_and_one_row_per_sample(scenario, tmp_path):
    wave = tmp_path / "wave.csv"
    assert main(["simulate", str(scenario), "--backend", "c", "--waveform", str(wave)]) == 0
    with open(wave, newline="") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["t_s", "v_supply_v", "i_supply_a", "v_load_v", "command_v",
                       "r_estimate_ohm", "correction_v"]
    assert len(rows) == 1 + int(0.3 * 32000)


def test_backends_model_and_c_give_the_same_closed_loop(scenario, capsys):
    docs = []
    for backend in ("model", "c"):
        assert main(["simulate", str(scenario), "--backend", backend, "--json"]) == 0
        docs.append(json.loads(capsys.readouterr().out))
    for key in ("r_estimate_ohm", "load_error_v", "max_load_v", "min_load_v"):
        assert docs[0][key] == docs[1][key]


@pytest.mark.parametrize("patch, needle", [
    (("current_a = 1.0", "current_a = -1.0"), "load.current_a"),
    (("[run]", "[run]\nbogus = 1"), "run.bogus"),
    (("seed = 5", "seed = 5\n[algorithm]\nloop_tau_ms = -1"), "algorithm.loop_tau_ms"),
    (("seed = 5", "seed = 5\n[algorithm]\ntarget_v = 3.0"), "algorithm.target_v"),
])
def test_bad_scenario_exits_2_with_one_line_naming_the_key(tmp_path, capsys, patch, needle):
    path = tmp_path / "bad.toml"
    path.write_text(SHORT.replace(*patch))
    assert main(["simulate", str(path), "--json"]) == 2
    err = capsys.readouterr().err
    assert needle in err and str(path) in err and err.count("\n") == 1


@pytest.mark.parametrize("name, lamp", [("demo_mast", False), ("garden_lamps", True)])
def test_design_and_simulate_carry_the_same_cautions_and_the_lamp_line_for_lamps_only(name, lamp, capsys):
    """One list of cautions (harness.loop.cautions.cautions_for) in design's text and --json and
    in simulate's text and --json; the lamp line only where the load is a lamp."""
    path = f"harness/scenario/scenarios/{name}.toml"
    assert main(["design", path, "--json"]) == 0
    design_json = json.loads(capsys.readouterr().out)["cautions"]
    assert main(["design", path]) == 0
    design_text = capsys.readouterr().out.splitlines()[-1]
    assert main(["simulate", path, "--json"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert main(["simulate", path]) == 0
    sim_text = capsys.readouterr().out.splitlines()[-1]
    assert design_text == sim_text == "Cautions: " + " ".join(design_json)
    assert sim["cautions"][-len(design_json):] == design_json      # after any voltage caution
    assert any("Lamp life" in c for c in design_json) == lamp
