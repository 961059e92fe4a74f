"""Proof properties 1 and 5: every admitted plant converges, in lock step on the model and the C.

Each example is a batch of plants drawn by harness.proof.strategies.plant_batches, configured by the
design calculator, run as one closed-loop call per sample rate through
harness.loop.lockstep.run_lockstep, where the fixed-point model drives the plant and the C
reference must agree with it on the command and every state field at every sample (property 5),
and every state field must stay inside algo.ranges.state_bounds (property 2). Bounds come from
harness.proof.bounds only.
"""
from hypothesis import Phase, given, note, settings

from harness.proof import bounds as bd
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config
from support.proof_support import (count_plant, report_shares, reproducer, run_groups, settle_windows,
                                   settled_failures, settled_load_v)

BATCH = 8


def _examples(fraction):
    """A share of the profile's examples; no shrinking (a run takes seconds; the failure message
    already carries the scenario file that reproduces it)."""
    return settings(max_examples=max(2, int(settings.default.max_examples * fraction)),
                    phases=(Phase.explicit, Phase.reuse, Phase.generate))


@_examples(0.10)
@given(hs.plant_batches(size=BATCH, max_steps=0))
def test_converges_from_a_steady_start_within_the_stated_windows(batch):
    """Bounds: SETTLE_WINDOWS, CHECK_WINDOWS, R_SETTLE_REL, LOAD_TOL_REL, OSCILLATION_REL, OVERSHOOT_REL."""
    scs = []
    for n, p in enumerate(batch):
        sc = hs.design_scenario(p, bd.SETTLE_WINDOWS, seed=n)
        scs.append(hs.design_scenario(p, settle_windows(sc) + bd.CHECK_WINDOWS, seed=n))
    for lr, b in run_groups(scs):
        sc = lr.run.scenarios[b]
        cfg = algo_config(sc)
        n_settle = settle_windows(sc)
        why = settled_failures(lr, b, sc, n_settle, n_settle + bd.CHECK_WINDOWS)
        v_max = float(lr.run.channels["v_load_v"][:, b].max())
        i = float(lr.run.channels["i_supply_a"][:, b].mean())
        r = sc.cable.resistance_ohm + sc.load_end.esr_ohm - cfg.esr_allowance_ohm
        settled = settled_load_v(lr, b, sc, n_settle, n_settle + bd.CHECK_WINDOWS)
        limit = bd.overshoot_limit_v(cfg, 0.0, bd.sensing_bias_v(cfg, sc.sensing, r, i), settled_v=settled,
                                     ripple_v=bd.ripple_excess_v(cfg, sc))
        count_plant("start overshoot checked")
        if v_max > limit:
            why.append(f"load reached {v_max:.6g} V, above target + margin {limit:.6g} V")
        note(f"plant {sc.load.kind} R={sc.cable.resistance_ohm:.4g} C={sc.load_end.capacitance_f:.4g}")
        assert not why, reproducer(sc, "; ".join(why))
    report_shares(len(scs))
