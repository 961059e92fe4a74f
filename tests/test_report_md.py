"""report.md of `linedrop simulate --out`: every figure defined, faults, outcomes, settings, version."""
import csv
import json
import re
import tomllib
from dataclasses import fields, replace
from importlib.metadata import version

import pytest

import algo
from algo.config import AlgoConfig
from algo.state import STATUS_NAMES, STATUS_NONE
from harness.cli.main import main
from harness.loop.cautions import cautions_for
from harness.loop.report_text import fault_sentence
from harness.scenario.read import load_scenario
from harness.scenario.specs import FaultSpec
from harness.scenario.write import scenario_to_toml

MAST_FAULTS = "harness/scenario/scenarios/mast_faults.toml"
FIGURES = ("load_error_v", "uncompensated_drop_v", "improvement", "ripple_load_v_pp", "max_load_v",
           "min_load_v", "settling_s", "r_estimate_ohm")
DEMO_MAST = "harness/scenario/scenarios/demo_mast.toml"


def _report(out_dir):
    return (out_dir / "report.md").read_text(), json.loads((out_dir / "metrics.json").read_text())


def _settings_rows(text):
    """{setting: (value, source)} of report.md's settings table."""
    rows = re.findall(r"^\| `(\w+)` \| ([^|]+) \| [^|]+ \| ([^|]+) \|$", text, re.M)
    return {k: (v.strip(), src.strip()) for k, v, src in rows if k not in STATUS_NAMES.values()}


@pytest.fixture(scope="module")
def faults_report(tmp_path_factory):
    """mast_faults shortened to 1 s, its two faults moved inside, run with design's settings."""
    tmp = tmp_path_factory.mktemp("mast")
    sc = load_scenario(MAST_FAULTS)
    sc = replace(sc, run=replace(sc.run, duration_s=1.0),
                 faults=(FaultSpec("cable_open", 0.2, 0.35), FaultSpec("cap_open", 0.45, 0.6)))
    path = tmp / "mast_short.toml"
    path.write_text(scenario_to_toml(sc))
    assert main(["simulate", str(path), "--out", str(tmp / "report"), "--waveform", str(tmp / "wave.csv")]) == 0
    assert main(["design", str(path), "--algorithm-out", str(tmp / "rec.toml")]) == 0
    return tmp


def test_every_figure_is_defined_with_its_sign_and_unit(faults_report):
    text, doc = _report(faults_report / "report")
    for key in FIGURES:
        assert re.search(rf"^- `{key}`.*\((.*(V|ohm|ms|ratio).*)\)", text, re.M), key
    assert "positive = the load is below target" in text
    assert "within the 1 % band of target (24 V +- 0.240 V)" in text
    # With no compensation the load sits a cable drop R*I below target (Ohm's law), so the
    # defined sign makes its load error positive and about the uncompensated drop.
    none = doc["none"]
    assert none["load_error_v"] > 0
    assert none["load_error_v"] == pytest.approx(none["uncompensated_drop_v"], rel=0.02)
    for name in ("linedrop", "none", "fixed", "difference", "sense"):
        assert re.search(rf"^- `{name}`: \S", text, re.M), name


def test_fault_figures_are_reported_in_sentences(faults_report):
    text, doc = _report(faults_report / "report")
    faults = doc["linedrop"]["faults"]
    assert [f["kind"] for f in faults] == ["cable_open", "cap_open"]
    for f in faults:
        assert (f"- {f['kind']} from {f['at_s']:g} s to {f['until_s']:g} s: the correction was "
                f"{f['correction_before_v']:.3f} V before the fault and {f['correction_at_end_v']:.3f} V "
                "at its end") in text
        assert f"{f['fall_time_s'] * 1e3:.1f} ms after the fault began" in text


