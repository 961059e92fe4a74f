"""linedrop tune: the demo's quick recommendation, its most sensitive knob, cache resume, Dask, bad input, rejection."""
import contextlib
import csv
import dataclasses
import io
import json
import os
import shutil

import pytest

from algo.config import AlgoConfig
from algo.params import derive
from harness.tune import range_check
from harness.cli.main import main
from harness.cli.simulate import DEMO
from harness.loop.metrics import last_event_s
from harness.scenario.read import load_scenario
from harness.tune.evaluate import KNOBS
from support.tools import require_module
from harness.tune.run_length import run_lengths
from harness.tune.runner import Cache, Runner
from harness.tune.search import Tuner

SPEC = {"max_error_mv": 80.0, "max_settle_ms": 300.0, "min_gain_margin": 1.25, "max_ideal_ratio": 2.0}
SPEC_ARGS = ["--max-error-mv", "80", "--max-settle-ms", "300"]
# A small sweep (two knobs, short runs) for the cache and scheduler tests.
SMALL = ["--knobs", "corr_frac_bits,table_bits", "--duration-s", "0.2", "--max-error-mv", "200",
         "--max-settle-ms", "150", "--quick"]


def _tune(argv, capsys):
    rc = main(["tune", *argv, "--json"])
    return rc, json.loads(capsys.readouterr().out)


@pytest.fixture(scope="module")
def quick(tmp_path_factory):
    """The demo's quick sweep, run once for the module: (JSON output, output folder)."""
    out = tmp_path_factory.mktemp("tune")
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        rc = main(["tune", DEMO, "--quick", *SPEC_ARGS, "--out", str(out), "--json"])
    assert rc == 0
    return json.loads(buf.getvalue()), out


def _fresh(tmp_path, configs):
    """Re-run ``configs`` on the demo with an empty cache (one round, local processes)."""
    runner = Runner(Cache(str(tmp_path / "fresh.jsonl")), progress=False)
    scenarios, _ = run_lengths([load_scenario(DEMO)], SPEC["max_settle_ms"], quick=True)
    try:
        tuner = Tuner(scenarios, runner, SPEC)
        return tuner.evaluate(configs, "check"), runner.new
    finally:
        runner.close()


def test_quick_recommendation_meets_the_spec_within_twice_the_float_ideal(quick):
    out, _ = quick
    rec = out["recommended"]
    assert rec["status"] == "ok" and rec["meets_spec"]
    assert rec["error_mv"] <= SPEC["max_error_mv"]
    assert rec["settle_ms"] is not None and rec["settle_ms"] <= SPEC["max_settle_ms"]
    assert rec["error_mv"] <= 2 * rec["ideal_error_mv"]
    assert rec["cost"] < out["start"]["cost"]
    assert out["evaluated_new"] > 0


def test_one_bit_less_on_the_most_sensitive_knob_breaks_the_spec(quick, tmp_path):
    out, _ = quick
    rec, knob = out["recommended"], out["most_sensitive_knob"]
    assert knob is not None
    settings = {k: rec[k] for k in KNOBS}
    lower = dict(settings, **{knob: settings[knob] - 1})
    (again, below), new = _fresh(tmp_path, [settings, lower])
    # Two model runs and their ideal (shared unless a filter shift differs), none from the cache.
    assert new == (4 if knob.endswith("_shift") else 3)
    assert again["meets_spec"] and again["error_mv"] == pytest.approx(rec["error_mv"], rel=1e-12)
    assert not below["meets_spec"]
    assert below["severity"] > 1.0


