"""``linedrop bench``: throughput of the C batch, the Python model and the closed loop, side by side."""
import json
import os
import time

import numpy as np

from algo import step as scalar
from algo.batch import BatchModel
from algo.config import AlgoConfig
from algo.params import derive
from harness.cli import bench_bare
from harness.cli.values import integer
from harness.errors import InputError

#: Largest --instances: the closed-loop figure holds every instance's waveforms in memory.
MAX_INSTANCES = 4096
DEFAULT_INSTANCES = 1024
DEFAULT_WINDOWS = 32
#: Options that apply only with --regulation, and their defaults there.
REGULATION_ONLY = {"scenarios": None, "backend": "c", "windows": DEFAULT_WINDOWS, "out": None}


def add_parser(sub):
    p = sub.add_parser("bench", help="measure samples per second of each backend (a benchmark)",
                       description="Measure throughput in one run, side by side. Figures vary "
                                   "with machine load; compare ratios, not absolutes.")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--instances", type=integer(1, MAX_INSTANCES),
                   help=f"batch size, 1 .. {MAX_INSTANCES} (default {DEFAULT_INSTANCES}; not with "
                        f"--regulation or --firmware)")
    p.add_argument("--regulation", action="store_true",
                   help="instead, regulation over scenarios with design's own settings: steady "
                        "improvement, dip and settling after a load step, overshoot and convergence "
                        "of linedrop and every baseline, side by side (a table; --out adds a plot)")
    p.add_argument("--scenarios", nargs="+", metavar="FILE.toml",
                   help="with --regulation: scenario files (default: the shipped scenarios)")
    p.add_argument("--backend", choices=("model", "c"),
                   help="with --regulation or --memory: linedrop's implementation (default: c, bit-exact "
                        "with the model)")
    p.add_argument("--windows", type=integer(2, 1024),
                   help="with --regulation: measurement windows from the start to the load step, 2 .. 1024; "
                        f"the run lasts twice that, or the scenario's own duration if longer (default {DEFAULT_WINDOWS})")
    p.add_argument("--out", metavar="DIR", help="with --regulation: write regulation.json and regulation.png")
    p.add_argument("--firmware", action="store_true",
                   help="instead, the firmware cost on Cortex-M4 and M0+: instructions per "
                        "ld_step (emulated), code, state and stack bytes (needs arm-none-eabi-gcc); "
                        "--json adds the rv32_* keys for RV32IMC (with riscv64-unknown-elf-gcc)")
    p.add_argument("--memory", action="store_true",
                   help="instead, the peak memory (RSS) of simulating the demo for each of --durations, "
                        "streamed in chunks and held whole, side by side (each run in a fresh process)")
    p.add_argument("--durations", nargs="+", type=float, default=[10.0, 100.0], metavar="S",
                   help="with --memory: run lengths in seconds (default 10 100)")
    p.add_argument("--spread", action="store_true",
                   help="instead, the wall time of linedrop spread on the demo's [spread] table "
                        "(every draw simulated, two local workers) beside its target")
    p.add_argument("--draws", type=integer(1, 1_000_000),
                   help="with --spread: draws, 1 .. 1000000 (default 10000)")
    p.set_defaults(func=run)


def _inputs(p, n, t, seed=1):
    """Realistic codes: a mid-scale voltage and current swinging with the perturbation, plus noise."""
    rng = np.random.default_rng(seed)
    ph = 2 * np.pi * np.arange(t) / p.period
    v = 0.7 * p.adc_max + 0.002 * p.adc_max * np.sin(ph) + rng.normal(0, 1, (n, t))
    i = 0.25 * p.adc_max + 0.02 * p.adc_max * np.sin(ph - 0.1) + rng.normal(0, 1, (n, t))
    return (np.clip(v, 0, p.adc_max).astype(np.uint16), np.clip(i, 0, p.adc_max).astype(np.uint16))


def _rate(fn, samples):
    t0 = time.perf_counter()
    fn()
    return samples / (time.perf_counter() - t0)


