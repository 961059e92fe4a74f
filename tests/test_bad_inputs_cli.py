"""Bad CSV inputs, command-line values and output places, one row per case (format:
tests/support/bad_inputs.py): each ends in one line naming the file, row, column or option and
what is allowed, exit status 2, no traceback; CRLF line ends and a byte-order mark are read as
usual. Also: a reader that goes away is no error, and Ctrl-C is one line and status 130.
"""
import os
import signal
import time

import pytest

from support.bad_inputs import ADC_OK, ALGO, DIR, SHORT, check_row, cli


def _replay(name, csv_text, *frags, status=2):
    files = {"in.csv": csv_text} if csv_text is not None else {}
    return (f"replay-{name}", files, ["replay", "--in", "{d}/in.csv", "--out", "{d}/o.csv"], status, frags)


REPLAY_CASES = [
    _replay("missing", None, "{d}/in.csv", "cannot read"),
    _replay("folder", DIR, "{d}/in.csv", "cannot read"),
    _replay("empty", "", "{d}/in.csv", "empty file", "adc_v,adc_i"),
    _replay("header-only", "adc_v,adc_i\n", "{d}/in.csv", "no data rows"),
    _replay("too-few-fields", "adc_v,adc_i\n1,2\n3\n", "{d}/in.csv", "row 3: 1 fields", "adc_v,adc_i"),
    _replay("too-many-fields", "adc_v,adc_i\n1,2\n3,4,5\n", "{d}/in.csv", "row 3: 3 fields", "adc_v,adc_i"),
    _replay("extra-column", "adc_v,adc_i,temp_c\n1,2,20\n", "{d}/in.csv", "row 1", "unknown column 'temp_c'",
            "allowed: adc_v,adc_i"),
    _replay("missing-column", "adc_v\n1\n", "{d}/in.csv", "row 1", "missing column 'adc_i'", "adc_v,adc_i"),
    _replay("column-twice", "adc_v,adc_i,adc_v\n1,2,3\n", "{d}/in.csv", "row 1", "'adc_v' given twice"),
    _replay("empty-column-name", "adc_v,adc_i,\n1,2,\n", "{d}/in.csv", "row 1", "unknown column ''"),
    _replay("non-integer", "adc_v,adc_i\n1,2\n12.5,2\n", "{d}/in.csv", "row 3, column adc_v", "'12.5'",
            "[0, 4095]"),
    _replay("text-code", "adc_v,adc_i\n1,volts\n", "{d}/in.csv", "row 2, column adc_i", "'volts'", "[0, 4095]"),
    _replay("underscore-digits", "adc_v,adc_i\n1,1_000\n", "{d}/in.csv", "row 2, column adc_i", "'1_000'",
            "[0, 4095]"),
    _replay("non-ascii-digits", "adc_v,adc_i\n1,\u0661\u0662\n", "{d}/in.csv", "row 2, column adc_i",
            "[0, 4095]"),
    _replay("sign-and-spaces-are-fine", "adc_v,adc_i\n+1, 2 \n", status=0),
    _replay("blank-cell", "adc_v,adc_i\n1,\n", "{d}/in.csv", "row 2, column adc_i", "[0, 4095]"),
    _replay("negative", "adc_v,adc_i\n1,2\n-1,2\n", "{d}/in.csv", "row 3, column adc_v", "-1", "[0, 4095]"),
    _replay("above-full-scale", "adc_v,adc_i\n1,4096\n", "{d}/in.csv", "row 2, column adc_i", "4096",
            "[0, 4095]", "12-bit"),
    _replay("huge", "adc_v,adc_i\n1," + "9" * 30 + "\n", "{d}/in.csv", "row 2, column adc_i", "[0, 4095]"),
    _replay("not-utf8", b"adc_v,adc_i\n1,2 \xdf\n", "{d}/in.csv", "not UTF-8"),
    _replay("bad-quote", 'adc_v,adc_i\n1,"2\n', "{d}/in.csv", "row", "not valid CSV"),
    _replay("crlf-is-fine", ADC_OK.replace("\n", "\r\n"), status=0),
    _replay("bom-is-fine", "\ufeff" + ADC_OK, status=0),
    _replay("blank-rows-are-fine", "adc_v,adc_i\n\n" + "2000,900\n" * 8 + "\n", status=0),
    ("replay-out-equals-in", {"in.csv": ADC_OK}, ["replay", "--in", "{d}/in.csv", "--out", "{d}/in.csv"], 2,
     ("--out {d}/in.csv", "is the input given as --in")),
]


