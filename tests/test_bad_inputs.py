"""A new user's bad inputs, one row per case: each ends in one line naming the file, row, key or
option and what is allowed, with exit status 2 (no traceback); a few look-alikes that are fine
(CRLF line ends, a byte-order mark) run as usual.

A row is (id, files, argv, status, fragments). ``files`` maps a name in the test's folder to its
text (str), bytes, DIR (a folder) or a callable of the folder giving either; ``{d}`` in argv and
fragments is that folder. Fragments are looked for in everything the command printed; with
status 2, stderr must be exactly one line and stdout empty.
"""
import os
import signal
import subprocess
import sys
import time

import pytest

from harness.cli.main import main
from harness.scenario.read import DEMO

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DIR = object()

#: The demo scenario cut to 0.1 s (load step at 0.05 s), so a run that goes ahead is short.
SHORT = (open(DEMO).read().replace("duration_s = 1.0", "duration_s = 0.1")
         .replace("steps = [[0.5, 2.2]]", "steps = [[0.05, 2.2]]"))


def scen(old, new, base=SHORT):
    """SHORT with ``old`` (which must occur) replaced by ``new``."""
    assert old in base, old
    return base.replace(old, new, 1)


def add(text, base=SHORT):
    return base + "\n" + text + "\n"


ADC_OK = "adc_v,adc_i\n" + "2000,900\n" * 64
ALGO = "[algorithm]\n"


def _scenario_files(command):
    """The file-level cases of a scenario argument, for ``command`` (argv before the file)."""
    out = [
        ("missing", {}, "{d}/nope.toml", ("{d}/nope.toml", "cannot read")),
        ("folder", {"s.toml": DIR}, "{d}/s.toml", ("{d}/s.toml", "cannot read scenario", "Is a directory")),
        ("not-utf8", {"s.toml": b"[supply]\ntarget_v = 24 # \xdf\n"}, "{d}/s.toml", ("{d}/s.toml", "not UTF-8")),
        ("not-toml", {"s.toml": "[supply\ntarget_v = 24\n"}, "{d}/s.toml", ("{d}/s.toml", "not valid TOML", "line 1")),
        ("empty", {"s.toml": ""}, "{d}/s.toml", ("{d}/s.toml", "[supply]: missing", "required sections")),
        ("binary", {"s.toml": b"\x00\x01\x02"}, "{d}/s.toml", ("{d}/s.toml", "not valid TOML")),
    ]
    return [(f"{command[0]}-scenario-{name}", files, command + [arg] + rest, 2, frags)
            for name, files, arg, frags in out
            for rest in [["--out", "{d}/o"] if command[0] == "tune" else []]]


SCENARIO_FILE_CASES = (_scenario_files(["design"]) + _scenario_files(["simulate"])
                       + _scenario_files(["tune"]) + _scenario_files(["vectors", "--out", "{d}/v"])
                       + _scenario_files(["bench", "--regulation", "--scenarios"]))


def _key(name, text, *frags):
    """A scenario whose content is ``text``, read by ``design``; the message names s.toml and frags."""
    return (f"key-{name}", {"s.toml": text}, ["design", "{d}/s.toml"], 2, ("{d}/s.toml",) + frags)


