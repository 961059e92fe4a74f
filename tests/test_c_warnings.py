"""Every C source of the reference compiles warning-free under the strict flags at -O0, -O2 and -Os.

Warnings are errors (``-Werror``), so a new implicit conversion, sign change
or pedantic C99 violation fails here before it reaches a firmware build.
The headers are also compiled alone, to prove they are self-contained.
"""
import pytest

from support.cbuild import STRICT, c_sources, gcc
from support.tools import require_tool

OPT_LEVELS = ["-O0", "-O2", "-Os"]
HEADERS = ["linedrop.h", "fixed.h"]


def test_the_reference_sources_are_all_found():
    assert {"step.c", "estimator.c", "fixed.c", "batch.c", "tools/replay_main.c"} <= set(c_sources())


@pytest.mark.parametrize("opt", OPT_LEVELS)
@pytest.mark.parametrize("source", c_sources())
def test_c_source_compiles_without_any_warning_under_strict_flags(tmp_path, source, opt):
    require_tool("gcc")
    res = gcc([*STRICT, opt, "-I.", "-c", source, "-o", str(tmp_path / "out.o")])
    assert res.returncode == 0 and res.stderr == "", res.stderr


@pytest.mark.parametrize("opt", OPT_LEVELS)
@pytest.mark.parametrize("header", HEADERS)
def test_header_compiles_alone_without_any_warning_under_strict_flags(tmp_path, header, opt):
    require_tool("gcc")
    unit = tmp_path / "unit.c"
    unit.write_text(f'#include "{header}"\n#include "{header}"\nint ld_unit_marker;\n')
    res = gcc([*STRICT, opt, "-I.", "-c", str(unit), "-o", str(tmp_path / "out.o")])
    assert res.returncode == 0 and res.stderr == "", res.stderr


@pytest.mark.parametrize("source", c_sources())
def test_c_source_compiles_without_any_warning_for_a_32_bit_target(tmp_path, source):
    require_tool("gcc-m32")
    res = gcc([*STRICT, "-O2", "-m32", "-I.", "-c", source, "-o", str(tmp_path / "out.o")])
    assert res.returncode == 0 and res.stderr == "", res.stderr
