"""``linedrop tune``: find the cheapest word lengths that still meet a regulation spec.

Runs the fixed-point model and the float ideal in closed loop on the same scenarios (same noise
seed), searches the knobs greedily (harness.tune.search) and writes ``tune.csv`` (every evaluated
configuration), ``error_vs_bits.png`` and ``pareto.png`` into ``--out`` (a new folder beside it,
swapped in whole with the results cache carried across). Cost is the weighted sum
of the word lengths: 2 x adc_bits (two converter channels) + dac_bits + table_bits + acc_bits +
r_frac_bits + corr_frac_bits. The estimate's filter shift (r_filter_shift) is swept for the
plots but weighs nothing: it costs no memory or cycles, so it moves only where that lowers the
error.

A configuration meets the spec when, on every scenario, the fixed-point model's load error
(target minus the mean load voltage over the last 20 % of the run) is at most ``--max-error-mv``,
the load settles into the 1 % band within ``--max-settle-ms`` of the last load step or fault end
(of the start when there is none), that error is at most ``--max-ideal-ratio`` times the
float ideal's on the same run, the observed accumulators stay inside their static bounds,
and the small-signal loop model (harness.design.calculator.loop_summary) gives a gain margin of at least
``--min-gain-margin``. Configurations whose range analysis shows a possible overflow are
rejected and never simulated. ``--json`` prints one object: recommended (knobs and figures),
csv, plots, most_sensitive_knob, one_bit_less, sensitivity (severity rise per bit of cost saved,
in the one-knob sweep), lowest_alone (each knob's lowest passing value in that sweep), start, spec, cost_definition, configurations, rejected,
evaluated_new, evaluated_cached, duration_s (run length per scenario file) and notes (runs shorter
than their checks need). Exit status 0 with a recommendation, 1 when none meets the spec.

Every run keeps all of its scenario's load steps and faults: it lasts until the error's tail
starts ``--max-settle-ms`` after the last of them (harness.tune.run_length); ``--quick`` stops
there, a full run lasts at least 0.8 s, ``--duration-s`` is taken as given. None is longer than
the scenario's own run.duration_s.
"""
import json
import math
import os

import sys

from harness.atomic import check_folder_target, check_swap_target
from harness.cli.values import integer, number
from harness.design.calculator import GM_TARGET
from harness.errors import InputError
from harness.scenario.read import load_scenario
from harness.tune.evaluate import KNOBS
from harness.tune.report import CACHE_FILE, OUT_FILES, summary, write_outputs
from harness.tune.run_length import DEFAULT_DURATION_S, run_lengths
from harness.tune.runner import Cache, Runner
from harness.tune.search import Tuner

COST_DEFINITION = ("2*adc_bits + dac_bits + table_bits + acc_bits + r_frac_bits + corr_frac_bits "
                   "(filter shifts weigh 0)")
#: What an interrupted or failed run leaves besides its outputs (harness.cli.main).
ON_STOP = "the results cache keeps every finished run: run the same command again to resume"


