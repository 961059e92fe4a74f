"""Greedy word-length search: from generous widths, shrink one knob at a time by sensitivity.

1. *Start*: every width at its generous value (KNOBS), the filter shift at the scenario's own.
2. *Sweep*: each knob alone, every value below its start, the others generous (one batch). This
   gives the error-vs-bits curves, each knob's lowest value that still meets the spec on its
   own (the bottom of the passing run down from the start), and its sensitivity: the rise in
   severity (harness.tune.evaluate.severity) per unit of cost saved.
3. *Chain*: knobs in order of sensitivity, least sensitive first, each moved to its own lowest
   value on top of the previous ones; the whole chain is evaluated at once. At the first link
   that breaks the spec, the chain is cut, that knob backs off one bit and the rest is retried.
4. *Polish*: every lower value of every knob, one knob at a time (one batch); the passing one
   that saves the most cost is taken, until none passes. The result is a local
   minimum: one bit less on any knob breaks the spec (or is rejected, or is off its range).
   The most sensitive knob is the one whose lower neighbour is furthest outside the spec.
"""
import hashlib
import math

from harness.scenario.algo_setup import algo_config
from harness.design.calculator import loop_summary
from harness.tune.evaluate import KNOBS, Job, cost, ideal_settings, severity, variant

#: Safety limit on chain and polish rounds.
MAX_ROUNDS = 40
#: Values tried beside each chain link, from the knob's target up.
LADDER = 2
#: Step between swept values in a quick sweep (every value otherwise).
QUICK_STEP = 2


def config_id(settings):
    """Short stable name of a configuration."""
    text = ",".join(f"{k}={settings[k]}" for k in sorted(settings))
    return hashlib.sha256(text.encode()).hexdigest()[:10]


def _worst(values):
    vals = [v for v in values if v is not None]
    return max(vals) if len(vals) == len(values) and vals else None


