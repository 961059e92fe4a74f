"""``linedrop replay``: run recorded ADC codes through a backend and write the commands."""
import csv

from algo.state import STATE_FIELDS, STATUS_NAMES
from harness.loop.adc_csv import read_adc_csv
from harness.scenario.algo_toml import load_algo_config
from harness.atomic import atomic_write, check_file_target
from harness.loop.backends import BACKENDS
from harness.loop.replay import replay


def add_parser(sub):
    p = sub.add_parser("replay", help="replay an ADC-code CSV (adc_v,adc_i) through the algorithm",
                       description="Replay recorded ADC codes and write the command code per sample.")
    p.add_argument("--backend", choices=BACKENDS, default="model",
                   help="fixed-point Python model, C reference, or float ideal (default: model)")
    p.add_argument("--in", dest="inp", required=True, metavar="ADC.csv",
                   help="input CSV with header adc_v,adc_i (integer codes)")
    p.add_argument("--out", required=True, metavar="CMD.csv", help="output CSV (written atomically)")
    p.add_argument("--config", metavar="ALGO.toml", help="TOML file with an [algorithm] table")
    p.add_argument("--state", action="store_true",
                   help="also write every state field per sample, and the last window's outcome by name")
    p.set_defaults(func=run)


def run(args):
    check_file_target(args.out, "--out", {"--in": args.inp, "--config": args.config})
    cfg = load_algo_config(args.config)
    adc_v, adc_i = read_adc_csv(args.inp, cfg.adc_bits)
    cmds, trace = replay(args.backend, cfg, adc_v, adc_i, with_state=args.state)
    fmt = (lambda x: f"{x:.6f}") if args.backend == "ideal" else (lambda x: str(int(x)))
    with atomic_write(args.out, newline="") as f:
        w = csv.writer(f)
        w.writerow(["cmd"] + (STATE_FIELDS + ["outcome"] if trace else []))
        for t, c in enumerate(cmds):
            row = [fmt(c)]
            if trace:
                row += [fmt(trace[name][t]) for name in STATE_FIELDS]
                row.append(STATUS_NAMES[int(trace["status"][t])])
            w.writerow(row)
    return 0
