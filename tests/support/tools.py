"""Finding system tools for tests: skip when missing, or fail when LINEDROP_REQUIRE_TOOLS=1."""
import functools
import importlib
import os
import shutil
import subprocess
import tempfile

import pytest

_PROBE = "int main(void) { return 0; }\n"


def tools_required():
    """True when missing tools must fail the run instead of skipping tests."""
    return os.environ.get("LINEDROP_REQUIRE_TOOLS", "") == "1"


@functools.lru_cache(maxsize=None)
def _probe(name):
    """Return ``None`` if tool ``name`` works here, else a reason string."""
    if name == "ngspice":
        return _probe_ngspice()
    if name == "frama-c":
        return _probe_frama_c()
    gcc = shutil.which("gcc")
    if name == "gcc":
        return None if gcc else "gcc not found on PATH"
    if name == "gcov":
        return None if gcc and shutil.which("gcov") else "gcc or gcov not found on PATH (Debian package gcc)"
    flags = {"gcc-m32": ["-m32"],
             "gcc-sanitizers": ["-fsanitize=undefined,address", "-fno-sanitize-recover=all"]}
    if name not in flags:
        raise ValueError(f"unknown tool {name!r}")
    if not gcc:
        return "gcc not found on PATH"
    with tempfile.TemporaryDirectory() as tmp:
        src, exe = os.path.join(tmp, "probe.c"), os.path.join(tmp, "probe")
        with open(src, "w") as f:
            f.write(_PROBE)
        build = subprocess.run([gcc, *flags[name], src, "-o", exe], capture_output=True, text=True)
        if build.returncode != 0:
            hint = " (install gcc-multilib)" if name == "gcc-m32" else ""
            return f"{name} cannot build a program{hint}: {build.stderr.strip()[:200]}"
        run = subprocess.run([exe], capture_output=True, text=True)
        if run.returncode != 0:
            return f"{name} builds but the program does not run: {run.stderr.strip()[:200]}"
    return None


def _probe_ngspice():
    """``None`` if ``ngspice -b`` runs a one-resistor netlist, else the reason."""
    exe = shutil.which("ngspice")
    if not exe:
        return "ngspice not found on PATH (Debian package ngspice)"
    with tempfile.TemporaryDirectory() as tmp:
        net = os.path.join(tmp, "probe.cir")
        with open(net, "w") as f:
            f.write("probe\nV1 1 0 1\nR1 1 0 1\n.op\n.end\n")
        run = subprocess.run([exe, "-b", net], capture_output=True, text=True, timeout=60)
        if run.returncode != 0:
            return f"ngspice -b fails: {(run.stderr or run.stdout).strip()[:200]}"
    return None


def _probe_frama_c():
    """``None`` if ``frama-c -version`` runs, else the reason."""
    exe = shutil.which("frama-c")
    if not exe:
        return "frama-c not found on PATH (Debian package frama-c-base)"
    run = subprocess.run([exe, "-version"], capture_output=True, text=True, timeout=60)
    if run.returncode != 0:
        return f"frama-c -version fails: {(run.stderr or run.stdout).strip()[:200]}"
    return None


def require_tool(name):
    """Skip the calling test if ``name`` is unavailable; fail instead under LINEDROP_REQUIRE_TOOLS=1.

    Parameters
    ----------
    name : str
        ``"gcc"``, ``"gcov"`` (gcc with its coverage tool), ``"gcc-m32"`` (32-bit multilib),
        ``"gcc-sanitizers"`` (UBSan + ASan), ``"ngspice"`` (batch-mode circuit simulator) or
        ``"frama-c"`` (its value analysis, Eva).
    """
    skip_or_fail(_probe(name))


def require_module(name):
    """Import and return module ``name``; skip the calling test if it is missing, or fail under
    LINEDROP_REQUIRE_TOOLS=1 (a per-test skip: never a module-level importorskip)."""
    try:
        return importlib.import_module(name)
    except ImportError as exc:
        skip_or_fail(f"Python module {name} not importable ({exc}); pip install '.[test]'")


def skip_or_fail(reason):
    """Nothing if ``reason`` is None; else skip with it, or fail under LINEDROP_REQUIRE_TOOLS=1."""
    if reason is None:
        return
    if tools_required():
        pytest.fail(f"LINEDROP_REQUIRE_TOOLS=1 but {reason}")
    pytest.skip(reason)