KEY_CASES = [
    _key("string-for-number", scen("target_v = 24.0", 'target_v = "24"'),
         'supply.target_v = "24"', "must be a number in (0, 1000]"),
    _key("boolean-for-number", scen("target_v = 24.0", "target_v = true"), "supply.target_v = true", "(0, 1000]"),
    _key("list-for-table", "load_end = [1, 2]\n" + scen("[load_end]\ncapacitance_f = 4.7e-3\nesr_ohm = 0.03", ""),
         "load_end = [1, 2]", "must be a table [load_end]"),
    _key("table-for-number", scen("target_v = 24.0", "target_v = {v = 24}"), "supply.target_v", "(0, 1000]"),
    _key("nan", scen("capacitance_f = 4.7e-3", "capacitance_f = nan"), "load_end.capacitance_f = nan", "(0, 10]"),
    _key("inf", scen("target_v = 24.0", "target_v = inf"), "supply.target_v = inf", "(0, 1000]"),
    _key("negative", scen("capacitance_f = 4.7e-3", "capacitance_f = -1.0"), "load_end.capacitance_f = -1",
         "(0, 10]"),
    _key("zero-where-positive", scen("capacitance_f = 4.7e-3", "capacitance_f = 0"), "capacitance_f = 0", "(0, 10]"),
    _key("target-above-range", scen("target_v = 24.0", "target_v = 1000.5"), "supply.target_v", "(0, 1000]"),
    _key("max-below-target", scen("max_v = 33.0", "max_v = 20.0"), "supply.target_v", "[0, 20]"),
    _key("min-above-max", scen("max_v = 33.0", "max_v = 33.0\nmin_v = 34.0"), "supply.min_v = 34",
         "<= supply.max_v = 33"),
    _key("bandwidth-above", scen("loop_bandwidth_hz = 2000.0", "loop_bandwidth_hz = 1.5e6"),
         "supply.loop_bandwidth_hz", "[0, 1e+06]"),
    _key("current-limit-zero", scen("current_limit_a = 3.0", "current_limit_a = 0.0"), "supply.current_limit_a",
         "(0, 1000]"),
    _key("dac-bits-below", scen("current_limit_a = 3.0", "current_limit_a = 3.0\ndac_bits = 7"),
         "supply.dac_bits = 7", "[8, 16]"),
    _key("dac-bits-above", scen("current_limit_a = 3.0", "current_limit_a = 3.0\ndac_bits = 17"),
         "supply.dac_bits = 17", "[8, 16]"),
    _key("dac-bits-float", scen("current_limit_a = 3.0", "current_limit_a = 3.0\ndac_bits = 12.0"),
         "supply.dac_bits = 12.0", "integer in [8, 16]"),
    _key("dac-fs-below-max", scen("current_limit_a = 3.0", "current_limit_a = 3.0\ndac_full_scale_v = 30.0"),
         "supply.dac_full_scale_v = 30", "[max_v = 33"),
    _key("length-above", scen("length_m = 150.0", "length_m = 10000.5"), "cable.length_m", "(0, 10000]"),
    _key("awg-above", scen("conductor_mm2 = 1.5", "awg = 41"), "cable.awg = 41", "[-3, 40]"),
    _key("awg-below", scen("conductor_mm2 = 1.5", "awg = -4"), "cable.awg = -4", "[-3, 40]"),
    _key("awg-and-area", scen("conductor_mm2 = 1.5", "conductor_mm2 = 1.5\nawg = 16"), "cable.awg",
         "not both"),
    _key("no-gauge", scen("conductor_mm2 = 1.5\n", ""), "cable.conductor_mm2: missing", "(0, 1000]"),
    _key("material-unknown", scen('material = "copper"', 'material = "gold"'), 'cable.material = "gold"',
         '"copper"'),
    _key("temperature-below", scen("temperature_c = 2.0", "temperature_c = -60.5"), "cable.temperature_c",
         "[-60, 250]"),
    _key("temperature-end-above", scen("temperature_end_c = 6.0", "temperature_end_c = 250.5"),
         "cable.temperature_end_c", "[-60, 250]"),
    _key("inductance-above", scen("length_m = 150.0", "length_m = 150.0\ninductance_h = 1.5"),
         "cable.inductance_h", "[0, 1]"),
    _key("esr-above", scen("esr_ohm = 0.03", "esr_ohm = 100.5"), "load_end.esr_ohm = 100.5", "[0, 100]"),
    _key("leakage-zero", scen("esr_ohm = 0.03", "esr_ohm = 0.03\nleakage_ohm = 0"), "load_end.leakage_ohm",
         "(0, 1e+12]"),
    _key("capacitance-above", scen("capacitance_f = 4.7e-3", "capacitance_f = 10.5"), "load_end.capacitance_f",
         "(0, 10]"),
    _key("current-above", scen("current_a = 1.5", "current_a = 1000.5"), "load.current_a", "[0, 1000]"),
    _key("current-negative", scen("current_a = 1.5", "current_a = -0.1"), "load.current_a", "[0, 1000]"),
    _key("load-kind-missing", scen('kind = "constant_current"\n', ""), "load.kind: missing", '"resistive"'),
    _key("load-kind-unknown", scen('kind = "constant_current"', 'kind = "motor"'), 'load.kind = "motor"',
         '"lamp"'),
    _key("load-key-of-other-kind", scen("current_a = 1.5", "current_a = 1.5\nrated_v = 24.0"), "load.rated_v",
         "unknown key", "allowed:"),
    _key("steps-unsorted", scen("steps = [[0.05, 2.2]]", "steps = [[0.06, 2.2], [0.05, 1.0]]"),
         "load.steps[1][0] = 0.05", "(0.06, 0.1]"),
    _key("steps-after-run", scen("steps = [[0.05, 2.2]]", "steps = [[0.2, 2.2]]"), "load.steps[0][0] = 0.2",
         "[0, 0.1]"),
    _key("steps-not-a-list", scen("steps = [[0.05, 2.2]]", 'steps = "soon"'), "load.steps", "list"),
    _key("steps-not-pairs", scen("steps = [[0.05, 2.2]]", "steps = [[0.05, 2.2, 3.0]]"), "load.steps[0]",
         "pair"),
    _key("cutoff-above-target", scen("current_a = 1.5", "current_a = 1.5\ncutoff_v = 24.0"), "load.cutoff_v",
         "(0, target_v = 24)"),
    _key("restart-below-cutoff", scen("current_a = 1.5", "current_a = 1.5\ncutoff_v = 10.0\nrestart_v = 9.0"),
         "load.restart_v = 9", "[cutoff_v = 10, target_v = 24)"),
    _key("adc-bits-above", scen("adc_bits = 12", "adc_bits = 17"), "sensing.adc_bits = 17", "[8, 16]"),
    _key("rate-below", scen("sample_rate_hz = 32000.0", "sample_rate_hz = 999.0"), "sensing.sample_rate_hz",
         "[1000, 1e+06]"),
    _key("v-fs-not-above-target", scen("adc_bits = 12", "adc_bits = 12\nv_full_scale_v = 24.0"),
         "sensing.v_full_scale_v = 24", "(target_v = 24, 1000]"),
    _key("noise-above", scen("adc_bits = 12", "adc_bits = 12\nnoise_lsb_rms = 100.5"), "sensing.noise_lsb_rms",
         "[0, 100]"),
    _key("gain-error-above", scen("adc_bits = 12", "adc_bits = 12\ngain_error = 0.51"), "sensing.gain_error",
         "[-0.5, 0.5]"),
    _key("offset-below", scen("adc_bits = 12", "adc_bits = 12\noffset_lsb = -1000.5"), "sensing.offset_lsb",
         "[-1000, 1000]"),
    _key("duration-zero", scen("duration_s = 0.1", "duration_s = 0"), "run.duration_s = 0", "(0, 3600]"),
    _key("duration-above", scen("duration_s = 0.1", "duration_s = 3600.5"), "run.duration_s", "(0, 3600]"),
    _key("seed-negative", scen("seed = 1", "seed = -1"), "run.seed = -1", "[0, 9223372036854775807]"),
    _key("start-unknown", scen('start = "steady"', 'start = "warm"'), 'run.start = "warm"', '"cold"'),
    _key("unknown-section", add("[extras]\nx = 1"), "extras: unknown section", "allowed: supply"),
    _key("unknown-key", scen("max_v = 33.0", "max_v = 33.0\nmax_a = 3.0"), "supply.max_a: unknown key",
         "allowed: current_limit_a"),
    _key("duplicate-key", scen("max_v = 33.0", "max_v = 33.0\nmax_v = 30.0"), "not valid TOML",
         "line 8"),
    _key("duplicate-section", add("[run]\nseed = 2"), "not valid TOML"),
    _key("fault-until-before-at", add('[[fault]]\nkind = "cable_open"\nat_s = 0.05\nuntil_s = 0.02'),
         "fault[0].until_s = 0.02", "(at_s = 0.05, 3600]"),
    _key("fault-at-after-run", add('[[fault]]\nkind = "cable_open"\nat_s = 0.1'), "fault[0].at_s = 0.1",
         "[0, run.duration_s = 0.1)"),
    _key("fault-kind-unknown", add('[[fault]]\nkind = "lightning"\nat_s = 0.01'), 'fault[0].kind = "lightning"',
         '"cable_open"'),
    _key("fault-code-above", add('[[fault]]\nkind = "adc_stuck"\nat_s = 0.01\ncode = 4096\nchannel = "v"'),
         "fault[0].code = 4096", "[0, 2^adc_bits − 1 = 4095]"),
    _key("fault-key-of-other-kind", add('[[fault]]\nkind = "cable_open"\nat_s = 0.01\nchannel = "v"'),
         "fault[0].channel: unknown key", "allowed: at_s"),
    _key("fault-a-table", add('[fault]\nkind = "cable_open"\nat_s = 0.01'), "fault", "array of tables"),
    _key("algorithm-not-a-table", "algorithm = 3\n" + SHORT, "algorithm = 3", "must be a table"),
    _key("algorithm-period-not-power", add("[algorithm]\nperiod_samples = 33"), "algorithm.period_samples = 33",
         "power of two"),
    _key("algorithm-fraction-above", add("[algorithm]\npert_fraction = 0.6"), "algorithm.pert_fraction",
         "[0.01, 0.5]"),
    _key("algorithm-plant-key", add("[algorithm]\ntarget_v = 24.0"), "algorithm.target_v", "supply.target_v"),
    _key("algorithm-unknown-key", add("[algorithm]\ngain = 3"), "algorithm.gain", "unknown"),
    _key("algorithm-string", add('[algorithm]\nfault_windows = "6"'), "algorithm.fault_windows", "[1, 1000]"),
]


