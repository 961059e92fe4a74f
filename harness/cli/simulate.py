"""``linedrop simulate``: run a scenario in closed loop, print metrics, write a report and waveforms."""
import contextlib
import csv
import json
import os

from harness.atomic import atomic_folder, atomic_write, check_file_target, check_swap_target
from harness.cli.version import tool_version
from harness.design.settings import given_table, with_settings
from harness.loop.backends import BACKENDS
from harness.loop.cautions import cautions_for, voltage_cautions
from harness.loop.closed_loop import CHANNELS, COMPENSATIONS, sample_times, simulate, stream
from harness.loop.decimate import Decimated
from harness.loop.metrics import Accumulator, metrics
from harness.loop.report_text import fault_sentence
from harness.scenario.read import DEMO, load_scenario

#: Runs with more scenario-samples than this show a progress bar.
PROGRESS_SAMPLES = 50_000
#: Runs of more samples than this stream: simulated STREAM_CHUNK samples at a time, the metrics
#: accumulated, the waveform rows written and the plots given a decimated copy chunk by chunk,
#: so memory does not grow with the run's length.
STREAM_SAMPLES = 262_144
#: Samples per chunk of a streamed run (about 10 MB of channels).
STREAM_CHUNK = 262_144
#: The waveform CSV's header.
WAVEFORM_HEADER = ["t_s"] + list(CHANNELS)
#: Warn when the steady load error exceeds this share of target.
WARN_ERROR_SHARE = 0.05
#: Warn when more than this share of the run's windows gave no valid estimate.
WARN_REJECTED_SHARE = 0.5


def add_parser(sub):
    p = sub.add_parser("simulate", help="run a scenario in closed loop (default: the built-in demo)",
                       description="Simulate supply, cable, load capacitor, load, sensing and faults "
                                   "in closed loop with the algorithm or a baseline.")
    p.add_argument("scenario", nargs="?", default=None,
                   help="scenario TOML file (default: the built-in demo, an invented sensor mast)")
    p.add_argument("--backend", choices=BACKENDS, default="model",
                   help="algorithm implementation (default: model)")
    p.add_argument("--compensation", choices=COMPENSATIONS, default="linedrop",
                   help="linedrop's algorithm or a baseline (default: linedrop)")
    p.add_argument("--out", metavar="DIR", help="write a report folder (plots, metrics, baselines)")
    p.add_argument("--waveform", metavar="FILE.csv", help="write every sample's true plant values")
    p.add_argument("--algorithm", metavar="ALGO.toml",
                   help="[algorithm] settings from this file (as design --algorithm-out writes it); "
                        "default: the scenario's own table, or design's recommendation without one")
    p.add_argument("--json", action="store_true", help="print the metrics as one JSON object")
    p.set_defaults(func=run)


def _waveform_rows(writer, t_s, channels):
    cols = [channels[c][:, 0] for c in CHANNELS]
    for k, t in enumerate(t_s):
        writer.writerow([f"{t:.7f}"] + [f"{c[k]:.6g}" for c in cols])


def _write_waveform(path, run):
    with atomic_write(path, newline="") as f:
        w = csv.writer(f)
        w.writerow(WAVEFORM_HEADER)
        _waveform_rows(w, run.t_s, run.channels)


def run_streamed(sc, backend, compensation, progress=False, chunk=STREAM_CHUNK, waveform=None):
    """Run one scenario in chunks of ``chunk`` samples, holding none of them past its chunk.

    Returns (a Run with a decimated copy of the plotted channels and the whole run's shading,
    the metrics, equal to those of the whole run held in memory). ``waveform``, a csv.writer,
    gets every sample's row as it comes.
    """
    fs = sc.sensing.sample_rate_hz
    n_t = int(round(sc.run.duration_s * fs))
    acc = Accumulator(sc, float(sample_times(n_t - 1, 1, fs)[0]))
    dec = Decimated(sc, n_t, fs)

    def sink(k0, t_s, channels):
        acc.add(t_s, channels)
        dec(k0, t_s, channels)
        if waveform is not None:
            _waveform_rows(waveform, t_s, channels)

    header = stream([sc], sink, backend, compensation, progress=progress, chunk_samples=chunk)
    return dec.run(header), acc.result(header.r_cable_ohm[0])


def _run_one(sc, backend, compensation, progress, chunk, waveform=None):
    """(Run, metrics) of one compensation: held whole (``chunk`` None) or streamed."""
    if chunk is None:
        run = simulate([sc], backend, compensation, progress=progress)
        return run, metrics(run)
    return run_streamed(sc, backend, compensation, progress, chunk, waveform)


