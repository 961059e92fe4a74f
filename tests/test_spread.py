"""linedrop spread: tolerances, draws, yield interval, batch independence, replay, Dask, resume.

The plant is the invented demo mast (harness/scenario/scenarios/demo_mast.toml) shortened to
0.2 s with its load step at 0.1 s and its own [spread] table replaced by SPREAD, so each test runs a
few draws in seconds.
"""
import json
import math
import os
from dataclasses import replace

import pytest

from harness.cli.main import main
from harness.errors import InputError
from harness.loop.closed_loop import simulate
from harness.loop.metrics import metrics
from harness.scenario.read import DEMO, load_scenario
from harness.spread import report
from harness.spread.draws import draw, draw_values
from harness.spread.evaluate import DrawJob, evaluate, figures
from harness.scenario.spread_section import Tolerances, parse_spread
from support.tools import require_module

SPREAD = """
[spread]
temperature_c = [-20.0, 40.0]
capacitance_tol = 0.2
esr_tol = 0.3
esr_doubling_c = 15.0
adc_gain_tol = 0.01
adc_offset_lsb = 2.0
bandwidth_tol = 0.3
dac_gain_tol = 0.004
current_gain_tol = 0.01
current_offset_lsb = 1.0
load_range = [0.8, 1.1]
"""
LIMITS = ["--max-error-mv", "30", "--max-overshoot-pct", "1", "--max-settle-ms", "40"]


def _demo_text():
    """The demo scenario's text without its own [spread] table (the last table of the file)."""
    return open(DEMO, encoding="utf-8").read().split("\n[spread]")[0]


@pytest.fixture
def scenario_file(tmp_path):
    text = _demo_text()
    text = text.replace("duration_s = 1.0", "duration_s = 0.2").replace("steps = [[0.5, 2.2]]", "steps = [[0.1, 2.2]]")
    path = tmp_path / "mast_spread.toml"
    path.write_text(text + SPREAD, encoding="utf-8")
    return path


def _nominal(path):
    from harness.cli.spread import nominal_of
    return nominal_of(str(path), None)[0]


def _spread(argv, capsys):
    rc = main(["spread", *argv, "--json"])
    return rc, json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("k, n", [(0, 10), (1, 10), (5, 10), (10, 10), (362, 1000), (9999, 10000), (3, 7)])
def test_the_yield_interval_is_wilsons_as_scipy_computes_it(k, n):
    # Reference: scipy.stats.binomtest(...).proportion_ci(method="wilson"), Wilson (1927).
    stats = pytest.importorskip("scipy.stats")
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=report.CONFIDENCE, method="wilson")
    lo, hi = report.wilson(k, n)
    assert lo == pytest.approx(ref.low, abs=1e-12) and hi == pytest.approx(ref.high, abs=1e-12)


def test_a_draw_passes_only_when_every_given_limit_holds_and_never_settling_fails():
    spec = {"max_error_mv": 10.0, "max_overshoot_pct": None, "max_settle_ms": 20.0}
    rows = [{"index": 0, "error_mv": 5.0, "overshoot_pct": 9.0, "settle_ms": 10.0},
            {"index": 1, "error_mv": 12.0, "overshoot_pct": 0.0, "settle_ms": 10.0},
            {"index": 2, "error_mv": 1.0, "overshoot_pct": 0.0, "settle_ms": None},
            {"index": 3, "error_mv": 10.0, "overshoot_pct": 0.0, "settle_ms": 20.0}]
    y = report.yield_of(rows, spec)
    assert (y["passed"], y["draws"]) == (2, 4)
    assert y["fails_by"] == {"error_mv": 1, "settle_ms": 1}
    assert [r["index"] for r in report.worst_rows(rows, spec, 2)] == [2, 1]


