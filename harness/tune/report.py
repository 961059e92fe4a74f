"""Outputs of ``linedrop tune``: the CSV of every evaluated configuration, plots and the summary text."""
import csv
import math
import os
import shutil

from harness.atomic import atomic_folder, atomic_write
from harness.tune.evaluate import KNOBS

COLUMNS = ["config", "phase", *KNOBS, "cost", "status", "reason", "meets_spec", "fails", "severity",
           "error_mv", "ideal_error_mv", "error_ratio", "settle_ms", "ideal_settle_ms", "converge_ms",
           "ideal_converge_ms", "est_error_ohm", "ripple_mv", "ideal_ripple_mv", "limit_cycle",
           "ideal_limit_cycle", "toggle_share", "acc_peak", "acc_bound", "acc_headroom_bits",
           "within_bounds", "gain_margin"]
#: The results cache (harness.tune.runner.Cache); by default it lives in the output folder.
CACHE_FILE = "tune-cache.jsonl"
#: What the output folder holds: the outputs, and the cache carried across when the folder is swapped.
OUT_FILES = ("tune.csv", "error_vs_bits.png", "pareto.png", CACHE_FILE)


def _cell(v):
    if v is None:
        return ""
    if isinstance(v, float):
        return "inf" if math.isinf(v) else f"{v:.6g}"
    return v


def write_csv(path, rows):
    """Every row (dicts with COLUMNS keys), written atomically."""
    with atomic_write(path, newline="") as f:
        w = csv.writer(f)
        w.writerow(COLUMNS)
        for row in rows:
            w.writerow([_cell(row.get(c)) for c in COLUMNS])


def pareto(rows):
    """Simulated rows not dominated in (cost, error_mv), by increasing cost."""
    ok = sorted((r for r in rows if r["status"] == "ok"), key=lambda r: (r["cost"], r["error_mv"]))
    front, best = [], math.inf
    for r in ok:
        if r["error_mv"] < best:
            front.append(r)
            best = r["error_mv"]
    return front


def _save(fig, path):
    with atomic_write(path, "wb") as f:
        fig.savefig(f, format="png", dpi=110)


def plot_knobs(path, start, rows, knobs, spec):
    """Error vs bits per knob (the one-knob sweep), with the ideal and the spec."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    n = len(knobs)
    cols = min(4, n)
    fig, axes = plt.subplots((n + cols - 1) // cols, cols, figsize=(3.6 * cols, 3.0 * ((n + cols - 1) // cols)),
                             squeeze=False)
    for ax, k in zip(axes.flat, knobs):
        pts = [r for r in rows if r["phase"] == "sweep" and all(r[j] == start[j] for j in knobs if j != k)]
        ok = sorted((r[k], r["error_mv"], r["ideal_error_mv"]) for r in pts if r["status"] == "ok")
        if ok:
            ax.semilogy([p[0] for p in ok], [p[1] for p in ok], "o-", label="fixed point")
            ax.semilogy([p[0] for p in ok], [p[2] for p in ok], "--", color="grey", label="float ideal")
        rej = [r[k] for r in pts if r["status"] != "ok"]
        for x in rej:
            ax.axvline(x, color="red", alpha=0.3)
        ax.axhline(spec["max_error_mv"], color="k", lw=0.8, ls=":", label="spec")
        ax.set_xlabel(f"{k}" + (" (red: rejected)" if rej else ""))
        ax.set_ylabel("load error, mV")
    for ax in list(axes.flat)[n:]:
        ax.axis("off")
    axes.flat[0].legend(fontsize=7)
    fig.suptitle("Closed-loop load error vs word length (one knob at a time)")
    fig.tight_layout()
    _save(fig, path)
    plt.close(fig)


def plot_pareto(path, rows, rec, spec):
    """Cost vs error of every simulated configuration, the Pareto front and the recommendation."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    ok = [r for r in rows if r["status"] == "ok"]
    fig, ax = plt.subplots(figsize=(6.4, 4.4))
    ax.semilogy([r["cost"] for r in ok], [r["error_mv"] for r in ok], ".", color="grey", label="evaluated")
    front = pareto(rows)
    ax.semilogy([r["cost"] for r in front], [r["error_mv"] for r in front], "o-", label="Pareto front")
    if rec is not None:
        ax.semilogy([rec["cost"]], [rec["error_mv"]], "*", ms=14, color="C3", label="recommended")
    ax.axhline(spec["max_error_mv"], color="k", lw=0.8, ls=":", label="spec")
    ax.set_xlabel("cost (weighted sum of word lengths, bits)")
    ax.set_ylabel("load error, mV")
    ax.legend(fontsize=8)
    fig.tight_layout()
    _save(fig, path)
    plt.close(fig)