def _profile(name, csv_text, *frags, status=2):
    files = {"s.toml": scen("current_a = 1.5\nsteps = [[0.05, 2.2]]", 'profile_csv = "p.csv"')}
    if csv_text is not None:
        files["p.csv"] = csv_text
    return (f"profile-{name}", files, ["design", "{d}/s.toml"], status, frags)


PROFILE_CASES = [
    _profile("missing", None, "{d}/p.csv", "cannot read profile"),
    _profile("folder", DIR, "{d}/p.csv", "cannot read profile"),
    _profile("empty", "", "{d}/p.csv", "row 1", "t_s,current_a"),
    _profile("header-only", "t_s,current_a\n", "{d}/p.csv", "no data rows", "t_s,current_a"),
    _profile("wrong-header", "time,current\n0,1\n", "{d}/p.csv", "row 1", "t_s,current_a"),
    _profile("extra-column", "t_s,current_a,v\n0,1,2\n", "{d}/p.csv", "row 1", "t_s,current_a"),
    _profile("non-numeric", "t_s,current_a\n0,1.5\n0.05,lots\n", "{d}/p.csv", "row 3, column current_a = 'lots'",
             "[0, 1000]"),
    _profile("unsorted", "t_s,current_a\n0,1.5\n0.05,2\n0.04,2\n", "{d}/p.csv", "row 4, column t_s = '0.04'",
             "greater than the previous row's 0.05"),
    _profile("too-many-fields", "t_s,current_a\n0,1.5,3\n", "{d}/p.csv", "row 2", "2 columns"),
    _profile("negative-current", "t_s,current_a\n0,-1.5\n", "{d}/p.csv", "row 2, column current_a", "[0, 1000]"),
    _profile("nan-current", "t_s,current_a\n0,nan\n", "{d}/p.csv", "row 2, column current_a", "[0, 1000]"),
    _profile("not-utf8", b"t_s,current_a\n0,1.5 \xdf\n", "{d}/p.csv", "not UTF-8"),
    _profile("crlf-is-fine", "t_s,current_a\r\n0,1.5\r\n0.05,2.2\r\n", "Configuration analysed", status=0),
    _profile("bom-is-fine", "\ufefft_s,current_a\n0,1.5\n0.05,2.2\n", "Configuration analysed", status=0),
]


