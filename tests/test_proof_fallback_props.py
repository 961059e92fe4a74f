"""Proof property 3: cable open, capacitor open, both, or load disconnected -> the correction falls
to zero within the stated windows, stays there, the loop re-converges after, and the load never
exceeds target + the overshoot margin. A rule-based machine injects the same events into a running
closed loop in any order. Bounds from harness.proof.bounds; model and C in lock step throughout."""
import math
from dataclasses import replace

from hypothesis import Phase, assume, given, settings, strategies as st
from hypothesis.stateful import RuleBasedStateMachine, initialize, rule

from harness.proof import bounds as bd
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config
from support.proof_support import (count_plant, report_shares, reproducer, run_groups, samples_between,
                           settle_windows, settled_failures, window_ends)

KINDS = ("cable_open", "cap_open", "both", "load_off")


def _examples(fraction):
    return settings(max_examples=max(2, int(settings.default.max_examples * fraction)),
                    phases=(Phase.explicit, Phase.reuse, Phase.generate))


@st.composite
def _fault_case(draw):
    batch = draw(hs.plant_batches(size=6, kinds=("constant_current", "resistive", "constant_power"),
                                  max_steps=0))
    scs = []
    for n, p in enumerate(batch):
        kind = draw(st.sampled_from(KINDS))
        settle = max(bd.SETTLE_WINDOWS, settle_windows(hs.design_scenario(p, 1)))
        at = settle + draw(st.floats(0.0, 0.999))
        # At least one whole window past LOAD_OFF_WINDOWS, so the load-off decay is checked on
        # some samples (a load back at exactly LOAD_OFF_WINDOWS leaves none).
        until = at + bd.LOAD_OFF_WINDOWS + draw(st.integers(1, 8))
        total = int(math.ceil(until)) + settle + bd.CHECK_WINDOWS
        if kind == "load_off":
            p = replace(p, load_steps=((at, 0.0), (until, 1.0)))
            faults = ()
        else:
            faults = [(k, at, until) for k in (("cable_open", "cap_open") if kind == "both" else (kind,))]
        sc = hs.design_scenario(p, total, faults=faults, seed=n)
        scs.append(replace(sc, source=f"{kind} {at!r} {until!r} {p.load_current_a!r}"))
    return scs


@_examples(0.05)
@given(_fault_case())
def test_faults_drop_the_correction_to_zero_in_the_stated_windows_and_it_recovers(scs):
    for lr, b in run_groups(scs):
        sc = lr.run.scenarios[b]
        kind, at, until, i_load = sc.source.split()
        at, until, i_load = float(at), float(until), float(i_load)
        cfg = algo_config(sc)
        why = []
        ends = window_ends(lr, b)
        corr_q = lr.trace["corr"][:, b]
        w_fault = int(math.floor(at))
        corr_before = float(lr.run.channels["correction_v"][ends[w_fault - 1], b])
        if kind == "load_off":
            i_lsb = sc.sensing.i_full_scale_a / (1 << sc.sensing.adc_bits)
            r_hat = float(lr.run.channels["r_estimate_ohm"][:, b].max())
            residue = (cfg.compensation * r_hat * (abs(sc.sensing.offset_lsb) + 1) * i_lsb
                       + bd.DAC_LSB_SLACK * bd.dac_lsb_v(cfg))
            held = samples_between(lr, b, w_fault + bd.LOAD_OFF_WINDOWS, int(until))
            off = lr.run.channels["correction_v"][held, b]
            count_plant("load off: decay checked" if off.size else "load off: back before LOAD_OFF_WINDOWS")
            worst = float(off.max()) if off.size else 0.0
            if worst > residue:
                why.append(f"load off: correction {worst:.4g} V after {bd.LOAD_OFF_WINDOWS} windows (> {residue:.3g} V)")
        else:
            zero_from = w_fault + cfg.fault_windows + bd.FAULT_EXTRA_WINDOWS
            held = samples_between(lr, b, zero_from, int(until))
            if corr_q[held].any():
                why.append(f"{kind}: correction not zero from window {zero_from} to the fault's end "
                           f"(max {int(corr_q[held].max())} LSB)")
        if kind in ("cap_open", "both") and bd.runs_away_without_capacitor(sc):
            count_plant("cap open: the plant runs away (forced zero checked only)")
            assert not why, reproducer(sc, "; ".join(why))
            continue
        count_plant(f"{kind}: every check")
        event_s = samples_between(lr, b, w_fault, len(ends))
        limit = bd.overshoot_limit_v(cfg, corr_before, 0.0, i_load if kind == "load_off" else 0.0,
                                     sc.cable.inductance_h, sc.load_end.capacitance_f,
                                     ripple_v=bd.ripple_excess_v(cfg, sc))
        v_max = float(lr.run.channels["v_load_v"][event_s, b].max())
        if v_max > limit:
            why.append(f"{kind}: load reached {v_max:.6g} V > target + margin {limit:.6g} V")
        w_back = int(math.ceil(until)) + max(bd.RECOVER_WINDOWS, settle_windows(sc))
        why += settled_failures(lr, b, sc, w_back, w_back + bd.CHECK_WINDOWS)
        assert not why, reproducer(sc, "; ".join(why))
    report_shares(len(scs))


