"""``linedrop vectors``: write golden test vectors of a scenario for checking a firmware port."""
import os

from algo.params import derive
from harness.atomic import check_swap_target
from harness.errors import InputError
from harness.cli.values import integer, number
from harness.port import vectors
from harness.scenario.read import DEMO, load_scenario
from harness.port.vector_files import folder_plan, set_names, write_set


def add_parser(sub):
    p = sub.add_parser("vectors", help="write golden test vectors (CSV, provenance, params header)",
                       description="Run a scenario and variants of it (load step, each fault, a long "
                                   "run, extreme ADC codes) through the model and write, per vector, "
                                   "the ADC codes, the command and every state field per sample.")
    p.add_argument("scenario", nargs="?", metavar="SCENARIO.toml",
                   help="scenario file (default: the built-in demo, demo_mast.toml)")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder: filled beside the old one and swapped in whole (other "
                        "vector sets in it are kept)")
    p.add_argument("--duration-s", type=number(0.0, 3600.0, "s", lo_open=True), metavar="S",
                   help="length of each closed-loop run, s (default: the scenario's run.duration_s)")
    p.add_argument("--long-s", type=number(0.0, 3600.0, "s", lo_open=True), metavar="S",
                   help=f"length of the long run, s (default: {vectors.LONG_WINDOWS} windows)")
    p.add_argument("--seed", type=integer(0, 2**63 - 1), metavar="N",
                   help="generator seed for ADC noise and random codes (default: the scenario's run.seed)")
    p.add_argument("--coverage", action="store_true",
                   help="also build the C reference with gcc --coverage, replay the set and record its "
                        "branch coverage in the provenance note (needs gcc and gcov)")
    p.add_argument("--mutants", action="store_true",
                   help="also run every one-token mutant of the C reference over the set and record how "
                        "many it catches (needs gcc; minutes on two cores)")
    p.set_defaults(func=run)


def run(args):
    path = args.scenario or DEMO
    stem = os.path.splitext(os.path.basename(path))[0]
    kept, ours = folder_plan(args.out, set_names(stem, vectors.vector_names()))
    check_swap_target(args.out, "--out", ours)
    if args.coverage or args.mutants:
        from harness.port.c_host import gcc_missing
        if gcc_missing():
            raise InputError(f"--coverage/--mutants: {gcc_missing()}")
    scenario = load_scenario(path)
    with open(path, "rb") as f:
        scenario_bytes = f.read()
    cfg, seed, vecs = vectors.generate(scenario, args.duration_s, args.long_s, args.seed)
    params = derive(cfg)
    figures = c_figures(params, vecs, args.coverage, args.mutants)
    written = write_set(args.out, stem, os.path.basename(path), scenario_bytes, cfg, params, seed, vecs,
                        extra=figures)
    total = sum(len(v.adc_v) for v in vecs)
    for vec in vecs:
        print(f"{stem}-{vec.name}.csv: {len(vec.adc_v)} samples ({vec.description})")
    others = f"; kept {len(kept)} files of other vector sets" if kept else ""
    for line in figure_lines(figures):
        print(line)
    print(f"wrote {len(written)} files to {args.out}: {len(vecs)} vectors, {total} samples, "
          f"params fingerprint {params.fingerprint()}{others}")
    return 0


def c_figures(params, vecs, coverage, mutants):
    """Provenance entries for the C reference's branch coverage and mutation score by ``vecs``."""
    if not (coverage or mutants):
        return {}
    from harness.port import c_coverage, c_mutants
    codes = [(v.adc_v, v.adc_i) for v in vecs]
    out = {}
    if coverage:
        out["c_branch_coverage"] = c_coverage.measure(params, codes).summary()
    if mutants:
        result = c_mutants.run(params, codes)
        out["c_mutants"] = c_mutants.summary(result)
        out["c_mutants"]["survivors"] = [f"{m.file}:{m.line} {m.what}" for m, r in result["results"].items()
                                         if r[0] == "survived"]
    return out


def figure_lines(figures):
    """One line per recorded figure, for the command's output."""
    out = []
    cov = figures.get("c_branch_coverage")
    if cov:
        out.append(f"C branch coverage: {cov['reachable_percent']:.2f} % of reachable branches "
                   f"({cov['taken']} of {cov['branches']} taken, {cov['unreachable']} listed unreachable)")
    mut = figures.get("c_mutants")
    if mut:
        out.append(f"C mutants: {mut['mutants']} in all, {mut['caught']} caught, {mut['equivalent']} "
                   f"equivalent, {mut['size']} out of reach by vector size, {mut['survived']} surviving "
                   f"({mut['stillborn']} did not build)")
    return out