@pytest.mark.parametrize("line, needle", [
    ("temperature_c = [40.0, -20.0]", "spread.temperature_c = [40.0, -20.0]: must be a pair [lo, hi] with lo <= hi, each in [-60, 250]"),
    ("temperature_c = 20.0", "spread.temperature_c = 20.0: must be a pair"),
    ("load_range = [0.0, 1.0]", "spread.load_range = [0.0, 1.0]: must be a pair [lo, hi] with lo <= hi, each in (0, 10]"),
    ("capacitance_tol = 1.5", "spread.capacitance_tol = 1.5: must be in [0, 0.9]"),
    ("esr_doubling_c = -1", "spread.esr_doubling_c = -1: must be in [0, 100]"),
    ("capacitance = 0.2", "spread.capacitance: unknown key; allowed: "),
])
def test_a_bad_spread_key_is_one_line_naming_file_key_and_range(tmp_path, line, needle):
    path = tmp_path / "bad.toml"
    path.write_text(_demo_text() + f"\n[spread]\n{line}\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_scenario(path)
    msg = str(exc.value)
    assert msg.startswith(f"{path}: ") and needle in msg and "\n" not in msg, msg


def test_the_cli_refuses_a_run_without_limits_and_a_bad_draw_count(scenario_file, capsys):
    assert main(["spread", str(scenario_file)]) == 2
    assert "give at least one limit" in capsys.readouterr().err
    assert main(["spread", str(scenario_file), "--draws", "0", *LIMITS]) == 2
    assert "--draws" in capsys.readouterr().err


def test_a_draw_is_the_same_whatever_else_is_drawn_and_stays_inside_its_tolerances(scenario_file):
    nom = _nominal(scenario_file)
    tol = nom.spread
    a, va = draw(nom, tol, 7, 3)
    b, vb = draw(nom, tol, 7, 3)
    assert a == b and va == vb
    assert draw(nom, tol, 7, 4)[1] != va and draw(nom, tol, 8, 3)[1] != va
    for k in range(50):
        sc, v = draw(nom, tol, 7, k)
        assert -20.0 <= v["temperature_c"] <= 40.0 and 0.8 <= v["load_factor"] <= 1.1
        assert sc.load_end.capacitance_f == pytest.approx(nom.load_end.capacitance_f * v["capacitance_factor"])
        assert abs(v["capacitance_factor"] - 1) <= 0.2 and abs(v["bandwidth_factor"] - 1) <= 0.3
        assert abs(sc.sensing.gain_error - nom.sensing.gain_error) <= 0.01
        assert abs(sc.supply.dac_gain_error - nom.supply.dac_gain_error) <= 0.004
        assert abs(sc.sensing.current_gain_error) <= 0.01 and abs(sc.sensing.current_offset_lsb) <= 1.0
        assert sc.algorithm == nom.algorithm and sc.sensing.sample_rate_hz == nom.sensing.sample_rate_hz
        assert sc.load.steps[0][1] == pytest.approx(nom.load.steps[0][1] * v["load_factor"])
        # Copper's temperature coefficient 0.00393 /K at 20 degC (IEC 60028), referred to t0.
        t0 = nom.cable.temperature_c
        alpha_t0 = 0.00393 / (1 + 0.00393 * (t0 - 20.0))
        assert sc.cable.resistance_ohm == pytest.approx(nom.cable.resistance_ohm * (1 + alpha_t0 * (v["temperature_c"] - t0)), rel=1e-9)
        # The ESR doubles per esr_doubling_c colder, times its tolerance factor.
        cold = 2.0 ** ((t0 - v["temperature_c"]) / 15.0)
        assert 0.7 * cold - 1e-12 <= v["esr_factor"] <= 1.3 * cold + 1e-12


def test_without_a_spread_table_a_draw_changes_only_the_noise_seed(scenario_file):
    nom = replace(_nominal(scenario_file), spread=Tolerances())
    sc, v = draw(nom, nom.spread, 1, 5)
    assert replace(sc, run=nom.run) == nom and sc.run.seed != nom.run.seed
    assert v == draw_values(Tolerances(), 1, 5, nom)[0]


def test_a_draws_figures_do_not_depend_on_the_other_draws_of_its_batch(scenario_file):
    nom = _nominal(scenario_file)
    jobs = [DrawJob(scenario=s, index=k, values=v) for k in range(4) for s, v in [draw(nom, nom.spread, 2, k)]]
    together = {r["index"]: r for r in evaluate(jobs)}
    alone = evaluate([jobs[2]])[0]
    reversed_ = {r["index"]: r for r in evaluate(jobs[::-1][:2])}
    assert alone == together[2]
    assert reversed_[3] == together[3] and reversed_[2] == together[2]


def test_the_worst_draws_replay_in_simulate_with_the_figures_spread_gave(scenario_file, tmp_path, capsys):
    out = tmp_path / "out"
    rc, res = _spread([str(scenario_file), "--draws", "6", "--worst", "2", "--out", str(out), *LIMITS], capsys)
    assert rc == 0 and len(res["worst"]) == 2 and res["draws"] == 6
    for path, want in zip(res["worst"], res["worst_figures"]):
        sc = load_scenario(path)
        run = simulate([sc], backend="c")
        got = figures(metrics(run), sc.supply.target_v)
        assert got == {k: want[k] for k in got}, path
    rows = (out / report.CSV_FILE).read_text().splitlines()
    assert len(rows) == 7 and rows[0].startswith("index,temperature_c,")
    assert (out / report.HIST_FILE).stat().st_size > 0 and (out / report.YIELD_FILE).stat().st_size > 0
    assert 0.0 <= res["ci_lo"] <= res["yield"] <= res["ci_hi"] <= 1.0


def test_an_interrupted_run_resumes_from_its_cache_with_the_same_figures(scenario_file, tmp_path, capsys):
    out = str(tmp_path / "out")
    _, first = _spread([str(scenario_file), "--draws", "3", "--out", out, *LIMITS, "--workers", "1"], capsys)
    _, again = _spread([str(scenario_file), "--draws", "5", "--out", out, *LIMITS, "--workers", "1"], capsys)
    assert (first["draws_new"], again["draws_new"], again["draws_cached"]) == (3, 2, 3)
    rows = (tmp_path / "out" / report.CSV_FILE).read_text().splitlines()
    fresh = str(tmp_path / "fresh")
    _spread([str(scenario_file), "--draws", "5", "--out", fresh, *LIMITS, "--workers", "2"], capsys)
    assert (tmp_path / "fresh" / report.CSV_FILE).read_text().splitlines() == rows


def test_dask_local_cluster_gives_the_same_draws_as_local_processes(scenario_file, tmp_path, capsys):
    distributed = require_module("distributed")
    argv = [str(scenario_file), "--draws", "4", *LIMITS]
    _, local = _spread([*argv, "--out", str(tmp_path / "local")], capsys)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        _, dask = _spread([*argv, "--out", str(tmp_path / "dask"), "--scheduler", cluster.scheduler_address], capsys)
    assert dask["draws_new"] == local["draws_new"] == 4
    assert (tmp_path / "dask" / report.CSV_FILE).read_text() == (tmp_path / "local" / report.CSV_FILE).read_text()
    assert {k: dask[k] for k in ("passed", "yield", "ci_lo", "ci_hi")} == {k: local[k] for k in ("passed", "yield", "ci_lo", "ci_hi")}


def test_spread_reads_its_table_from_the_scenario_and_every_other_command_ignores_it(scenario_file):
    sc = load_scenario(scenario_file)
    assert sc.spread == parse_spread(str(scenario_file), {
        "temperature_c": [-20.0, 40.0], "capacitance_tol": 0.2, "esr_tol": 0.3, "esr_doubling_c": 15.0,
        "adc_gain_tol": 0.01, "adc_offset_lsb": 2.0, "bandwidth_tol": 0.3, "dac_gain_tol": 0.004,
        "current_gain_tol": 0.01, "current_offset_lsb": 1.0, "load_range": [0.8, 1.1]})
    plain = load_scenario(DEMO)
    assert replace(sc, spread=plain.spread, source=plain.source) == replace(
        plain, run=replace(plain.run, duration_s=0.2), load=replace(plain.load, steps=((0.1, 2.2),)))
    assert math.isfinite(sc.spread.capacitance_tol)


def test_the_drivers_of_failing_are_spearmans_rank_correlation_as_scipy_computes_it():
    # Reference: scipy.stats.spearmanr on the same columns (no ties in either).
    stats = pytest.importorskip("scipy.stats")
    import numpy as np
    rng = np.random.default_rng(5)
    spec = {"max_error_mv": 10.0}
    rows = []
    for k in range(40):
        x = {name: float(rng.normal()) for name in report.DRAWN}
        rows.append({"index": k, **x, "error_mv": 10.0 * math.exp(x["esr_factor"] - 0.5 * x["load_factor"]),
                     "overshoot_pct": 0.0, "settle_ms": 1.0})
    got = report.drivers(rows, spec)
    sev = [r["error_mv"] / 10.0 for r in rows]
    for name in report.DRAWN:
        want = stats.spearmanr([r[name] for r in rows], sev).statistic
        assert got[name] == pytest.approx(want, abs=1e-12), name
    assert list(got)[0] == "esr_factor"


def test_bench_spread_prints_its_figures_and_the_target(capsys):
    assert main(["bench", "--spread", "--draws", "4", "--json"]) == 0
    fig = json.loads(capsys.readouterr().out)
    assert fig["spread_draws"] == 4 and fig["spread_wall_s"] > 0 and fig["spread_target_s"] == 60.0
    assert fig["spread_10000_draws_of_1s_wall_s"] == pytest.approx(fig["spread_wall_s"] * 2500 / fig["spread_duration_s"])
    assert main(["bench", "--spread", "--regulation"]) == 2


def test_ctrl_c_while_the_outputs_are_written_keeps_the_old_ones_and_the_next_run_resumes(
        scenario_file, tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    argv = [str(scenario_file), "--out", str(out), *LIMITS, "--workers", "1"]
    _spread([*argv, "--draws", "3"], capsys)
    before = {n: (out / n).read_bytes() for n in os.listdir(out) if n != report.CACHE_FILE}

    def interrupted(*args, **kw):
        raise KeyboardInterrupt
    monkeypatch.setattr(report, "_plots", interrupted)          # after spread.csv is written
    assert main(["spread", *argv, "--draws", "5"]) == 130
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "interrupted" in err and "resume" in err
    assert {n: (out / n).read_bytes() for n in os.listdir(out) if n != report.CACHE_FILE} == before
    monkeypatch.undo()
    _, again = _spread([*argv, "--draws", "5"], capsys)
    assert (again["draws_new"], again["draws_cached"]) == (0, 5)