class Tuner:
    """Evaluates configurations (dicts of knob values) on every scenario and keeps every row."""

    def __init__(self, scenarios, runner, spec, knobs=None, quick=False):
        self.scenarios, self.runner, self.spec = scenarios, runner, spec
        self.step = QUICK_STEP if quick else 1
        base = algo_config(scenarios[0])
        self.knobs = list(knobs or KNOBS)
        self.start = {}
        for k in self.knobs:
            lo, gen, _ = KNOBS[k]
            self.start[k] = int(getattr(base, k) if gen is None else gen)
        self.fixed = {}
        self.rows = {}          # config id -> row
        self.order = []         # config ids in evaluation order

    def _margin(self, settings):
        try:
            return min(loop_summary(sc, algo_config(variant(sc, settings, sc.run.duration_s)))["gain_margin"]
                       for sc in self.scenarios)
        except Exception:       # the small-signal model has no answer for this configuration
            return None

    def evaluate(self, configs, phase):
        """Rows (dicts) for ``configs``, evaluated in one round."""
        jobs = []
        for s in configs:
            for sc in self.scenarios:
                jobs.append(Job(sc, tuple(sorted(s.items())), "model"))
                jobs.append(Job(sc, tuple(sorted(ideal_settings(s).items())), "ideal"))
        res = self.runner.run(jobs)
        rows, n = [], 2 * len(self.scenarios)
        for i, s in enumerate(configs):
            rows.append(self._row(s, phase, res[i * n:(i + 1) * n]))
        return rows

    def _row(self, s, phase, res):
        cid = config_id(s)
        if cid in self.rows:
            return self.rows[cid]
        fixed, ideal = res[0::2], res[1::2]
        row = {"config": cid, "phase": phase, **s, "cost": cost(s)}
        bad = [r for r in fixed + ideal if r["status"] != "ok"]
        if bad:
            row.update(status=bad[0]["status"], reason=bad[0]["reason"], meets_spec=False,
                       severity=math.inf, fails=bad[0]["status"])
        else:
            row.update(status="ok", reason="")
            row["error_mv"] = max(r["error_mv"] for r in fixed)
            row["ideal_error_mv"] = max(r["error_mv"] for r in ideal)
            row["error_ratio"] = max(f["error_mv"] / max(i["error_mv"], 1e-9) for f, i in zip(fixed, ideal))
            row["settle_ms"] = _worst([r["settle_ms"] for r in fixed])
            row["ideal_settle_ms"] = _worst([r["settle_ms"] for r in ideal])
            row["converge_ms"] = _worst([r["converge_ms"] for r in fixed])
            row["ideal_converge_ms"] = _worst([r["converge_ms"] for r in ideal])
            row["est_error_ohm"] = max(abs(f["r_est_ohm"] - i["r_est_ohm"]) for f, i in zip(fixed, ideal))
            row["ripple_mv"] = max(r["ripple_mv"] for r in fixed)
            row["ideal_ripple_mv"] = max(r["ripple_mv"] for r in ideal)
            row["limit_cycle"] = any(r["limit_cycle"] for r in fixed)
            row["ideal_limit_cycle"] = any(r["limit_cycle"] for r in ideal)
            row["toggle_share"] = max(r["toggle_share"] for r in fixed)
            row["acc_peak"] = max(r["acc_peak"] for r in fixed)
            row["acc_bound"] = max(r["acc_bound"] for r in fixed)
            row["acc_headroom_bits"] = min(r["acc_headroom_bits"] for r in fixed)
            row["within_bounds"] = all(r["within_bounds"] for r in fixed)
            row["gain_margin"] = self._margin(s)
            row["severity"] = max(severity(f, self.spec, i) for f, i in zip(fixed, ideal))
            row["fails"] = " ".join(self._fails(row, fixed, ideal))
            row["meets_spec"] = not row["fails"]
        self.rows[cid] = row
        self.order.append(cid)
        return row

    def _fails(self, row, fixed, ideal):
        """Names of the spec criteria a simulated row misses."""
        sp = self.spec
        if row["error_mv"] > sp["max_error_mv"]:
            yield "error"
        if any(r["settle_ms"] is None or r["settle_ms"] > sp["max_settle_ms"] for r in fixed):
            yield "settling"
        if sp.get("max_ideal_ratio") and any(
                f["error_mv"] > sp["max_ideal_ratio"] * i["error_mv"] for f, i in zip(fixed, ideal)):
            yield "ideal_ratio"
        if row["gain_margin"] is not None and row["gain_margin"] < sp["min_gain_margin"]:
            yield "gain_margin"
        if not row["within_bounds"]:
            yield "range_bounds"

    # -- search phases ----------------------------------------------------------------------

    def _with(self, s, **changes):
        return dict(s, **changes)

    def _sweep_values(self, k):
        """Values below the start, descending (every ``self.step``-th, always the lowest)."""
        vals = list(range(self.start[k] - 1, KNOBS[k][0] - 1, -self.step))
        if vals and vals[-1] != KNOBS[k][0]:
            vals.append(KNOBS[k][0])
        return vals

    def sweep(self):
        """Phase 1-2: the start and every one-knob variant; returns (start row, lowest, sensitivity)."""
        values = {k: self._sweep_values(k) for k in self.knobs}
        configs = [self.start]
        for k in self.knobs:
            configs += [self._with(self.start, **{k: v}) for v in values[k]]
        rows = self.evaluate(configs, "sweep")
        start_row, lowest, sens = rows[0], {}, {}
        i = 1
        for k in self.knobs:
            vals = values[k]
            lowest[k] = self.start[k]
            worst = start_row["severity"]
            for v, row in zip(vals, rows[i:i + len(vals)]):
                if not row["meets_spec"]:
                    break
                lowest[k], worst = v, max(worst, row["severity"])
            i += len(vals)
            saved = (self.start[k] - lowest[k]) * KNOBS[k][2]
            sens[k] = (worst - start_row["severity"]) / saved if saved else math.inf
        return start_row, lowest, sens

    def _costly(self):
        """Knobs that cost something: only these are shrunk (weightless shifts are only swept)."""
        return [k for k in self.knobs if KNOBS[k][2] > 0]

    def chain(self, cur, lowest, sens):
        """Phase 3: shrink knobs least-sensitive-first toward their lowest values.

        Each round evaluates the whole chain at once, and beside every link the LADDER values
        just above that knob's target, so a broken link is repaired in the same round.
        """
        target = dict(lowest)
        remaining = [k for k in sorted(self._costly(), key=lambda k: (sens[k], k)) if target[k] < cur[k]]
        for _ in range(MAX_ROUNDS):
            if not remaining:
                break
            links, configs, c = [], [], cur
            for k in remaining:
                vals = list(range(target[k], min(target[k] + LADDER, c[k])))
                links.append((k, c, vals, len(configs)))
                configs += [self._with(c, **{k: v}) for v in vals]
                c = self._with(c, **{k: target[k]})
            rows = self.evaluate(configs, "chain")
            for j, (k, base, vals, at) in enumerate(links):
                ok = [v for v, r in zip(vals, rows[at:at + len(vals)]) if r["meets_spec"]]
                if ok and ok[0] == target[k]:
                    continue
                # The link broke: take the lowest passing ladder value, or back off past the ladder.
                cur = self._with(base, **{k: ok[0]}) if ok else base
                if not ok:
                    target[k] = vals[-1] + 1
                remaining = [x for x in remaining[j + (1 if ok else 0):] if target[x] < cur[x]]
                break
            else:
                return c
        return cur

    def polish(self, cur):
        """Phase 4: every lower value of every knob in one round; take the passing one saving the
        most cost (then the least severe), until none passes. Returns (config, the one-bit-lower
        neighbours' rows of the final round)."""
        for _ in range(MAX_ROUNDS):
            cands = [(k, v, self._with(cur, **{k: v})) for k in self._costly()
                     for v in range(cur[k] - 1, KNOBS[k][0] - 1, -1)]
            rows = self.evaluate([c for _, _, c in cands], "polish")
            ok = [(cost(c), r["severity"], k, c) for (k, v, c), r in zip(cands, rows) if r["meets_spec"]]
            if not ok:
                return cur, {k: r for (k, v, _), r in zip(cands, rows) if v == cur[k] - 1}
            cur = min(ok, key=lambda t: t[:3])[3]
        return cur, {}

    def run(self):
        """The whole search; returns a result dict (see harness.cli.tune)."""
        start_row, lowest, sens = self.sweep()
        out = {"start": start_row, "lowest_alone": lowest, "sensitivity": sens,
               "recommended": None, "neighbours": {}, "most_sensitive": None}
        cur = dict(self.start)
        if not start_row["meets_spec"]:
            # The generous start fails, but a one-knob variant of it may pass: go on from the
            # cheapest that does, so the recommendation agrees with the rows the CSV shows.
            passing = [r for r in self.rows.values() if r["meets_spec"]]
            if not passing:
                return out
            best = min(passing, key=lambda r: (r["cost"], r["severity"], r["config"]))
            cur = {k: best[k] for k in self.start}
        cur = self.chain(cur, lowest, sens)
        cur, neigh = self.polish(cur)
        out["recommended"] = self.rows[config_id(cur)]
        out["neighbours"] = neigh
        simulated = {k: r for k, r in neigh.items() if r["status"] == "ok"}
        if simulated:
            out["most_sensitive"] = max(simulated, key=lambda k: (simulated[k]["severity"],
                                                                  simulated[k]["error_mv"]))
        return out
