"""ADC and DAC against quantisation theory and their definitions."""

from dataclasses import replace

import numpy as np
import pytest

from harness.plant.sensing import Adc, Dac
from harness.scenario.specs import SensingSpec, SupplySpec

SPEC = SensingSpec(v_full_scale_v=40.96, i_full_scale_a=4.096, adc_bits=12, noise_lsb_rms=0.0)


def _errors_lsb(spec, batch=100, samples=2000, seed=11):
    """Quantisation error in LSB of ``batch * samples`` uniformly spread conversions."""
    adc = Adc([spec] * batch, seeds=range(batch))
    v = np.random.default_rng(seed).uniform(1.0, 39.0, (samples, batch))
    codes = np.array([adc.convert(row, np.zeros(batch))[0] for row in v])
    lsb = spec.v_full_scale_v / 2**spec.adc_bits
    return (codes - v / lsb).ravel()


def test_quantisation_error_variance_is_one_twelfth_lsb_squared():
    """Source: Widrow, Kollar & Liu, "Statistical theory of quantization", IEEE Trans.
    Instrum. Meas. 45(2), 1996: a rounding quantiser fed a signal spread over many steps has
    error uniform in [-1/2, 1/2) LSB, variance 1/12 LSB^2 and zero mean. 2e5 samples give a
    standard error of about 0.2 % on the variance; tolerance 2 %, mean within 0.01 LSB."""
    e = _errors_lsb(SPEC)
    assert np.var(e) == pytest.approx(1 / 12, rel=0.02)
    assert abs(np.mean(e)) < 0.01
    assert np.max(np.abs(e)) <= 0.5


def test_noise_adds_in_power_to_quantisation_error():
    """Source: Widrow, Kollar & Liu 1996 (as above): with Gaussian noise of 1 LSB rms before
    the quantiser the quantisation error stays uniform and uncorrelated, so the total error
    variance is sigma^2 + 1/12 LSB^2. Tolerance 2 %."""
    e = _errors_lsb(replace(SPEC, noise_lsb_rms=1.0))
    assert np.var(e) == pytest.approx(1.0 + 1 / 12, rel=0.02)


@pytest.mark.parametrize("v_lsb, code", [(0.0, 0), (0.4, 0), (0.6, 1), (1000.4, 1000), (1000.6, 1001),
                                         (4094.6, 4095), (5000.0, 4095), (-3.0, 0)])
def test_codes_round_to_nearest_and_clip_to_range(v_lsb, code):
    """Source: brief's ADC definition (round to nearest, unsigned, clipped to [0, 2**bits - 1])."""
    adc = Adc([SPEC], seeds=[0])
    v, i = adc.convert(np.array([v_lsb * 0.01]), np.array([v_lsb * 0.001]))
    assert v[0] == code and i[0] == code


def test_gain_and_offset_errors_shift_codes():
    """Source: the usual linear ADC error model code = x (1 + gain error) + offset
    (e.g. Analog Devices MT-010, from memory). 1 % gain at 2000 LSB is 20 LSB, offset 3 LSB."""
    adc = Adc([replace(SPEC, gain_error=0.01, offset_lsb=3.0)], seeds=[0])
    v, _ = adc.convert(np.array([20.0]), np.array([0.0]))
    assert v[0] == 2000 + 20 + 3


def test_stuck_channel_reports_its_fixed_code():
    """Source: the adc_stuck fault as specified (a fixed code on one channel)."""
    adc = Adc([SPEC, SPEC], seeds=[0, 1])
    v, i = adc.convert(np.array([10.0, 10.0]), np.array([1.0, 1.0]), np.array([-1, 77]), np.array([5, -1]))
    assert list(v) == [1000, 77] and list(i) == [5, 1000]


def test_noise_sequence_depends_only_on_seed():
    """Reproducibility requirement (STYLE.md: seeded generators); no outside source."""
    noisy = replace(SPEC, noise_lsb_rms=2.0)
    one = Adc([noisy], seeds=[5])
    two = Adc([replace(noisy, adc_bits=10), noisy], seeds=[9, 5])
    for _ in range(5000):
        a, _ = one.convert(np.array([12.3]), np.array([0.0]))
        b, _ = two.convert(np.array([12.3, 12.3]), np.array([0.0, 0.0]))
        assert a[0] == b[1]


