"""Outputs of ``linedrop tune``: the CSV of every evaluated configuration, plots and the summary text."""
import csv
import math
import os

from harness.atomic import atomic_write
from harness.tune.evaluate import KNOBS

COLUMNS = ["config", "phase", *KNOBS, "cost", "status", "reason", "meets_spec", "fails", "severity",
           "error_mv", "ideal_error_mv", "error_ratio", "settle_ms", "ideal_settle_ms", "converge_ms",
           "ideal_converge_ms", "est_error_ohm", "ripple_mv", "ideal_ripple_mv", "limit_cycle",
           "ideal_limit_cycle", "toggle_share", "acc_peak", "acc_bound", "acc_headroom_bits",
           "within_bounds", "gain_margin"]


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
    """CSV and plots into ``out_dir``; returns their paths."""
    os.makedirs(out_dir, exist_ok=True)
    paths = {"csv": os.path.join(out_dir, "tune.csv"),
             "knobs_png": os.path.join(out_dir, "error_vs_bits.png"),
             "pareto_png": os.path.join(out_dir, "pareto.png")}
    write_csv(paths["csv"], rows)
    plot_knobs(paths["knobs_png"], start, rows, knobs, spec)
    plot_pareto(paths["pareto_png"], rows, result["recommended"], spec)
    return paths


def _fmt(v, unit=""):
    return "n/a" if v is None else f"{v:.4g}{unit}"


def summary(result, knobs, spec, paths, counts):
    """The readable report."""
    rec, st = result["recommended"], result["start"]
    lines = [f"Spec: load error <= {spec['max_error_mv']:g} mV, settling <= {spec['max_settle_ms']:g} ms, "
             f"loop gain margin >= {spec['min_gain_margin']:g}"
             + (f", error <= {spec['max_ideal_ratio']:g} x the float ideal's" if spec.get("max_ideal_ratio") else ""),
             f"Evaluated {counts['configs']} configurations ({counts['rejected']} rejected by range "
             f"analysis); {counts['new']} new runs, {counts['cached']} from the cache"]
    if rec is None:
        why = st["reason"] or f"error {_fmt(st.get('error_mv'), ' mV')}, settling {_fmt(st.get('settle_ms'), ' ms')}"
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
        lines.append(f"  accumulator peak {rec['acc_peak']} of static bound {rec['acc_bound']} "
                     f"({rec['acc_headroom_bits']} bits spare in acc_bits={rec['acc_bits']}); limit cycle: "
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
