"""The published plant strategies: ranges as documented, the one excluded corner warned about by the
design calculator, and scenario_to_toml round trips (what every failure report relies on)."""
import tomllib
from dataclasses import replace

from hypothesis import given, settings

from harness.proof import strategies as hs
from harness.design.report import design_report
from harness.scenario.read import parse_scenario
from harness.scenario.write import scenario_to_toml


@settings(max_examples=settings.default.max_examples * 2)
@given(hs.plants())
def test_drawn_plants_stay_inside_the_documented_ranges(p):
    assert hs.R_RANGE[0] <= p.r_cable_ohm <= hs.R_RANGE[1]
    assert hs.C_RANGE[0] <= p.capacitance_f <= hs.C_RANGE[1]
    assert p.inductance_h == 0 or hs.L_MIN_H <= p.inductance_h <= hs.L_MAX_H
    assert hs.ADC_BITS[0] <= p.adc_bits <= hs.ADC_BITS[1]
    assert 0 <= p.esr_ohm <= max(1e-3, min(1.0, p.r_cable_ohm))
    assert p.f_lo_hz <= hs.F_LO_MAX_HZ * 1.0001
    assert p.max_v > p.target_v + (p.r_cable_ohm + p.esr_ohm) * p.load_current_a


@settings(max_examples=settings.default.max_examples // 2)
@given(hs.unservable_plants())
def test_the_design_calculator_warns_about_every_plant_the_sizing_rules_exclude(p):
    """DESIGN.md section 3.9: the capacitor must be an AC short at the perturbation frequency.
    The strategies leave out exactly the plants for which no allowed frequency makes it one."""
    rep = design_report(hs.base_scenario(p))
    assert any("not an AC short" in w for w in rep["warnings"]), rep["warnings"]


@settings(max_examples=settings.default.max_examples // 2)
@given(hs.plants())
def test_scenario_to_toml_round_trips_a_designed_scenario_exactly(p):
    sc = hs.design_scenario(p, 12, faults=(("cable_open", 2.5, 5.0), ("cap_open", 6.0, float("inf"))))
    back = parse_scenario(tomllib.loads(scenario_to_toml(sc, "comment\nlines")), "x")
    assert replace(back, source=sc.source) == sc
    assert back.algorithm == sc.algorithm
