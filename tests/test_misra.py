"""MISRA C:2012 check of the firmware C (cppcheck's MISRA addon) against the deviation record.

The record is the table in c_ref/PORTING.md, section "MISRA C:2012 deviations". The rules the
planted violations break are MISRA C:2012 Rule 7.1 (octal constants), 15.1 (goto) and 19.2
(union); cppcheck's addon, not this project, decides that they are findings.
"""
import os
import shutil

import pytest

from harness.errors import InputError
from harness.port import misra
from support.tools import skip_or_fail

PLANTS = {
    "octal": ("7.1", "uint32_t ld_planted(void);\nuint32_t ld_planted(void)\n{\n"
                     "    uint32_t k = 010;\n    return k;\n}\n"),
    "goto": ("15.1", "void ld_planted(int32_t *x);\nvoid ld_planted(int32_t *x)\n{\n"
                     "    if (*x > 0) {\n        goto done;\n    }\n    *x = 0;\ndone:\n    *x += 1;\n}\n"),
    "union": ("19.2", "typedef union { int32_t s; uint32_t u; } ld_planted_t;\n"
                      "uint32_t ld_planted(int32_t x);\nuint32_t ld_planted(int32_t x)\n{\n"
                      "    ld_planted_t w;\n    w.s = x;\n    return w.u;\n}\n"),
}
HEADER = ("| rule | category | file | findings | rationale |\n"
          "|------|----------|------|----------|-----------|\n")
GOOD_ROW = "| 10.1 | Required | fixed.h | 3 | Right shifts of signed values, defined by gcc and clang. |\n"
# Category of each rule the record deviates, from MISRA C:2012 Appendix A (summary of guidelines).
# A row for another rule needs its category added here from the same source.
CATEGORY = {"2.5": "Advisory", "8.7": "Advisory", "10.1": "Required", "10.3": "Required",
            "10.4": "Required", "10.6": "Required", "10.7": "Required", "10.8": "Required",
            "12.1": "Advisory", "12.3": "Advisory", "15.5": "Advisory", "15.7": "Required",
            "17.7": "Required", "17.8": "Advisory"}


def _require_cppcheck():
    skip_or_fail(misra.tool_missing())


def _copy_sources(dest):
    dest.mkdir()
    for name in misra.FIRMWARE_FILES:
        shutil.copy(os.path.join(misra.C_REF, name), dest / name)
    return dest


def _record(tmp_path, rows, heading="## 8. MISRA C:2012 deviations\n\nText.\n\n"):
    path = tmp_path / "record.md"
    path.write_text("# Porting\n\n" + heading + HEADER + rows + "\nAfter the table.\n")
    return str(path)


@pytest.fixture(scope="module")
def c_ref_report():
    """The check of c_ref's own sources against PORTING.md, run once for the tests below."""
    _require_cppcheck()
    return misra.check()


def test_the_firmware_sources_have_no_finding_outside_the_deviation_record(c_ref_report):
    assert c_ref_report.findings, "cppcheck found nothing at all: the addon did not run"
    assert not c_ref_report.uncovered, misra.format_report(c_ref_report)


def test_no_deviation_row_is_stale(c_ref_report):
    assert not c_ref_report.stale, misra.format_report(c_ref_report)


@pytest.mark.parametrize("plant", sorted(PLANTS))
def test_a_planted_violation_is_reported_as_not_covered(tmp_path, plant):
    _require_cppcheck()
    rule, code = PLANTS[plant]
    port = _copy_sources(tmp_path / "port")
    with open(port / "step.c", "a") as f:
        f.write("\n" + code)
    report = misra.check(str(port))
    assert any(f.rule == rule and f.file == "step.c" for f in report.uncovered), \
        misra.format_report(report)


def test_findings_beyond_a_rows_count_are_reported(tmp_path):
    # Two unparenthesised ?: in fixed.c (MISRA C:2012 Rule 12.1) against a row allowing one.
    _require_cppcheck()
    port = _copy_sources(tmp_path / "port")
    with open(port / "fixed.c", "a") as f:
        f.write("int32_t ld_planted(int32_t a, int32_t b);\n"
                "int32_t ld_planted(int32_t a, int32_t b)\n{\n"
                "    int32_t m = a > b ? a : b;\n    return m < 0 ? -m : m;\n}\n")
    path = _record(tmp_path, "| 12.1 | Advisory | fixed.c | 1 | One finding allowed, to test the count. |\n")
    found = misra.run_cppcheck(str(port), misra.FIRMWARE_FILES)
    uncovered, _ = misra.compare(found, misra.read_deviations(path))
    first = len((port / "fixed.c").read_text().splitlines()) - 2  # the two ?: lines
    got = [f.line for f in uncovered if f.file == "fixed.c" and f.rule == "12.1"]
    assert got == [first, first + 1]


def test_a_row_no_finding_needs_is_stale(tmp_path, c_ref_report):
    path = _record(tmp_path, "| 15.1 | Required | step.c | 1 | No goto is in step.c: a stale row. |\n")
    _, stale = misra.compare(c_ref_report.findings, misra.read_deviations(path))
    assert [(d.rule, d.file, found) for d, found in stale] == [("15.1", "step.c", 0)]