def test_dac_volts_are_code_times_full_scale_over_two_to_bits():
    """Source: ideal straight-binary DAC transfer function V = code * FS / 2**N (e.g. Analog
    Devices MT-015, from memory)."""
    dac = Dac([SupplySpec(target_v=24.0, max_v=30.0, dac_bits=10, dac_full_scale_v=32.0)])
    assert dac.to_volts(np.array([512]))[0] == 16.0
    assert dac.to_volts(np.array([5000]))[0] == 1023 * 32.0 / 1024
    assert dac.to_code(np.array([24.0]))[0] == 768
    assert dac.to_code(np.array([24.0 + 0.49 * 32 / 1024]))[0] == 768


@pytest.mark.parametrize("planned", [1, 4096, 5000])
def test_a_planned_run_length_leaves_the_noise_unchanged_before_and_past_it(planned):
    """The reference is the same ADC without a plan (its noise drawn block after block)."""
    spec = replace(SPEC, noise_lsb_rms=3.0)
    v = np.full(3, 20.0)
    ref, got = Adc([spec] * 3, seeds=range(3)), Adc([spec] * 3, seeds=range(3))
    got.plan(planned)
    for _ in range(9000):
        np.testing.assert_array_equal(got.convert(v, v / 10)[0], ref.convert(v, v / 10)[0])
    ref.close()
    got.close()


def test_a_setpoint_gain_error_moves_the_load_by_that_share_of_the_command():
    # A converter's gain error is the slope of its transfer line against the ideal one (the
    # usual definition, IEEE Std 1658 for DACs, from memory): with 1 + g volts per nominal volt the
    # supply puts out the firmware's command times 1 + g, which its ADC-side estimate cannot see,
    # so the load moves by g times the command the loop settles to (within the DAC LSB and the
    # estimate's LSB times the current, design's quantisation bound).
    from dataclasses import replace
    from harness.design.report import design_report
    from harness.design.settings import recommended
    from harness.loop.closed_loop import simulate
    from harness.loop.metrics import TAIL, metrics
    from harness.scenario.read import DEMO, load_scenario
    sc = recommended(load_scenario(DEMO))
    base = simulate([sc], backend="c")
    g = 0.005
    off = simulate([replace(sc, supply=replace(sc.supply, dac_gain_error=g))], backend="c")
    t = base.t_s
    command_v = float(base.channels["command_v"][t >= t[-1] * (1 - TAIL), 0].mean())
    shift = metrics(base)["load_error_v"] - metrics(off)["load_error_v"]
    assert shift == pytest.approx(g * command_v, abs=design_report(sc)["quantisation_error_v"])
    assert g * command_v > 10 * design_report(sc)["quantisation_error_v"]


def test_each_adc_channels_own_gain_moves_the_load_as_the_ratio_estimate_predicts():
    # The estimate is V/I in codes and the drop it gives is that ratio times the current code, so
    # the correction scales with the voltage channel's gain g_v, and the current channel's gain
    # g_i cancels except in the fixed ESR allowance, whose share of the drop (allowance times the
    # current code) it scales: the load moves by g_v * correction - g_i * allowance * I (circuit
    # algebra on the ratio; within design's quantisation bound).
    from dataclasses import replace
    from harness.design.report import design_report
    from harness.design.settings import recommended
    from harness.loop.closed_loop import simulate
    from harness.loop.metrics import TAIL, metrics
    from harness.scenario.read import DEMO, load_scenario
    sc = recommended(load_scenario(DEMO))
    rep = design_report(sc)
    slack = rep["quantisation_error_v"]

    def run(**k):
        r = simulate([replace(sc, sensing=replace(sc.sensing, **k))], backend="c")
        t = r.t_s
        tail = t >= t[-1] * (1 - TAIL)
        corr = float(r.channels["correction_v"][tail, 0].mean())
        i = float(r.channels["i_supply_a"][tail, 0].mean())
        return metrics(r)["load_error_v"], corr, i

    base, corr, i = run()
    g = 0.01
    v_only = base - run(gain_error=g, current_gain_error=-g)[0]
    i_only = base - run(current_gain_error=g)[0]
    assert v_only == pytest.approx(g * corr, abs=slack) and g * corr > 5 * slack
    assert i_only == pytest.approx(-g * sc.algorithm["esr_allowance_ohm"] * i, abs=slack)
