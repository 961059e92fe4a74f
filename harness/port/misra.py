"""MISRA C:2012 check of the firmware C: cppcheck's MISRA addon against the recorded deviations.

Runs ``cppcheck --addon=misra`` (C99, every preprocessor configuration cppcheck finds, so the
builds for size and for speed of ``fixed.h`` both) over the firmware sources: the ``.c`` files
a firmware build compiles (``c_ref.cortexm.build.ALGO_SOURCES``) and the two headers, never
``batch.c``, ``host/`` or ``tools/``. The deviation record is the table under "MISRA C:2012
deviations" in ``c_ref/PORTING.md``: one row per rule and file, with the rule's category, the
number of findings the row covers and the rationale. A row covers exactly its number of
findings: more findings are reported as not covered, fewer make the row stale.

    python -m harness.port.misra [--c-dir DIR] [--deviations FILE] [--rule-texts FILE]

Exit status 0 when every finding is covered and no row is stale, 1 otherwise, 2 when the tool
is missing or the table is malformed.
"""
import argparse
import collections
import functools
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET

from c_ref.cortexm.build import ALGO_SOURCES, C_REF
from harness.errors import InputError, reading

HEADERS = ("linedrop.h", "fixed.h")
FIRMWARE_FILES = tuple(ALGO_SOURCES) + HEADERS
PORTING = os.path.join(C_REF, "PORTING.md")
SECTION = "MISRA C:2012 deviations"
COLUMNS = ("rule", "category", "file", "findings", "rationale")
# Mandatory guidelines admit no deviation (MISRA C:2012, section 5.4).
CATEGORIES = ("Required", "Advisory")
_RULE_ID = re.compile(r"misra-c2012-(\d+\.\d+)$")
# Cppcheck ids that mean the analysis itself failed, so an empty result would prove nothing.
_TOOL_ERRORS = ("syntaxError", "internalError", "internalAstError", "cppcheckError",
                "preprocessorErrorDirective", "unknownMacro")
_FAILED = ("Did not find addon", "Bailing out")

Finding = collections.namedtuple("Finding", "rule file line column message")
Deviation = collections.namedtuple("Deviation", "rule category file count rationale lineno")
Report = collections.namedtuple("Report", "findings deviations uncovered stale seconds")


def rule_key(rule):
    """Sort key of a rule number such as ``"10.4"``: ``(10, 4)``."""
    major, minor = rule.split(".")
    return int(major), int(minor)


@functools.lru_cache(maxsize=None)
def tool_missing():
    """``None`` if cppcheck and its MISRA addon report a planted octal constant, else why not."""
    exe = shutil.which("cppcheck")
    if exe is None:
        return "cppcheck not found on PATH (Debian package cppcheck)"
    with tempfile.TemporaryDirectory() as tmp:
        with open(os.path.join(tmp, "probe.c"), "w") as f:
            f.write("int ld_probe = 010;\n")
        try:
            found = run_cppcheck(tmp, ["probe.c"])
        except RuntimeError as exc:
            if "Did not find addon" in str(exc):
                return f"{exe} has no MISRA addon (misra.py; Debian's cppcheck package ships it)"
            return f"cppcheck --addon=misra fails: {str(exc)[-200:]}"
    if not any(f.rule == "7.1" for f in found):
        return "cppcheck runs but its MISRA addon (misra.py) reported nothing on an octal constant"
    return None


def run_cppcheck(c_dir, files, rule_texts=None):
    """Run cppcheck's MISRA addon on ``files`` (names relative to ``c_dir``); return the findings.

    Parameters
    ----------
    c_dir : str
        Folder holding the sources and their headers (the include path).
    files : sequence of str
        Sources and headers to check; findings name files relative to ``c_dir``.
    rule_texts : str, optional
        The addon's rule-text file (MISRA's own headlines, which cppcheck does not ship), for
        full messages; by default each message is only the rule's number.

    Raises RuntimeError when cppcheck cannot analyse the sources (addon missing or failing,
    syntax or preprocessor error).
    """
    with tempfile.TemporaryDirectory() as build_dir:
        if rule_texts is None:
            rule_texts = os.path.join(build_dir, "rule-texts.txt")
            with open(rule_texts, "w") as f:
                f.write(_placeholder_rule_texts())
        addon = os.path.join(build_dir, "misra.json")
        with open(addon, "w") as f:
            json.dump({"script": "misra.py", "args": [f"--rule-texts={os.path.abspath(rule_texts)}"]}, f)
        cmd = [shutil.which("cppcheck") or "cppcheck", f"--addon={addon}", "--std=c99",
               "--language=c", "--platform=unix32", "-I.", "--xml",
               f"--cppcheck-build-dir={build_dir}", *files]
        res = subprocess.run(cmd, cwd=c_dir, capture_output=True, text=True)
    # A failing addon leaves the XML empty and the exit status 0: only stdout tells.
    failed = [ln for ln in res.stdout.splitlines() if ln.startswith(_FAILED)]
    if res.returncode != 0 or failed:
        raise RuntimeError(f"{' '.join(cmd)}: {(' '.join(failed) or res.stderr).strip()[-300:]}")
    return _parse_xml(res.stderr)