def test_every_evaluated_configuration_is_in_the_csv_and_the_plots_are_pngs(quick):
    out, folder = quick
    with open(out["csv"], newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == out["configurations"]
    assert {r["phase"] for r in rows} >= {"sweep", "polish"}
    for path in out["plots"]:
        with open(path, "rb") as f:
            assert f.read(8) == b"\x89PNG\r\n\x1a\n"
    simulated = [r for r in rows if r["status"] == "ok"]
    assert simulated and all(int(r["acc_peak"]) <= int(r["acc_bound"]) for r in simulated)
    assert all(r["within_bounds"] == "True" for r in simulated)
    assert not [p for p in os.listdir(folder) if p.startswith(".tmp-")]


def test_overflowing_accumulators_are_rejected_not_simulated(quick):
    out, _ = quick
    with open(out["csv"], newline="") as f:
        rows = list(csv.DictReader(f))
    generous = {"adc_bits": "16", "table_bits": "16"}
    narrow = [r for r in rows if r["acc_bits"] == "20" and all(r[k] == v for k, v in generous.items())]
    assert narrow and all(r["status"] == "rejected" and r["error_mv"] == "" for r in narrow)
    assert all("acc_bits" in r["reason"] for r in narrow)
    assert out["rejected"] >= len(narrow)


def test_range_analysis_rejects_a_block_whose_accumulators_can_overflow():
    cfg = AlgoConfig(adc_bits=16, table_bits=16, acc_bits=24)
    p = derive(cfg)
    assert not range_check.overflows(range_check.analyse(p))
    # The same demodulation shift with a narrower declared accumulator can overflow.
    bad = range_check.overflows(range_check.analyse(dataclasses.replace(p, acc_bits=p.acc_bits - 1)))
    assert {b.name for b in bad} == {"acc_vi", "acc_vq", "acc_ii", "acc_iq"}
    with pytest.raises(Exception, match="acc_bits"):
        derive(cfg.with_(acc_bits=20))


def test_tuner_reports_a_rejected_configuration_with_its_reason(tmp_path):
    (row,), new = _fresh(tmp_path, [{"adc_bits": 16, "table_bits": 16, "acc_bits": 20}])
    assert row["status"] == "rejected" and not row["meets_spec"]
    assert "too narrow" in row["reason"] and "error_mv" not in row
    assert new == 2     # the ideal ran; the model job was answered by the rejection, without a run


def test_second_run_resumes_from_the_cache_and_evaluates_nothing_new(tmp_path, capsys):
    argv = [DEMO, *SMALL, "--out", str(tmp_path / "a")]
    rc1, first = _tune(argv, capsys)
    rc2, second = _tune(argv, capsys)
    assert rc1 == rc2 == 0
    assert first["evaluated_new"] > 0 and second["evaluated_new"] == 0
    assert second["recommended"] == first["recommended"]


def test_an_interrupted_sweep_reruns_only_the_missing_jobs(tmp_path, capsys):
    argv = [DEMO, *SMALL, "--out", str(tmp_path / "a")]
    _, full = _tune(argv, capsys)
    cache = tmp_path / "a" / "tune-cache.jsonl"
    lines = cache.read_text().splitlines(keepends=True)
    keep = len(lines) // 2
    cache.write_text("".join(lines[:keep]) + lines[keep][: len(lines[keep]) // 2])   # torn last line
    _, resumed = _tune(argv, capsys)
    assert resumed["evaluated_new"] == full["evaluated_new"] - keep
    assert resumed["recommended"] == full["recommended"]


def test_dask_local_cluster_gives_the_same_recommendation_as_local_processes(tmp_path, capsys):
    distributed = require_module("distributed")
    _, local = _tune([DEMO, *SMALL, "--out", str(tmp_path / "local")], capsys)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        _, dask = _tune([DEMO, *SMALL, "--out", str(tmp_path / "dask"), "--scheduler",
                         cluster.scheduler_address], capsys)
    assert dask["evaluated_new"] == local["evaluated_new"] > 0
    assert dask["recommended"] == local["recommended"]


@pytest.mark.parametrize("argv, needle", [
    (["missing.toml"], "missing.toml"),
    ([DEMO, "--max-error-mv", "-5"], "--max-error-mv"),
    ([DEMO, "--max-settle-ms", "0"], "--max-settle-ms"),
    ([DEMO, "--max-ideal-ratio", "nan"], "--max-ideal-ratio"),
    ([DEMO, "--knobs", "adc_bits,gain"], "--knobs"),
    ([DEMO, "--duration-s", "-1"], "--duration-s"),
    ([DEMO, "--min-gain-margin", "0.5"], "--min-gain-margin"),
    ([DEMO, "--knobs", ""], "--knobs: no knob given"),
])
def test_bad_input_exits_2_with_one_line(argv, needle, tmp_path, capsys):
    assert main(["tune", *argv, "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and needle in err and err.startswith("linedrop tune: error:")
    assert not (tmp_path / "o").exists()


def test_a_cache_line_torn_by_an_interrupted_run_loses_no_later_record(tmp_path):
    path = tmp_path / "cache.jsonl"
    path.write_text('{"key": "a", "v": 1}\n{"key": "b", "v"')     # the run died mid-write
    cache = Cache(str(path))
    assert "a" in cache and "b" not in cache
    cache.put_many([{"key": "c", "v": 3}])
    again = Cache(str(path))
    assert again.get("c") == {"key": "c", "v": 3} and again.get("a") == {"key": "a", "v": 1}


class _RuleRunner:
    """Stands in for the closed loop: a configuration meets the spec iff dac_bits <= 14."""

    def __init__(self):
        self.new = self.cached = 0

    def run(self, jobs):
        out = []
        for job in jobs:
            s = dict(job.settings)
            err = 10.0 if job.backend == "ideal" or s["dac_bits"] <= 14 else 500.0
            out.append({"key": job.key, "status": "ok", "reason": "", "error_mv": err, "ripple_mv": 1.0,
                        "settle_ms": 50.0, "converge_ms": 20.0, "r_est_ohm": 2.0, "r_true_ohm": 2.0,
                        "toggle_share": 0.0, "off_target_lsb": 0.0, "limit_cycle": False,
                        "dac_lsb_mv": 1.0, "acc_peak": 1, "acc_bound": 2, "acc_headroom_bits": 8,
                        "isum_peak": 1, "within_bounds": True})
        return out


def test_a_failing_start_with_passing_variants_still_gives_a_recommendation(monkeypatch):
    """tune's summary, rows and recommendation agree: passing rows are never reported as none."""
    monkeypatch.setattr(Tuner, "_margin", lambda self, settings: 2.0)
    spec = {"max_error_mv": 100.0, "max_settle_ms": 300.0, "min_gain_margin": 1.25, "max_ideal_ratio": 2.0}
    tuner = Tuner([load_scenario(DEMO)], _RuleRunner(), spec, knobs=["dac_bits", "table_bits"])
    result = tuner.run()
    assert not result["start"]["meets_spec"]
    assert any(r["meets_spec"] for r in tuner.rows.values())
    rec = result["recommended"]
    assert rec is not None and rec["meets_spec"] and rec["dac_bits"] <= 14
    assert rec["cost"] == min(r["cost"] for r in tuner.rows.values() if r["meets_spec"])


MAST_FAULTS = os.path.join(os.path.dirname(DEMO), "mast_faults.toml")


def test_quick_runs_keep_the_load_step_and_the_settling_the_spec_allows_after_it():
    # Worked by hand: the demo steps its load at 0.5 s; a load settling within 300 ms has settled
    # by 0.8 s, and the error's tail (the last 20 % of the run) must start after that, so the
    # run lasts 0.8 / 0.8 = 1.0 s; with 100 ms allowed, 0.6 / 0.8 = 0.75 s.
    demo = load_scenario(DEMO)
    (sc,), notes = run_lengths([demo], 300.0, quick=True)
    assert sc.run.duration_s == pytest.approx(1.0) and notes == []
    assert sc.load.steps == demo.load.steps and last_event_s(sc) == 0.5
    (sc,), _ = run_lengths([demo], 100.0, quick=True)
    assert sc.run.duration_s == pytest.approx(0.75) and last_event_s(sc) == 0.5
    # Without --quick a run lasts at least DEFAULT_DURATION_S (0.8 s), longer where the checks need it.
    assert run_lengths([demo], 100.0)[0][0].run.duration_s == pytest.approx(0.8)
    assert run_lengths([demo], 300.0)[0][0].run.duration_s == pytest.approx(1.0)


def test_a_run_shorter_than_its_checks_need_is_said_in_the_summary():
    # The second fault of mast_faults.toml ends at 1.5 s: (1.5 + 0.3) / 0.8 = 2.25 s > its 2 s run.
    scs, notes = run_lengths([load_scenario(DEMO), load_scenario(MAST_FAULTS)], 300.0, quick=True)
    assert [sc.run.duration_s for sc in scs] == [pytest.approx(1.0), 2.0]
    assert len(notes) == 1 and notes[0].startswith("mast_faults.toml: runs last 2 s (its own run.duration_s)")
    (cut,), notes = run_lengths([load_scenario(DEMO)], 300.0, duration_s=0.3)
    assert cut.run.duration_s == 0.3 and "--duration-s" in notes[0] and "0.5 s" in notes[0]


def test_the_run_length_is_part_of_the_cache_key():
    from harness.tune.evaluate import Job
    demo = load_scenario(DEMO)
    short, full = (dataclasses.replace(demo, run=dataclasses.replace(demo.run, duration_s=d))
                   for d in (0.5, 1.0))
    assert Job(short, (), "model").key != Job(full, (), "model").key


def test_quick_json_names_each_scenario_run_length(quick):
    out, _ = quick
    assert out["duration_s"] == {"demo_mast.toml": pytest.approx(1.0)} and out["notes"] == []
    assert out["start"]["settle_ms"] is not None     # timed from the load step, which the run holds


def _again(quick, tmp_path, *extra):
    """The quick run once more in a copy of its folder (every job answered by the cache)."""
    out = tmp_path / "again"
    shutil.copytree(quick[1], out)
    return out, ["tune", DEMO, "--quick", *SPEC_ARGS, *extra, "--out", str(out)]


def test_summary_exit_status_and_csv_agree_when_nothing_meets_the_spec(quick, tmp_path, capsys):
    out, argv = _again(quick, tmp_path)
    argv[argv.index("--max-error-mv") + 1] = "0.001"
    assert main(argv) == 1
    text = capsys.readouterr().out
    assert "No configuration meets the spec" in text and "fails error" in text
    with open(out / "tune.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert rows and not [r for r in rows if r["meets_spec"] == "True"]


def test_summary_exit_status_and_csv_agree_on_the_recommendation(quick, tmp_path, capsys):
    out, argv = _again(quick, tmp_path)
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "No configuration" not in text and "Recommended" in text
    with open(out / "tune.csv", newline="") as f:
        passing = [r for r in csv.DictReader(f) if r["meets_spec"] == "True"]
    rec = quick[0]["recommended"]
    assert rec["config"] in {r["config"] for r in passing}
    assert f"Recommended (cost {rec['cost']})" in text


def test_ctrl_c_while_the_outputs_are_written_keeps_the_old_ones(quick, tmp_path, capsys, monkeypatch):
    import harness.tune.report as report
    out, argv = _again(quick, tmp_path)
    before = {n: (out / n).read_bytes() for n in os.listdir(out)}

    def interrupted(*args, **kw):
        raise KeyboardInterrupt
    monkeypatch.setattr(report, "plot_pareto", interrupted)      # after tune.csv and one plot
    assert main(argv) == 130
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("linedrop tune: interrupted; no output was replaced")
    assert "resume" in err
    assert {n: (out / n).read_bytes() for n in os.listdir(out)} == before
    assert sorted(os.listdir(tmp_path)) == ["again"]


def test_a_cache_cut_mid_line_is_repaired_and_said_so_once(quick, tmp_path, capsys):
    out, argv = _again(quick, tmp_path, "--json")
    cache = out / "tune-cache.jsonl"
    text = cache.read_text()
    cache.write_text(text + text.splitlines(keepends=True)[0][:25])      # a record cut mid-line
    assert main(argv) == 0
    captured = capsys.readouterr()
    json.loads(captured.out)
    assert captured.err.count("\n") == 1 and "dropped 1 line(s) cut short" in captured.err
    assert cache.read_text() == text            # the broken line is gone; the next record starts clean
    assert main(argv) == 0
    assert capsys.readouterr().err == ""


def test_the_summary_of_a_sweep_that_leaves_acc_bits_alone_says_what_it_knows(monkeypatch):
    from harness.tune.report import summary
    monkeypatch.setattr(Tuner, "_margin", lambda self, settings: 2.0)
    tuner = Tuner([load_scenario(DEMO)], _RuleRunner(), SPEC, knobs=["dac_bits"])
    result = tuner.run()
    counts = {"configs": len(tuner.rows), "rejected": 0, "new": 0, "cached": 0}
    paths = {"csv": "tune.csv", "knobs_png": "a.png", "pareto_png": "b.png"}
    text = summary(result, ["dac_bits"], SPEC, paths, counts, {"demo_mast.toml": 1.0})
    assert "Recommended (cost 8): dac_bits=8" in text and "bits spare);" in text
    assert "Runs: demo_mast.toml 1 s" in text