def _closed_loop_rate(backend, n, samples, plant="auto"):
    """Scenario-samples per second of the whole closed loop (plant, ADC, algorithm, recording)
    on ``n`` copies of the bundled demo scenario, ``samples`` samples long, setup included;
    ``plant`` as harness.loop.closed_loop.simulate's."""
    from dataclasses import replace

    from harness.loop.closed_loop import simulate
    from harness.scenario.read import DEMO, load_scenario
    sc = load_scenario(DEMO)
    # A shorter run, with the cable warming at the scenario's own rate (the ramp ends with the run).
    duration_s = samples / sc.sensing.sample_rate_hz
    cable = sc.cable
    if cable.temperature_end_c is not None:
        end_c = cable.temperature_c + (cable.temperature_end_c - cable.temperature_c) * duration_s / sc.run.duration_s
        cable = replace(cable, temperature_end_c=end_c)
    sc = replace(sc, cable=cable, run=replace(sc.run, duration_s=duration_s))
    return _rate(lambda: simulate([sc] * n, backend, channels=("v_load_v", "i_supply_a", "v_supply_v"),
                                  plant=plant), n * samples)


def measure(n=1024):
    """Return the throughput figures (samples per second) as a dict."""
    from c_ref.binding import CBatch
    p = derive(AlgoConfig())
    out = {}
    v, i = _inputs(p, n, 4096)
    c = CBatch([p] * n)
    out["c_batch_samples_per_s"] = _rate(lambda: c.run(v, i), v.size)
    v1, i1 = v[0].tolist(), i[0].tolist()
    s = scalar.init(p)
    out["model_samples_per_s"] = _rate(lambda: [scalar.step(p, s, a, b) for a, b in zip(v1, i1)],
                                       len(v1))
    bm = BatchModel([p] * n)
    out["model_batch_samples_per_s"] = _rate(lambda: bm.run(v[:, :512], i[:, :512]), n * 512)
    out["closed_loop_batch_samples_per_s"] = _closed_loop_rate("model", n, 16384)
    out["closed_loop_single_samples_per_s"] = _closed_loop_rate("model", 1, 8192)
    out["closed_loop_c_batch_samples_per_s"] = _closed_loop_rate("c", n, 16384)
    # The C backend on the compiled plant (the default) and on the numpy plant, side by side.
    out["closed_loop_c_batch_numpy_plant_samples_per_s"] = _closed_loop_rate("c", n, 16384, "numpy")
    out["closed_loop_c_single_samples_per_s"] = _closed_loop_rate("c", 1, 32000)
    out["closed_loop_c_single_numpy_plant_samples_per_s"] = _closed_loop_rate("c", 1, 32000, "numpy")
    pair, reason = bench_bare.measure(_import_root() or os.getcwd())
    out.update(pair)
    if reason:
        out["ngspice_skipped"] = reason
    return out


def _import_root():
    """The folder that holds the imported harness and c_ref packages (where "python -c" must run)."""
    import c_ref
    import harness
    root = os.path.dirname(os.path.dirname(os.path.abspath(harness.__file__)))
    return root if os.path.dirname(os.path.dirname(os.path.abspath(c_ref.__file__))) == root else None


def memory_probe(duration_s, mode, backend):
    """Print, as one JSON line, the peak RSS (MiB) of simulating the demo for ``duration_s``.

    ``mode`` "streamed" runs it as simulate does a long run (chunks, accumulated metrics, a
    decimated copy for the plots), "whole" as it does a short one (every sample held). Run it
    in a fresh process: the peak is the process's own, from resource.getrusage.
    """
    import resource
    from dataclasses import replace

    from harness.cli.simulate import STREAM_CHUNK, _run_one
    from harness.scenario.read import DEMO, load_scenario
    sc = load_scenario(DEMO)
    sc = replace(sc, run=replace(sc.run, duration_s=duration_s))
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    _run_one(sc, backend, "linedrop", False, STREAM_CHUNK if mode == "streamed" else None)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss    # KiB on Linux
    print(json.dumps({"samples": int(round(duration_s * sc.sensing.sample_rate_hz)),
                      "before_mib": before / 1024, "peak_mib": peak / 1024}))


