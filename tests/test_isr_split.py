"""The interrupt path (ld_step_isr) and the main loop's window work (ld_window_work).

The C reference against the model, bit for bit after every call, whenever the window work runs
(at once, as late as its deadline allows, past it, or never); and the hand-over's contract,
worked from its definition in c_ref/step.c: a window whose work has finished before the next
period end gives the estimate, the outcome and the correction that ld_step gives, one period of
perturbation amplitude apart; a late one holds the correction; one a whole window late is
dropped and the correction is zero.
"""
import numpy as np
import pytest
from hypothesis import event, given, settings, strategies as st

from algo import estimator as est
from algo import state as ws
from algo import step as model
from algo.config import AlgoConfig
from algo.params import derive
from harness.proof import algo_strategies as sa
from support.model_c_pair import Pair


def _scaled(fraction):
    """Settings with ``fraction`` of the active profile's example count (at least 5)."""
    return settings(max_examples=max(5, int(settings.default.max_examples * fraction)))


@st.composite
def _schedules(draw, p, n):
    """For each window end in ``n`` samples, the number of samples after it at which the window
    work runs: 0 (at once) up to past the next window end, or never (None)."""
    ends = range(p.window - 1, n, p.window)
    choices = st.one_of(st.just(0), st.just(p.period - 1), st.integers(0, 2 * p.window),
                        st.none())
    return {t: draw(choices) for t in ends}


@_scaled(0.5)
@given(st.one_of(sa.configs(max_window=256), sa.realistic_configs(max_window=256)).flatmap(
    lambda cp: st.tuples(st.just(cp), sa.sequences(cp[0], cp[1], 2, 6), st.data())))
def test_c_matches_model_after_every_isr_step_and_window_work_whenever_the_work_runs(case):
    (cfg, p), (adc_v, adc_i), data = case
    sched = data.draw(_schedules(p, len(adc_v)))
    due = {}
    for end, delay in sched.items():
        if delay is not None:
            due.setdefault(end + delay, []).append(end)
    pair = Pair(p)
    for t, (a, b) in enumerate(zip(adc_v, adc_i)):
        pair.step_isr(a, b)
        for _ in due.get(t, ()):
            pair.window_work()
    event(f"late windows {min(pair.s.late_windows, 3)}")


CFG = AlgoConfig()
P = derive(CFG)


def _sine_plant(p, n, r_codes=0.4, steps=()):
    """Open-loop supply codes for a cable of ``r_codes`` V-codes per I-code carrying a sine
    swing at the perturbation frequency on a mean current, stepping by the factors in ``steps``
    (sample, factor)."""
    t = np.arange(n)
    i_dc = np.full(n, 0.3 * p.adc_max)
    for at, factor in steps:
        i_dc[at:] *= factor
    swing = 0.05 * p.adc_max * np.sin(2 * np.pi * t / p.period + 0.2)
    i = np.rint(i_dc + swing).astype(int)
    v = np.rint(0.6 * p.adc_max - r_codes * (i_dc - i_dc[0]) + r_codes * swing).astype(int)
    return v.tolist(), i.tolist()


def _run(p, adc_v, adc_i, delay=None, isr=True):
    """States after every sample: through step, or through step_isr with the window work run
    ``delay`` samples after each window end (None: never)."""
    s = model.init(p)
    out = []
    ends = []
    for t, (a, b) in enumerate(zip(adc_v, adc_i)):
        if isr:
            model.step_isr(p, s, a, b)
            if s.w_state == ws.WIN_PENDING and s.count == 0:
                ends.append(t)
            if delay is not None and ends and t == ends[-1] + delay:
                est.window_work(p, s)
        else:
            model.step(p, s, a, b)
        out.append(dict(vars(s)))
    return out


N = 12 * P.window
V, I = _sine_plant(P, N, steps=((5 * P.window + 70, 1.3),))


