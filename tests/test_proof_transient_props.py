"""Proof property 4: load steps landing anywhere in a window never move the settled estimate by more
than TRANSIENT_R_REL and never push the load above target + the overshoot margin; the loop settles
again within RECOVER_WINDOWS, or the R*C-scaled settle time where that is longer. Model and C in lock step (harness.loop.lockstep)."""
from dataclasses import replace

from hypothesis import Phase, given, settings

from harness.proof import bounds as bd
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config
from support.proof_cases import above_converter_floor, as_drawn, light_steps, steps_above_light
from support.proof_support import (count_plant, report_shares, reproducer, run_groups, samples_between, settle_windows, settled_failures,
                                   window_ends)

STEP_SPAN = 20      # steps land in the STEP_SPAN windows after settling (harness.proof.strategies.plants)


def _examples(fraction):
    return settings(max_examples=max(2, int(settings.default.max_examples * fraction)),
                    phases=(Phase.explicit, Phase.reuse, Phase.generate))


@_examples(0.05)
@given(hs.plant_batches(size=6, kinds=("constant_current", "resistive", "constant_power"), max_steps=2, min_steps=1,
                        steps_after=float(bd.SETTLE_WINDOWS)))
def test_load_steps_anywhere_in_a_window_move_the_estimate_little_and_never_overshoot(batch):
    total = bd.SETTLE_WINDOWS + STEP_SPAN + bd.CHECK_WINDOWS
    scs = []
    for n, p in enumerate(batch):
        count_plant("load steps drawn" if p.load_steps else "no load step drawn: not run")
        if p.load_steps and not as_drawn(n):
            # Generate the steps the estimate check is about: five plants in six carry a load
            # above the converters' own light-load floor and step to at least twice the
            # light-load current (support.proof_cases); the first keeps its drawn load and
            # steps, light loads and load dumps to zero included.
            p = steps_above_light(above_converter_floor(p), total)
        if p.load_steps:    # the recovery after a step, like the settling, scales with R*C
            sc = hs.design_scenario(p, bd.SETTLE_WINDOWS, seed=n)
            sc = hs.design_scenario(p, total + max(bd.RECOVER_WINDOWS, settle_windows(sc)), seed=n)
            scs.append(replace(sc, source=repr(p.load_current_a)))
    for lr, b in run_groups(scs):
        sc = lr.run.scenarios[b]
        cfg = algo_config(sc)
        win = hs.window_s(sc)
        first = int(sc.load.steps[0][0] / win)
        ends = window_ends(lr, b)
        ch = lr.run.channels
        r_before = float(ch["r_estimate_ohm"][ends[first - 1], b])
        after = samples_between(lr, b, first, len(ends))
        r = ch["r_estimate_ohm"][after, b]
        move = float(abs(r - r_before).max())
        allowed = bd.TRANSIENT_R_REL * (sc.cable.resistance_ohm + sc.load_end.esr_ohm) \
            + bd.R_LSB_SLACK * bd.r_lsb_ohm(cfg)
        why = []
        # A step to a light load (bounds.light_load_a) leaves no measurable current swing: the
        # windows clip or, while the capacitor feeds back into the supply, read no swing at all,
        # and the estimate may be dropped with the correction (the fallback). The overshoot and
        # settled checks below still hold it.
        light = light_steps(sc)
        count_plant("a step to a light load: estimate not held" if light else "estimate held through the steps")
        if move > allowed and not light:
            why.append(f"a load step moved the estimate by {move:.4g} ohm (> {allowed:.4g} ohm) from {r_before:.5g}")
        i0 = float(sc.source)
        corr_before = float(ch["correction_v"][:ends[first - 1] + 1, b].max())
        limit = bd.overshoot_limit_v(cfg, corr_before, 0.0, 1.5 * i0, sc.cable.inductance_h, sc.load_end.capacitance_f,
                                     ripple_v=bd.ripple_excess_v(cfg, sc))
        v_max = float(ch["v_load_v"][after, b].max())
        if v_max > limit:
            why.append(f"the load reached {v_max:.6g} V after a step (> target + margin {limit:.6g} V)")
        w_back = int(sc.load.steps[-1][0] / win) + 1 + max(bd.RECOVER_WINDOWS, settle_windows(sc))
        why += settled_failures(lr, b, sc, w_back, w_back + bd.CHECK_WINDOWS)
        assert not why, reproducer(sc, "; ".join(why))
    report_shares(len(batch))
