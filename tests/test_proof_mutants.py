"""Closed-loop examples that pin what the properties only bound: each fails on one of the one-line
mutations of issue 15 (`.ci/named_mutants.py` applies them in a scratch copy; PROOFS.md lists
which test kills which). Every expected value is worked out by hand from the circuit or from the
settings, named beside the check. The runs are the fixed-point model alone (range-checked every
sample): the C is held to it elsewhere, and a mutant of the model must fail on its behaviour.
"""
import math
from dataclasses import replace

import numpy as np
import pytest

from algo import state as st
from algo.params import derive
from harness.plant.plant import Plant
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario
from support.proof_support import amplitude_in_force, run_groups, window_ends

FAULT_AT, FAULT_UNTIL = 30, 45      # windows: the faults start and end on window boundaries

PLANT = hs.DrawnPlant(r_cable_ohm=1.0, capacitance_f=4.7e-3, esr_ohm=0.0, inductance_h=0.0, bandwidth_hz=0.0,
                      target_v=24.0, max_v=30.0, load_kind="constant_current", load_current_a=1.5,
                      load_steps=(), i_full_scale_a=5.0, adc_bits=14, dac_bits=14, noise_lsb_rms=0.5,
                      offset_lsb=0.0, gain_error=0.0, temperature_c=20.0, temperature_end_c=20.0,
                      sample_rate_hz=0.0)


def _plant(**kw):
    """PLANT with ``kw`` changed, at the sample rate the strategies draw for it."""
    p = replace(PLANT, **kw)
    return replace(p, sample_rate_hz=hs.rate_for(p.f_lo_hz))


def _run(plant, windows, faults=(), overrides=None):
    """(lr, b, window end samples) of one plant with the design calculator's settings."""
    sc = hs.design_scenario(plant, windows, faults=faults, overrides=overrides)
    (lr, b), = run_groups([sc], algos=("model",))
    return lr, b, window_ends(lr, b)


def test_the_correction_never_exceeds_the_headroom_less_the_perturbation_and_reaches_it_when_the_drop_needs_more():
    """Drop R*I = 1.5 V, headroom max_v - target = 0.75 V, corr_max_v 2 V: the correction is at
    most the headroom less the perturbation's peak (to the DAC code; algo.step.corr_ceiling, with
    the amplitude in force when the period's correction was computed) at every sample, and
    reaches it (worked by hand)."""
    plant = _plant(max_v=24.75)
    lr, b, ends = _run(plant, 40, overrides={"corr_max_v": 2.0})
    cfg = algo_config(lr.run.scenarios[b])
    lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    headroom_v = (round(24.75 / lsb) - round(24.0 / lsb)) * lsb
    corr = lr.run.channels["correction_v"][:, b]
    pert = amplitude_in_force(lr, b, cfg.period_samples) * lsb
    ceiling = headroom_v - pert
    assert (corr <= ceiling + 0.5 * lsb).all()      # correction_v is float32
    assert corr[ends[-1]] >= ceiling[ends[-1]] - lsb
    assert pert[ends[-1]] > 0


def _outcomes(lr, b, ends, first, last):
    return [int(lr.trace["status"][ends[w], b]) for w in range(first, last)]


@pytest.mark.parametrize("kind, load, outcome", [
    # Cable open: no current flows, so the current swing is zero (below any swing_min_a).
    ("cable_open", "constant_current", st.STATUS_LOW_SWING),
    # Capacitor open, constant current load: the load takes no AC current, the swing is zero.
    ("cap_open", "constant_current", st.STATUS_LOW_SWING),
    # Capacitor open, 16 ohm resistive load: Re Z = 1 + 16 ohm, above r_max_ohm (2 ohm).
    ("cap_open", "resistive", st.STATUS_R_HIGH),
])
def test_an_open_cable_reads_low_swing_from_its_first_whole_window(kind, load, outcome):
    """Outcome sequence: VALID before the fault, the fault's own outcome in every window it holds."""
    lr, b, ends = _run(_plant(load_kind=load), 50, faults=[(kind, FAULT_AT, FAULT_UNTIL)])
    assert _outcomes(lr, b, ends, FAULT_AT - 5, FAULT_AT) == [st.STATUS_VALID] * 5
    assert _outcomes(lr, b, ends, FAULT_AT, FAULT_UNTIL) == [outcome] * (FAULT_UNTIL - FAULT_AT)


def test_capacitor_open_forces_zero_at_the_end_of_exactly_fault_windows_bad_windows():
    """The fault starts with window FAULT_AT: windows FAULT_AT .. FAULT_AT + fault_windows - 1 are
    bad (bad_windows counts 1, 2, ...), so the correction, which a constant current load leaves at
    its settled value, holds to the end of window FAULT_AT + fault_windows - 2 and is zero from the
    end of window FAULT_AT + fault_windows - 1 to the fault's end (the fault_windows rule, counted
    by hand)."""
    lr, b, ends = _run(_plant(), 50, faults=[("cap_open", FAULT_AT, FAULT_UNTIL)])
    fw = algo_config(lr.run.scenarios[b]).fault_windows
    bad = [int(lr.trace["bad_windows"][ends[w], b]) for w in range(FAULT_AT - 1, FAULT_UNTIL)]
    assert bad == list(range(FAULT_UNTIL - FAULT_AT + 1))
    corr = lr.trace["corr"][:, b]
    held = corr[ends[FAULT_AT - 1]]
    assert held > 0
    assert corr[ends[FAULT_AT + fw - 2]] == pytest.approx(held, rel=0.01)
    assert not corr[ends[FAULT_AT + fw - 1]:ends[FAULT_UNTIL - 1] + 1].any()


