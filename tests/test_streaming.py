"""Long runs stream: chunked closed loop, accumulated metrics, decimated plots, the same outputs.

The references are outside the code under test: numpy's own reductions written out as the
figures are defined (harness/loop/metrics.py's definitions, README), exact rational
arithmetic (fractions.Fraction) for the tail means, and the in-memory run itself.
"""
import io
import json
import math
import os
import re
from dataclasses import replace
from fractions import Fraction

import numpy as np
import pytest

from algo.state import STATUS_NAMES
import harness.cli.simulate as sim
from harness.cli.main import main
from harness.loop import closed_loop
from harness.loop.closed_loop import simulate, stream
from harness.loop.decimate import Decimated
from harness.loop.metrics import SETTLE_BAND, TAIL, Accumulator, ExactSum, last_event_s, metrics
from harness.loop.spans import shading
from harness.scenario.read import DEMO, load_scenario
from test_simulate_cli import SHORT

#: test_simulate_cli's short plant with a current limit it hits after the load step, a cable
#: fault, and windows the algorithm rejects.
LIMITED = (SHORT.replace("max_v = 15.0", "max_v = 15.0\ncurrent_limit_a = 1.6").replace("duration_s = 0.3", "duration_s = 0.5")
           + '[[fault]]\nkind = "cable_open"\nat_s = 0.3\nuntil_s = 0.4\n')
#: Chunk size forced in the tests: prime, so chunks cut windows, buckets and spans anywhere.
CHUNK = 997


@pytest.fixture
def limited(tmp_path):
    path = tmp_path / "limited.toml"
    path.write_text(LIMITED)
    return path


def _chunks(run, size):
    """(k0, t_s, channels) of ``run`` cut into chunks of ``size`` samples."""
    for k0 in range(0, run.t_s.size, size):
        yield k0, run.t_s[k0:k0 + size], {k: v[k0:k0 + size] for k, v in run.channels.items()}


def _cli(args, capsys):
    assert main(args) == 0
    return capsys.readouterr().out


def test_streamed_cli_writes_the_same_metrics_report_waveform_and_json(limited, tmp_path, capsys, monkeypatch):
    whole = tmp_path / "whole"
    args = ["simulate", str(limited), "--json"]
    out_whole = _cli(args + ["--out", str(whole), "--waveform", str(tmp_path / "whole.csv")], capsys)
    chunks = []
    real_stream = sim.stream

    def counting(scenarios, sink, *a, **kw):
        return real_stream(scenarios, lambda k0, t, ch: (chunks.append(k0), sink(k0, t, ch)), *a, **kw)

    def no_whole_run(*a, **kw):
        raise AssertionError("a streamed run must not hold the whole run")

    monkeypatch.setattr(sim, "STREAM_SAMPLES", 1000)
    monkeypatch.setattr(sim, "STREAM_CHUNK", CHUNK)
    monkeypatch.setattr(sim, "stream", counting)
    monkeypatch.setattr(sim, "simulate", no_whole_run)
    streamed = tmp_path / "streamed"
    out_streamed = _cli(args + ["--out", str(streamed), "--waveform", str(tmp_path / "streamed.csv")], capsys)
    assert len(chunks) == 5 * math.ceil(16000 / CHUNK)     # every compensation, in chunks
    assert json.loads(out_streamed) == json.loads(out_whole)
    for name in ("metrics.json", "report.md"):
        assert (streamed / name).read_text() == (whole / name).read_text(), name
    assert (tmp_path / "streamed.csv").read_bytes() == (tmp_path / "whole.csv").read_bytes()
    report = (streamed / "report.md").read_text()
    assert "sat at its 1.6 A limit" in report and "low_swing" in report   # the shading's figures are there


def test_an_interrupted_streamed_run_leaves_no_waveform(limited, tmp_path, monkeypatch):
    monkeypatch.setattr(sim, "STREAM_SAMPLES", 1000)
    monkeypatch.setattr(sim, "STREAM_CHUNK", CHUNK)
    real = Decimated.__call__
    calls = []

    def interrupt(self, k0, t_s, ch):
        calls.append(k0)
        if len(calls) == 3:
            raise KeyboardInterrupt
        real(self, k0, t_s, ch)

    monkeypatch.setattr(Decimated, "__call__", interrupt)
    wave = tmp_path / "wave.csv"
    wave.write_text("old\n")
    assert main(["simulate", str(limited), "--json", "--waveform", str(wave)]) == 130
    assert wave.read_text() == "old\n"
    assert sorted(os.listdir(tmp_path)) == ["limited.toml", "wave.csv"]