def _warnings(sc, m):
    """Plain-words warnings about the run itself (the safety cautions come separately)."""
    out = []
    err, target = m["load_error_v"], sc.supply.target_v
    if abs(err) > WARN_ERROR_SHARE * target:
        out.append(f"warning: the load ends {abs(err):.3g} V {'below' if err > 0 else 'above'} target "
                   f"({100 * abs(err) / target:.1f} % of {target:g} V): the compensation is not doing its job here")
    counts = m["window_outcomes"]
    total = sum(counts.values()) if counts else 0
    rejected = total - counts.get("valid", 0) if counts else 0
    if total and rejected > WARN_REJECTED_SHARE * total:
        parts = ", ".join(f"{n} {c}" for n, c in counts.items() if c and n != "valid")
        out.append(f"warning: {rejected} of {total} windows gave no valid estimate ({parts})")
    return out


def _print_summary(name, m, warn):
    print(f"scenario: {name}")
    for key in ("r_cable_ohm", "r_estimate_ohm", "uncompensated_drop_v", "load_error_v",
                "improvement", "max_load_v", "min_load_v", "ripple_load_v_pp", "settling_s"):
        v = m[key]
        print(f"  {key:22s} {'n/a' if v is None else format(v, '.4g')}")
    print(f"  {'converged':22s} {m['converged']}")
    if m["window_outcomes"]:
        print(f"  {'window_outcomes':22s} " + ", ".join(f"{n} {c}" for n, c in m["window_outcomes"].items()))
    for f in m["faults"]:
        print(f"  fault {fault_sentence(f)}")
    for line in warn:
        print(line)


def _table_source(as_written, algorithm_path):
    """Where the [algorithm] table a run uses came from, in words (as with_settings decides it)."""
    if algorithm_path:
        return f"--algorithm {algorithm_path}"
    if as_written.algorithm:
        return "the scenario's [algorithm] table"
    return "linedrop design's recommendation"


def run(args):
    path = args.scenario or DEMO
    if args.out:
        from harness.loop.report import REPORT_FILES
        check_swap_target(args.out, "--out", REPORT_FILES)
    if args.waveform:
        check_file_target(args.waveform, "--waveform", {"the scenario": path, "--algorithm": args.algorithm})
    as_written = load_scenario(path)
    sc, settings = with_settings(as_written, args.algorithm)
    samples = sc.run.duration_s * sc.sensing.sample_rate_hz
    progress = samples > PROGRESS_SAMPLES and not args.json
    chunk = STREAM_CHUNK if samples > STREAM_SAMPLES else None
    with contextlib.ExitStack() as outputs:
        waveform = None
        if args.waveform and chunk:     # rows go to the temporary file as they come
            waveform = csv.writer(outputs.enter_context(atomic_write(args.waveform, newline="")))
            waveform.writerow(WAVEFORM_HEADER)
        main, m = _run_one(sc, args.backend, args.compensation, progress, chunk, waveform)
        runs, all_m = {args.compensation: main}, {args.compensation: m}
        if args.out:
            for comp in COMPENSATIONS:
                if comp != args.compensation:
                    runs[comp], all_m[comp] = _run_one(sc, args.backend, comp, progress, chunk)
            from harness.loop.report import REPORT_FILES, write_report
            what_ran = {"version": tool_version(), "as_written": as_written, "line": settings,
                        "table_source": _table_source(as_written, args.algorithm),
                        "given": set(given_table(as_written, args.algorithm))}
            with atomic_folder(args.out, REPORT_FILES) as folder:
                write_report(folder, runs, all_m, settings=what_ran)
        if args.waveform and not chunk:
            _write_waveform(args.waveform, main)
    warnings = _warnings(sc, m)
    warn = voltage_cautions(m["max_load_v"], m["max_supply_v"])
    if args.json:
        out = dict(m, scenario=path, backend=args.backend, compensation=args.compensation,
                   settings=settings, warnings=warnings, cautions=warn + cautions_for(sc.load.kind))
        if len(all_m) > 1:
            out["baselines"] = {k: v for k, v in all_m.items() if k != args.compensation}
        print(json.dumps(out, indent=2))
    else:
        print(settings)
        _print_summary(os.path.basename(path), m, warnings + warn)
        if args.out:
            print(f"report: {os.path.join(args.out, 'report.md')}")
        print("Cautions: " + " ".join(cautions_for(sc.load.kind)))
    return 0
