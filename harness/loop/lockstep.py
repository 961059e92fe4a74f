"""Closed loop with several implementations in lock step: the first drives the plant, all must agree.

The proof suite runs the fixed-point model and the C reference side by side on one batch of
plants: every sample, each implementation gets the same ADC codes, and their commands and every
state field must agree bit for bit (property 5) and lie inside the range analysis
(``algo.ranges.state_bounds``, property 2). The plant is driven by the first implementation's
command, so a disagreement is caught at the sample where it starts.

A firmware port joins the same way: wrap it in an object with ``step(adc_v, adc_i) -> commands``
(int arrays of shape (B,)) and ``states() -> {field: array (B,)}`` and pass it in ``algos``
(harness/proof/PROOFS.md).
"""
from dataclasses import dataclass

import numpy as np

from algo.params import derive
from algo.ranges import state_bounds
from algo.state import STATE_FIELDS
from harness.loop import backends
from harness.scenario.algo_setup import algo_config
from harness.loop.closed_loop import CHANNELS, Run, drive
from harness.plant.rig import build_rig

#: State fields recorded per sample besides the plant channels (ints).
TRACE_FIELDS = ("status", "windows", "bad_windows", "r_est", "corr", "cmd", "pert_amp")


class Mismatch(AssertionError):
    """Implementations disagree, or a state field left its range-analysis interval."""


@dataclass
class LockstepRun:
    """A closed-loop Run plus per-sample traces of TRACE_FIELDS (int64, (T, B)) and the bounds."""
    run: Run
    trace: dict
    bounds: dict      # field -> (lo (B,), hi (B,))


def _bounds(params):
    per = [state_bounds(p) for p in params]
    return {f: (np.array([b[f][0] for b in per], dtype=np.int64),
                np.array([b[f][1] for b in per], dtype=np.int64)) for f in STATE_FIELDS}


def _check(t, names, states, bounds):
    ref = states[0]
    for name, other in zip(names[1:], states[1:]):
        for f in STATE_FIELDS:
            bad = np.flatnonzero(np.asarray(ref[f], np.int64) != np.asarray(other[f], np.int64))
            if bad.size:
                b = int(bad[0])
                raise Mismatch(f"sample {t}, scenario {b}: {f} differs: {names[0]}={int(ref[f][b])} "
                               f"{name}={int(other[f][b])}")
    for f in STATE_FIELDS:
        v = np.asarray(ref[f], np.int64)
        lo, hi = bounds[f]
        bad = np.flatnonzero((v < lo) | (v > hi))
        if bad.size:
            b = int(bad[0])
            raise Mismatch(f"sample {t}, scenario {b}: {f} = {int(v[b])} outside its range-analysis "
                           f"interval [{int(lo[b])}, {int(hi[b])}]")


