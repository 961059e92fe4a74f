"""Proof properties 2 and 5: safe saturation and bit-exactness for ANY algorithm settings.

The algorithm's own settings are drawn anywhere in their documented ranges
(harness.proof.strategies.algorithm_overrides), on plants with load steps and faults, from a steady
or a cold start. harness.loop.lockstep checks, at every sample, that the C reference equals
the model on the command and every state field, and that every state field lies inside
algo.ranges.state_bounds: the command in [cmd_min, cmd_max] (the min_v / max_v codes), the
estimate in [0, r_max_q], the correction in [0, corr_max_q], the accumulators inside acc_bits.
A separate property shows that nothing winds up while the correction is clamped.
"""
from dataclasses import replace

from hypothesis import Phase, event, given, settings, strategies as st

from algo.params import derive
from algo.ranges import declared_width_violations
from harness.proof import bounds as bd
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config
from harness.errors import InputError
from support.proof_cases import above_converter_floor, as_drawn
from support.proof_support import (corr_ceiling_q, count_plant, r_cable_at, report_shares, reproducer,
                                   run_groups, samples_between, settle_windows, settled_failures,
                                   window_ends)

from harness.proof import algo_strategies as sa

FAULTS = ("cable_open", "cap_open", "load_short", "adc_stuck")
SAFETY_BATCH = 6
OVERRIDE_DRAWS = 4     # override sets drawn per plant until derive accepts one


def _examples(fraction):
    return settings(max_examples=max(2, int(settings.default.max_examples * fraction)),
                    phases=(Phase.explicit, Phase.reuse, Phase.generate))


@settings(max_examples=settings.default.max_examples * 5)
@given(sa.configs())
def test_range_analysis_fits_every_declared_word_for_every_derivable_config(cp):
    """Every parameter block derive() accepts has state bounds inside the C types and acc_bits."""
    _, p = cp
    assert declared_width_violations(p) == []


@st.composite
def _safety_case(draw):
    batch = draw(hs.plant_batches(size=SAFETY_BATCH, max_steps=2, steps_after=2.0))
    start = draw(st.sampled_from(["steady", "cold"]))
    scs = []
    for n, p in enumerate(batch):
        base = hs.design_scenario(p, 24)
        faults = ()
        if draw(st.booleans()):
            kind = draw(st.sampled_from(FAULTS))
            at = draw(st.floats(1.0, 12.0))
            faults = ((kind, at, at + draw(st.floats(1.0, 10.0))),)
        for _ in range(OVERRIDE_DRAWS):     # the settings derive accepts: the ones the claim is about
            over = draw(hs.algorithm_overrides(base))
            sc = hs.design_scenario(p, 24, faults=faults, seed=n, start=start, overrides=over)
            try:
                derive(algo_config(sc))
                break
            except InputError:
                sc = None
        if sc is None:
            count_plant("overrides rejected by derive: not run")
            continue
        if faults and faults[0][0] == "adc_stuck":
            f = sc.faults[0]
            code = draw(st.sampled_from([0, (1 << p.adc_bits) - 1]))
            sc = replace(sc, faults=(replace(f, code=code, channel=draw(st.sampled_from("vi"))),))
        count_plant("run")
        scs.append(sc)
    return scs


@_examples(0.10)
@given(_safety_case())
def test_any_settings_keep_every_state_field_in_range_and_c_bit_exact_at_every_sample(scs):
    """run_groups raises with a reproducer on the first mismatch or out-of-range field."""
    for lr, b in run_groups(scs):
        event(f"last status {int(lr.trace['status'][-1, b])}")
    report_shares(SAFETY_BATCH)


def _half_headroom(p):
    """``p`` with max_v at target + half the correction its load asks for ((R-hat - ESR allowance) I)."""
    return replace(p, max_v=p.target_v + 0.5 * p.r_cable_ohm * p.load_current_a)


@_examples(0.05)
@given(hs.plant_batches(size=6, kinds=("constant_current", "resistive", "constant_power"), max_steps=0),
       st.data())
