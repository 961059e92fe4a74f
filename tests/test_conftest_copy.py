"""``python -m pytest`` in an unbuilt source tree tests the installed, built copy (tests/conftest.py).

Each case lays out a miniature project in a temporary folder: a source tree holding this
conftest and a c_ref package, and a stand-in for site-packages holding a c_ref package with
the compiled extension's file name. A test inside the miniature project reports which c_ref
``python -m pytest`` (working directory first on sys.path, as Python documents for ``-m``)
imported.
"""
import importlib.machinery
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

CONFTEST = Path(__file__).with_name("conftest.py")
EXT = "_linedrop_cffi" + importlib.machinery.EXTENSION_SUFFIXES[0]
PROBE = "import c_ref\n\ndef test_where():\n    print('C_REF_FROM', c_ref.WHERE)\n"


def _package(folder, where, built):
    (folder / "c_ref").mkdir(parents=True)
    (folder / "c_ref" / "__init__.py").write_text(f"WHERE = {where!r}\n")
    if built:
        (folder / "c_ref" / EXT).write_bytes(b"")


def _imported_by_python_m_pytest(tmp_path, source_built):
    src, site = tmp_path / "src", tmp_path / "site"
    _package(src, "source", source_built)
    _package(site, "installed", True)
    (src / "tests").mkdir()
    shutil.copy(CONFTEST, src / "tests" / "conftest.py")
    (src / "tests" / "test_probe.py").write_text(PROBE)
    env = {**os.environ, "PYTHONPATH": str(site)}
    res = subprocess.run([sys.executable, "-m", "pytest", "-q", "-s", "-p", "no:cacheprovider", "tests"],
                         cwd=src, env=env, capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stdout + res.stderr
    return res.stdout.split("C_REF_FROM ", 1)[1].split()[0]


@pytest.mark.parametrize("source_built, expected", [(False, "installed"), (True, "source")],
                         ids=["plain-install", "editable-install"])
def test_python_m_pytest_imports_the_copy_that_holds_the_extension(tmp_path, source_built, expected):
    assert _imported_by_python_m_pytest(tmp_path, source_built) == expected