@pytest.mark.parametrize("chunk", [1, 250, 4000])
def test_stream_hands_on_the_samples_simulate_records(limited, chunk):
    sc = load_scenario(str(limited))
    sc = replace(sc, run=replace(sc.run, duration_s=0.02))
    whole = simulate([sc])
    got = {}

    def keep(k0, t_s, ch):
        assert t_s.size <= chunk
        got.setdefault("t_s", []).append(t_s.copy())
        for k, v in ch.items():
            got.setdefault(k, []).append(v.copy())

    stream([sc], keep, chunk_samples=chunk)
    assert np.array_equal(np.concatenate(got.pop("t_s")), whole.t_s)
    assert set(got) == set(whole.channels)
    for k, parts in got.items():
        assert np.array_equal(np.concatenate(parts), whole.channels[k]), k


def _numpy_metrics(run):
    """The figures written with numpy's reductions, as metrics.py and the README define them."""
    sc, t = run.scenarios[0], run.t_s
    ch = {k: v[:, 0].astype(np.float64) for k, v in run.channels.items()}
    target = sc.supply.target_v
    tail = t >= t[-1] * (1 - TAIL)
    since = last_event_s(sc)
    out = (t > since) & (np.abs(ch["v_load_v"] - target) > SETTLE_BAND * target)
    last = np.flatnonzero(out)
    settle = 0.0 if not last.size else None if last[-1] == t.size - 1 else float(t[last[-1] + 1] - since)
    faults = []
    for f in sc.faults:
        before = np.flatnonzero(t < f.at_s)
        pre = float(ch["correction_v"][before[-1]]) if before.size else 0.0
        during = (t >= f.at_s) & (t < f.until_s)
        fallen = np.flatnonzero(during & (ch["correction_v"] <= 0.05 * pre))
        faults.append({"correction_before_v": pre,
                       "correction_at_end_v": float(ch["correction_v"][np.flatnonzero(during)[-1]]),
                       "fall_time_s": float(t[fallen[0]] - f.at_s) if fallen.size else None})
    w = ch["windows"].astype(np.int64)
    ends = np.flatnonzero(np.diff(w, prepend=0))
    return {"i_tail_mean": ch["i_supply_a"][tail].mean(), "v_tail_mean": ch["v_load_v"][tail].mean(),
            "max_load_v": ch["v_load_v"].max(), "min_load_v": ch["v_load_v"].min(),
            "max_supply_v": ch["v_supply_v"].max(), "ripple_load_v_pp": np.ptp(ch["v_load_v"][tail]),
            "settling_s": settle, "faults": faults, "r_estimate_ohm": ch["r_estimate_ohm"][-1],
            "windows": int(ends.size), "status_counts": np.bincount(ch["status"].astype(np.int64)[ends])}


@pytest.fixture(scope="module")
def fault_run():
    sc = load_scenario(os.path.join(os.path.dirname(DEMO), "mast_faults.toml"))
    return simulate([sc], "c")


@pytest.mark.parametrize("chunk", [997, 4096, 10 ** 9])
def test_accumulated_metrics_equal_numpy_on_the_whole_run(fault_run, chunk):
    run = fault_run
    acc = Accumulator(run.scenarios[0], run.t_s[-1])
    for _, t_s, ch in _chunks(run, chunk):
        acc.add(t_s, ch)
    m, ref = acc.result(run.r_cable_ohm[0]), _numpy_metrics(run)
    assert m == metrics(run)                    # chunking changes nothing, bit for bit
    for key in ("max_load_v", "min_load_v", "max_supply_v", "ripple_load_v_pp", "settling_s", "r_estimate_ohm"):
        assert m[key] == ref[key], key          # exact: no summation involved
    for got, want in zip(m["faults"], ref["faults"]):
        assert {k: got[k] for k in want} == want
    assert m["faults"][0]["fall_time_s"] is not None
    assert sum(m["window_outcomes"].values()) == ref["windows"]
    low_swing = {name: code for code, name in STATUS_NAMES.items()}["low_swing"]
    assert m["window_outcomes"]["low_swing"] == ref["status_counts"][low_swing] > 0
    # Tail means: exact sums rounded once against numpy's pairwise sum (1e-12 relative).
    target = run.scenarios[0].supply.target_v
    assert m["load_error_v"] == pytest.approx(target - ref["v_tail_mean"], rel=1e-12)
    assert m["uncompensated_drop_v"] == pytest.approx(run.r_cable_ohm[0] * ref["i_tail_mean"], rel=1e-12)