def write_outputs(out_dir, result, rows, knobs, start, spec):
    """CSV and plots into a new folder swapped in for ``out_dir`` whole; returns their paths.

    The results cache, if ``out_dir`` holds one, is carried across (it is complete by now).
    """
    names = {"csv": "tune.csv", "knobs_png": "error_vs_bits.png", "pareto_png": "pareto.png"}
    with atomic_folder(out_dir, OUT_FILES) as folder:
        cache = os.path.join(out_dir, CACHE_FILE)
        if os.path.isfile(cache):
            shutil.copy2(cache, os.path.join(folder, CACHE_FILE))
        write_csv(os.path.join(folder, names["csv"]), rows)
        plot_knobs(os.path.join(folder, names["knobs_png"]), start, rows, knobs, spec)
        plot_pareto(os.path.join(folder, names["pareto_png"]), rows, result["recommended"], spec)
    return {k: os.path.join(out_dir, n) for k, n in names.items()}


def _fmt(v, unit=""):
    return "n/a" if v is None else f"{v:.4g}{unit}"


def summary(result, knobs, spec, paths, counts, lengths, notes=()):
    """The readable report; ``lengths`` maps each scenario file to its run length (s), ``notes``
    are lines about runs shorter than their checks need (harness.tune.run_length)."""
    rec, st = result["recommended"], result["start"]
    lines = [f"Spec: load error <= {spec['max_error_mv']:g} mV, settling <= {spec['max_settle_ms']:g} ms, "
             f"loop gain margin >= {spec['min_gain_margin']:g}"
             + (f", error <= {spec['max_ideal_ratio']:g} x the float ideal's" if spec.get("max_ideal_ratio") else ""),
             f"Evaluated {counts['configs']} configurations ({counts['rejected']} rejected by range "
             f"analysis); {counts['new']} new runs, {counts['cached']} from the cache",
             "Runs: " + ", ".join(f"{name} {s:g} s" for name, s in lengths.items())]
    lines += [f"Note: {n}" for n in notes]
    if rec is None:
        why = st["reason"] or (f"fails {st['fails']}: error {_fmt(st.get('error_mv'), ' mV')}, settling "
                               f"{_fmt(st.get('settle_ms'), ' ms')}, gain margin {_fmt(st.get('gain_margin'))}")
        lines.append(f"No configuration meets the spec: even the generous start fails ({why}).")
    else:
        if not st["meets_spec"]:
            why = st["reason"] or st["fails"]
            lines.append(f"The generous start fails ({why}); the search went on from the cheapest "
                         f"sweep variant that meets the spec.")
        lines.append("Recommended (cost " + f"{rec['cost']}): " + ", ".join(f"{k}={rec[k]}" for k in knobs))
        lines.append(f"  load error {_fmt(rec['error_mv'], ' mV')} (float ideal {_fmt(rec['ideal_error_mv'], ' mV')}, "
                     f"x{rec['error_ratio']:.2f}), settling {_fmt(rec['settle_ms'], ' ms')}, ripple "
                     f"{_fmt(rec['ripple_mv'], ' mV')} p-p, estimate off the ideal by {_fmt(rec['est_error_ohm'], ' ohm')}")
        width = f" in acc_bits={rec['acc_bits']}" if "acc_bits" in rec else ""   # not tuned: the scenario's
        lines.append(f"  accumulator peak {rec['acc_peak']} of static bound {rec['acc_bound']} "
                     f"({rec['acc_headroom_bits']} bits spare{width}); limit cycle: "
                     f"{'yes' if rec['limit_cycle'] else 'no'}; gain margin {_fmt(rec['gain_margin'])}")
        lines.append(f"  cost of the generous start: {st['cost']} (error {_fmt(st['error_mv'], ' mV')})")
        for k, r in result["neighbours"].items():
            what = (r["reason"] if r["status"] != "ok" else
                    f"error {_fmt(r['error_mv'], ' mV')} (ideal {_fmt(r['ideal_error_mv'], ' mV')}), settling "
                    f"{_fmt(r['settle_ms'], ' ms')}; fails: {r['fails'] or 'nothing'}")
            mark = "  <- most sensitive" if k == result["most_sensitive"] else ""
            lines.append(f"  one bit less on {k} ({r[k]}): {what}{mark}")
    lines += [f"CSV: {paths['csv']}", f"Plots: {paths['knobs_png']}, {paths['pareto_png']}"]
    return "\n".join(lines)
