"""linedrop design warns where a limit is below what the plant needs: estimate range, supply current
limit, converter full scales, headroom at the compensated current; the shipped scenarios raise none."""
import glob

import pytest

from harness.design.report import design_report
from harness.scenario.read import load_scenario

# Invented plants. A 48 V camera at the end of 100 m of AWG 24 copper: 84.22 ohm/km per
# conductor at 20 degC (ASTM B258 / NBS Handbook 100), so a 16.8 ohm loop.
CAMERA = """
[supply]
target_v = 48.0
max_v = 57.0
[cable]
length_m = 100.0
awg = 24
[load_end]
capacitance_f = 2.2e-3
[load]
kind = "constant_current"
current_a = 0.3
[sensing]
i_full_scale_a = 1.0
{algorithm}
"""

BASE = """
[supply]
target_v = {target}
max_v = {max_v}
{supply}
[cable]
resistance_ohm = {r}
[load_end]
capacitance_f = 22e-3
[load]
kind = "{kind}"
{load}
[sensing]
{sensing}
"""

SHIPPED = sorted(glob.glob("harness/scenario/scenarios/*.toml"))

PHRASES = ("r_max_ohm", "current_limit_a", "current ADC reads", "voltage ADC reads", "headroom")


def _report(tmp_path, text):
    p = tmp_path / "s.toml"
    p.write_text(text)
    return design_report(load_scenario(str(p)))


def plant(tmp_path, **kw):
    """Design report of BASE with ``kw`` replacing the defaults (an invented 24 V, 0.5 ohm run)."""
    v = dict(target=24.0, max_v=30.0, supply="", r=0.5, kind="constant_current", load="current_a = 2.0",
             sensing="")
    v.update(kw)
    return _report(tmp_path, BASE.format(**v))


def _has(rep, phrase):
    return any(phrase in w for w in rep["warnings"])


def test_camera_cable_resistance_agrees_with_the_awg24_table(tmp_path):
    """AWG 24 copper, 84.22 ohm/km per conductor at 20 degC (ASTM B258): 2 x 100 m is 16.84 ohm."""
    rep = _report(tmp_path, CAMERA.format(algorithm=""))
    assert rep["r_cable_ohm"] == pytest.approx(2 * 100.0 * 84.22e-3, rel=1e-3)


def test_a_user_r_max_below_the_cable_is_warned(tmp_path):
    """r_max_ohm = 10 ohm on a 16.8 ohm loop: every window would read r_high."""
    rep = _report(tmp_path, CAMERA.format(algorithm="[algorithm]\nr_max_ohm = 10.0\n"))
    assert _has(rep, "r_max_ohm = 10 ohm"), rep["warnings"]
    assert not _has(_report(tmp_path, CAMERA.format(algorithm="")), "r_max_ohm"), "recommended r_max warned"


def test_r_max_counts_the_hot_cable(tmp_path):
    """An r_max_ohm above the cold loop but within R_MAX_ROOM of the hot one is warned.

    Copper's 0.00393 /degC (IEC 60028): 16.84 ohm at 20 degC is 16.84 * (1 + 0.00393 * 60) =
    20.8 ohm at 80 degC; r_max_ohm 24 ohm is 1.43x the cold loop but only 1.15x the hot one.
    """
    cold = CAMERA.format(algorithm="[algorithm]\nr_max_ohm = 24.0\n")
    assert not _has(_report(tmp_path, cold), "r_max_ohm")
    hot = cold.replace("awg = 24", "awg = 24\ntemperature_end_c = 80.0")
    rep = _report(tmp_path, hot)
    assert rep["r_cable_range_ohm"][1] == pytest.approx(16.84 * (1 + 0.00393 * 60), rel=2e-3)
    assert _has(rep, "r_max_ohm = 24 ohm"), rep["warnings"]


def test_a_load_above_the_current_limit_is_warned(tmp_path):
    """6 A behind a 4 A supply limit (the current ADC sized apart so only the limit is at fault)."""
    rep = plant(tmp_path, supply="current_limit_a = 4.0", load="current_a = 6.0", sensing="i_full_scale_a = 10.0")
    assert _has(rep, "current_limit_a = 4 A"), rep["warnings"]
    assert not _has(rep, "current ADC reads")
    assert not _has(plant(tmp_path, supply="current_limit_a = 8.0", load="current_a = 6.0",
                          sensing="i_full_scale_a = 10.0"), "current_limit_a")


def test_the_current_limit_is_checked_at_the_compensated_current(tmp_path):
    """A lamp draws more once compensated: 12 V 60 W is 5 A hot at 12 V (I = P / V). Behind a 1 ohm
    loop it sags and draws under 4.8 A, so only the compensated current is above a 4.8 A limit."""
    rep = plant(tmp_path, target=12.0, max_v=30.0, r=1.0, supply="current_limit_a = 4.8", kind="lamp",
                load="rated_v = 12.0\nrated_w = 60.0", sensing="i_full_scale_a = 10.0")
    assert rep["loads"][0]["current_a"] < 4.8 < rep["compensated_current_a"]
    assert rep["compensated_current_a"] == pytest.approx(60.0 / 12.0, rel=1e-6)
    assert _has(rep, "current_limit_a = 4.8 A"), rep["warnings"]


