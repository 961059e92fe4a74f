"""Bad scenario and algorithm files, one row per case (format: tests/support/bad_inputs.py): each
ends in one line naming the file and key and what is allowed, exit status 2, no traceback. The
ranges are those of harness/scenario/SCENARIO_KEYS.md and algo.config.SETTINGS, each tried just
outside; a profile with CRLF line ends or a byte-order mark is read as usual.
"""
import pytest

from support.bad_inputs import ADC_OK, DIR, SHORT, add, check_row, scen


def _scenario_files(command):
    """The file-level cases of a scenario argument, for ``command`` (argv before the file)."""
    out = [
        ("missing", {}, "{d}/nope.toml", ("{d}/nope.toml", "cannot read")),
        ("folder", {"s.toml": DIR}, "{d}/s.toml", ("{d}/s.toml", "cannot read scenario", "Is a directory")),
        ("not-utf8", {"s.toml": b"[supply]\ntarget_v = 24 # \xdf\n"}, "{d}/s.toml", ("{d}/s.toml", "not UTF-8")),
        ("not-toml", {"s.toml": "[supply\ntarget_v = 24\n"}, "{d}/s.toml", ("{d}/s.toml", "not valid TOML", "line 1")),
        ("empty", {"s.toml": ""}, "{d}/s.toml", ("{d}/s.toml", "[supply]: missing", "required sections")),
        ("binary", {"s.toml": b"\x00\x01\x02"}, "{d}/s.toml", ("{d}/s.toml", "not valid TOML")),
        ("under-a-file", {"f": "x"}, "{d}/f/s.toml", ("{d}/f/s.toml", "cannot read scenario", "Not a directory")),
    ]
    return [(f"{command[0]}-scenario-{name}", files, command + [arg] + rest, 2, frags)
            for name, files, arg, frags in out
            for rest in [{"tune": ["--out", "{d}/o"], "spread": ["--out", "{d}/o", "--max-error-mv", "30"]}
                         .get(command[0], [])]]


SCENARIO_FILE_CASES = (_scenario_files(["design"]) + _scenario_files(["simulate"])
                       + _scenario_files(["tune"]) + _scenario_files(["spread"])
                       + _scenario_files(["vectors", "--out", "{d}/v"])
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
    _key("algorithm-integer-nan", add("[algorithm]\nfault_windows = nan"), "algorithm.fault_windows = nan",
         "integer in [1, 1000]"),
    _key("algorithm-integer-inf", add("[algorithm]\nr_frac_bits = inf"), "algorithm.r_frac_bits = inf",
         "integer in [8, 16]"),
    _key("algorithm-power-of-two-minus-inf", add("[algorithm]\nperiods_per_window = -inf"),
         "algorithm.periods_per_window = -inf", "power of two in [1, 64]"),
    _key("algorithm-integer-as-float", add("[algorithm]\ntable_bits = 12.0"), "algorithm.table_bits = 12.0",
         "integer in [8, 16]"),
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
    _algo_file("empty", "", "{d}/a.toml", "no [algorithm] table"),
    _algo_file("comments-only", "# settings to come\n", "{d}/a.toml", "no [algorithm] table"),
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
    _algo_file("integer-nan", "[algorithm]\nacc_bits = nan\n", "{d}/a.toml", "algorithm.acc_bits = nan",
               "integer in [20, 32]"),
    _algo_file("integer-inf", "[algorithm]\nstep_rel_shift = inf\n", "{d}/a.toml", "algorithm.step_rel_shift",
               "integer in [0, 8]"),
    _algo_file("integer-as-float", "[algorithm]\ncorr_frac_bits = 4.0\n", "{d}/a.toml",
               "algorithm.corr_frac_bits = 4.0", "integer in [0, 8]"),
], [])

CASES = SCENARIO_FILE_CASES + KEY_CASES + PROFILE_CASES + ALGO_CASES


@pytest.mark.parametrize("files, argv, status, fragments", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_a_bad_input_ends_in_one_line_naming_it(capsys, tmp_path, files, argv, status, fragments):
    check_row(capsys, tmp_path, files, argv, status, fragments)