def _placeholder_rule_texts():
    """A rule-text file in the addon's format whose text is just each rule's number.

    Without rule texts every finding carries the same message, and cppcheck drops a message
    it has already shown for the same line: a second rule on a line went unreported (10
    findings of 77 in the firmware sources). One distinct text per rule keeps them all.
    """
    lines = ["Appendix A Summary of guidelines"]
    for major in range(1, 23):
        for minor in range(1, 21):
            lines += [f"Rule {major}.{minor}", f"MISRA C:2012 rule {major}.{minor}"]
    return "\n".join(lines + ["Appendix B", ""])


def _parse_xml(text):
    start = text.find("<?xml")
    if start < 0:
        raise RuntimeError(f"cppcheck wrote no XML results: {text.strip()[-300:]}")
    found = set()
    for err in ET.fromstring(text[start:]).iter("error"):
        ident = err.get("id", "")
        if ident in _TOOL_ERRORS:
            raise RuntimeError(f"cppcheck could not analyse the sources: {ident}: {err.get('msg')}")
        m = _RULE_ID.match(ident)
        loc = err.find("location")
        if m and loc is not None:
            found.add(Finding(m.group(1), os.path.normpath(loc.get("file")), int(loc.get("line")),
                              int(loc.get("column", "0")), err.get("msg", "")))
    return sorted(found, key=lambda f: (f.file, f.line, rule_key(f.rule), f.column))


def read_deviations(path=PORTING):
    """The rows of the deviation table under the heading naming :data:`SECTION` in ``path``.

    Raises :class:`harness.errors.InputError` (one line naming the file and line) for a
    missing section or table, a missing column, a malformed rule number, a category other than
    Required or Advisory, a file outside :data:`FIRMWARE_FILES`, a count below 1, an empty
    rationale or a repeated rule and file.
    """
    with reading(path, "the MISRA deviation record"):
        with open(path, encoding="utf-8") as f:
            lines = f.read().splitlines()
    start = next((k for k, line in enumerate(lines) if line.startswith("#") and SECTION in line), None)
    if start is None:
        raise InputError(f"{path}: no section headed '{SECTION}'")
    rows = _table_rows(path, lines, start + 1)
    out, seen = [], set()
    for lineno, cells in rows:
        dev = _deviation(path, lineno, cells)
        if (dev.rule, dev.file) in seen:
            raise InputError(f"{path}:{lineno}: rule {dev.rule} in {dev.file} has a row already; "
                             "one row per rule and file")
        seen.add((dev.rule, dev.file))
        out.append(dev)
    return out


def _cells(line):
    return [c.strip() for c in line.strip().strip("|").split("|")]


def _table_rows(path, lines, first):
    """``(line number, {column: cell})`` for each row of the first table from ``lines[first]`` on."""
    k = first
    while k < len(lines) and not lines[k].startswith("|"):
        if lines[k].startswith("#"):
            break
        k += 1
    if k >= len(lines) or not lines[k].startswith("|"):
        raise InputError(f"{path}:{first}: no table under '{SECTION}'")
    header = [c.lower() for c in _cells(lines[k])]
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise InputError(f"{path}:{k + 1}: deviation table lacks column(s) {', '.join(missing)}; "
                         f"needs {', '.join(COLUMNS)}")
    rows = []
    for j in range(k + 2, len(lines)):
        if not lines[j].startswith("|"):
            break
        cells = _cells(lines[j])
        if len(cells) != len(header):
            raise InputError(f"{path}:{j + 1}: {len(cells)} cells, the header has {len(header)}")
        rows.append((j + 1, dict(zip(header, cells))))
    return rows


