"""Shared parts of the bad-input tables (tests/test_bad_inputs*.py).

A row is (id, files, argv, status, fragments). ``files`` maps a name in the test's folder to its
text (str), bytes or DIR (a folder); ``{d}`` in argv and fragments is that folder. Fragments are
looked for in everything the command printed; with status 2, stderr must be exactly one line,
stdout empty, and the folder as it was.
"""
import os
import subprocess
import sys

from harness.cli.main import main
from harness.scenario.read import DEMO

DIR = object()

#: The demo scenario cut to 0.1 s (load step at 0.05 s), so a run that goes ahead is short.
SHORT = (open(DEMO).read().replace("duration_s = 1.0", "duration_s = 0.1")
         .replace("steps = [[0.5, 2.2]]", "steps = [[0.05, 2.2]]"))
ADC_OK = "adc_v,adc_i\n" + "2000,900\n" * 64
ALGO = "[algorithm]\n"


def scen(old, new, base=SHORT):
    """SHORT with ``old`` (which must occur) replaced by ``new``."""
    assert old in base, old
    return base.replace(old, new, 1)


def add(text, base=SHORT):
    """SHORT with ``text`` appended (after its last table)."""
    return base + "\n" + text + "\n"


def _materialise(folder, files):
    for name, content in files.items():
        path = folder / name
        if content is DIR:
            path.mkdir()
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, newline="")


def check_row(capsys, tmp_path, files, argv, status, fragments):
    """Run one row in-process and check its status, its one line and its fragments."""
    _materialise(tmp_path, files)
    d = str(tmp_path)
    before = sorted(os.listdir(tmp_path))
    assert main([a.replace("{d}", d) for a in argv]) == status
    out, err = capsys.readouterr()
    if status == 2:
        assert len(err.strip().splitlines()) == 1 and out == "", err + out
        assert "Traceback" not in err
        assert sorted(os.listdir(tmp_path)) == before, "a refused run left files behind"
    for frag in fragments:
        assert frag.replace("{d}", d) in out + err, out + err


def cli(*argv, cwd, **kw):
    """The command in a process of its own (pipes, signals), stdout and stderr piped."""
    return subprocess.Popen([sys.executable, "-m", "harness.cli", *argv], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, cwd=cwd, **kw)