def _log(name, csv_text, *frags, status=2):
    files = {"a.toml": ALGO, "log.csv": csv_text} if csv_text is not None else {"a.toml": ALGO}
    return (f"log-{name}", files, ["check-port", "--log", "{d}/log.csv", "--config", "{d}/a.toml"], status, frags)


LOG_OK = "adc_v,adc_i,cmd\n" + "2000,900,7\n" * 8
LOG_CASES = [
    _log("missing", None, "{d}/log.csv", "cannot read log"),
    _log("empty", "", "{d}/log.csv", "empty file"),
    _log("header-only", "adc_v,adc_i,cmd\n", "{d}/log.csv", "no data rows"),
    _log("too-few-fields", "adc_v,adc_i,cmd\n1,2\n", "{d}/log.csv", "row 2: 2 fields", "adc_v,adc_i,cmd"),
    _log("too-many-fields", "adc_v,adc_i,cmd\n1,2,3,4\n", "{d}/log.csv", "row 2: 4 fields"),
    _log("unknown-column", "adc_v,adc_i,cmd,temp\n1,2,3,4\n", "{d}/log.csv", "row 1", "unknown column 'temp'",
         "allowed: adc_v,adc_i"),
    _log("missing-column", "adc_v,adc_i\n1,2\n", "{d}/log.csv", "row 1", "missing column 'cmd'"),
    _log("non-integer", "adc_v,adc_i,cmd\n1,2,3.5\n", "{d}/log.csv", "row 2, column cmd", "'3.5'"),
    _log("underscore-digits", "adc_v,adc_i,cmd\n1,2,3_0\n", "{d}/log.csv", "row 2, column cmd", "'3_0'"),
    _log("negative-code", "adc_v,adc_i,cmd\n-1,2,3\n", "{d}/log.csv", "row 2", "adc_v=-1", "[0, 65535]"),
    _log("above-uint16", "adc_v,adc_i,cmd\n1,65536,3\n", "{d}/log.csv", "row 2", "adc_i=65536", "[0, 65535]"),
    # Codes above the ADC's full scale reach ld_step as they are and are clamped there (the
    # extreme-codes vector feeds 65535), so a log holding one is compared, not refused.
    _log("above-adc-full-scale-is-compared", "adc_v,adc_i,cmd\n1,4096,3\n", "NOT bit-exact", status=1),
    _log("crlf-is-fine", LOG_OK.replace("\n", "\r\n"), "NOT bit-exact", "row 2", status=1),
    _log("bom-is-fine", "\ufeff" + LOG_OK, "NOT bit-exact", "row 2", status=1),
    ("log-config-empty", {"a.toml": "", "log.csv": LOG_OK}, ["check-port", "--log", "{d}/log.csv", "--config",
                                                              "{d}/a.toml"], 2, ("{d}/a.toml", "no [algorithm] table")),
    ("log-no-params", {"log.csv": LOG_OK}, ["check-port", "--log", "{d}/log.csv"], 2,
     ("--log", "VECTORS_DIR", "--config")),
    ("log-vectors-dir-missing", {"log.csv": LOG_OK}, ["check-port", "{d}/nodir", "--log", "{d}/log.csv"], 2,
     ("{d}/nodir",)),
    ("log-vectors-dir-empty", {"log.csv": LOG_OK, "vec": DIR}, ["check-port", "{d}/vec", "--log", "{d}/log.csv"],
     2, ("{d}/vec",)),
]


def _opt(name, argv, *frags, files=None):
    return (f"option-{name}", files or {"s.toml": SHORT, "in.csv": ADC_OK}, argv, 2, frags)