def test_time_at_the_current_limit_matches_the_waveform(faults_report):
    text, _ = _report(faults_report / "report")
    with open(faults_report / "wave.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    at_limit = sum(float(r["i_supply_a"]) >= 3.0 for r in rows)        # mast_faults: 3 A limit
    total_ms = 1e3 * at_limit * float(rows[0]["t_s"])                   # samples times 1 / rate
    found = re.search(r"With linedrop, the supply current sat at its 3 A limit for ([\d.]+) ms in all", text)
    assert at_limit > 0 and found and float(found.group(1)) == pytest.approx(total_ms, abs=0.1)
    assert "No load step." in text


def test_a_correction_that_never_fell_says_never_in_a_sentence():
    f = {"kind": "cap_open", "at_s": 1.2, "until_s": float("inf"), "correction_before_v": 5.0,
         "correction_at_end_v": 4.9, "fall_time_s": None}
    s = fault_sentence(f)
    assert s == ("cap_open from 1.2 s to the end of the run: the correction was 5.000 V before the "
                 "fault and 4.900 V at its end; it never fell below 5 % of its value before the fault "
                 "during the fault.")


def test_windows_are_counted_per_outcome_by_name(faults_report):
    text, doc = _report(faults_report / "report")
    counts = doc["linedrop"]["window_outcomes"]
    for code, name in STATUS_NAMES.items():
        if code != STATUS_NONE:
            assert re.search(rf"^\| `{name}` \| {counts[name]} \| \w", text, re.M), name
    # Every finished window is counted once: duration * rate / (period * periods per window).
    rows = _settings_rows(text)
    rate, per, n = (float(rows[k][0]) for k in ("sample_rate_hz", "period_samples", "periods_per_window"))
    assert sum(counts.values()) == int(1.0 * rate // (per * n))
    assert counts["low_swing"] > 0          # the cable_open fault leaves no current swing


def test_settings_table_lists_every_setting_with_design_as_its_source(faults_report):
    text, _ = _report(faults_report / "report")
    rows = _settings_rows(text)
    assert list(rows) == [f.name for f in fields(AlgoConfig)]
    rec = tomllib.loads((faults_report / "rec.toml").read_text())["algorithm"]
    for key, value in rec.items():
        shown, source = rows[key]
        assert float(shown) == pytest.approx(value, rel=1e-5), key
        assert source == "linedrop design's recommendation", key
    assert rows["target_v"] == ("24", "the scenario's supply.target_v")
    assert "recommended by linedrop design" in text


def test_report_names_the_package_and_algorithm_versions_and_keeps_the_cautions(faults_report):
    text, _ = _report(faults_report / "report")
    assert f"linedrop {version('linedrop')} (algorithm {algo.VERSION})" in text
    for caution in cautions_for("constant_current"):     # mast_faults' load
        assert f"- {caution}" in text
    assert "Lamp life" not in text


def test_report_writes_no_number_with_an_exponent(faults_report):
    text, _ = _report(faults_report / "report")
    assert not re.search(r"\d[eE][+-]?\d", text)
    assert " in never" not in text and "n/a" not in text.split("## Cautions")[0]


@pytest.mark.parametrize("table, flag, source", [
    ("\n[algorithm]\nloop_tau_ms = 3.0\n", False, "the scenario's [algorithm] table"),
    ("", True, "--algorithm {algo}"),
])
def test_settings_table_names_the_scenario_table_or_the_algorithm_file(tmp_path, table, flag, source):
    sc = load_scenario(DEMO_MAST)        # shortened to 0.3 s, its load step moved to 0.15 s
    sc = replace(sc, run=replace(sc.run, duration_s=0.3), load=replace(sc.load, steps=((0.15, 2.2),)))
    scenario = tmp_path / "short.toml"
    scenario.write_text(scenario_to_toml(sc) + table)
    algo_file = tmp_path / "algo.toml"
    algo_file.write_text("[algorithm]\nloop_tau_ms = 4.5\nfault_windows = 9\n")
    argv = ["simulate", str(scenario), "--out", str(tmp_path / "r")]
    argv += ["--algorithm", str(algo_file)] if flag else []
    assert main(argv) == 0
    text = _report(tmp_path / "r")[0]
    rows = _settings_rows(text)
    source = source.format(algo=algo_file)
    if flag:
        assert rows["loop_tau_ms"] == ("4.5", source) and rows["fault_windows"] == ("9", source)
    else:
        assert rows["loop_tau_ms"] == ("3", source)
        assert rows["fault_windows"][1] == "linedrop design's recommendation"   # the keys not given
    assert rows["max_v"] == (f"{sc.supply.max_v:g}", "the scenario's supply.max_v")
    assert "Load steps at 0.15 s." in text and "the last load step or fault end (0.15 s here)" in text
