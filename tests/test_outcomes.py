"""Window outcomes "clipped" and "r_low" on hand-made ADC code sequences (open loop).

The codes are built by hand, so what each window must be is known without the
algorithm: a sample at a rail is not a measurement, a current that does not
swing is an open cable, and a voltage swing in antiphase with the current has a
negative real part, which no passive cable and capacitor can show.
"""
import numpy as np
import pytest

from algo.config import AlgoConfig
from algo.params import derive
from algo.state import STATE_FIELDS, STATUS_CLIPPED, STATUS_LOW_SWING, STATUS_R_LOW, STATUS_VALID
from harness.loop.replay import replay

CFG = AlgoConfig()
P = derive(CFG)
PERIOD, WINDOW, ADC_MAX = P.period, P.window, P.adc_max
BACKENDS = ("model", "c")
V0, I0 = 2000, 1000      # mid-scale operating point, far from both rails
V_SWING, I_SWING = 20, 100
SETTLE = 12              # valid windows before the window under test


def _wave(swing, windows):
    n = np.arange(windows * WINDOW)
    return np.round(swing * np.sin(2 * np.pi * n / PERIOD)).astype(np.int64)


def _in_phase(windows):
    """Voltage swing in phase with the current: real part V_SWING / I_SWING V-code per I-code."""
    return V0 + _wave(V_SWING, windows), I0 + _wave(I_SWING, windows)


def _run(backend, v, i):
    v, i = np.asarray(v, dtype=np.uint16), np.asarray(i, dtype=np.uint16)
    _, trace = replay(backend, CFG, v, i, with_state=True)
    return trace


def _at_window_end(trace, w):
    """Every state field right after window ``w`` (0-based) finished."""
    t = (w + 1) * WINDOW - 1
    return {f: int(trace[f][t]) for f in STATE_FIELDS}


def test_the_sequences_stay_off_the_rails_and_settle_valid():
    """Control: without a rail sample the settling windows are valid and build a correction."""
    v, i = _in_phase(SETTLE)
    assert 0 < v.min() and v.max() < ADC_MAX and 0 < i.min() and i.max() < ADC_MAX
    for backend in BACKENDS:
        s = _at_window_end(_run(backend, v, i), SETTLE - 1)
        assert s["status"] == STATUS_VALID
        assert s["bad_windows"] == 0 and s["r_est"] > 0 and s["corr"] > 0


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("rail", ["v_at_adc_max", "i_at_adc_max", "i_at_zero"])
def test_a_sample_at_a_rail_makes_the_window_clipped_and_holds_the_estimate(backend, rail):
    v, i = _in_phase(SETTLE + 1)
    t = SETTLE * WINDOW + 5          # one sample inside the window under test
    if rail == "v_at_adc_max":
        v[t] = ADC_MAX
    elif rail == "i_at_adc_max":
        i[t] = ADC_MAX
    else:
        i[t] = 0
    trace = _run(backend, v, i)
    before, after = _at_window_end(trace, SETTLE - 1), _at_window_end(trace, SETTLE)
    assert before["status"] == STATUS_VALID
    assert after["status"] == STATUS_CLIPPED
    assert after["r_est"] == before["r_est"]
    # The voltage at its rail is a fault window (the supply outside the voltage ADC's range); a
    # current code at one rail only holds.
    assert before["bad_windows"] == 0
    assert after["bad_windows"] == (1 if rail == "v_at_adc_max" else 0)
    assert after["corr_target"] > 0
    assert after["pert_amp"] == min(max(before["pert_amp"] >> 1, P.pert_min), P.pert_max)
    assert after["clipped"] == 0                       # cleared at the window end
    flag = {"i_at_zero": 1, "v_at_adc_max": 2, "i_at_adc_max": 4}[rail]
    assert int(trace["clipped"][t]) == flag             # set by the rail sample, its own flag
    assert int(trace["clipped"][t - 1]) == 0
    if rail == "v_at_adc_max":                         # same current codes: same target
        assert after["corr_target"] == before["corr_target"]


@pytest.mark.parametrize("backend", BACKENDS)
def test_an_open_cable_with_current_near_zero_stays_low_swing_and_forces_zero(backend):
    v, i = _in_phase(SETTLE)
    n = np.arange(P.fault_windows * WINDOW)
    v_open = np.full(n.size, V0 + 300)                 # no load current, no drop
    i_open = (n % 2).astype(np.int64)                  # codes 0..1: no swing at the perturbation
    trace = _run(backend, np.concatenate([v, v_open]), np.concatenate([i, i_open]))
    settled = _at_window_end(trace, SETTLE - 1)
    assert settled["corr"] > 0 and settled["r_est"] > 0
    for k in range(1, P.fault_windows + 1):
        s = _at_window_end(trace, SETTLE - 1 + k)
        assert s["status"] == STATUS_LOW_SWING
        assert s["bad_windows"] == k
        # The estimate is held and the correction keeps tracking it times the measured current,
        # which the open cable has taken to about half a code: the drop all but vanishes.
        assert 0 <= s["corr_target"] <= settled["corr_target"] // 50
        if k < P.fault_windows:
            assert s["corr"] > 0
    assert s["corr"] == 0 and s["r_est"] == 0


@pytest.mark.parametrize("backend", BACKENDS)
def test_a_voltage_swing_in_antiphase_with_the_current_is_r_low_and_a_fault_window(backend):
    v, i = _in_phase(SETTLE)
    v_anti, i_anti = V0 - _wave(V_SWING, 2), I0 + _wave(I_SWING, 2)
    trace = _run(backend, np.concatenate([v, v_anti]), np.concatenate([i, i_anti]))
    settled = _at_window_end(trace, SETTLE - 1)
    for k in (1, 2):
        s = _at_window_end(trace, SETTLE - 1 + k)
        assert s["status"] == STATUS_R_LOW
        assert s["r_raw"] < 0
        assert s["bad_windows"] == k
        assert s["r_est"] == settled["r_est"]          # not a valid window: estimate untouched
        assert s["corr_target"] == settled["corr_target"]   # same current, held estimate


def test_model_and_c_agree_on_every_field_after_every_sample_of_these_sequences():
    v, i = _in_phase(SETTLE + 2)
    v[SETTLE * WINDOW + 7] = ADC_MAX
    v[(SETTLE + 1) * WINDOW:] = V0 - _wave(V_SWING, 1)
    tm, tc = _run("model", v, i), _run("c", v, i)
    for f in STATE_FIELDS:
        assert np.array_equal(tm[f], tc[f]), f


@pytest.mark.parametrize("backend", BACKENDS)
def test_the_current_at_both_rails_in_one_window_counts_toward_the_forced_zero(backend):
    """A current that touches code 0 and adc_max in one window swings over the ADC's whole range
    (a plant running away): the window is clipped and counts as a fault window (flags 1 | 4)."""
    v, i = _in_phase(SETTLE + 1)
    t = SETTLE * WINDOW + 5
    i[t], i[t + 3] = 0, ADC_MAX
    trace = _run(backend, v, i)
    after = _at_window_end(trace, SETTLE)
    assert after["status"] == STATUS_CLIPPED and after["bad_windows"] == 1
    assert int(trace["clipped"][t + 3]) == 5
