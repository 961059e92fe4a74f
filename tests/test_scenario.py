"""Scenario files: demo files load, and bad input gives one-line errors naming key and range."""

import tomllib
from pathlib import Path

import pytest

from harness.cli.main import main
from harness.plant.rig import build_rig
from harness.errors import InputError
from algo.config import SETTINGS
from harness.scenario.read import load_scenario, parse_scenario
from harness.scenario.specs import restart_voltage
from harness.scenario.write import scenario_to_toml

SCENARIOS = Path(__file__).resolve().parents[1] / "harness" / "scenario" / "scenarios"

BASE = """
[supply]
target_v = 24.0
max_v = 30.0
[cable]
length_m = 100.0
conductor_mm2 = 1.5
[load_end]
capacitance_f = 1e-3
[load]
kind = "constant_current"
current_a = 1.0
"""


def _write(tmp_path, text, name="scenario.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize("name", ["demo_mast.toml", "garden_lamps.toml", "parking_camera.toml"])
def test_demo_scenarios_load_and_build(name):
    """The shipped demo files parse and build a plant (no outside source)."""
    sc = load_scenario(SCENARIOS / name)
    batch = build_rig([sc])
    obs = batch.reset()
    assert obs.v_supply_v.shape == (1,)


def test_demo_mast_loop_resistance_from_gauge():
    """Source: IEC 60028 copper 1/58 ohm mm^2/m at 20 degC, 0.00393 /degC; 2 x 150 m of 1.5 mm^2 at 2 degC."""
    sc = load_scenario(SCENARIOS / "demo_mast.toml")
    assert sc.cable.resistance_ohm == pytest.approx(300 / 58 / 1.5 * (1 + 0.00393 * (2 - 20)), rel=1e-12)


def test_defaults_are_filled_in(tmp_path):
    """Documented defaults (harness/scenario/SCENARIO_KEYS.md): 12-bit ADC at 32 kHz, steady start."""
    sc = load_scenario(_write(tmp_path, BASE))
    assert (sc.sensing.adc_bits, sc.sensing.sample_rate_hz, sc.run.start) == (12, 32000.0, "steady")
    assert sc.load.cutoff_v == pytest.approx(6.0)


@pytest.mark.parametrize("old, new, fragments", [
    ("length_m = 100.0", "length_m = -3", ["cable.length_m = -3", "(0, 10000]"]),
    ("capacitance_f = 1e-3", "capacitance_f = 0.0", ["load_end.capacitance_f = 0.0", "(0, 10]"]),
    ("max_v = 30.0", "max_v = 30.0\nmin_v = 31.0", ["supply.min_v = 31.0", "supply.max_v = 30"]),
    ("target_v = 24.0", "target_v = 35.0", ["supply.target_v = 35.0", "[0, 30]"]),
    ("conductor_mm2 = 1.5", "conductor_mm2 = 1.5\nawg = 14", ["cable.awg", "not both"]),
    ("conductor_mm2 = 1.5", "conductor_mm2 = \"thick\"", ["cable.conductor_mm2 = \"thick\"", "number"]),
    ("length_m = 100.0", "length_m = 100.0\nlenght_m = 5.0", ["cable.lenght_m", "unknown key", "length_m"]),
    ("current_a = 1.0", "power_w = 5.0", ["load.current_a", "missing"]),
    ("current_a = 1.0", "current_a = 1.0\npower_w = 5.0", ["load.power_w", "unknown key"]),
    ('kind = "constant_current"', 'kind = "motor"', ["load.kind = \"motor\"", "constant_power"]),
    ("current_a = 1.0", "current_a = 1.0\nsteps = [[0.5, 2.0], [0.2, 1.0]]", ["load.steps[1][0] = 0.2", "(0.5, 1]"]),
    ("current_a = 1.0", "current_a = 1.0\n[sensing]\nadc_bits = 12.5", ["sensing.adc_bits = 12.5", "[8, 16]"]),
    ("current_a = 1.0", "current_a = 1.0\n[run]\nstart = \"warm\"", ["run.start = \"warm\"", "\"cold\""]),
    ("current_a = 1.0", "current_a = 1.0\n[[fault]]\nkind = \"cap_open\"\nat_s = 0.5\nuntil_s = 0.2",
     ["fault[0].until_s = 0.2", "must be in (at_s = 0.5, 3600]"]),
    ("current_a = 1.0", "current_a = 1.0\n[[fault]]\nkind = \"adc_stuck\"\nat_s = 0.1\nchannel = \"v\"\ncode = 4096",
     ["fault[0].code = 4096", "[0, 2^adc_bits − 1 = 4095]"]),
    ('kind = "constant_current"\ncurrent_a = 1.0', 'kind = "constant_power"\npower_w = 70.0',
     ["load.power_w = 70.0", "the most the cable can deliver"]),
    ("[load_end]", "[load_edn]", ["load_edn", "unknown section"]),
    ("current_a = 1.0", "current_a = 1.0\nrestart_v = 5.0", ["load.restart_v = 5.0", "[cutoff_v = 6, target_v = 24)"]),
    ("current_a = 1.0", "current_a = 1.0\nrestart_v = 24.0", ["load.restart_v = 24.0", "[cutoff_v = 6, target_v = 24)"]),
    ("current_a = 1.0", "current_a = 1.0\ncutoff_v = 10.0\nrestart_v = 9.5", ["load.restart_v = 9.5", "[cutoff_v = 10, target_v = 24)"]),
    ("current_a = 1.0", "current_a = 1.0\nrestart_v = \"high\"", ["load.restart_v = \"high\"", "number"]),
    ('kind = "constant_current"\ncurrent_a = 1.0', 'kind = "resistive"\nresistance_ohm = 10.0\nrestart_v = 8.0',
     ["load.restart_v", "unknown key", "resistive"]),
])
def test_bad_values_give_one_line_error_naming_file_key_and_range(tmp_path, old, new, fragments):
    """Brief's error format: ``file: key = value: allowed range`` on one line. Loop resistance
    for the power check: 2 x 100 m of 1.5 mm^2 copper is 2.30 ohm, so at most 62.6 W."""
    assert old in BASE
    path = _write(tmp_path, BASE.replace(old, new))
    with pytest.raises(InputError) as exc:
        load_scenario(path)
    msg = str(exc.value)
    assert "\n" not in msg and msg.startswith(str(path) + ": ")
    for frag in fragments:
        assert frag in msg, msg


@pytest.mark.parametrize("cutoff, restart", [(6.0, 15.0), (20.0, 22.0), (23.0, 23.5)])
def test_default_restart_is_halfway_from_the_cutoff_to_the_target(tmp_path, cutoff, restart):
    """Documented default (harness/scenario/SCENARIO_KEYS.md): (cutoff_v + target_v) / 2 at
    target_v = 24 V, worked by hand; the plant uses it."""
    sc = load_scenario(_write(tmp_path, BASE.replace("current_a = 1.0", f"current_a = 1.0\ncutoff_v = {cutoff}")))
    assert sc.load.restart_v is None
    assert restart_voltage(sc.load, sc.supply.target_v) == pytest.approx(restart, rel=1e-12)
    assert build_rig([sc]).plant.loads.restart_v[0] == pytest.approx(restart, rel=1e-12)


def test_restart_v_is_read_and_written_back(tmp_path):
    """scenario_to_toml round trip (harness/scenario/write.py's contract): restart_v survives it."""
    sc = load_scenario(_write(tmp_path, BASE.replace("current_a = 1.0", "current_a = 1.0\nrestart_v = 9.25")))
    assert sc.load.restart_v == 9.25
    assert parse_scenario(tomllib.loads(scenario_to_toml(sc)), sc.source).load == sc.load


def test_bad_restart_v_exits_with_status_2_and_one_line(capsys, tmp_path):
    path = _write(tmp_path, BASE.replace("current_a = 1.0", "current_a = 1.0\nrestart_v = 30.0"))
    assert main(["design", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "load.restart_v = 30.0" in err and "[cutoff_v = 6, target_v = 24)" in err, err


def test_profile_csv_is_read_relative_to_scenario(tmp_path):
    """Brief: profile_csv is relative to the scenario file, header t_s,current_a."""
    (tmp_path / "p.csv").write_text("t_s,current_a\n0,1.0\n0.5,2.0\n")
    sc = load_scenario(_write(tmp_path, BASE.replace("current_a = 1.0", 'profile_csv = "p.csv"')))
    assert sc.load.profile == ((0.0, 1.0), (0.5, 2.0))


@pytest.mark.parametrize("csv, fragments", [
    ("t,i\n0,1\n", ["row 1", "t_s,current_a"]),
    ("t_s,current_a\n0,1\n0.5,abc\n", ["row 3", "column current_a = 'abc'", "[0, 1000]"]),
    ("t_s,current_a\n0,1\n0,2\n", ["row 3", "column t_s"]),
])
def test_bad_profile_rows_are_named(tmp_path, csv, fragments):
    """Brief's error format for CSV profiles: file, row/column and allowed range on one line."""
    (tmp_path / "p.csv").write_text(csv)
    with pytest.raises(InputError) as exc:
        load_scenario(_write(tmp_path, BASE.replace("current_a = 1.0", 'profile_csv = "p.csv"')))
    msg = str(exc.value)
    assert "\n" not in msg and "p.csv" in msg
    for frag in fragments:
        assert frag in msg, msg


def test_invalid_toml_is_an_input_error(tmp_path):
    """A TOML syntax error is bad input too (one line, names the file)."""
    path = _write(tmp_path, "[supply\n")
    with pytest.raises(InputError, match="not valid TOML"):
        load_scenario(path)


PLANT_TABLES = {"supply": {"target_v": 24.0}, "cable": {"resistance_ohm": 2.0}, "load_end": {"capacitance_f": 1e-3},
        "load": {"kind": "constant_current", "current_a": 1.0}, "sensing": {}}


@pytest.mark.parametrize("section, key", [("supply", "dac_bits"), ("sensing", "adc_bits"),
                                          ("sensing", "sample_rate_hz")])
def test_converter_ranges_agree_between_the_keys_doc_the_scenario_reader_and_the_algorithm(section, key):
    """SCENARIO_KEYS.md, the scenario reader and algo.config.SETTINGS state one range."""
    s = SETTINGS[key]
    doc = (Path(__file__).resolve().parents[1] / "harness" / "scenario" / "SCENARIO_KEYS.md").read_text()
    row = next(line for line in doc.splitlines() if line.startswith(f"| {key} |"))
    lo, hi = (float(x) for x in row.split("[", 1)[1].split("]", 1)[0].split(","))
    assert (lo, hi) == (s.lo, s.hi)
    top = s.kind(s.hi)
    data = {k: dict(v) for k, v in PLANT_TABLES.items()}
    data[section][key] = top
    parse_scenario(data, Path("x.toml"))
    data[section][key] = s.kind(2 * top)
    with pytest.raises(InputError, match=rf"x.toml: {section}\.{key} = "):
        parse_scenario(data, Path("x.toml"))
