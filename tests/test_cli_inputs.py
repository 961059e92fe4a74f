"""Bad output paths and inputs end in one line naming the option, file or row, and exit status 2.

Checked before any simulation runs, so a long run never fails at its end on a path it could
have refused at its start.
"""
import os
import subprocess
import sys

import pytest

from harness.cli.main import main
from harness.scenario.read import DEMO

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture
def adc_csv(tmp_path):
    path = tmp_path / "adc.csv"
    path.write_text("adc_v,adc_i\n" + "2000,900\n" * 64)
    return path


def _fails_with(capsys, argv, *words):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in err, err


def test_output_file_in_a_missing_folder_is_refused_before_the_run(capsys, adc_csv, tmp_path):
    out = tmp_path / "missing" / "cmd.csv"
    _fails_with(capsys, ["replay", "--in", str(adc_csv), "--out", str(out)], "--out", "does not exist")
    assert not out.parent.exists()


def test_output_file_naming_a_folder_is_refused(capsys, tmp_path):
    _fails_with(capsys, ["simulate", "--waveform", str(tmp_path)], "--waveform", "is a folder")
    _fails_with(capsys, ["design", DEMO, "--algorithm-out", str(tmp_path)], "--algorithm-out", "is a folder")
    _fails_with(capsys, ["design", DEMO, "--header", str(tmp_path)], "--header", "is a folder")


def test_output_folder_naming_an_existing_file_is_refused(capsys, tmp_path):
    f = tmp_path / "a_file"
    f.write_text("keep me")
    for cmd in (["simulate", "--out", str(f)], ["vectors", "--out", str(f)],
                ["bench", "--regulation", "--out", str(f)], ["simulate", "--out", str(f / "sub")]):
        _fails_with(capsys, cmd, "--out")
    assert f.read_text() == "keep me"


def test_scenario_that_is_not_utf8_names_the_file(capsys, tmp_path):
    bad = tmp_path / "latin1.toml"
    bad.write_bytes("[supply]\n# Ma\xdfe\ntarget_v = 24\n".encode("latin-1"))
    _fails_with(capsys, ["design", str(bad)], str(bad), "not UTF-8")


@pytest.mark.parametrize("rows, what", [("1,2\n3,4,5\n", "row 3: 3 fields"), ("1,2\n3\n", "row 3: 1 fields")])
def test_replay_csv_rows_must_match_the_header(capsys, tmp_path, rows, what):
    path = tmp_path / "adc.csv"
    path.write_text("adc_v,adc_i\n" + rows)
    _fails_with(capsys, ["replay", "--in", str(path), "--out", str(tmp_path / "o.csv")], what)
    assert not (tmp_path / "o.csv").exists()


def test_version_names_the_package_and_the_algorithm(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert out.startswith("linedrop ") and "algorithm" in out


def test_a_closed_pipe_ends_the_command_quietly_with_status_141(capsys, monkeypatch):
    def reader_went_away(args):
        raise BrokenPipeError(32, "Broken pipe")
    monkeypatch.setattr("harness.cli.design.run", reader_went_away)
    assert main(["design", DEMO]) == 141              # 128 + SIGPIPE, as a shell reports it
    assert capsys.readouterr().err == ""


def test_python_m_harness_cli_runs_the_command():
    res = subprocess.run([sys.executable, "-m", "harness.cli", "--version"], cwd=ROOT, capture_output=True,
                         text=True, timeout=120)
    assert res.returncode == 0 and res.stdout.startswith("linedrop ") and res.stderr == ""


def _short_demo(tmp_path):
    path = tmp_path / "demo_short.toml"
    path.write_text(open(DEMO).read().replace("duration_s = 1.0", "duration_s = 0.1")
                    .replace("steps = [[0.5, 2.2]]", "steps = [[0.05, 2.2]]"))
    return str(path)


def test_a_report_folder_holding_other_files_is_refused_before_the_run(capsys, tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep")
    _fails_with(capsys, ["simulate", _short_demo(tmp_path), "--out", str(out)], "notes.txt", "did not write")
    assert sorted(os.listdir(out)) == ["notes.txt"]


def test_an_interrupted_report_leaves_the_previous_one_exactly_as_it_was(capsys, tmp_path, monkeypatch):
    demo, out = _short_demo(tmp_path), tmp_path / "report"
    assert main(["simulate", demo, "--out", str(out)]) == 0
    before = {p: (out / p).read_bytes() for p in os.listdir(out)}
    import harness.loop.report as report

    def interrupted(*args, **kw):
        raise KeyboardInterrupt
    monkeypatch.setattr(report, "plot_comparison", interrupted)
    assert main(["simulate", demo, "--out", str(out)]) == 130
    assert {p: (out / p).read_bytes() for p in os.listdir(out)} == before
    assert sorted(os.listdir(tmp_path)) == ["demo_short.toml", "report"]      # no temporary folder left


def test_ctrl_c_while_the_subcommands_load_is_one_line_and_status_130(capsys, monkeypatch):
    def loading(*args):
        raise KeyboardInterrupt          # as if it came during `import numpy`
    monkeypatch.setattr(sys.modules["harness.cli.main"], "commands", loading)
    assert main(["design", DEMO]) == 130
    assert capsys.readouterr().err == "linedrop: interrupted; no output was replaced\n"


def test_the_command_module_loads_no_subcommand_before_main_runs():
    code = ("import sys, harness.cli.main; "
            "print(sorted(m for m in sys.modules if m.startswith(('numpy', 'harness.cli.'))))")
    res = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert res.stdout.strip() == "['harness.cli.main']", res.stdout + res.stderr


def test_a_usage_error_is_one_line_naming_the_option_and_the_range(capsys):
    assert main(["bench", "--instances", "lots"]) == 2
    assert capsys.readouterr().err == ("linedrop bench: error: argument --instances: must be an integer in "
                                       "[1, 4096], got 'lots' (see linedrop bench --help)\n")
