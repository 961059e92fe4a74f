"""Cable loop resistance against published conductor tables."""

import pytest

from harness.plant.cable import CableResistance
from harness.scenario import conductors


@pytest.mark.parametrize("awg, ohm_per_km", [(10, 3.277), (12, 5.211), (14, 8.286), (18, 20.95), (20, 33.31),
                                             (24, 84.22)])
def test_awg_resistance_matches_astm_b258_table(awg, ohm_per_km):
    """Solid annealed copper at 20 degC.

    Source: ASTM B258 / NBS Handbook 100 (Copper Wire Tables) resistance per km at 20 degC,
    values as quoted in the project brief. Tolerance 0.5 %.
    """
    r = conductors.conductor_resistance_ohm(1000.0, conductors.awg_area_mm2(awg), "copper", 20.0)
    assert r == pytest.approx(ohm_per_km, rel=0.005)


@pytest.mark.parametrize("mm2, max_ohm_per_km", [(0.5, 36.0), (0.75, 24.5), (1.0, 18.1), (1.5, 12.1),
                                                 (2.5, 7.41), (4.0, 4.61)])
def test_metric_copper_is_below_iec_60228_maximum(mm2, max_ohm_per_km):
    """Nominal cross-sections, plain copper, 20 degC.

    Source: IEC 60228 Table A.1 (class 1/2 plain copper maximum DC resistance at 20 degC).
    The table is a maximum, so the model must lie below it; it must also lie within 10 % of
    it, because the maxima sit a few per cent above the nominal value (that margin is common
    practice, no published source).
    """
    r = conductors.conductor_resistance_ohm(1000.0, mm2, "copper", 20.0)
    assert 0.90 * max_ohm_per_km < r <= max_ohm_per_km


@pytest.mark.parametrize("mm2, max_ohm_per_km", [(16.0, 1.91), (25.0, 1.20), (35.0, 0.868)])
def test_aluminium_is_below_iec_60228_maximum(mm2, max_ohm_per_km):
    """Class 2 aluminium conductors at 20 degC.

    Source: IEC 60228 Table for class 2 aluminium conductors, maximum resistance at 20 degC
    (values from memory). Same 10 % window as for copper (common practice, no published source).
    """
    r = conductors.conductor_resistance_ohm(1000.0, mm2, "aluminium", 20.0)
    assert 0.90 * max_ohm_per_km < r <= max_ohm_per_km


@pytest.mark.parametrize("awg, ohm_per_kft", [(14, 3.07), (12, 1.93)])
def test_awg_resistance_at_75c_matches_nec_chapter_9_table_8(awg, ohm_per_kft):
    """Solid uncoated copper at 75 degC.

    Source: NFPA 70 (NEC) Chapter 9, Table 8, DC resistance at 75 degC. Tolerance 1 %.
    """
    r = conductors.conductor_resistance_ohm(304.8, conductors.awg_area_mm2(awg), "copper", 75.0)
    assert r == pytest.approx(ohm_per_kft, rel=0.01)


def test_awg_36_diameter_is_five_mils():
    """Source: ASTM B258 defines AWG 36 as 0.005 in (0.127 mm) and AWG 0000 as 0.46 in (11.684 mm)."""
    assert conductors.awg_diameter_mm(36) == pytest.approx(0.127, rel=1e-12)
    assert conductors.awg_diameter_mm(-3) == pytest.approx(11.684, rel=1e-9)


def test_loop_counts_both_conductors():
    """Source: DESIGN.md section 2 (loop resistance counts both conductors); Ohm's law."""
    one = conductors.conductor_resistance_ohm(150.0, 1.5, "copper", 20.0)
    assert conductors.loop_resistance_ohm(150.0, 1.5, "copper", 20.0) == pytest.approx(2.0 * one, rel=1e-15)
    assert one == pytest.approx(150.0 / 58.0 / 1.5, rel=1e-12)


def test_temperature_ramp_scales_resistance_linearly_in_temperature():
    """Source: IEC 60028 linear temperature coefficient 0.00393 /degC at 20 degC for annealed copper."""
    ramp = CableResistance(2.0, "copper", 20.0, 70.0, ramp_s=10.0)
    assert ramp.r_ohm(0.0) == pytest.approx(2.0, rel=1e-15)
    assert ramp.r_ohm(10.0) == pytest.approx(2.0 * (1 + 0.00393 * 50.0), rel=1e-12)
    assert ramp.r_ohm(5.0) == pytest.approx(2.0 * (1 + 0.00393 * 25.0), rel=1e-12)
    assert ramp.r_ohm(20.0) == ramp.r_ohm(10.0)
