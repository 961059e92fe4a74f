"""``linedrop spread``: the share of production units that meet a spec, by Monte-Carlo in closed loop.

Draws ``--draws`` plants from the scenario's ``[spread]`` tolerances (harness.spread.draws), runs
each in closed loop with the nominal plant's algorithm settings (the scenario's own table, or
``linedrop design``'s recommendation for the nominal plant: the firmware is built once), and
reports the yield against the limits given on the command line with its Wilson interval,
histograms, a yield plot, every draw's figures (spread.csv) and the worst draws as scenario
files that ``linedrop simulate --backend c`` replays with the same figures. Draws run in batches
on local processes, or on a Dask distributed cluster with ``--scheduler``; a draw's figures do not
depend on where or with which others it ran, so both give the same results for the same seed.
Finished batches go to a results cache in the output folder: an interrupted run resumes.
"""
import json
import math
import os
import sys

from harness.atomic import check_folder_target, check_swap_target
from harness.cli.values import integer, number
from harness.design.settings import with_settings
from harness.errors import InputError
from harness.loop.cautions import cautions_for
from harness.scenario.read import DEMO, load_scenario
from harness.spread import report
from harness.spread.draws import draw
from harness.spread.evaluate import DrawJob, evaluate
from harness.scenario.spread_section import describe
from harness.tune.runner import Cache, Runner

#: Draws run together in one closed-loop batch.
MAX_BATCH = 256
ON_STOP = "the results cache keeps every finished batch of draws: run the same command again to resume"


def add_parser(sub):
    p = sub.add_parser("spread", help="yield over production tolerances (Monte-Carlo in closed loop)",
                       description="Monte-Carlo over the scenario's [spread] tolerances: the share of "
                                   "draws that meet the spec, with its confidence interval, plots and "
                                   "the worst draws as scenario files.")
    p.add_argument("scenario", nargs="?", default=None, metavar="SCENARIO.toml",
                   help="scenario file with a [spread] table (default: the built-in demo)")
    p.add_argument("--draws", type=integer(1, 1_000_000), default=10_000, help="draws, 1 .. 1000000 (default 10000)")
    p.add_argument("--seed", type=integer(0, 2**63 - 1), help="draw seed (default: the scenario's run.seed)")
    p.add_argument("--max-error-mv", type=number(0.0, math.inf, "mV", lo_open=True),
                   help="largest steady load error, mV")
    p.add_argument("--max-overshoot-pct", type=number(0.0, 100.0, "%"),
                   help="largest load voltage above target, % of target")
    p.add_argument("--max-settle-ms", type=number(0.0, math.inf, "ms", lo_open=True),
                   help="longest settling into the 1 %% band after the last load step or fault (of the "
                        "start without one), ms")
    p.add_argument("--min-yield-pct", type=number(0.0, 100.0, "%"),
                   help="exit status 1 when the yield's lower confidence bound is below this")
    p.add_argument("--worst", type=integer(0, 100), default=5, help="worst draws written as scenario files, "
                                                                    "0 .. 100 (default 5)")
    p.add_argument("--algorithm", metavar="ALGO.toml", help="[algorithm] settings from this file "
                                                            "(default: the scenario's, or design's)")
    p.add_argument("--backend", choices=("c", "model"), default="c",
                   help="linedrop's implementation (default c: the compiled loop; bit-exact with model)")
    p.add_argument("--out", metavar="DIR", default="spread-out", help="output folder (default spread-out)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="run on this Dask distributed scheduler")
    p.add_argument("--workers", type=integer(1, 256), default=2, help="local worker processes (default 2)")
    p.add_argument("--json", action="store_true", help="print the result as one JSON object")
    p.set_defaults(func=run)


def spec_of(args):
    """The limits given (dict; None where not given); a one-line InputError without any."""
    spec = {"max_error_mv": args.max_error_mv, "max_overshoot_pct": args.max_overshoot_pct,
            "max_settle_ms": args.max_settle_ms}
    if all(v is None for v in spec.values()):
        raise InputError("spread: give at least one limit: --max-error-mv, --max-overshoot-pct or "
                         "--max-settle-ms")
    return spec


def nominal_of(path, algorithm_path):
    """(the nominal scenario with its settings, the settings line); one-line errors on bad input."""
    scenario = load_scenario(path)
    if scenario.load.profile_csv is not None:
        raise InputError(f"{path}: load.profile_csv: spread draws scale a load's value and steps; a "
                         f"recorded current profile is not drawn (use current_a and steps)")
    return with_settings(scenario, algorithm_path)


def jobs_for(nominal, seed, n, backend):
    """The DrawJobs of draws 0 .. n-1."""
    out = []
    for k in range(n):
        sc, values = draw(nominal, nominal.spread, seed, k)
        out.append(DrawJob(scenario=sc, index=k, values=values, backend=backend))
    return out


def run(args):
    spec = spec_of(args)
    path = args.scenario or DEMO
    nominal, line = nominal_of(path, args.algorithm)
    seed = nominal.run.seed if args.seed is None else args.seed
    check_swap_target(args.out, "--out", report.OUT_FILES | {report.worst_name(n) for n in range(1, 101)})
    check_folder_target(args.out, "--out", report.OUT_FILES | {report.worst_name(n) for n in range(1, 101)})
    cache = Cache(os.path.join(args.out, report.CACHE_FILE))
    if cache.dropped:
        print(f"linedrop spread: {cache.path}: dropped {cache.dropped} line(s) cut short by an interrupted "
              f"run; those draws run again", file=sys.stderr)
    jobs = jobs_for(nominal, seed, args.draws, args.backend)
    runner = Runner(cache, scheduler=args.scheduler, workers=args.workers, progress=not args.json,
                    evaluate=evaluate, desc="spread", max_chunk=MAX_BATCH)
    try:
        rows = runner.run(jobs)
    finally:
        runner.close()
    result = {**report.yield_of(rows, spec), "drivers": report.drivers(rows, spec)}
    worst = [(jobs[r["index"]].scenario, r) for r in report.worst_rows(rows, spec, args.worst)]
    paths = report.write_outputs(args.out, rows, spec, worst, cache.path)
    counts = {"draws": len(rows), "new": runner.new, "cached": runner.cached}
    ok = args.min_yield_pct is None or 100 * result["ci_lo"] >= args.min_yield_pct
    cautions = cautions_for(nominal.load.kind)
    if args.json:
        print(json.dumps({"scenario": path, "seed": seed, "spec": spec, **result, **paths,
                          "varies": nominal.spread.varies(), "settings": line,
                          "draws_new": counts["new"], "draws_cached": counts["cached"],
                          "worst_figures": [{k: r[k] for k in ("index", "error_mv", "overshoot_pct", "settle_ms")}
                                            for _, r in worst],
                          "cautions": cautions}, indent=1))
    else:
        print(report.summary(result, spec, paths, counts, describe(nominal.spread), line))
        print("Cautions: " + " ".join(cautions))
    return 0 if ok else 1