def test_the_deviation_record_parses_and_every_row_has_a_rationale():
    rows = misra.read_deviations()
    assert rows
    for row in rows:
        assert row.category == CATEGORY.get(row.rule), f"line {row.lineno}: {row}"
        assert row.file in misra.FIRMWARE_FILES, row
        assert len(row.rationale.split()) >= 8, f"line {row.lineno}: rationale too short"
    assert len({(r.rule, r.file) for r in rows}) == len(rows)


@pytest.mark.parametrize("row, complaint", [
    ("| 10.1 | Mandatory | fixed.h | 3 | A Mandatory rule cannot be deviated at all. |\n", "category"),
    ("| 10.1 | Required | batch.c | 3 | batch.c is host code, not firmware. |\n", "file"),
    ("| 10.1 | Required | fixed.h | 0 | A row covering no finding at all. |\n", "findings"),
    ("| 10.1 | Required | fixed.h | 3 |  |\n", "rationale"),
    ("| rule 10 | Required | fixed.h | 3 | Not a rule number in the table. |\n", "rule"),
    (GOOD_ROW + GOOD_ROW, "row already"),
    ("| 10.1 | Required | fixed.h | 3 |\n", "cells"),
])
def test_a_malformed_row_is_a_one_line_error_naming_its_line(tmp_path, row, complaint):
    path = _record(tmp_path, row)
    with pytest.raises(InputError) as err:
        misra.read_deviations(path)
    msg = str(err.value)
    assert "\n" not in msg and complaint in msg
    assert msg.startswith(f"{path}:"), msg


def test_a_record_without_the_section_is_an_error(tmp_path):
    path = _record(tmp_path, GOOD_ROW, heading="## 8. Something else\n\n")
    with pytest.raises(InputError, match="no section headed"):
        misra.read_deviations(path)


def test_more_findings_than_a_row_allows_are_all_uncovered_and_fewer_make_it_stale():
    row = misra.Deviation("12.1", "Advisory", "step.c", 2, "Two findings allowed here.", 10)
    two = [misra.Finding("12.1", "step.c", n, 1, "m") for n in (1, 2)]
    three = two + [misra.Finding("12.1", "step.c", 3, 1, "m")]
    assert misra.compare(two, [row]) == ([], [])
    assert misra.compare(three, [row]) == (three, [])
    assert misra.compare(two[:1], [row]) == ([], [(row, 1)])
    other = misra.Finding("12.1", "estimator.c", 4, 1, "m")
    assert misra.compare(two + [other], [row]) == ([other], [])


@pytest.fixture
def fresh_probe():
    """:func:`misra.tool_missing` with its cache cleared before and after (it probes PATH once)."""
    misra.tool_missing.cache_clear()
    yield misra.tool_missing
    misra.tool_missing.cache_clear()


def test_without_cppcheck_the_reason_says_the_tool_is_missing(tmp_path, monkeypatch, capsys,
                                                                fresh_probe):
    monkeypatch.setenv("PATH", str(tmp_path))
    assert "cppcheck not found" in fresh_probe()
    assert misra.main([]) == 2
    assert "tool missing" in capsys.readouterr().err


def _fake_cppcheck(folder, monkeypatch, script):
    """Put a shell script named cppcheck first on PATH (nothing else on it)."""
    fake = folder / "cppcheck"
    fake.write_text("#!/bin/sh\n" + script)
    fake.chmod(0o755)
    monkeypatch.setenv("PATH", str(folder))


def test_a_cppcheck_without_the_addon_is_reported_as_missing_it(tmp_path, monkeypatch, fresh_probe):
    # What cppcheck 2.10 prints (stdout, exit status 0) when the addon's script is absent.
    _fake_cppcheck(tmp_path, monkeypatch, "echo 'Did not find addon misra.py'\n")
    assert "has no MISRA addon" in fresh_probe()


def test_an_addon_that_fails_is_an_error_not_an_empty_result(tmp_path, monkeypatch):
    # cppcheck 2.10 with a failing addon: a "Bailing out" line, empty XML, exit status 0.
    _fake_cppcheck(tmp_path, monkeypatch,
                   "echo 'Bailing out from checking step.c since there was an internal error'\n"
                   "echo '<?xml version=\"1.0\"?><results><errors></errors></results>' >&2\n")
    with pytest.raises(RuntimeError, match="Bailing out"):
        misra.run_cppcheck(str(tmp_path), ["step.c"])


@pytest.mark.parametrize("args, complaint", [
    (["--deviations", "no-such-record.md"], "cannot read"),
    (["--c-dir", "."], "no step.c"),
])
def test_the_command_rejects_bad_input_with_status_2(tmp_path, monkeypatch, capsys, args, complaint):
    _require_cppcheck()
    monkeypatch.chdir(tmp_path)
    assert misra.main(args) == 2
    err = capsys.readouterr().err
    assert complaint in err and err.count("\n") == 1, err


def test_the_command_passes_on_c_ref(capsys):
    _require_cppcheck()
    assert misra.main([]) == 0
    assert "0 not covered, 0 stale rows" in capsys.readouterr().out
