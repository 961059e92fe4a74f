"""Prove with Frama-C's value analysis (Eva) that the C step has no runtime error for any ADC input
and keeps the state inside algo.ranges' bounds, for one params block.

The harness (harness.port.prove_harness) draws the state inside the invariant and the codes
anywhere in uint16, calls each entry once and asserts the invariant after the call. Eva runs
with the precision the harness needs (a split on every window count, kept through the calls;
return values split so a status and the value it guards stay together; the equality domain).
None of them drops a check: Eva's default alarms all stay on, an out-of-range conversion to a
signed type is added (EVA_OPTIONS), and the result is "proved"
only if every property of the sources and the harness is valid and every harness assertion was
reached.
"""
import csv
import os
import re
import shutil
import subprocess
import tempfile
import time
from collections import namedtuple

from harness.errors import InputError
from harness.port import prove_harness as ph

C_REF = os.path.normpath(os.path.join(os.path.dirname(__file__), "..", "..", "c_ref"))

#: Data models: the firmware's 32-bit one (int and long 32 bits, as on Cortex-M) and a 64-bit
#: host's (long 64 bits).
MACHDEPS = ("x86_32", "x86_64")

#: Eva's precision settings (the split limit is raised to the window's sample count per run),
#: and one check added to its defaults: a conversion to a signed type that does not hold the value
#: (implementation-defined in C99 6.3.1.3p3, wrapped by gcc) is an alarm too.
EVA_OPTIONS = ("-eva-precision", "1", "-eva-interprocedural-splits", "-eva-split-return", "auto",
               "-eva-domains", "equality", "-warn-signed-downcast")

#: Statuses that mean a property holds (the libc specifications are taken as given).
_HOLDS = ("Valid", "Considered valid")

_LABEL = re.compile(r"assert (\w+):")

Alarm = namedtuple("Alarm", "kind where expression status function")
Proof = namedtuple("Proof", "alarms seconds harness_asserts")


class ToolMissing(InputError):
    """frama-c is not installed or does not run: exit status 2 with what to install."""


def frama_c():
    """Path of the frama-c executable, or raise ToolMissing."""
    exe = shutil.which("frama-c")
    if not exe:
        raise ToolMissing("frama-c not found on PATH (Debian package frama-c-base)")
    return exe


def command(p, workdir, c_dir=C_REF, machdep=MACHDEPS[0]):
    """The frama-c command line analysing ``p``'s harness in ``workdir`` (written there first)."""
    for name, text in ((ph.HARNESS_NAME, ph.harness_source(p)), (ph.PARAMS_NAME, ph.params_source(p))):
        with open(os.path.join(workdir, name), "w") as f:
            f.write(text)
    sources = [os.path.join(c_dir, name) for name in ph.SOURCES]
    for src in sources + [os.path.join(c_dir, "linedrop.h")]:
        if not os.path.isfile(src):
            raise InputError(f"{src}: no such file (the C sources to analyse)")
    nice = ["nice", "-n", "10"] if shutil.which("nice") else []
    return nice + [frama_c(), "-machdep", machdep, f"-cpp-extra-args=-I{c_dir} -I{workdir}",
                   *sources, os.path.join(workdir, ph.HARNESS_NAME), "-main", "ld_prove_main", "-eva", *EVA_OPTIONS,
                   "-eva-split-limit", str(p.window + 1), "-then", "-report-csv", os.path.join(workdir, "report.csv")]


def _where(row, workdir):
    directory, name, line = row["directory"], row["file"], row["line"]
    if os.path.realpath(os.path.join(directory, name)) == os.path.realpath(
            os.path.join(workdir, ph.HARNESS_NAME)):
        return f"{ph.HARNESS_NAME}:{line}"          # the harness is gone when the run ends
    path = os.path.join(directory, name)
    if not os.path.relpath(path).startswith(".."):
        path = os.path.relpath(path)
    return f"{path}:{line}"


def _labels(workdir):
    """``{line: label}`` of the harness's named assertions, so an alarm says which bound failed."""
    with open(os.path.join(workdir, ph.HARNESS_NAME)) as f:
        return {n: m.group(1) for n, text in enumerate(f, 1) for m in [_LABEL.search(text)] if m}


def parse_report(path, workdir, expected_asserts):
    """(alarms, harness assertions proved) from Eva's property CSV: every property not valid is an
    alarm, and so is a shortfall of valid harness assertions (some were never reached)."""
    alarms, proved, labels = [], 0, _labels(workdir)
    with open(path, newline="") as f:
        for row in csv.DictReader(f, delimiter="\t"):
            if row["directory"].startswith("FRAMAC_SHARE") and row["status"] in _HOLDS:
                continue
            where = _where(row, workdir)
            label = labels.get(int(row["line"])) if where.startswith(ph.HARNESS_NAME + ":") else None
            if row["status"] == "Valid":
                proved += label is not None and row["property kind"] == "user assertion"
            elif row["status"] != "Considered valid":
                expression = f"{label}: {row['property']}" if label else row["property"]
                alarms.append(Alarm(row["property kind"], where, expression, row["status"].lower(),
                                    row["function"]))
    if proved < expected_asserts and not any(a.where.startswith(ph.HARNESS_NAME) for a in alarms):
        alarms.append(Alarm("unreached", ph.HARNESS_NAME, f"{expected_asserts - proved} of "
                            f"{expected_asserts} harness assertions never reached (a call does not return)",
                            "dead", "ld_prove_main"))
    return alarms, proved


def prove(p, c_dir=C_REF, machdep=MACHDEPS[0], timeout_s=1800):
    """Run Eva on params block ``p`` (algo.params.Params) over the C sources in ``c_dir``.

    Returns
    -------
    Proof
        ``alarms`` (list of Alarm: kind, "file:line", the expression, Eva's status, the function
        it is in; empty when proved), ``seconds`` (wall time of the analysis) and ``harness_asserts`` (assertions proved).
    """
    expected = len(ph.ENTRIES) * len(ph.assertion_names(p))
    with tempfile.TemporaryDirectory(prefix="linedrop-prove-") as work:
        cmd = command(p, work, os.path.abspath(c_dir), machdep)
        start = time.monotonic()
        try:
            run = subprocess.run(cmd, cwd=work, capture_output=True, text=True, timeout=timeout_s)
        except OSError as exc:
            raise ToolMissing(f"frama-c does not run: {exc}") from exc
        seconds = time.monotonic() - start
        report = os.path.join(work, "report.csv")
        if run.returncode != 0 or not os.path.isfile(report):
            tail = (run.stderr.strip() or run.stdout.strip()).splitlines()[-3:]
            raise InputError(f"frama-c failed on the sources in {c_dir} (exit {run.returncode}): "
                             + " / ".join(tail))
        alarms, proved = parse_report(report, work, expected)
    return Proof(alarms, seconds, proved)


def scenario_params(path):
    """The params block a run of scenario ``path`` uses (its [algorithm] table, the rest from
    design's recommendation, as ``linedrop simulate`` runs it); ``None`` for the default config."""
    from algo.config import AlgoConfig
    from algo.params import derive
    if path is None:
        return derive(AlgoConfig())
    from harness.design.settings import with_settings
    from harness.scenario.algo_setup import algo_config
    from harness.scenario.read import load_scenario
    return derive(algo_config(with_settings(load_scenario(path))[0]))
