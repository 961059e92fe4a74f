"""C reference vs Python model: identical command and state bits after every step, no tolerance."""
import numpy as np
from hypothesis import event, given, settings, strategies as st
from hypothesis.stateful import RuleBasedStateMachine, initialize, invariant, rule

from algo import step as model
from algo.config import AlgoConfig
from algo.params import derive
from algo.state import STATUS_NAMES, STATUS_LOW_SWING, STATUS_VALID
from c_ref.binding import CBatch
from support.model_c_pair import Pair, assert_same, first_difference, model_run, py_state
from harness.proof import algo_strategies as sa


def _scaled(fraction):
    """Settings with ``fraction`` of the active profile's example count (at least 5)."""
    return settings(max_examples=max(5, int(settings.default.max_examples * fraction)))


def _note_statuses(s):
    event(f"last status {STATUS_NAMES.get(s.status, '?')}")


@_scaled(1.0)
@given(sa.cases(max_window=1024, max_windows=4))
def test_c_matches_model_after_every_step_for_any_config_and_sequence(case):
    cfg, p, (adc_v, adc_i) = case
    pair = Pair(p)
    pair.run(adc_v, adc_i)
    _note_statuses(pair.s)


@_scaled(0.5)
@given(sa.configs(max_window=64).flatmap(
    lambda cp: st.tuples(st.just(cp), sa.sequences(cp[0], cp[1], min_windows=20, max_windows=40))))
def test_c_matches_model_after_every_step_over_long_runs_of_many_windows(case):
    (cfg, p), (adc_v, adc_i) = case
    pair = Pair(p)
    pair.run(adc_v, adc_i)
    assert pair.s.windows >= 20
    _note_statuses(pair.s)


@_scaled(0.5)
@given(sa.realistic_configs(max_window=512).flatmap(
    lambda cp: st.tuples(st.just(cp), sa.realistic_sequences(cp[0], cp[1], 8, 12, max_steps=2))))
def test_realistic_sine_pair_reaches_valid_windows_and_moves_the_correction_in_both(case):
    """Guards the strategies too: a suite whose windows are never VALID proves little.

    Two load steps spoil at most four of the eight or more windows, and the correction starts
    once a second valid window confirms the first (algo.estimator.update_estimate): a valid
    window that replaces an unconfirmed one needs its own confirmation, so room for two pairs.
    """
    (cfg, p), (adc_v, adc_i) = case
    pair = Pair(p)
    seen_valid = seen_estimate = seen_corr = False
    for a, b in zip(adc_v, adc_i):
        pair.step(a, b)
        seen_valid |= pair.s.status == STATUS_VALID
        seen_estimate |= pair.s.r_est > 0
        seen_corr |= pair.s.corr > 0
    assert seen_valid and seen_estimate and seen_corr, (seen_valid, seen_estimate, seen_corr)


@_scaled(0.3)
@given(st.one_of(sa.configs(), sa.realistic_configs(max_window=16384)).flatmap(
    lambda cp: st.tuples(st.just(cp), sa.sequences(cp[0], cp[1], 1, 3), st.data())))
def test_batch_call_in_chunks_matches_model_on_every_command_and_at_every_chunk_end(case):
    (cfg, p), (adc_v, adc_i), data = case
    n = len(adc_v)
    cuts = sorted(set(data.draw(st.lists(st.integers(1, max(n - 1, 1)), max_size=4))) | {n})
    c = CBatch([p])
    s = model.init(p)
    start = 0
    for end in cuts:
        v, i = adc_v[start:end], adc_i[start:end]
        py_cmds, s = model_run(p, v, i, s)
        c_cmds = c.run(np.array([v], np.uint16), np.array([i], np.uint16))[0]
        msg = first_difference(py_cmds, c_cmds, v, i)
        assert msg is None, f"chunk [{start}, {end}): {msg}"
        assert_same(f"after chunk [{start}, {end})", s.cmd, c.state(0)["cmd"], py_state(s), c.state(0))
        start = end


@_scaled(0.3)
@given(st.lists(st.one_of(sa.configs(max_window=1024), sa.realistic_configs(max_window=1024)),
                min_size=2, max_size=6), st.integers(1, 3000), st.data())
def test_many_instances_with_different_params_in_one_call_match_each_run_alone(cps, n, data):
    rows_v, rows_i = [], []
    for cfg, p in cps:
        v, i = data.draw(sa.sequences(cfg, p, 0, 2))
        rows_v.append(np.resize(np.array(v or [0], np.uint16), n))
        rows_i.append(np.resize(np.array(i or [0], np.uint16), n))
    many = CBatch([p for _, p in cps])
    out = many.run(np.stack(rows_v), np.stack(rows_i))
    for k, (cfg, p) in enumerate(cps):
        alone = CBatch([p])
        out_alone = alone.run(rows_v[k][None, :], rows_i[k][None, :])[0]
        assert np.array_equal(out[k], out_alone), f"instance {k}: batched commands differ from alone"
        assert many.state(k) == alone.state(0), f"instance {k}: batched state differs from alone"
        py_cmds, s = model_run(p, rows_v[k].tolist(), rows_i[k].tolist())
        assert first_difference(py_cmds, out_alone, rows_v[k], rows_i[k]) is None
        assert_same(f"instance {k} at the end", s.cmd, alone.state(0)["cmd"], py_state(s), alone.state(0))


def test_bad_window_count_saturates_at_uint16_max_in_both():
    """65536+ windows without current swing: bad_windows stops at 0xFFFF and C agrees."""
    p = derive(AlgoConfig(period_samples=4, periods_per_window=1, fault_windows=1000))
    n = 4 * 65540
    adc_v, adc_i = [100] * n, [0] * n
    py_cmds, s = model_run(p, adc_v, adc_i)
    c = CBatch([p])
    c_cmds = c.run(np.array([adc_v], np.uint16), np.array([adc_i], np.uint16))[0]
    assert first_difference(py_cmds, c_cmds, adc_v, adc_i) is None
    assert s.bad_windows == 0xFFFF and s.status == STATUS_LOW_SWING
    assert_same("after 65540 bad windows", s.cmd, c.state(0)["cmd"], py_state(s), c.state(0))


def _any_code(p):
    return st.one_of(st.sampled_from([0, p.adc_max, sa.CODE_MAX]), st.integers(0, sa.CODE_MAX))


class ModelAndCInLockStep(RuleBasedStateMachine):
    """Interleave init, single steps, bursts and resets; compare everything after every rule."""

    @initialize(cp=st.one_of(sa.configs(max_window=256), sa.realistic_configs(max_window=256)))
    def start(self, cp):
        self.cfg, self.p = cp
        self.pair = Pair(self.p)

    @rule()
    def init_both(self):
        self.pair.init()

    @rule()
    def reset_both(self):
        self.pair.reset()

    @rule(data=st.data())
    def step_once(self, data):
        self.pair.step(data.draw(_any_code(self.p)), data.draw(_any_code(self.p)))

    @rule(data=st.data())
    def step_burst(self, data):
        adc_v, adc_i = data.draw(sa.sequences(self.cfg, self.p, 0, 3))
        self.pair.run(adc_v, adc_i)

    @invariant()
    def command_and_state_agree(self):
        if hasattr(self, "pair"):
            self.pair.check(f"after rule {self.pair.ops}")


ModelAndCInLockStep.TestCase.settings = settings(
    max_examples=max(5, settings.default.max_examples // 4), stateful_step_count=25)
TestModelAndCInLockStep = ModelAndCInLockStep.TestCase