def test_a_load_step_twice_the_detector_threshold_reads_transient():
    """Ideal supply, cable R = 1 ohm, ESR = R, constant current load: a load step dI moves the cable
    current at once by dI * ESR / (R + ESR) = dI / 2, then it follows with tau = (R + ESR) C
    (150 samples here), so the first whole period after a step on a period boundary sums
    dI / i_lsb * sum_k (1 - exp(-(k+1) / tau) / 2) codes more than the one before (first-order
    circuit, worked by hand). The threshold is step_min or the swing share, whichever is larger;
    the swing share is at most the perturbation current's amplitude pert / (R + ESR) times the
    period over 2**step_rel_shift (the period-sum image of the demodulated swing). dI makes the
    difference twice the larger of the two: the window holding the step reads TRANSIENT; a step
    of a quarter of that (below step_min) reads VALID."""
    base = _plant(esr_ohm=1.0)
    cfg = algo_config(hs.design_scenario(base, 1))
    p = derive(cfg)
    n = cfg.period_samples
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    loop_r = base.r_cable_ohm + base.esr_ohm
    tau_samples = loop_r * base.capacitance_f * hs.design_scenario(base, 1).sensing.sample_rate_hz
    share = sum(1 - math.exp(-(k + 1) / tau_samples) / 2 for k in range(n))
    swing_thr = p.pert_max * dac_lsb / loop_r / i_lsb * n / (1 << p.step_rel_shift)
    d_i = 2 * max(p.step_min, swing_thr) * i_lsb / share
    at = 40                                  # window boundary, so also a period boundary
    for factor, expect in ((1 + d_i / base.load_current_a, st.STATUS_TRANSIENT),
                           (1 + d_i / 4 / base.load_current_a, st.STATUS_VALID)):
        lr, b, ends = _run(replace(base, load_steps=((float(at), factor),)), at + 2)
        assert _outcomes(lr, b, ends, at - 3, at + 1) == [st.STATUS_VALID] * 3 + [expect]


def test_the_esr_allowance_keeps_the_load_at_target_when_the_esr_carries_the_load():
    """R 1 ohm, ESR 0.5 ohm, 1.5 A constant current: the perturbation sees R + ESR = 1.5 ohm but
    the DC drop is R*I = 1.5 V; with the allowance (0.5 ohm, design's recommendation) the settled
    load sits at target (24 V); without it 0.75 V above. Worked by hand; 0.1 V allowed."""
    lr, b, ends = _run(_plant(esr_ohm=0.5), 60)
    # design's allowance is the load end's share of the estimate: the ESR (a constant-current
    # load has no incremental conductance in parallel) plus the sampling's own small part.
    assert algo_config(lr.run.scenarios[b]).esr_allowance_ohm == pytest.approx(0.5, rel=0.02)
    v = lr.run.channels["v_load_v"][ends[-9]:ends[-1], b]
    assert abs(float(v.mean()) - 24.0) < 0.1


def _ripple_gain(faults):
    """Load/supply amplitude ratio at 500 Hz: 2 ohm cable, 1 mF, 16 ohm resistive load."""
    fs, f = 32000.0, 500.0
    sc = make_scenario(r=2.0, c=1e-3, load=LoadSpec("resistive", 16.0), faults=faults, rate=fs)
    p = Plant([sc])
    p.reset_steady(24.0)
    n = int(0.2 * fs)
    k = np.arange(n)
    vs = 24.0 + 0.5 * np.sin(2 * np.pi * f * k / fs)
    v = np.array([p.step(float(x)).v_load_v[0] for x in vs])
    tail = slice(n // 2, n)                   # 50 whole periods after 50 periods of settling
    ref = np.exp(-2j * np.pi * f * k[tail] / fs)
    return abs(np.sum((v[tail] - v[tail].mean()) * ref)) / abs(np.sum((vs[tail] - 24.0) * ref))


def test_capacitor_open_passes_the_supply_ripple_to_the_load_as_the_rc_divider_predicts():
    """Source: voltage divider of the cable R and the load Z (any circuits text). Without the
    capacitor |H| = 16 / 18; with it Z = 16 || 1/(j w C). The plant's ZOH stepping is exact, the
    sampled sine's own phase step at 500 Hz / 32 kHz is the tolerance (2 %)."""
    w = 2 * np.pi * 500.0
    z = 1 / (1 / 16.0 + 1j * w * 1e-3)
    assert _ripple_gain([("cap_open", 0.0, 1.0)]) == pytest.approx(16.0 / 18.0, rel=0.02)
    assert _ripple_gain([]) == pytest.approx(abs(z / (2.0 + z)), rel=0.02)


def test_a_fault_between_samples_acts_from_the_first_sample_after_it_until_the_first_at_its_end():
    """A cable-open fault over [at, until) with both edges 0.3 samples past a sample instant: the
    supply current at the end of a sample step is zero exactly for the steps that start at t with
    at <= t < until (no current flows in an open cable; the plant holds a step's parameters from
    its start), and the cable carries current on every other step (the load's 1.5 A, then the
    capacitor's recharge)."""
    fs = 32000.0
    at, until = (320 + 0.3) / fs, (640 + 0.3) / fs
    sc = make_scenario(r=1.0, c=1e-3, load=LoadSpec("constant_current", 1.5, cutoff_v=6.0),
                       faults=[("cable_open", at, until)], rate=fs)
    p = Plant([sc])
    p.reset_steady(24.0)
    obs = [p.step(24.0) for _ in range(960)]
    t = np.array([o.t_s for o in obs]) - 1 / fs          # each step's start
    i = np.array([o.i_supply_a[0] for o in obs])
    inside = (t >= at) & (t < until)
    assert inside.sum() == 320
    assert not i[inside].any()
    assert (np.abs(i[~inside]) > 0.1).all()