def test_exact_sum_is_the_rational_mean_in_any_chunks():
    rng = np.random.default_rng(11)
    x = np.concatenate([rng.normal(24.0, 1e-3, 4000), rng.normal(0.0, 1e-12, 100), [1e300, 5e-324, -1e300, -0.0]])
    rng.shuffle(x)
    exact = float(sum(Fraction(v) for v in x.tolist()) / x.size)
    for parts in (1, 3, 97, x.size):
        s = ExactSum()
        for part in np.array_split(x, parts):
            s.add(part)
        assert s.mean() == exact
    assert x.mean() != exact                     # plain float summation loses the small terms here
    bad = ExactSum()
    bad.add([1.0, math.inf])
    assert bad.mean() == math.inf


def test_decimated_copy_keeps_every_bucket_extreme_and_the_whole_run_shading(limited):
    run = simulate([load_scenario(str(limited))])
    n_t, fs = run.t_s.size, run.cfgs[0].sample_rate_hz
    dec = Decimated(run.scenarios[0], n_t, fs, buckets=300)
    for k0, t_s, ch in _chunks(run, CHUNK):
        dec(k0, t_s, ch)
    small = dec.run(run)
    assert small.shading[0] == shading(run)
    size = math.ceil(n_t / 300)
    for name, x in small.channels.items():
        full = run.channels[name][:, 0]
        pad = np.concatenate([full, np.full(-n_t % size, full[-1])]).reshape(-1, size)
        pairs = x[:, 0].reshape(-1, 2)
        assert np.array_equal(pairs.min(axis=1), pad.min(axis=1)), name
        assert np.array_equal(pairs.max(axis=1), pad.max(axis=1)), name
    assert small.t_s.size == 2 * math.ceil(n_t / size) and small.t_s[-1] == run.t_s[-1]


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_bar_shows_elapsed_remaining_and_rate_on_stderr_and_is_off_with_json(limited, monkeypatch):
    monkeypatch.setattr(sim, "PROGRESS_SAMPLES", 100)
    monkeypatch.setitem(closed_loop.PROGRESS, "mininterval", 0.0)
    tiny = limited.parent / "tiny.toml"       # 1,600 samples, the events moved inside the run
    tiny.write_text(LIMITED.replace("duration_s = 0.5", "duration_s = 0.05").replace("at_s = 0.3", "at_s = 0.01")
                    .replace("until_s = 0.4", "until_s = 0.02").replace("[[0.15, 1.5]]", "[[0.03, 1.5]]"))
    for json_flag, shown in ((["--json"], False), ([], True)):
        err = _Terminal()
        monkeypatch.setattr("sys.stderr", err)
        assert main(["simulate", str(tiny)] + json_flag) == 0
        text = err.getvalue()
        assert bool(text) == shown, text[-300:]
        if shown:   # tqdm with a known total: "done/total [elapsed<remaining, rate]"
            bar = r"simulate \(linedrop\): +\d+%\|[^|]*\| [\d.]+k?/1\.60k \[\d\d:\d\d<\d\d:\d\d, +[\d.]+k?sample/s\]"
            assert re.search(bar, text), text[-300:]


def test_bench_memory_prints_streamed_and_whole_peaks_side_by_side(capsys):
    assert main(["bench", "--memory", "--durations", "0.02", "0.04", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["samples"] for r in rows] == [640, 1280]
    assert all(r["streamed_peak_mib"] >= r["streamed_start_mib"] > 0 for r in rows)
    assert all(r["whole_peak_mib"] >= r["whole_start_mib"] > 0 for r in rows)


def test_bench_memory_refuses_a_duration_out_of_range(capsys):
    assert main(["bench", "--memory", "--durations", "5000"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--durations 5000" in err[0] and "(0, 3600]" in err[0]