OPTION_CASES = [
    _opt("bench-instances-zero", ["bench", "--instances", "0"], "--instances", "[1, 4096]"),
    _opt("bench-instances-negative", ["bench", "--instances", "-5"], "--instances", "[1, 4096]"),
    _opt("bench-instances-huge", ["bench", "--instances", "1000000000000"], "--instances", "[1, 4096]"),
    _opt("bench-instances-text", ["bench", "--instances", "many"], "--instances", "'many'", "integer"),
    _opt("bench-windows-below", ["bench", "--regulation", "--windows", "1"], "--windows", "[2, 1024]"),
    _opt("bench-windows-above", ["bench", "--regulation", "--windows", "1025"], "--windows", "[2, 1024]"),
    _opt("bench-windows-text", ["bench", "--regulation", "--windows", "ten"], "--windows", "'ten'"),
    _opt("bench-backend-unknown", ["bench", "--regulation", "--backend", "ideal"], "--backend", "'ideal'",
         "'model'"),
    _opt("bench-regulation-and-firmware", ["bench", "--regulation", "--firmware"], "--regulation",
         "--firmware"),
    _opt("bench-scenarios-without-regulation", ["bench", "--scenarios", "{d}/s.toml"], "--scenarios",
         "--regulation"),
    _opt("bench-out-without-regulation", ["bench", "--out", "{d}/b"], "--out", "--regulation"),
    _opt("bench-windows-without-regulation", ["bench", "--windows", "8"], "--windows", "--regulation"),
    _opt("bench-instances-with-regulation", ["bench", "--regulation", "--instances", "8"], "--instances",
         "--regulation"),
    _opt("vectors-no-out", ["vectors", "{d}/s.toml"], "--out", "required"),
    _opt("vectors-duration-zero", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "0"],
         "--duration-s", "(0, 3600]"),
    _opt("vectors-duration-negative", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "-1"],
         "--duration-s", "(0, 3600]"),
    _opt("vectors-duration-nan", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "nan"],
         "--duration-s", "(0, 3600]"),
    _opt("vectors-duration-inf", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "inf"],
         "--duration-s", "(0, 3600]"),
    _opt("vectors-duration-above", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "3601"],
         "--duration-s", "(0, 3600]"),
    _opt("vectors-duration-text", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--duration-s", "soon"],
         "--duration-s", "'soon'"),
    _opt("vectors-long-zero", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--long-s", "0"], "--long-s",
         "(0, 3600]"),
    _opt("vectors-seed-negative", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--seed", "-1"], "--seed",
         "[0, 9223372036854775807]"),
    _opt("vectors-seed-huge", ["vectors", "{d}/s.toml", "--out", "{d}/v", "--seed", str(2**63)], "--seed",
         "[0, 9223372036854775807]"),
    _opt("tune-no-scenario", ["tune"], "SCENARIO.toml", "required"),
    _opt("tune-error-zero", ["tune", "{d}/s.toml", "--out", "{d}/t", "--max-error-mv", "0"], "--max-error-mv",
         "(0, inf) mV"),
    _opt("tune-error-nan", ["tune", "{d}/s.toml", "--out", "{d}/t", "--max-error-mv", "nan"], "--max-error-mv",
         "(0, inf) mV", "'nan'"),
    _opt("tune-settle-negative", ["tune", "{d}/s.toml", "--out", "{d}/t", "--max-settle-ms", "-3"],
         "--max-settle-ms", "(0, inf) ms"),
    _opt("tune-gain-margin-below-one", ["tune", "{d}/s.toml", "--out", "{d}/t", "--min-gain-margin", "0.5"],
         "--min-gain-margin", "[1, inf)", "unstable"),
    _opt("tune-ideal-ratio-negative", ["tune", "{d}/s.toml", "--out", "{d}/t", "--max-ideal-ratio", "-1"],
         "--max-ideal-ratio", "[0, inf)"),
    _opt("tune-workers-zero", ["tune", "{d}/s.toml", "--out", "{d}/t", "--workers", "0"], "--workers",
         "[1, 256]"),
    _opt("tune-knob-unknown", ["tune", "{d}/s.toml", "--out", "{d}/t", "--knobs", "adc_bits,speed"], "--knobs",
         "unknown speed", "allowed: "),
    _opt("tune-knobs-empty", ["tune", "{d}/s.toml", "--out", "{d}/t", "--knobs", ","], "--knobs", "no knob"),
    _opt("tune-duration-zero", ["tune", "{d}/s.toml", "--out", "{d}/t", "--duration-s", "0"], "--duration-s",
         "(0, 3600] s"),
    _opt("tune-error-text", ["tune", "{d}/s.toml", "--out", "{d}/t", "--max-error-mv", "small"],
         "--max-error-mv", "'small'"),
    _opt("tune-same-scenario-twice", ["tune", "{d}/s.toml", "{d}/s.toml", "--out", "{d}/t"], "s.toml",
         "give each scenario once"),
    _opt("bench-same-scenario-twice", ["bench", "--regulation", "--scenarios", "{d}/s.toml", "{d}/s.toml"],
         "--scenarios", "share a name"),
    _opt("simulate-scenario-as-algorithm", ["simulate", "{d}/s.toml", "--algorithm", "{d}/s.toml"], "{d}/s.toml",
         "only [algorithm]"),
    _opt("check-port-vectors-dir-missing", ["check-port", "{d}/nodir", "--c-dir", "{d}"], "{d}/nodir",
         "no such directory"),
    _opt("replay-no-in", ["replay", "--out", "{d}/o.csv"], "--in", "required"),
    _opt("replay-backend-unknown", ["replay", "--in", "{d}/in.csv", "--out", "{d}/o.csv", "--backend", "fpga"],
         "--backend", "'fpga'", "'model'"),
    _opt("design-no-scenario", ["design"], "SCENARIO.toml", "required"),
    _opt("simulate-compensation-unknown", ["simulate", "{d}/s.toml", "--compensation", "more"],
         "--compensation", "'more'", "'none'"),
    _opt("simulate-unknown-option", ["simulate", "{d}/s.toml", "--fast"], "unrecognized", "--fast"),
    _opt("unknown-command", ["simulat"], "simulat", "simulate"),
    _opt("check-port-neither", ["check-port", "{d}/v"], "--c-dir", "--log"),
    _opt("check-port-both", ["check-port", "{d}/v", "--c-dir", "{d}", "--log", "{d}/in.csv"], "--c-dir",
         "--log"),
    _opt("check-port-c-dir-without-vectors", ["check-port", "--c-dir", "{d}"], "--c-dir", "VECTORS_DIR"),
    _opt("check-port-config-with-c-dir", ["check-port", "{d}", "--c-dir", "{d}", "--config", "{d}/s.toml"],
         "--config", "--log"),
]