class FaultMachine(RuleBasedStateMachine):
    """Up to four plants; rules open and close the cable and the capacitor and step the load, in
    any order, with waits between. The timeline becomes the plants' [[fault]] and load steps (the
    scenario file's own event API) and runs once, in lock step, at teardown, where the
    zero-correction bound, the margin and re-convergence are checked over the whole trace."""

    @initialize(batch=hs.plant_batches(size=4, kinds=("constant_current", "resistive"), max_steps=0))
    def start(self, batch):
        scs = [hs.design_scenario(p, 1) for p in batch]
        rates = {sc.sensing.sample_rate_hz for sc in scs}
        self.plants = [p for p, sc in zip(batch, [hs.design_scenario(p, 1) for p in batch])
                       if sc in scs and sc.sensing.sample_rate_hz == min(rates, default=0)]
        assume(self.plants)
        self.win = max(hs.window_s(hs.design_scenario(p, 1)) for p in self.plants)
        # Settle (and recovery) bound in windows of the slowest plant: the longest of the plants'.
        self.settle = max([bd.SETTLE_WINDOWS] + [
            math.ceil(settle_windows(hs.design_scenario(p, 1)) * hs.window_s(hs.design_scenario(p, 1))
                      / self.win) for p in self.plants])
        self.now = float(self.settle)                  # in windows of the slowest plant
        self.open = [dict() for _ in self.plants]      # kind -> opened at (window)
        self.intervals = [[] for _ in self.plants]     # (kind, at, until)
        self.steps = [[] for _ in self.plants]         # (window, factor)

    @rule(b=st.integers(0, 3), kind=st.sampled_from(("cable_open", "cap_open")))
    def open_fault(self, b, kind):
        self.open[b % len(self.plants)].setdefault(kind, self.now)

    @rule(b=st.integers(0, 3), kind=st.sampled_from(("cable_open", "cap_open")))
    def close_fault(self, b, kind):
        b %= len(self.plants)
        if kind in self.open[b]:
            self.intervals[b].append((kind, self.open[b].pop(kind), self.now))

    @rule(b=st.integers(0, 3), factor=st.sampled_from((0.0, 0.3, 1.0, 1.2)))
    def step_load(self, b, factor):
        b %= len(self.plants)
        if not self.steps[b] or self.steps[b][-1][0] < self.now:
            self.steps[b].append((self.now, factor))

    @rule(windows=st.integers(1, 12), frac=st.floats(0.0, 0.99))
    def wait(self, windows, frac):
        self.now += windows + frac

    def teardown(self):
        if not getattr(self, "plants", None):
            return
        for b in range(len(self.plants)):
            for kind, at in self.open[b].items():
                self.intervals[b].append((kind, at, self.now))
        end = int(math.ceil(self.now)) + max(bd.RECOVER_WINDOWS, self.settle) + bd.CHECK_WINDOWS
        scs = []
        for b, p in enumerate(self.plants):
            p = replace(p, load_steps=tuple(self.steps[b]))
            own = hs.window_s(hs.design_scenario(p, 1))
            k = self.win / own                         # this plant's windows per machine window
            sc = hs.design_scenario(p, end * k, faults=[(f, a * k, u * k) for f, a, u in self.intervals[b]], seed=b)
            scs.append(replace(sc, source=f"{max([1.0] + [f for _, f in self.steps[b]]) * p.load_current_a!r}"))
        for lr, b in run_groups(scs):
            sc = lr.run.scenarios[b]
            cfg = algo_config(sc)
            t = lr.run.t_s
            own = hs.window_s(sc)
            corr = lr.trace["corr"][:, b]
            why = []
            for kind, at, until in [(f.kind, f.at_s, f.until_s) for f in sc.faults]:
                zero = (t >= at + (cfg.fault_windows + bd.FAULT_EXTRA_WINDOWS) * own) & (t < until)
                if corr[zero].any():
                    why.append(f"{kind} over [{at:.4g}, {until:.4g}) s: correction {int(corr[zero].max())} LSB "
                               f"after {cfg.fault_windows + bd.FAULT_EXTRA_WINDOWS} windows")
            peak = float(lr.run.channels["correction_v"][:, b].max())
            lim = bd.overshoot_limit_v(cfg, peak, 0.0, float(sc.source), sc.cable.inductance_h,
                                       sc.load_end.capacitance_f, ripple_v=bd.ripple_excess_v(cfg, sc))
            v = float(lr.run.channels["v_load_v"][:, b].max())
            if v > lim:
                why.append(f"load reached {v:.6g} V > {lim:.6g} V")
            n_end = len(window_ends(lr, b))
            why += settled_failures(lr, b, sc, n_end - bd.CHECK_WINDOWS, n_end)
            assert not why, reproducer(sc, "stateful: " + "; ".join(why))
        report_shares(len(scs))


TestFaultMachine = FaultMachine.TestCase
TestFaultMachine.settings = settings(max_examples=max(2, settings.default.max_examples // 25),
                                     stateful_step_count=10, phases=(Phase.explicit, Phase.reuse, Phase.generate))
