"""``linedrop vectors``: write golden test vectors of a scenario for checking a firmware port."""
import os

from algo.params import derive
from harness.atomic import check_swap_target
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
    p.set_defaults(func=run)


def run(args):
    path = args.scenario or DEMO
    stem = os.path.splitext(os.path.basename(path))[0]
    kept, ours = folder_plan(args.out, set_names(stem, vectors.vector_names()))
    check_swap_target(args.out, "--out", ours)
    scenario = load_scenario(path)
    with open(path, "rb") as f:
        scenario_bytes = f.read()
    cfg, seed, vecs = vectors.generate(scenario, args.duration_s, args.long_s, args.seed)
    params = derive(cfg)
    written = write_set(args.out, stem, os.path.basename(path), scenario_bytes, cfg, params, seed, vecs)
    total = sum(len(v.adc_v) for v in vecs)
    for vec in vecs:
        print(f"{stem}-{vec.name}.csv: {len(vec.adc_v)} samples ({vec.description})")
    others = f"; kept {len(kept)} files of other vector sets" if kept else ""
    print(f"wrote {len(written)} files to {args.out}: {len(vecs)} vectors, {total} samples, "
          f"params fingerprint {params.fingerprint()}{others}")
    return 0
