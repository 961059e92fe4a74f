"""Ctrl-C or a failing write mid-run: exit 130 (or 1), one line saying what was left, and every
previous output exactly as it was.

Each test lets a command start writing, then raises from a function it calls while its new
output is half written (KeyboardInterrupt is what Python raises on Ctrl-C; 130 = 128 + SIGINT
is what a shell reports for a command killed by it, bash(1) "EXIT STATUS").
"""
import errno
import os
import types

import pytest

from harness.cli.main import main
from harness.scenario.read import DEMO

VEC_ARGS = ["--duration-s", "0.06", "--long-s", "0.06", "--seed", "3"]


def snapshot(folder):
    """Every file under ``folder`` (relative path -> bytes) and the entries beside it."""
    files = {}
    for root, _, names in os.walk(folder):
        for n in names:
            path = os.path.join(root, n)
            with open(path, "rb") as f:
                files[os.path.relpath(path, folder)] = f.read()
    return files, sorted(os.listdir(os.path.dirname(os.path.abspath(folder))))


def one_line(capsys):
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    return err


def after_calls(n, exc, real=None):
    """A stand-in that calls ``real`` ``n`` times, then raises ``exc``."""
    calls = []

    def fake(*args, **kw):
        calls.append(1)
        if len(calls) > n:
            raise exc
        return real(*args, **kw)
    return fake


@pytest.fixture
def short_scenario(tmp_path):
    """The demo cut to 0.1 s (its load step moved to 0.05 s), so a report takes a second."""
    text = open(DEMO, encoding="utf-8").read()
    text = text.replace("duration_s = 1.0", "duration_s = 0.1").replace("[[0.5, 2.2]]", "[[0.05, 2.2]]")
    assert "duration_s = 0.1" in text and "[[0.05, 2.2]]" in text
    path = tmp_path / "short.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.fixture
def vec_dir(tmp_path):
    out = tmp_path / "vectors"
    assert main(["vectors", "--out", str(out), *VEC_ARGS]) == 0
    return out


def test_ctrl_c_while_vectors_are_written_keeps_the_old_set(vec_dir, capsys, monkeypatch):
    import harness.port.vector_files as vf
    before = snapshot(vec_dir)
    capsys.readouterr()
    monkeypatch.setattr(vf, "csv_text", after_calls(3, KeyboardInterrupt, vf.csv_text))
    assert main(["vectors", "--out", str(vec_dir), "--duration-s", "0.07", "--long-s", "0.07"]) == 130
    err = one_line(capsys)
    assert err == "linedrop vectors: interrupted; no output was replaced\n"
    assert snapshot(vec_dir) == before


def test_sigterm_while_vectors_are_written_keeps_the_old_set(vec_dir, capsys, monkeypatch):
    import harness.port.vector_files as vf
    from harness.cli.main import Terminated
    before = snapshot(vec_dir)
    capsys.readouterr()
    monkeypatch.setattr(vf, "csv_text", after_calls(3, Terminated, vf.csv_text))
    assert main(["vectors", "--out", str(vec_dir), "--duration-s", "0.07", "--long-s", "0.07"]) == 143
    assert one_line(capsys) == "linedrop vectors: terminated; no output was replaced\n"
    assert snapshot(vec_dir) == before


def test_a_write_failing_mid_set_ends_in_one_line_and_keeps_the_old_set(vec_dir, capsys, monkeypatch):
    import harness.port.vector_files as vf
    before = snapshot(vec_dir)
    capsys.readouterr()
    full = OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(vec_dir / "demo_mast-params.h"))
    monkeypatch.setattr(vf, "params_header", after_calls(0, full))
    assert main(["vectors", "--out", str(vec_dir), "--duration-s", "0.07", "--long-s", "0.07"]) == 1
    err = one_line(capsys)
    assert err.startswith("linedrop vectors: error: ") and os.strerror(errno.ENOSPC) in err
    assert err.rstrip().endswith("no output was replaced")
    assert snapshot(vec_dir) == before


def test_ctrl_c_while_a_report_is_written_keeps_the_old_report(short_scenario, tmp_path, capsys, monkeypatch):
    import harness.loop.report as report
    out = tmp_path / "report"
    assert main(["simulate", short_scenario, "--out", str(out)]) == 0
    before = snapshot(out)
    capsys.readouterr()

    def half_written(folder, runs, metrics, **_):
        with open(os.path.join(folder, "report.md"), "w") as f:
            f.write("# half")
        raise KeyboardInterrupt
    monkeypatch.setattr(report, "write_report", half_written)
    assert main(["simulate", short_scenario, "--out", str(out)]) == 130
    assert one_line(capsys) == "linedrop simulate: interrupted; no output was replaced\n"
    assert snapshot(out) == before


def test_the_message_names_the_output_finished_before_the_interrupt(short_scenario, tmp_path, capsys,
                                                                     monkeypatch):
    import harness.cli.simulate as simulate
    out, wave = tmp_path / "report", tmp_path / "wave.csv"
    wave.write_text("old waveform\n")
    monkeypatch.setattr(simulate, "_write_waveform", after_calls(0, KeyboardInterrupt))
    assert main(["simulate", short_scenario, "--out", str(out), "--waveform", str(wave)]) == 130
    err = one_line(capsys)
    assert err == (f"linedrop simulate: interrupted; finished before it stopped: {out}; "
                   f"no other output was replaced\n")
    assert (out / "report.md").is_file() and wave.read_text() == "old waveform\n"


def test_ctrl_c_after_one_of_two_design_files_names_that_one(tmp_path, capsys, monkeypatch):
    import harness.cli.design as design
    algo, header = tmp_path / "algo.toml", tmp_path / "params.h"
    header.write_text("/* old header */\n")
    monkeypatch.setattr(design, "params_header", after_calls(0, KeyboardInterrupt))
    assert main(["design", DEMO, "--algorithm-out", str(algo), "--header", str(header)]) == 130
    assert str(algo) in one_line(capsys)
    assert header.read_text() == "/* old header */\n"
    assert sorted(os.listdir(tmp_path)) == ["algo.toml", "params.h"]


def test_ctrl_c_while_replay_writes_keeps_the_old_commands(tmp_path, capsys, monkeypatch):
    import harness.cli.replay as replay
    adc, out = tmp_path / "adc.csv", tmp_path / "cmd.csv"
    adc.write_text("adc_v,adc_i\n" + "2000,900\n" * 64)
    out.write_text("old commands\n")

    class Writer:
        def __init__(self, f):
            self.f, self.rows = f, 0

        def writerow(self, row):
            self.rows += 1
            if self.rows > 2:
                raise KeyboardInterrupt
            self.f.write(",".join(map(str, row)) + "\n")
    monkeypatch.setattr(replay, "csv", types.SimpleNamespace(writer=Writer))
    assert main(["replay", "--in", str(adc), "--out", str(out)]) == 130
    assert one_line(capsys) == "linedrop replay: interrupted; no output was replaced\n"
    assert out.read_text() == "old commands\n" and sorted(os.listdir(tmp_path)) == ["adc.csv", "cmd.csv"]