def test_nothing_winds_up_while_the_correction_is_clamped(batch, data):
    """A heavy load needs more correction than the headroom allows, so corr sits at its ceiling
    (the headroom less the perturbation's peak, algo.step.corr_ceiling);
    after a step to a light load the loop settles within RECOVER_WINDOWS as from rest and the
    load never exceeds the overshoot margin (a wound-up state would overshoot or lag)."""
    heavy = bd.SETTLE_WINDOWS
    scs, p_heavy = [], []
    for n, p in enumerate(batch):
        # The heavy load is raised above the converters' own light-load floor (five plants in
        # six, support.proof_cases), so that a light load the settled checks run on in full fits
        # below it; the first keeps its drawn load.
        p = _half_headroom(p) if as_drawn(n) else above_converter_floor(p, _half_headroom)
        p_heavy.append(p.load_current_a)
        need = p.r_cable_ohm * p.load_current_a
        # The light load is drawn above bounds.light_load_a where the plant allows it (the settled
        # checks then run in full) and low enough that its drop, on the hottest cable, fits the
        # correction's ceiling: the headroom less the perturbation's largest peak
        # (algo.step.corr_ceiling), with a tenth to spare.
        probe = hs.design_scenario(p, 1)
        cfg = algo_config(probe)
        hot = r_cable_at(probe, probe.run.duration_s) / p.r_cable_ohm
        top = max(0.05, min(0.45, 0.9 * (0.5 * need - cfg.pert_max_v) / (hot * need)))
        floor = 2 * bd.light_load_a(cfg, probe, p.r_cable_ohm + p.esr_ohm) / p.load_current_a
        lo = max(0.05, floor) if floor < top else 0.05
        light = data.draw(st.floats(lo, max(lo, top)))
        p = replace(p, load_steps=((float(heavy), light),))
        recover = max(bd.RECOVER_WINDOWS, settle_windows(probe))   # like the settling, scales with R*C
        sc = hs.design_scenario(p, heavy + recover + bd.CHECK_WINDOWS, seed=n)
        scs.append(replace(sc, source=f"step of {p.load_current_a * (1 - light)!r} A"))
    for lr, b in run_groups(scs):
        sc = lr.run.scenarios[b]
        cfg = algo_config(sc)
        ends = window_ends(lr, b)
        corr = lr.trace["corr"][:, b]
        ceiling = corr_ceiling_q(lr, b, derive(cfg))
        clamped = corr[ends[heavy - 2]] == ceiling[ends[heavy - 2]]
        heavy_light = p_heavy[b] < bd.light_load_a(cfg, sc, sc.cable.resistance_ohm + sc.load_end.esr_ohm)
        count_plant("clamped before release" if clamped else
                    "not clamped: light load, no estimate" if heavy_light else "not clamped")
        if not clamped and not heavy_light:
            why_clamp = [f"the correction never reached its ceiling {int(ceiling[ends[heavy - 2]])} LSB (need > headroom)"]
        else:
            why_clamp = []
        lsb = bd.dac_lsb_v(cfg)
        headroom = (round(cfg.max_v / lsb) - round(cfg.target_v / lsb)) * lsb
        over = float(lr.run.channels["correction_v"][:, b].max())
        if over > headroom + 0.5 * lsb:      # correction_v is float32
            why_clamp.append(f"the correction reached {over:.6g} V, above the headroom {headroom:.6g} V")
        recover = max(bd.RECOVER_WINDOWS, settle_windows(sc))
        why = why_clamp + settled_failures(lr, b, sc, heavy + recover, heavy + recover + bd.CHECK_WINDOWS)
        after = samples_between(lr, b, heavy, heavy + recover + bd.CHECK_WINDOWS)
        corr_v = float(lr.run.channels["correction_v"][ends[heavy - 1], b])
        d_i = float(sc.source.split()[2])
        limit = bd.overshoot_limit_v(cfg, corr_v, 0.0, d_i, sc.cable.inductance_h,
                                     sc.load_end.capacitance_f, ripple_v=bd.ripple_excess_v(cfg, sc))
        v_max = float(lr.run.channels["v_load_v"][after, b].max())
        if v_max > limit:
            why.append(f"after the clamp was released the load reached {v_max:.6g} V > {limit:.6g} V")
        assert not why, reproducer(sc, "; ".join(why))
    report_shares(len(scs))