def _algo_file(name, text, *frags):
    files = {"a.toml": text} if text is not None else {}
    return [(f"algo-{cmd[0]}-{name}", dict(files, **{"in.csv": ADC_OK, "s.toml": SHORT}), cmd, 2, frags)
            for cmd in (["replay", "--in", "{d}/in.csv", "--out", "{d}/o.csv", "--config", "{d}/a.toml"],
                        ["simulate", "{d}/s.toml", "--algorithm", "{d}/a.toml"])]


ALGO_CASES = sum([
    _algo_file("missing", None, "{d}/a.toml", "cannot read"),
    _algo_file("not-toml", "[algorithm\n", "{d}/a.toml", "not valid TOML"),
    _algo_file("unknown-section", "[algorithm]\n[supply]\ntarget_v = 2\n", "{d}/a.toml", "supply",
               "only [algorithm]"),
    _algo_file("unknown-key", "[algorithm]\nspeed = 2\n", "{d}/a.toml", "algorithm.speed", "unknown"),
    _algo_file("string", '[algorithm]\nperiod_samples = "32"\n', "{d}/a.toml", "algorithm.period_samples",
               "[4, 256]"),
    _algo_file("above", "[algorithm]\nperiod_samples = 512\n", "{d}/a.toml", "algorithm.period_samples = 512",
               "[4, 256]"),
    _algo_file("nan", "[algorithm]\npert_fraction = nan\n", "{d}/a.toml", "algorithm.pert_fraction",
               "[0.01, 0.5]"),
    _algo_file("boolean", "[algorithm]\nfault_windows = true\n", "{d}/a.toml", "algorithm.fault_windows",
               "[1, 1000]"),
    _algo_file("not-a-table", "algorithm = 3\n", "{d}/a.toml", "[algorithm] must be a table"),
], [])