def test_the_interrupt_path_with_the_work_done_in_time_estimates_and_corrects_as_ld_step_does():
    """The estimate, the outcome, the fault count and the window count equal ld_step's outside
    the samples between a window end and the period end that commits its work; the correction
    and its integral that the law's last stage leaves, three samples after each period end,
    equal what ld_step leaves at that period end (open-loop codes: the plant does not feed back,
    so both see the same sums)."""
    whole = _run(P, V, I, isr=False)
    for delay in (0, P.period - 1):          # at once, and as late as the deadline allows
        split = _run(P, V, I, delay=delay)
        for t, (a, b) in enumerate(zip(whole, split)):
            lag = (t + 1) % P.window
            if not (0 < lag <= P.period - 1 or lag == 0):
                for name in ("r_est", "status", "bad_windows", "valid_run", "windows", "r_c", "kp"):
                    assert a[name] == b[name], (delay, t, name, a[name], b[name])
        ends = range(P.period - 1, N - 3, P.period)
        for t in ends:
            for name in ("corr", "integ", "corr_target", "du_prev", "kp_off"):
                assert split[t + 3][name] == whole[t][name], (delay, t, name)
        assert any(whole[t]["corr"] > 0 for t in ends) and split[-1]["status"] == ws.STATUS_VALID
        assert split[-1]["late_windows"] == 0


def test_the_correction_law_takes_one_stage_per_sample_after_a_period_end():
    split = _run(P, V, I, delay=0)
    whole = _run(P, V, I, isr=False)
    moving = [t for t in range(2 * P.window + P.period - 1, N - 3, P.period)
              if whole[t]["corr"] != whole[t - P.period]["corr"] and t % P.window != P.window - 1]
    assert len(moving) > 10
    for t in moving:
        assert split[t + 1]["corr_target"] == whole[t]["corr_target"]             # stage 1
        assert split[t + 1]["corr"] == split[t]["corr"] != whole[t]["corr"]
        assert split[t + 2]["corr"] == whole[t]["corr"]                            # stage 2
        assert split[t + 2]["cmd_base"] == split[t]["cmd_base"]
        assert split[t + 3]["cmd_base"] == whole[t]["cmd_base"]                    # stage 3


def test_work_finished_after_its_deadline_commits_at_the_period_end_after_it():
    late = 3 * P.period + 5                      # finishes 3 periods and 5 samples after the end
    split = _run(P, V, I, delay=late)
    timely = _run(P, V, I, delay=0)
    w = 6 * P.window - 1                         # a window end with the correction under way
    assert split[w]["corr"] > 0
    commit = w + 4 * P.period                    # the first period end after the work finished
    for t in range(w, commit):                   # the correction runs on the last committed inputs
        assert (split[t]["r_c"], split[t]["kp"]) == (split[w]["r_c"], split[w]["kp"])
        assert split[t]["w_state"] in (ws.WIN_PENDING, ws.WIN_DONE)
    assert split[commit - 1]["w_state"] == ws.WIN_DONE
    assert split[commit]["w_state"] == ws.WIN_IDLE
    assert split[commit]["r_est"] == timely[commit]["r_est"]      # same window, same estimate
    assert split[commit]["r_c"] == timely[commit]["r_c"]
    assert split[commit]["pert_amp"] == timely[commit]["pert_amp"]
    assert split[commit]["late_windows"] == 0


def test_work_that_never_runs_drops_the_next_window_and_forces_the_correction_to_zero():
    timely = _run(P, V, I, delay=0)
    s = model.init(P)
    for t, (a, b) in enumerate(zip(V, I)):
        model.step_isr(P, s, a, b)
        if t < 6 * P.window:                     # the work keeps up for six windows, then stops
            est.window_work(P, s)
        if t == 6 * P.window - 1:
            assert s.corr == timely[t]["corr"] > 0
    # Window 7 is handed over and never worked; windows 8 to 12 each end while it still waits.
    assert (s.late_windows, s.w_state) == (5, ws.WIN_PENDING)
    assert s.corr == s.integ == s.corr_target == 0
    assert s.cmd_base == P.target_code
    assert s.windows == 6
    assert est.window_work(P, s) == 1 and s.windows == 7       # catching up works window 7


@pytest.mark.parametrize("field", ["w_state", "late_windows", "pert_next"])
def test_reset_clears_the_hand_over(field):
    s = model.init(P)
    for a, b in zip(V[:P.window], I[:P.window]):
        model.step_isr(P, s, a, b)
    s.late_windows = 3
    assert s.w_state == ws.WIN_PENDING
    model.reset(P, s)
    assert getattr(s, field) == getattr(model.init(P), field)
