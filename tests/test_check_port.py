"""linedrop check-port: c_ref passes, a broken copy fails at its first wrong sample, logs, bad input.

The first divergence of a broken copy is found independently of the checker:
the copy is built with the text-vector replay driver (plain gcc, no cffi)
and its output compared with the vector files row by row.
"""
import glob
import os
import re
import shutil

import numpy as np
import pytest

from c_ref import textvec
from support.cbuild import C_REF, DRIVER, STRICT, gcc, run_driver
from harness.cli.main import main
from support.vector_helpers import read_note, write_vectors
from harness.port.check import LABELS
from harness.port.vector_files import COLUMNS, params_from_note, parse_vector_csv
from support.tools import require_tool

ARGS = ["--duration-s", "0.1", "--long-s", "0.15", "--seed", "5"]
OUTPUT_FIELDS = textvec.OUTPUT_FIELDS   # command and the model's state fields

# One-line changes a port could plausibly get wrong: (file, original text, broken text).
ROUNDING = {
    "demod_half_dropped": ("step.c", "s->acc_vq += (v * cs + half) >> ds;", "s->acc_vq += (v * cs) >> ds;"),
    "safe_round_truncates": ("fixed.h", "(x >> s) + ((x >> (s - 1u)) & 1)", "(x >> s) + ((x >> (s - 1u)) & 0)"),
}
CONSTANT = {
    "norm_bits": ("linedrop.h", "#define LD_NORM_BITS 14u ", "#define LD_NORM_BITS 13u "),
    "bit_length_step": ("fixed.h", "{ r >>= 4; n += 4u; }", "{ r >>= 4; n += 3u; }"),
}


@pytest.fixture(scope="module")
def vec_dir(tmp_path_factory):
    return write_vectors(tmp_path_factory, ARGS)


def _copy_c_ref(dest):
    """The files a firmware engineer copies: c_ref's *.c and *.h, without batch.c."""
    dest.mkdir()
    for path in glob.glob(os.path.join(C_REF, "*.[ch]")):
        if os.path.basename(path) != "batch.c":
            shutil.copy(path, dest)
    return dest


def _break(port, change):
    name, old, new = change
    text = (port / name).read_text()
    assert text.count(old) == 1, f"{old!r} not found once in {name}"
    (port / name).write_text(text.replace(old, new))


def _first_divergence_by_driver(port, vec_dir, tmp_path):
    """(file, index, differing columns) of the first row where the replay driver built from ``port``
    differs from the vectors."""
    exe = str(tmp_path / "replay")
    res = gcc([*STRICT, "-O2", "-I", str(port), DRIVER, str(port / "step.c"), str(port / "estimator.c"),
               str(port / "fixed.c"),
               "-o", exe])
    assert res.returncode == 0, res.stderr
    note = read_note(vec_dir)
    params = params_from_note(note, "note")
    for entry in note["vectors"]:
        rows = parse_vector_csv(entry["file"], (vec_dir / entry["file"]).read_text())
        out = run_driver(exe, textvec.dumps([(params, textvec.samples(rows[:, 0], rows[:, 1]))]))
        got = np.array([[cmd] + [st[f] for f in OUTPUT_FIELDS[1:]]
                        for cmd, st in textvec.parse_output(out.stdout)])
        bad = np.flatnonzero((got != rows[:, 2:]).any(axis=1))
        if bad.size:
            k = int(bad[0])
            return entry["file"], k, [LABELS[c] for c in np.flatnonzero(got[k] != rows[k, 2:])]
    return None


def _total_samples(vec_dir):
    return sum(e["samples"] for e in read_note(vec_dir)["vectors"])


def test_c_ref_copy_is_bit_exact_on_every_sample(vec_dir, tmp_path, capsys):
    require_tool("gcc")
    port = _copy_c_ref(tmp_path / "port")
    assert main(["check-port", str(vec_dir), "--c-dir", str(port)]) == 0
    assert f"bit-exact on {_total_samples(vec_dir)} samples" in capsys.readouterr().out


@pytest.mark.parametrize("change", list(ROUNDING.values()) + list(CONSTANT.values()),
                         ids=list(ROUNDING) + list(CONSTANT))