def add_parser(sub):
    p = sub.add_parser("tune", help="search word lengths against a regulation spec (model vs float ideal)",
                       description="Sweep ADC, table, accumulator, estimate, correction and DAC word "
                                   "lengths and filter shifts greedily; report the cheapest "
                                   "configuration meeting the spec.")
    p.add_argument("scenarios", nargs="+", metavar="SCENARIO.toml", help="scenario files (all must pass)")
    p.add_argument("--max-error-mv", type=number(0.0, math.inf, "mV", lo_open=True), default=100.0,
                   help="largest load error, mV (default 100)")
    p.add_argument("--max-settle-ms", type=number(0.0, math.inf, "ms", lo_open=True), default=300.0,
                   help="longest settling time, ms (default 300)")
    p.add_argument("--min-gain-margin", default=GM_TARGET,
                   type=number(1.0, math.inf, "", note=" (below 1 the small-signal loop is unstable)"),
                   help=f"smallest loop gain margin from the small-signal model, >= 1 (below 1 the "
                        f"loop is unstable; default {GM_TARGET})")
    p.add_argument("--max-ideal-ratio", type=number(0.0, math.inf, ""), default=2.0,
                   help="largest load error as a multiple of the float ideal's on the same run "
                        "(default 2; 0 turns the check off)")
    p.add_argument("--quick", action="store_true",
                   help="every second value in the sweep, and runs that end as soon as the checks allow "
                        "(every load step and fault kept)")
    p.add_argument("--duration-s", type=number(0.0, 3600.0, "s", lo_open=True),
                   help=f"simulated time per run, s, taken as given (default: at least {DEFAULT_DURATION_S} "
                        f"and long enough to keep every load step and fault and the settling after them; "
                        f"capped at the scenario's run.duration_s)")
    p.add_argument("--knobs", help=f"comma-separated knobs to tune (default all: {','.join(KNOBS)})")
    p.add_argument("--out", metavar="DIR", default="tune-out", help="output folder (default tune-out)")
    p.add_argument("--cache", metavar="DIR", help="results cache folder (default: the output folder)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="run on this Dask distributed scheduler")
    p.add_argument("--workers", type=integer(1, 256), default=2, help="local worker processes (default 2)")
    p.add_argument("--json", action="store_true", help="print the recommendation as one JSON object")
    p.set_defaults(func=run)


def parse(args):
    """Checked (scenarios with their run lengths, spec, knobs, notes); one-line InputError on bad input.

    The numbers are checked by their argparse types (harness.cli.values)."""
    spec = {"max_error_mv": args.max_error_mv, "max_settle_ms": args.max_settle_ms,
            "min_gain_margin": args.min_gain_margin, "max_ideal_ratio": args.max_ideal_ratio}
    knobs = list(KNOBS)
    if args.knobs is not None:
        knobs = [k.strip() for k in args.knobs.split(",") if k.strip()]
        unknown = [k for k in knobs if k not in KNOBS]
        if unknown or not knobs:
            what = f"unknown {', '.join(unknown)}" if unknown else "no knob given"
            raise InputError(f"--knobs: {what}; allowed: {', '.join(KNOBS)}")
    names = [os.path.basename(path) for path in args.scenarios]
    twice = [n for k, n in enumerate(names) if n in names[:k]]
    if twice:
        raise InputError(f"SCENARIO.toml: two files are named {twice[0]}; give each scenario once, "
                         f"under its own file name")
    scenarios = [load_scenario(path) for path in args.scenarios]
    scenarios, notes = run_lengths(scenarios, spec["max_settle_ms"], args.quick, args.duration_s)
    return scenarios, spec, knobs, notes


def _json_value(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def run(args):
    scenarios, spec, knobs, notes = parse(args)
    check_swap_target(args.out, "--out", OUT_FILES)
    if args.cache:
        check_folder_target(args.cache, "--cache")
    cache = Cache(os.path.join(args.cache or args.out, CACHE_FILE))
    if cache.dropped:
        print(f"linedrop tune: {cache.path}: dropped {cache.dropped} line(s) cut short by an interrupted "
              f"run; those runs are done again", file=sys.stderr)
    runner = Runner(cache, scheduler=args.scheduler, workers=args.workers, progress=not args.json)
    try:
        tuner = Tuner(scenarios, runner, spec, knobs, quick=args.quick)
        result = tuner.run()
    finally:
        runner.close()
    rows = [tuner.rows[c] for c in tuner.order]
    paths = write_outputs(args.out, result, rows, knobs, tuner.start, spec)
    lengths = {os.path.basename(sc.source): sc.run.duration_s for sc in scenarios}
    counts = {"configs": len(rows), "rejected": sum(r["status"] == "rejected" for r in rows),
              "new": runner.new, "cached": runner.cached}
    rec = result["recommended"]
    if args.json:
        out = {"recommended": None if rec is None else {k: _json_value(v) for k, v in rec.items()},
               "csv": paths["csv"], "plots": [paths["knobs_png"], paths["pareto_png"]],
               "most_sensitive_knob": result["most_sensitive"],
               "sensitivity": {k: _json_value(v) for k, v in result["sensitivity"].items()},
               "lowest_alone": result["lowest_alone"],
               "one_bit_less": {k: {c: _json_value(v) for c, v in r.items()}
                                for k, r in result["neighbours"].items()},
               "start": {k: _json_value(v) for k, v in result["start"].items()},
               "spec": spec, "duration_s": lengths, "notes": notes, "cost_definition": COST_DEFINITION,
               "configurations": counts["configs"], "rejected": counts["rejected"],
               "evaluated_new": counts["new"], "evaluated_cached": counts["cached"]}
        print(json.dumps(out, indent=1))
    else:
        print(summary(result, knobs, spec, paths, counts, lengths, notes))
    return 0 if rec is not None else 1