@pytest.mark.parametrize("load,sensing", [("current_a = 1.0", "i_full_scale_a = 0.5"),
                                          ("current_a = 20.0", "")])
def test_a_current_above_the_current_adc_full_scale_is_warned(tmp_path, load, sensing):
    """1 A on a 0.5 A full scale, and 20 A on the default 10 A (SCENARIO_KEYS.md [sensing])."""
    rep = plant(tmp_path, max_v=40.0, load=load, sensing=sensing)
    assert _has(rep, "current ADC reads"), rep["warnings"]


def test_the_current_adc_counts_the_perturbation_swing(tmp_path):
    """9.9 A is inside 10 A full scale but its perturbation swing is not (the swing is design's
    current_swing_a; the top code reads 10 A * (1 - 2**-12))."""
    rep = plant(tmp_path, load="current_a = 9.9")
    assert 9.9 + rep["current_swing_a"] > 10.0 * (1 - 2 ** -12)
    assert _has(rep, "current ADC reads"), rep["warnings"]
    assert not _has(plant(tmp_path, load="current_a = 8.0"), "current ADC reads")


def test_a_voltage_full_scale_below_max_v_is_warned(tmp_path):
    """v_full_scale_v 25 V under max_v 30 V; the default 1.25 x max_v is not warned."""
    assert _has(plant(tmp_path, sensing="v_full_scale_v = 25.0"), "voltage ADC reads")
    assert not _has(plant(tmp_path), "voltage ADC reads")


def test_headroom_catches_a_lamp_shortfall_the_sagging_current_hides(tmp_path):
    """12 V 60 W lamp on 0.4 ohm: at 12 V it draws 5 A (P / V), so the correction needs 0.4 * 5 =
    2.0 V; sagging uncompensated it draws less and needs under 1.9 V. 1.9 V of headroom is short."""
    rep = plant(tmp_path, target=12.0, max_v=13.9, r=0.4, kind="lamp", load="rated_v = 12.0\nrated_w = 60.0")
    assert rep["loads"][0]["current_a"] * 0.4 < 1.9
    # Within 0.5 %: design subtracts the load end's share of the estimate as the sampled plant
    # shows it, the figure uses its circuit-algebra value (operating_point.end_real_ohm); the two
    # differ by the sampling's own small part. The sagging current would be 5 % low.
    assert rep["correction_needed_v"] == pytest.approx(0.4 * 5.0, rel=5e-3)
    assert _has(rep, "headroom"), rep["warnings"]


def test_headroom_does_not_warn_a_constant_power_load_that_fits(tmp_path):
    """60 W on 2 ohm at 24 V: at the target it draws 2.5 A (P / V) and needs 5 V, within 6 V of
    headroom; uncompensated it sags to V = 12 + sqrt(144 - 120) = 16.9 V and draws 3.55 A (V^2 -
    24 V + 120 = 0), which would have asked for 7.1 V."""
    rep = plant(tmp_path, r=2.0, kind="constant_power", load="power_w = 60.0")
    assert rep["loads"][0]["load_v"] == pytest.approx(12.0 + 24.0 ** 0.5, rel=1e-6)
    assert rep["correction_needed_v"] == pytest.approx(2.0 * 60.0 / 24.0, rel=5e-3)   # as above
    assert not _has(rep, "headroom"), rep["warnings"]


@pytest.mark.parametrize("path", SHIPPED)
def test_shipped_scenarios_raise_none_of_the_limit_warnings(path):
    """The shipped scenarios are sized within every limit these warnings check."""
    warnings = design_report(load_scenario(path))["warnings"]
    assert not [w for w in warnings if any(p in w for p in PHRASES)], warnings


RIPPLE = """
[supply]
target_v = 24.0
max_v = 30.0
dac_bits = {dac_bits}
[cable]
resistance_ohm = 0.5
[load_end]
capacitance_f = 22e-3
esr_ohm = {esr}
[load]
kind = "constant_current"
current_a = 2.0
[sensing]
adc_bits = {adc_bits}
"""


def test_a_converter_floor_that_puts_ripple_on_the_load_is_warned(tmp_path):
    """An invented 24 V run with the capacitor's ESR equal to the cable's 0.5 ohm and an 8-bit DAC:
    the perturbation floor the converters need divides about evenly between cable and ESR
    (|ESR + 1/jwC| ~ ESR at 22 mF, worked by hand), so half of it reaches the load, well above
    0.5 % of 24 V = 0.12 V. A 0.005 ohm ESR with 16-bit converters leaves nothing to warn."""
    rep = _report(tmp_path, RIPPLE.format(dac_bits=8, esr=0.5, adc_bits=10))
    assert _has(rep, "of ripple on the load"), rep["warnings"]
    quiet = _report(tmp_path, RIPPLE.format(dac_bits=16, esr=0.005, adc_bits=16))
    assert not _has(quiet, "of ripple on the load"), quiet["warnings"]