def test_one_line_change_is_reported_at_its_true_first_wrong_sample(vec_dir, tmp_path, capsys, change):
    require_tool("gcc")
    port = _copy_c_ref(tmp_path / "port")
    _break(port, change)
    truth = _first_divergence_by_driver(port, vec_dir, tmp_path)
    assert truth is not None, "the change does not show in the vectors"
    assert main(["check-port", str(vec_dir), "--c-dir", str(port)]) == 1
    out = capsys.readouterr().out
    assert f"first divergence in {truth[0]} at row {truth[1] + 2} " in out   # header: row 1
    rows = parse_vector_csv(truth[0], (vec_dir / truth[0]).read_text())
    assert f"inputs: adc_v={rows[truth[1], 0]} adc_i={rows[truth[1], 1]}" in out
    assert f"differs: {', '.join(truth[2])}\n" in out
    assert truth[1] == 0 or "samples before it" in out
    listed = re.findall(r"^  [* ] (\S+(?: \(\w+\))?)\s+-?\d+\s+-?\d+", out, flags=re.M)
    assert len(listed) == len(COLUMNS) - 2


def test_log_made_by_the_model_passes_and_a_tampered_one_fails_at_the_edit(vec_dir, tmp_path, capsys):
    log = tmp_path / "device.csv"
    lines = (vec_dir / "demo_mast-load_step.csv").read_text().splitlines()
    log.write_text("\n".join(lines) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 0
    assert f"bit-exact on {len(lines) - 1} samples" in capsys.readouterr().out
    row = 1234
    cells = lines[row + 1].split(",")
    col = COLUMNS.index("r_est")
    cells[col] = str(int(cells[col]) + 1)
    lines[row + 1] = ",".join(cells)
    log.write_text("\n".join(lines) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 1
    out = capsys.readouterr().out
    assert f"at row {row + 2} " in out and re.search(r"^  \* r_est ", out, flags=re.M)


def test_log_params_can_come_from_an_algorithm_config(vec_dir, tmp_path, capsys):
    cfg = read_note(vec_dir)["algo_config"]
    toml = tmp_path / "algo.toml"
    toml.write_text("[algorithm]\n" + "".join(f"{k} = {v!r}\n" for k, v in cfg.items()))
    assert main(["check-port", "--log", str(vec_dir / "demo_mast-normal.csv"), "--config", str(toml)]) == 0
    toml.write_text("[algorithm]\n" + "".join(f"{k} = {v!r}\n" for k, v in cfg.items() if k != "v_full_scale_v"))
    assert main(["check-port", "--log", str(vec_dir / "demo_mast-normal.csv"), "--config", str(toml)]) == 1


def _missing_header(port):
    (port / "linedrop.h").unlink()


def _syntax_error(port):
    _break(port, ("step.c", "s->isum += i;", "s->isum += i"))


def _sign_warning(port):
    _break(port, ("step.c", "int32_t half = (int32_t)((1UL << ds) >> 1);", "int32_t half = (1UL << ds) >> 1;"))


def _wrong_layout(port):
    _break(port, ("linedrop.h", "    int32_t psum_prev; ", "    int16_t psum_prev; "))


def _missing_function(port):
    text = (port / "step.c").read_text()
    start = text.index("void ld_reset(const")
    (port / "step.c").write_text(text[:start] + text[text.index("\n}\n", start) + 3:])


@pytest.mark.parametrize("damage, message", [
    (_missing_header, "no linedrop.h"),
    (_syntax_error, "step.c: does not compile under -std=c99"),
    (_sign_warning, "-Werror"),
    (_wrong_layout, "ld_state_t.psum_prev is int16_t; the model's is int32_t"),
    (_missing_function, "undefined symbol: ld_reset"),
])
def test_broken_port_exits_2_with_a_clear_first_line(vec_dir, tmp_path, capsys, damage, message):
    require_tool("gcc")
    port = _copy_c_ref(tmp_path / "port")
    damage(port)
    assert main(["check-port", str(vec_dir), "--c-dir", str(port)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].startswith("linedrop check-port: error: ") and message in err[0], err
    compile_error = damage in (_syntax_error, _sign_warning)
    assert len(err) == 1 or (compile_error and "error" in err[0] and len(err) <= 8), err


@pytest.mark.parametrize("args, message", [
    (["{vec}"], "give either --c-dir"),
    (["{tmp}/none", "--c-dir", "{tmp}"], "no such directory of vectors"),
    (["{tmp}", "--c-dir", "{tmp}"], "no vector set"),
    (["{vec}", "--log", "{tmp}/none.csv"], "cannot read log"),
    (["{vec}", "--log", "{vec}/demo_mast-params.h"], "row 1: unknown column"),
    (["--log", "{vec}/demo_mast-normal.csv"], "give VECTORS_DIR or --config"),
])
def test_bad_arguments_exit_2_with_one_line(vec_dir, tmp_path, capsys, args, message):
    argv = [a.format(vec=vec_dir, tmp=tmp_path) for a in args]
    assert main(["check-port", *argv]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and message in err, err


def test_tampered_vector_file_is_refused_before_building(vec_dir, tmp_path, capsys):
    copy = tmp_path / "vectors"
    shutil.copytree(vec_dir, copy)
    path = copy / "demo_mast-normal.csv"
    path.write_text(path.read_text().replace("\n2", "\n3", 1))
    assert main(["check-port", str(copy), "--c-dir", str(tmp_path)]) == 2
    assert "differ from the hash" in capsys.readouterr().err


def _columns(lines, names):
    """The vector CSV ``lines`` cut down to the columns ``names`` (in that order)."""
    idx = [COLUMNS.index(n) for n in names]
    return [",".join(line.split(",")[i] for i in idx) for line in lines]


def test_minimal_log_is_checked_on_its_cmd_column_and_reports_the_row_an_editor_shows(vec_dir, tmp_path, capsys):
    lines = (vec_dir / "demo_mast-load_step.csv").read_text().splitlines()
    log = tmp_path / "device.csv"
    minimal = _columns(lines, ["adc_v", "adc_i", "cmd"])
    log.write_text("\n".join(minimal) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 0
    assert f"bit-exact on {len(lines) - 1} samples (1 file; column cmd after" in capsys.readouterr().out
    # A changed command in the file's 1001st line (row 1001, header = row 1) is found there.
    cells = minimal[1000].split(",")
    minimal[1000] = ",".join(cells[:2] + [str(int(cells[2]) + 1)])
    log.write_text("\n".join(minimal) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 1
    out = capsys.readouterr().out
    assert "at row 1001 (" in out and re.search(r"^  \* cmd ", out, flags=re.M)
    assert not re.search(r"^  [* ] r_est ", out, flags=re.M), "a column the log lacks was shown as compared"


def test_log_columns_in_any_order_are_all_compared(vec_dir, tmp_path, capsys):
    lines = (vec_dir / "demo_mast-normal.csv").read_text().splitlines()
    names = ["r_est", "adc_i", "cmd", "adc_v", "status"]
    cut = _columns(lines, names)
    log = tmp_path / "device.csv"
    log.write_text("\n".join(cut) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 0
    capsys.readouterr()
    cells = cut[300].split(",")
    cells[4] = str(int(cells[4]) ^ 1)          # the status column, last in this file
    cut[300] = ",".join(cells)
    log.write_text("\n".join(cut) + "\n")
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 1
    out = capsys.readouterr().out
    assert "at row 301 (" in out and "differs: status\n" in out


@pytest.mark.parametrize("text, message", [
    ("adc_v,adc_i,cmd,volts\n1,2,3,4\n", "row 1: unknown column 'volts'; allowed: adc_v,adc_i,command,acc_vi,"),
    ("adc_v,adc_i\n1,2\n", "row 1: missing column 'cmd'; a log holds at least adc_v,adc_i,cmd"),
    ("adc_v,adc_i,cmd,cmd\n1,2,3,3\n", "row 1: column 'cmd' given twice"),
    ("adc_v,adc_i,cmd\n1,2,3\n4,5\n", "row 3: 2 fields, the header has 3"),
    ("adc_v,adc_i,cmd\n1,2,3\n\n4,5,6,7\n", "row 4: 4 fields, the header has 3"),
    ("adc_v,adc_i,cmd\n1,2,3\n4,x,6\n", "row 3, column adc_i: 'x' is not an integer"),
    ("adc_v,adc_i,cmd\n1,2,3\n70000,5,6\n", "row 3: ADC codes must be in [0, 65535]"),
])
def test_bad_log_is_one_line_naming_file_and_row(vec_dir, tmp_path, capsys, text, message):
    log = tmp_path / "device.csv"
    log.write_text(text)
    assert main(["check-port", str(vec_dir), "--log", str(log)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and f"{log}: {message}" in err, err