def _replay(name, csv_text, *frags, status=2, extra=()):
    files = {"in.csv": csv_text} if csv_text is not None else {}
    return (f"replay-{name}", files, ["replay", "--in", "{d}/in.csv", "--out", "{d}/o.csv", *extra], status, frags)


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
    _replay("out-equals-in", ADC_OK, "--out {d}/in.csv", "is the input", extra=()),
]
# The output-equals-input row names its own --out.
REPLAY_CASES[-1] = ("replay-out-equals-in", {"in.csv": ADC_OK},
                    ["replay", "--in", "{d}/in.csv", "--out", "{d}/in.csv"], 2,
                    ("--out {d}/in.csv", "--in"))


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
    _log("negative-code", "adc_v,adc_i,cmd\n-1,2,3\n", "{d}/log.csv", "row 2", "adc_v=-1", "[0, 65535]"),
    _log("above-uint16", "adc_v,adc_i,cmd\n1,65536,3\n", "{d}/log.csv", "row 2", "adc_i=65536", "[0, 65535]"),
    # Codes above the ADC's full scale reach ld_step as they are and are clamped there (the
    # extreme-codes vector feeds 65535), so a log holding one is compared, not refused.
    _log("above-adc-full-scale-is-compared", "adc_v,adc_i,cmd\n1,4096,3\n", "NOT bit-exact", status=1),
    _log("crlf-is-fine", LOG_OK.replace("\n", "\r\n"), "NOT bit-exact", "row 2", status=1),
    _log("bom-is-fine", "\ufeff" + LOG_OK, "NOT bit-exact", "row 2", status=1),
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
    _out("vectors-file", ["vectors", "{d}/s.toml", "--out", "{d}/f"], "--out {d}/f", "not a folder"),
    _out("bench-regulation-proc", ["bench", "--regulation", "--scenarios", "{d}/s.toml", "--out", "/proc/x"],
         "--out /proc/x", "cannot create"),
    _out("bench-regulation-file", ["bench", "--regulation", "--scenarios", "{d}/s.toml", "--out", "{d}/f"],
         "--out {d}/f", "not a folder"),
    _out("tune-proc", ["tune", "{d}/s.toml", "--out", "/proc/x"], "--out /proc/x", "cannot create"),
    _out("tune-file", ["tune", "{d}/s.toml", "--out", "{d}/f"], "--out {d}/f", "not a folder"),
]

CASES = SCENARIO_FILE_CASES + KEY_CASES + PROFILE_CASES + ALGO_CASES + REPLAY_CASES + LOG_CASES \
    + OPTION_CASES + OUT_CASES


def _materialise(folder, files):
    for name, content in files.items():
        path = folder / name
        if callable(content):
            content = content(folder)
        if content is DIR:
            path.mkdir()
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, newline="")


def _status(argv):
    try:
        return main(argv)
    except SystemExit as exc:         # argparse
        return exc.code


@pytest.mark.parametrize("files, argv, status, fragments", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_a_bad_input_ends_in_one_line_naming_it(capsys, tmp_path, files, argv, status, fragments):
    _materialise(tmp_path, files)
    d = str(tmp_path)
    before = sorted(os.listdir(tmp_path))
    assert _status([a.replace("{d}", d) for a in argv]) == status
    out, err = capsys.readouterr()
    if status == 2:
        assert len(err.strip().splitlines()) == 1 and out == "", err + out
        assert "Traceback" not in err
        assert sorted(os.listdir(tmp_path)) == before, "a refused run left files behind"
    text = out + err
    for frag in fragments:
        assert frag.replace("{d}", d) in text, text