def _out(name, argv, *frags, files=None):
    return (f"out-{name}", files or {"s.toml": SHORT, "in.csv": ADC_OK, "f": "keep"}, argv, 2, frags)


OUT_CASES = [
    _out("replay-missing-folder", ["replay", "--in", "{d}/in.csv", "--out", "{d}/no/o.csv"], "--out",
         "does not exist"),
    _out("replay-proc", ["replay", "--in", "{d}/in.csv", "--out", "/proc/x.csv"], "--out /proc/x.csv",
         "cannot create"),
    _out("replay-folder", ["replay", "--in", "{d}/in.csv", "--out", "{d}"], "--out", "is a folder"),
    _out("simulate-waveform-proc", ["simulate", "{d}/s.toml", "--waveform", "/proc/x.csv"],
         "--waveform /proc/x.csv", "cannot create"),
    _out("simulate-waveform-is-scenario", ["simulate", "{d}/s.toml", "--waveform", "{d}/s.toml"],
         "--waveform {d}/s.toml", "scenario"),
    _out("simulate-out-proc", ["simulate", "{d}/s.toml", "--out", "/proc/x"], "--out /proc/x", "cannot create"),
    _out("simulate-out-file", ["simulate", "{d}/s.toml", "--out", "{d}/f"], "--out {d}/f", "not a folder"),
    _out("simulate-out-under-file", ["simulate", "{d}/s.toml", "--out", "{d}/f/r"], "--out {d}/f/r",
         "not a folder"),
    _out("simulate-out-holds-scenario", ["simulate", "{d}/s.toml", "--out", "{d}"], "--out {d}",
         "did not write"),
    _out("design-header-proc", ["design", "{d}/s.toml", "--header", "/proc/x.h"], "--header /proc/x.h",
         "cannot create"),
    _out("design-algorithm-out-is-scenario", ["design", "{d}/s.toml", "--algorithm-out", "{d}/s.toml"],
         "--algorithm-out {d}/s.toml", "scenario"),
    _out("design-header-is-algorithm-out", ["design", "{d}/s.toml", "--algorithm-out", "{d}/a.toml",
                                            "--header", "{d}/a.toml"], "--header {d}/a.toml", "--algorithm-out"),
    _out("design-header-missing-folder", ["design", "{d}/s.toml", "--header", "{d}/no/p.h"], "--header",
         "does not exist"),
    _out("vectors-proc", ["vectors", "{d}/s.toml", "--out", "/proc/x"], "--out /proc/x", "cannot create"),
    _out("vectors-holds-scenario", ["vectors", "{d}/s.toml", "--out", "{d}"], "--out {d}", "did not write"),
    _out("replay-out-is-config", ["replay", "--in", "{d}/in.csv", "--out", "{d}/a.toml", "--config", "{d}/a.toml"],
         "--out {d}/a.toml", "--config", files={"in.csv": ADC_OK, "a.toml": ALGO}),
    _out("simulate-out-proc-deeper", ["simulate", "{d}/s.toml", "--out", "/proc/x/y"], "--out /proc/x/y",
         "cannot create a folder in /proc"),
    _out("simulate-waveform-under-file", ["simulate", "{d}/s.toml", "--waveform", "{d}/f/w.csv"],
         "--waveform {d}/f/w.csv", "is a file, not a folder"),
    _out("tune-cache-proc", ["tune", "{d}/s.toml", "--out", "{d}/t", "--cache", "/proc/c"], "--cache /proc/c",
         "cannot create a folder"),
    _out("tune-cache-file", ["tune", "{d}/s.toml", "--out", "{d}/t", "--cache", "{d}/f"], "--cache {d}/f",
         "not a folder"),
    ("out-replay-existing-file-is-replaced", {"in.csv": ADC_OK, "o.csv": "old\n"},
     ["replay", "--in", "{d}/in.csv", "--out", "{d}/o.csv"], 0, ()),
    _out("vectors-file", ["vectors", "{d}/s.toml", "--out", "{d}/f"], "--out {d}/f", "not a folder"),
    _out("bench-regulation-proc", ["bench", "--regulation", "--scenarios", "{d}/s.toml", "--out", "/proc/x"],
         "--out /proc/x", "cannot create"),
    _out("bench-regulation-file", ["bench", "--regulation", "--scenarios", "{d}/s.toml", "--out", "{d}/f"],
         "--out {d}/f", "not a folder"),
    _out("tune-proc", ["tune", "{d}/s.toml", "--out", "/proc/x"], "--out /proc/x", "cannot create"),
    _out("tune-file", ["tune", "{d}/s.toml", "--out", "{d}/f"], "--out {d}/f", "not a folder"),
]

