"""The compiled closed loop (c_ref/host, harness.loop.compiled) against the numpy plant, sample for sample.

The reference is the numpy plant (harness.plant.plant.Plant, itself checked against
scipy.linalg.expm, scipy.signal and ngspice in test_plant*.py and test_proof_ngspice.py) driven
through closed_loop.drive with the same C algorithm: every sample of every scenario must agree
to 1e-12 relative (of the channel's peak over the run) in the supply voltage, supply current
and load voltage at full precision, and exactly in the ADC codes and the commands.
"""
import glob
import os

import numpy as np
import pytest

from harness.loop import compiled
from harness.loop.closed_loop import CHANNELS, CODE_CHANNELS, OUTCOME_CHANNELS, _units, drive, make_compensator, simulate
from harness.plant.rig import build_rig
from harness.scenario.algo_setup import algo_config
from harness.scenario.read import load_scenario
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario
from support.tools import skip_or_fail

REL = 1e-12
SHIPPED = sorted(glob.glob(os.path.join(os.path.dirname(compiled.__file__), "..", "scenario", "scenarios", "*.toml")))
DURATION = 0.25


@pytest.fixture(autouse=True)
def _compiled_loop_built():
    """Each test skips, or fails under LINEDROP_REQUIRE_TOOLS=1, where the compiled loop is not built."""
    skip_or_fail(compiled.why_not("c", "linedrop"))


def _setup(scenarios, compensation):
    cfgs = [algo_config(s) for s in scenarios]
    rig = build_rig(scenarios)
    comp, fixed_point = make_compensator(compensation, "c", cfgs, scenarios)
    rig.reset()
    n_t = int(round(scenarios[0].run.duration_s * cfgs[0].sample_rate_hz))
    return rig, comp, _units(comp, cfgs, fixed_point), n_t


def _numpy(scenarios, compensation):
    """(T, 3, B) float64 v_supply, i_supply, v_load and (T, 3, B): ADC codes and the command."""
    rig, comp, _, n_t = _setup(scenarios, compensation)
    out, codes = np.empty((n_t, 3, len(scenarios))), np.empty((n_t, 3, len(scenarios)))
    for k, _, obs, v_code, i_code, cmd in drive(rig, comp.step, comp.field("cmd"), n_t):
        out[k] = obs.v_supply_v, obs.i_supply_a, obs.v_load_v
        codes[k] = v_code, i_code, cmd
    rig.adc.close()
    return out, codes, rig


def _compiled(scenarios, compensation, pieces=1):
    """As :func:`_numpy` on the compiled loop, the run cut into ``pieces`` calls."""
    rig, comp, units, n_t = _setup(scenarios, compensation)
    loop = compiled.CompiledLoop(rig, comp, *units)
    out = np.empty((n_t, 4, len(scenarios)))
    rec = {name: np.empty((n_t, len(scenarios)), dtype=np.float32) for name in CODE_CHANNELS[:2]}
    edges = np.linspace(0, n_t, pieces + 1).astype(int)
    for k0, k1 in zip(edges[:-1], edges[1:]):
        loop.run(k0, k1 - k0, {n: a[k0:] for n, a in rec.items()}, 0, trace=out[k0:])
    rig.adc.close()
    codes = np.concatenate([np.stack([rec[n] for n in CODE_CHANNELS[:2]], axis=1), out[:, 3:]], axis=1)
    return out[:, :3], codes.astype(float), rig, loop


def _assert_agree(scenarios, compensation="linedrop", pieces=1):
    ref, ref_codes, ref_rig = _numpy(scenarios, compensation)
    got, got_codes, rig, loop = _compiled(scenarios, compensation, pieces)
    peak = np.abs(ref).max(axis=0, keepdims=True)
    bad = np.argwhere(np.abs(got - ref) > REL * peak)
    assert bad.size == 0, f"first sample off by more than {REL} of the peak: (k, channel, scenario) {bad[0]}"
    np.testing.assert_array_equal(got_codes, ref_codes)
    np.testing.assert_array_equal(rig.plant.loads.on, ref_rig.plant.loads.on)
    np.testing.assert_array_equal(rig.plant.mode, ref_rig.plant.mode)
    np.testing.assert_allclose(rig.plant.loads.u, ref_rig.plant.loads.u, rtol=REL, atol=0)
    np.testing.assert_allclose(rig.plant.x, ref_rig.plant.x, rtol=REL, atol=REL * peak.max())
    return loop