def _deviation(path, lineno, cells):
    where = f"{path}:{lineno}"
    rule, category = cells["rule"], cells["category"]
    file, count, rationale = cells["file"].strip("`"), cells["findings"], cells["rationale"]
    if not re.fullmatch(r"\d+\.\d+", rule):
        raise InputError(f"{where}: rule {rule!r} is not a MISRA C:2012 rule number such as 10.4")
    if category not in CATEGORIES:
        raise InputError(f"{where}: category {category!r} must be one of {', '.join(CATEGORIES)} "
                         "(a Mandatory rule admits no deviation)")
    if file not in FIRMWARE_FILES:
        raise InputError(f"{where}: file {file!r} is not one of {', '.join(FIRMWARE_FILES)}")
    if not re.fullmatch(r"[1-9]\d*", count):
        raise InputError(f"{where}: findings {count!r} must be a whole number, at least 1")
    if len(rationale.split()) < 3:
        raise InputError(f"{where}: rule {rule} in {file} needs a rationale (a sentence at least)")
    return Deviation(rule, category, file, int(count), rationale, lineno)


def compare(findings, deviations):
    """``(uncovered, stale)``: findings beyond their row's count, and rows with fewer findings.

    A rule and file with more findings than its row allows (or no row) has all its findings in
    ``uncovered``, since which are new cannot be told; ``stale`` holds ``(row, found)`` pairs.
    """
    by_key = collections.defaultdict(list)
    for f in findings:
        by_key[(f.rule, f.file)].append(f)
    rows = {(d.rule, d.file): d for d in deviations}
    uncovered = [f for key, fs in by_key.items() if key not in rows or len(fs) > rows[key].count
                 for f in fs]
    stale = [(d, len(by_key.get(key, []))) for key, d in rows.items()
             if len(by_key.get(key, [])) < d.count]
    return sorted(uncovered, key=lambda f: (f.file, f.line)), stale


def check(c_dir=C_REF, deviations_path=PORTING, rule_texts=None, files=FIRMWARE_FILES):
    """Run the check over ``files`` in ``c_dir`` against the table in ``deviations_path``.

    Returns a :data:`Report`: all findings, the table's rows, the uncovered findings, the stale
    rows (see :func:`compare`) and the cppcheck run's wall time in seconds. A malformed table or
    a source missing from ``c_dir`` raises :class:`harness.errors.InputError`.
    """
    deviations = read_deviations(deviations_path)
    missing = [name for name in files if not os.path.isfile(os.path.join(c_dir, name))]
    if missing:
        raise InputError(f"{c_dir}: no {', '.join(missing)}; the firmware sources are "
                         f"{', '.join(FIRMWARE_FILES)}")
    t0 = time.monotonic()
    findings = run_cppcheck(c_dir, files, rule_texts)
    seconds = time.monotonic() - t0
    uncovered, stale = compare(findings, deviations)
    return Report(findings, deviations, uncovered, stale, seconds)


def format_report(report):
    """The report as text: uncovered findings, stale rows, then a one-line summary."""
    rows = {(d.rule, d.file): d.count for d in report.deviations}
    out = []
    for f in report.uncovered:
        allowed = rows.get((f.rule, f.file), 0)
        out.append(f"{f.file}:{f.line}:{f.column}: rule {f.rule} not covered "
                   f"(deviation row allows {allowed} in {f.file}): {f.message}")
    for d, found in report.stale:
        out.append(f"stale deviation row (line {d.lineno}): rule {d.rule} in {d.file} "
                   f"covers {d.count}, found {found}")
    per_rule = collections.Counter(f.rule for f in report.findings)
    summary = ", ".join(f"{r}: {per_rule[r]}" for r in sorted(per_rule, key=rule_key))
    out.append(f"{len(report.findings)} MISRA C:2012 findings ({summary or 'none'}); "
               f"{len(report.uncovered)} not covered, {len(report.stale)} stale rows; "
               f"cppcheck {report.seconds:.1f} s")
    return "\n".join(out)


def main(argv=None):
    ap = argparse.ArgumentParser(prog="python -m harness.port.misra", description=__doc__.split("\n")[0])
    ap.add_argument("--c-dir", default=C_REF, help="folder with the firmware sources (default c_ref/)")
    ap.add_argument("--deviations", default=PORTING, help="markdown file with the deviation table")
    ap.add_argument("--rule-texts", help="the MISRA addon's rule-text file, for full messages")
    args = ap.parse_args(argv)
    reason = tool_missing()
    if reason is not None:
        print(f"misra: tool missing: {reason}", file=sys.stderr)
        return 2
    try:
        report = check(args.c_dir, args.deviations, args.rule_texts)
    except InputError as exc:
        print(f"misra: {exc}", file=sys.stderr)
        return 2
    print(format_report(report))
    return 0 if not report.uncovered and not report.stale else 1


if __name__ == "__main__":
    sys.exit(main())
