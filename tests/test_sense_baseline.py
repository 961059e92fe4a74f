"""The ``sense`` baseline: what sense wires give, the yardstick for linedrop's regulation.

Reference: with sense wires the cable's drop is inside the supply's regulation loop, so in
steady state the load end sits at target to within the voltage ADC's resolution whatever the
cable (the definition of remote sensing; Ohm's law gives the supply voltage it needs).
"""
import numpy as np
import pytest

from harness.loop.closed_loop import simulate
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario


def _v_lsb(sc):
    return sc.sensing.v_full_scale_v / (1 << sc.sensing.adc_bits)


@pytest.mark.parametrize("r, c, amps, bw", [(2.0, 1e-3, 1.0, 0.0), (0.5, 4.7e-3, 3.0, 2000.0),
                                            (8.0, 220e-6, 0.4, 500.0)])
def test_sense_holds_the_load_at_target_and_the_supply_at_target_plus_the_drop(r, c, amps, bw):
    sc = make_scenario(r=r, c=c, bw=bw, load=LoadSpec("constant_current", amps, cutoff_v=1.0), duration=0.5)
    run = simulate([sc], compensation="sense")
    tail = run.t_s > 0.4
    v_load = run.channels["v_load_v"][tail, 0].mean()
    v_supply = run.channels["v_supply_v"][tail, 0].mean()
    # Within two voltage-ADC LSBs plus the ADC noise's average (0.5 LSB rms over 3200 samples).
    assert abs(v_load - sc.supply.target_v) <= 2 * _v_lsb(sc)
    assert v_supply == pytest.approx(sc.supply.target_v + r * amps, abs=4 * _v_lsb(sc))


def test_sense_recovers_from_a_load_step_without_overshooting_one_percent():
    load = LoadSpec("constant_current", 1.0, steps=((0.25, 1.5),), cutoff_v=1.0)
    sc = make_scenario(r=2.0, c=1e-3, load=load, duration=0.5)
    run = simulate([sc], compensation="sense")
    v = run.channels["v_load_v"][:, 0]
    after = run.t_s > 0.25
    assert v[after].min() < sc.supply.target_v - 0.05          # the step is seen at all
    assert v.max() <= 1.01 * sc.supply.target_v
    late = run.t_s > 0.45
    assert np.abs(v[late] - sc.supply.target_v).max() <= 0.01 * sc.supply.target_v


def test_sense_integral_does_not_wind_up_while_the_command_is_pinned_at_its_ceiling():
    sc = make_scenario(r=2.0, c=1e-3, load=LoadSpec("constant_current", 2.5, cutoff_v=1.0), duration=0.2)
    from harness.loop.baselines import RemoteSense
    from harness.scenario.algo_setup import algo_config
    comp = RemoteSense([algo_config(sc)], [sc])
    for _ in range(2000):
        comp.step(np.array([0]), np.array([0]))                # load voltage reads 0: full error
    assert comp.cmd[0] == comp.cmd_max[0]
    assert comp.integ[0] == 0.0                                # nothing stored while pinned
    # The load back at target: the command returns to target at once, no stored windup.
    comp.step(np.array([round(comp.target_v_code[0])]), np.array([0]))
    assert abs(comp.cmd[0] - comp.target[0]) <= comp.k_p[0] * comp.v_to_dac[0]