class LockstepLoop:
    """A running closed loop of ``scenarios`` with ``algos`` in lock step (see :func:`run_lockstep`).

    ``advance(n)`` runs n more samples and returns their record (channels and traces), so a
    caller can check a long run piece by piece.
    """

    def __init__(self, scenarios, algos=("model", "c"), overrides=None, check_every=1):
        self.scenarios = list(scenarios)
        per = overrides if isinstance(overrides, list) else [overrides] * len(self.scenarios)
        self.cfgs = [algo_config(s, o) for s, o in zip(self.scenarios, per)]
        rates = {c.sample_rate_hz for c in self.cfgs}
        if len(rates) != 1:
            raise ValueError(f"scenarios in one batch must share sample_rate_hz, got {sorted(rates)}")
        self.params = [derive(c) for c in self.cfgs]
        self.impls = [backends.make(a, self.cfgs) if isinstance(a, str) else a for a in algos]
        self.names = [a if isinstance(a, str) else type(a).__name__ for a in algos]
        self.rig = build_rig(self.scenarios)
        self.bounds = _bounds(self.params)
        self.check_every = check_every
        self.r_unit = np.array([c.v_full_scale_v / c.i_full_scale_a / (1 << c.r_frac_bits) for c in self.cfgs])
        self.corr_unit = np.array([c.dac_full_scale_v / (1 << c.dac_bits) / (1 << c.corr_frac_bits)
                                   for c in self.cfgs])
        self.rig.reset()
        self.t = 0
        self.last_obs = None
        states = [impl.states() for impl in self.impls]
        _check(-1, self.names, states, self.bounds)
        self.cmd = np.asarray(states[0]["cmd"], dtype=np.int64)

    def advance(self, n_t):
        """Run ``n_t`` samples; returns (channels, trace): dicts of (n_t, B) arrays (module docstring)."""
        n_b = len(self.scenarios)
        rec = {name: np.empty((n_t, n_b), dtype=np.float32) for name in CHANNELS}
        trace = {name: np.empty((n_t, n_b), dtype=np.int64) for name in TRACE_FIELDS}
        impls, names = self.impls, self.names
        t0 = self.t

        def step(v_code, i_code):
            cmds = [np.asarray(impl.step(v_code, i_code), dtype=np.int64) for impl in impls]
            for name, c in zip(names[1:], cmds[1:]):
                if not np.array_equal(c, cmds[0]):
                    b = int(np.flatnonzero(c != cmds[0])[0])
                    raise Mismatch(f"sample {self.t}, scenario {b}: command differs: {names[0]}={cmds[0][b]} "
                                   f"{name}={c[b]}")
            return cmds[0]

        for k, command_v, obs, _, _, cmd in drive(self.rig, step, self.cmd, n_t):
            t = t0 + k
            self.cmd = cmd
            if t % self.check_every == 0:
                st = impls[0].states()
                _check(t, names, [st] + [impl.states() for impl in impls[1:]], self.bounds)
                for name in TRACE_FIELDS:
                    trace[name][k] = st[name]
            else:
                for name in TRACE_FIELDS:
                    trace[name][k] = impls[0].field(name)
            rec["v_supply_v"][k], rec["i_supply_a"][k] = obs.v_supply_v, obs.i_supply_a
            rec["v_load_v"][k], rec["command_v"][k] = obs.v_load_v, command_v
            rec["r_estimate_ohm"][k] = trace["r_est"][k] * self.r_unit
            rec["correction_v"][k] = trace["corr"][k] * self.corr_unit
            self.t = t + 1
            self.last_obs = obs
        return rec, trace


def run_lockstep(scenarios, algos=("model", "c"), overrides=None, check_every=1):
    """Run ``scenarios`` (shared sample rate, duration and start) with ``algos`` in lock step.

    Parameters
    ----------
    scenarios : list of harness.scenario.specs.Scenario
    algos : sequence of str or objects
        Backend names (``"model"``, ``"c"``) or port objects (module docstring); the first
        drives the plant.
    overrides : dict or list of dict, optional
        Algorithm settings replacing the scenarios' own (one for all, or one per scenario).
    check_every : int
        Compare and range-check every this many samples (1: every sample).

    Returns
    -------
    LockstepRun
    """
    scenarios = list(scenarios)
    durations = {s.run.duration_s for s in scenarios}
    if len(durations) != 1:
        raise ValueError(f"scenarios in one batch must share run.duration_s, got {sorted(durations)}")
    loop = LockstepLoop(scenarios, algos, overrides, check_every)
    n_t = int(round(durations.pop() * loop.cfgs[0].sample_rate_hz))
    rec, trace = loop.advance(n_t)
    t_s = (np.arange(n_t) + 1) / loop.cfgs[0].sample_rate_hz
    run = Run(t_s=t_s, channels=rec, scenarios=scenarios, cfgs=loop.cfgs,
              r_cable_ohm=np.asarray(loop.last_obs.r_cable_ohm, dtype=float).copy(),
              backend="+".join(loop.names), compensation="linedrop")
    return LockstepRun(run=run, trace=trace, bounds=loop.bounds)