CASES = REPLAY_CASES + LOG_CASES + OPTION_CASES + OUT_CASES


@pytest.mark.parametrize("files, argv, status, fragments", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_a_bad_input_ends_in_one_line_naming_it(capsys, tmp_path, files, argv, status, fragments):
    check_row(capsys, tmp_path, files, argv, status, fragments)


@pytest.mark.parametrize("argv", [["design", "{s}"], ["design", "{s}", "--json"], ["simulate", "{s}", "--json"],
                                  ["vectors", "{s}", "--out", "{d}/v", "--duration-s", "0.05", "--long-s", "0.05"],
                                  ["--help"]], ids=lambda a: "-".join(a[:2]))
def test_a_reader_that_goes_away_ends_the_command_silently(tmp_path, argv):
    (tmp_path / "s.toml").write_text(SHORT)
    argv = [a.replace("{s}", str(tmp_path / "s.toml")).replace("{d}", str(tmp_path)) for a in argv]
    proc = cli(*argv, cwd=tmp_path)
    proc.stdout.close()                  # the reader is gone before the first line is written
    err = proc.stderr.read()
    assert proc.wait(timeout=300) in (0, 141) and err == "", err


# SIGINT is what the terminal sends on Ctrl-C, SIGTERM what kill(1), a service manager or a
# cancelled batch job sends; 128 + the signal number is the status a shell reports for them.
@pytest.mark.parametrize("sig, status, word", [(signal.SIGINT, 130, "interrupted"),
                                               (signal.SIGTERM, 143, "terminated")], ids=["ctrl-c", "sigterm"])
def test_ctrl_c_or_sigterm_mid_run_ends_in_one_line_with_its_status(tmp_path, sig, status, word):
    (tmp_path / "long.toml").write_text(SHORT.replace("duration_s = 0.1", "duration_s = 60.0"))
    proc = cli("simulate", str(tmp_path / "long.toml"), "--out", str(tmp_path / "r"), "--waveform",
               str(tmp_path / "w.csv"), cwd=tmp_path, start_new_session=True)
    time.sleep(6)                         # past the imports, well inside the 60 s run
    os.killpg(proc.pid, sig)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == status, err
    assert err.splitlines() == [f"linedrop simulate: {word}; no output was replaced"]
    assert sorted(os.listdir(tmp_path)) == ["long.toml"]      # no half-written waveform beside it