def _memory(args):
    import subprocess
    import sys

    from harness.errors import InputError
    bad = [d for d in args.durations if not 0 < d <= 3600]
    if bad:
        raise InputError(f"--durations {bad[0]:g}: must be in (0, 3600] s ([run] duration_s's range)")
    rows = []
    for d in args.durations:
        row = {"duration_s": d}
        for mode in ("streamed", "whole"):
            code = f"from harness.cli.bench import memory_probe; memory_probe({d!r}, {mode!r}, {args.backend!r})"
            # Run from the folder the harness package was imported from's parent: "python -c" puts
            # the working directory first on sys.path, and a source tree without the built C
            # reference there would shadow the installed package.
            done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                                  cwd=_import_root())
            fig = json.loads(done.stdout.strip().splitlines()[-1])
            row.update({"samples": fig["samples"], f"{mode}_start_mib": fig["before_mib"],
                        f"{mode}_peak_mib": fig["peak_mib"]})
        rows.append(row)
    if args.json:
        print(json.dumps(rows))
        return 0
    print("peak resident memory of simulating the demo, MiB (each run in its own process; "
          "'start' is the streamed run's, after the imports)")
    print(f"{'duration (s)':>12s} {'samples':>10s} {'start':>8s} {'streamed':>9s} {'held whole':>11s}")
    for r in rows:
        print(f"{r['duration_s']:12g} {r['samples']:10d} {r['streamed_start_mib']:8.1f} "
              f"{r['streamed_peak_mib']:9.1f} {r['whole_peak_mib']:11.1f}")
    return 0


def _regulation(args):
    import sys
    from pathlib import Path

    from harness.atomic import check_swap_target
    from harness.design import regulation, regulation_report
    from harness.scenario.read import DEMO, load_scenario
    if args.out:
        check_swap_target(args.out, "--out", regulation_report.FILES)
    paths = args.scenarios or sorted(str(p) for p in Path(DEMO).parent.glob("*.toml"))
    scenarios = {Path(p).stem: load_scenario(p) for p in paths}
    if len(scenarios) < len(paths):
        raise InputError("--scenarios: two files share a name; give each scenario its own file name")
    results = regulation.regulation(scenarios, backend=args.backend, windows=args.windows,
                                    progress=lambda n, c: print(f"  {n}: {c}", file=sys.stderr))
    written = regulation_report.write(args.out, results) if args.out else []
    if args.json:
        print(json.dumps(regulation_report.as_json(results)))
    else:
        print(regulation_report.table(results))
        for path in written:
            print(f"wrote {path}")
    return 0


def _check_options(args):
    """One-line InputError for options that do not go together; fills in the defaults."""
    if args.spread and (args.regulation or args.firmware or args.memory):
        raise InputError("--spread is a benchmark of its own; give one of --regulation, --firmware, "
                         "--memory, --spread")
    if args.draws is not None and not args.spread:
        raise InputError("--draws applies only with --spread")
    if args.regulation and args.firmware:
        raise InputError("--regulation and --firmware are two different benchmarks; give one of them")
    if args.memory and (args.regulation or args.firmware):
        raise InputError("--memory is a benchmark of its own; give one of --regulation, --firmware, --memory")
    if not args.regulation:
        given = [name for name in REGULATION_ONLY if getattr(args, name) is not None
                 and not (name == "backend" and args.memory)]
        if given:
            raise InputError(f"--{given[0]} applies only with --regulation"
                             + (" or --memory" if given[0] == "backend" else ""))
    if args.instances is not None and (args.regulation or args.firmware or args.memory or args.spread):
        mode = ("--regulation" if args.regulation else "--firmware" if args.firmware
                else "--memory" if args.memory else "--spread")
        raise InputError(f"--instances applies only to the throughput benchmark, not with {mode}")
    for name, default in REGULATION_ONLY.items():
        if getattr(args, name) is None:
            setattr(args, name, default)
    if args.instances is None:
        args.instances = DEFAULT_INSTANCES


def run(args):
    _check_options(args)
    if args.regulation:
        return _regulation(args)
    if args.memory:
        return _memory(args)
    if args.spread:
        from harness.cli import bench_spread
        fig = bench_spread.measure(args.draws or bench_spread.TARGET_DRAWS, progress=not args.json)
        if args.json:
            print(json.dumps(fig))
        else:
            for key, value in fig.items():
                print(f"{key:48s} {value:14.3f}" if isinstance(value, float) else f"{key:48s} {value}")
        return 0
    if args.firmware:
        from c_ref.cortexm.build import toolchain_missing
        reason = toolchain_missing()
        if reason:
            raise InputError(f"--firmware: {reason}")
        from harness.port import firmware_cost
        return firmware_cost.main(["--json"] if args.json else [])
    figures = measure(args.instances)
    if args.json:
        print(json.dumps(figures))
    else:
        for key, value in figures.items():
            if isinstance(value, str) or value is None:
                print(f"{key:48s} {value or 'n/a'}")
            elif key.endswith("_wall_s"):
                print(f"{key:48s} {value:14.3f}")
            else:
                print(f"{key:48s} {value:14,.0f}")
    return 0