def _generated(start):
    """Scenarios covering every load kind, fault kind and converter setting (one batch per start)."""
    d = DURATION
    cc_lock = LoadSpec("constant_current", 1.0, cutoff_v=12.0, steps=((0.1, 1.8),))
    cp_lock = LoadSpec("constant_power", 30.0, cutoff_v=14.0, steps=((0.08, 60.0), (0.16, 20.0)))
    cp_collapse = LoadSpec("constant_power", 20.0, cutoff_v=15.0, restart_v=20.0, steps=((0.05, 95.0), (0.1, 20.0)))
    res = LoadSpec("resistive", 20.0, steps=((0.1, 8.0),))
    lamp = LoadSpec("lamp", 25.0, rated_v=24.0, thermal_tau_s=0.02, steps=((0.12, 40.0),))
    profile = LoadSpec("constant_current", 0.5, profile=((0.0, 0.5), (0.05, 1.5), (0.15, 0.8), (0.2, 1.2)))
    faults = (("cable_open", 0.03, 0.06), ("cap_open", 0.09, 0.13), ("load_short", 0.15, 0.152),
              ("adc_stuck", 0.18, 0.2, 4095, "v"), ("adc_stuck", 0.21, 0.22, 0, "i"))
    base = dict(r=1.5, c=2.2e-3, esr=0.03, duration=d, max_v=32.0)
    out = [
        make_scenario(load=cc_lock, seed=1, **base),
        make_scenario(load=cp_lock, seed=2, bw=2000.0, l=20e-6, **base),
        make_scenario(load=cp_collapse, seed=3, limit=4.0, **base),
        make_scenario(load=res, seed=4, leak=500.0, temp_end=80.0, **base),
        make_scenario(load=lamp, seed=5, bw=1500.0, **base),
        make_scenario(load=profile, seed=6, l=50e-6, noise=0.0, **base),
        make_scenario(load=LoadSpec("constant_current", 1.2, steps=((0.05, 2.5),)), seed=7, limit=2.0,
                      bw=3000.0, **base),
        make_scenario(load=LoadSpec("constant_current", 1.0), faults=faults, seed=8, limit=3.0, **base),
        make_scenario(load=LoadSpec("constant_power", 25.0, cutoff_v=10.0), faults=faults[:3], seed=9, **base),
    ]
    from dataclasses import replace
    out[6] = replace(out[6], supply=replace(out[6].supply, dac_gain_error=0.01))     # the setpoint's gain error
    out[3] = replace(out[3], supply=replace(out[3].supply, dac_gain_error=-0.02))
    out[1] = replace(out[1], sensing=replace(out[1].sensing, current_gain_error=0.02, current_offset_lsb=-1.5))
    return [replace(s, run=replace(s.run, start=start)) for s in out]


@pytest.mark.parametrize("path", SHIPPED, ids=os.path.basename)
@pytest.mark.parametrize("compensation", ["linedrop", "none"])
def test_compiled_loop_agrees_with_numpy_plant_on_every_shipped_scenario(path, compensation):
    _assert_agree([load_scenario(path)], compensation)


@pytest.mark.parametrize("start", ["steady", "cold"])
def test_compiled_loop_agrees_on_every_load_fault_and_converter_kind_in_one_batch(start):
    loop = _assert_agree(_generated(start))
    # The run crossed windows (the numpy plant's preamble ran) and refolds (the C loop's own).
    assert loop.reasons.get("window", 0) > 0 and loop.refreshes > 0, (loop.reasons, loop.refreshes)


@pytest.mark.parametrize("k", range(9))
def test_compiled_loop_agrees_on_each_generated_scenario_alone(k):
    _assert_agree([_generated("steady")[k]], pieces=3)


def test_compiled_loop_agrees_on_a_batch_of_copies_sharing_their_refreshes():
    """Copies refresh at the same samples, and the C loop reuses one discretisation for them:
    a warming cable's (plant_systems.c) and a constant-power load's (numpy's, called back)."""
    ramp, cp = _generated("steady")[3], _generated("steady")[2]
    loop = _assert_agree([ramp, cp, ramp, cp, ramp])
    assert loop.refreshes > 0, loop.refreshes


def test_compiled_loop_without_compensation_agrees_on_the_generated_batch():
    _assert_agree(_generated("cold"), "none", pieces=2)


def test_simulate_runs_the_compiled_loop_by_default_for_the_c_backend_and_matches_numpy():
    sc = load_scenario(SHIPPED[0])
    names = CHANNELS + CODE_CHANNELS + OUTCOME_CHANNELS
    a = simulate([sc], "c", channels=names)
    b = simulate([sc], "c", channels=names, plant="numpy")
    assert a.plant_path == "compiled" and b.plant_path == "numpy"
    for name in names:
        np.testing.assert_array_equal(a.channels[name], b.channels[name], err_msg=name)
    np.testing.assert_array_equal(a.r_cable_ohm, b.r_cable_ohm)


@pytest.mark.parametrize("backend, compensation, word", [
    ("model", "linedrop", "model backend"), ("ideal", "linedrop", "ideal backend"),
    ("c", "fixed", "fixed baseline"), ("c", "difference", "difference baseline"), ("c", "sense", "sense baseline")])
def test_runs_the_compiled_loop_cannot_do_fall_back_to_numpy_with_the_reason(backend, compensation, word):
    sc = make_scenario(load=LoadSpec("constant_current", 1.0), duration=0.01)
    run = simulate([sc], backend, compensation, channels=("v_load_v",))
    assert run.plant_path.startswith("numpy (") and word in run.plant_path, run.plant_path
    with pytest.raises(ValueError, match=word):
        simulate([sc], backend, compensation, channels=("v_load_v",), plant="compiled")
