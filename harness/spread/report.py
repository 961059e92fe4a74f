"""The yield of spread draws against a spec, its confidence interval, plots and the worst draws.

The yield is the share of draws meeting every given limit. Its interval is Wilson's score
interval (E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
JASA 22, 1927) at CONFIDENCE: unlike the normal approximation it stays inside [0, 1] and is
usable at a yield of 100 %, the usual case for a good design.
"""
import csv
import math
import os

from harness.atomic import atomic_folder
from harness.scenario.write import scenario_to_toml

#: Two-sided confidence of the yield's interval, and its normal quantile.
CONFIDENCE = 0.95
Z = 1.959963984540054
#: Spec figures: (row key, command-line limit, label, unit).
SPEC = (("error_mv", "max_error_mv", "load error", "mV"),
        ("overshoot_pct", "max_overshoot_pct", "overshoot above target", "%"),
        ("settle_ms", "max_settle_ms", "settling after the last event", "ms"))
CACHE_FILE = "spread-cache.jsonl"
CSV_FILE, HIST_FILE, YIELD_FILE = "spread.csv", "histograms.png", "yield.png"
#: What the output folder holds.
OUT_FILES = {CACHE_FILE, CSV_FILE, HIST_FILE, YIELD_FILE}


def wilson(k, n, z=Z):
    """Wilson score interval (lo, hi) of a proportion of ``k`` successes in ``n`` trials."""
    if n <= 0:
        return 0.0, 1.0
    p = k / n
    den = 1.0 + z * z / n
    mid = (p + z * z / (2 * n)) / den
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    return max(0.0, mid - half), min(1.0, mid + half)


def failures(row, spec):
    """The spec figures ``row`` fails (list of row keys); a settling that never happened fails."""
    out = []
    for key, limit, _, _ in SPEC:
        lim = spec.get(limit)
        if lim is None:
            continue
        v = row[key]
        if v is None or v > lim:
            out.append(key)
    return out


def severity(row, spec):
    """How far ``row`` is from passing: the largest figure / limit over the given limits."""
    worst = 0.0
    for key, limit, _, _ in SPEC:
        lim = spec.get(limit)
        if lim is not None:
            v = row[key]
            worst = max(worst, math.inf if v is None else v / lim)
    return worst


def yield_of(rows, spec):
    """{"passed", "draws", "yield", "ci_lo", "ci_hi", "fails_by": {figure: count}}."""
    n = len(rows)
    fails = [failures(r, spec) for r in rows]
    k = sum(not f for f in fails)
    lo, hi = wilson(k, n)
    return {"passed": k, "draws": n, "yield": k / n if n else 0.0, "ci_lo": lo, "ci_hi": hi,
            "confidence": CONFIDENCE,
            "fails_by": {key: sum(key in f for f in fails) for key, limit, _, _ in SPEC if spec.get(limit) is not None}}


#: Drawn quantities (spread.csv columns) whose link to failing is reported.
DRAWN = ("temperature_c", "capacitance_factor", "esr_factor", "adc_gain_error", "adc_offset_lsb",
         "bandwidth_factor", "load_factor", "dac_gain_error", "current_gain_error", "current_offset_lsb")


def drivers(rows, spec):
    """Which drawn quantities go with failing: {name: rank correlation with the severity}, for
    the quantities that vary, largest magnitude first (Spearman's rho; a never-settled draw ranks
    worst). Empty when fewer than three draws or no severity varies."""
    import numpy as np
    if len(rows) < 3:
        return {}
    sev = np.array([min(severity(r, spec), 1e300) for r in rows])

    def ranks(x):
        order = np.argsort(x, kind="stable")
        out = np.empty(len(x))
        out[order] = np.arange(len(x))
        return out

    if np.ptp(sev) == 0:
        return {}
    rs = ranks(sev)
    out = {}
    for name in DRAWN:
        x = np.array([r[name] for r in rows], dtype=float)
        if np.ptp(x) > 0:
            out[name] = float(np.corrcoef(ranks(x), rs)[0, 1])
    return dict(sorted(out.items(), key=lambda kv: -abs(kv[1])))


def worst_rows(rows, spec, count):
    """The ``count`` rows farthest from the spec (highest severity, then lowest index)."""
    return sorted(rows, key=lambda r: (-severity(r, spec), r["index"]))[:count]


def _write_csv(path, rows, spec):
    keys = [k for k in rows[0] if k != "key"] + ["passes"]
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(keys)
        for r in sorted(rows, key=lambda r: r["index"]):
            w.writerow(["" if r.get(k) is None else r.get(k) for k in keys[:-1]] + [int(not failures(r, spec))])


def _plots(folder, rows, spec, y):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, axes = plt.subplots(1, len(SPEC), figsize=(4.2 * len(SPEC), 3.4))
    fig2, ax2 = plt.subplots(figsize=(6.4, 4.0))
    for ax, (key, limit, label, unit) in zip(axes, SPEC):
        vals = [r[key] for r in rows if r[key] is not None]
        never = len(rows) - len(vals)
        ax.hist(vals, bins=40, color="tab:blue", alpha=0.8)
        title = f"{label} ({unit})" + (f"; {never} never settled" if never else "")
        ax.set_title(title, fontsize=9)
        ax.set_xlabel(unit)
        ax.set_ylabel("draws")
        lim = spec.get(limit)
        if lim is not None:
            ax.axvline(lim, color="tab:red", ls="--", label=f"spec {lim:g} {unit}")
            ax.legend(fontsize=8)
        if vals:
            xs = sorted(vals)
            share = [(j + 1) / len(rows) for j in range(len(xs))]
            ax2.plot([x / lim for x in xs] if lim else xs, share, label=f"{label}" + (f" / {lim:g} {unit}" if lim else f" ({unit})"))
    ax2.axvline(1.0, color="tab:red", ls="--", label="spec limit")
    ax2.set_xlim(0.0, 3.0)     # the pass/fail edge in view; a long tail runs off to the right
    ax2.set_xlabel("figure / its spec limit (tail beyond 3 cut off)")
    ax2.set_ylabel("share of draws at or below")
    ax2.set_ylim(0, 1.02)
    ax2.set_title(f"Share of {len(rows)} draws within each limit; all limits: {100 * y['yield']:.1f} % "
                  f"({100 * y['ci_lo']:.1f} .. {100 * y['ci_hi']:.1f} %)", fontsize=10)
    ax2.legend(fontsize=8)
    fig.tight_layout()
    fig2.tight_layout()
    fig.savefig(os.path.join(folder, HIST_FILE), dpi=110)
    fig2.savefig(os.path.join(folder, YIELD_FILE), dpi=110)
    plt.close(fig)
    plt.close(fig2)


def worst_name(n):
    """File name of the ``n``-th worst draw (1-based)."""
    return f"worst-{n:02d}.toml"


def write_outputs(out_dir, rows, spec, worst, cache_path=None):
    """CSV, plots and the worst draws' scenario files (``worst``: [(scenario, row)]) into a new
    folder swapped in for ``out_dir`` whole (the results cache carried across); their paths."""
    names = [worst_name(n + 1) for n in range(len(worst))]
    ours = OUT_FILES | set(names) | {worst_name(n) for n in range(1, 101)}
    with atomic_folder(out_dir, ours) as folder:
        if cache_path and os.path.isfile(cache_path):
            import shutil
            shutil.copy2(cache_path, os.path.join(folder, CACHE_FILE))
        _write_csv(os.path.join(folder, CSV_FILE), rows, spec)
        _plots(folder, rows, spec, yield_of(rows, spec))
        for name, (sc, row) in zip(names, worst):
            figs = ", ".join(f"{label} {_fmt(row[key], unit)}" for key, _, label, unit in SPEC)
            comment = (f"Draw {row['index']} of linedrop spread on {os.path.basename(sc.source)}: an invented\n"
                       f"plant variant, not a measured unit. {figs}.\n"
                       f"Replay: linedrop simulate {name} --backend c")
            with open(os.path.join(folder, name), "w", encoding="utf-8") as f:
                f.write(scenario_to_toml(sc, comment))
    return {"csv": os.path.join(out_dir, CSV_FILE), "plots": [os.path.join(out_dir, HIST_FILE),
                                                             os.path.join(out_dir, YIELD_FILE)],
            "worst": [os.path.join(out_dir, n) for n in names]}


def _fmt(v, unit):
    return "never" if v is None else f"{v:.4g} {unit}"


def summary(result, spec, paths, counts, tol_line, nominal_line):
    """The readable report."""
    y = result
    limits = ", ".join(f"{label} <= {spec[limit]:g} {unit}" for _, limit, label, unit in SPEC
                       if spec.get(limit) is not None)
    lines = [f"Spec: {limits}",
             f"Draws vary: {tol_line}",
             nominal_line,
             f"{counts['draws']} draws: {counts['new']} run now, {counts['cached']} from the cache",
             f"Yield: {100 * y['yield']:.2f} % ({y['passed']} of {y['draws']}), "
             f"{100 * y['confidence']:.0f} % interval {100 * y['ci_lo']:.2f} .. {100 * y['ci_hi']:.2f} % (Wilson)"]
    fails = [f"{label} {y['fails_by'][key]}" for key, limit, label, _ in SPEC if key in y["fails_by"]]
    lines.append("Failing draws by figure: " + ", ".join(fails))
    if y.get("drivers"):
        lines.append("Going with failing (rank correlation with how far a draw misses the spec): "
                     + ", ".join(f"{k} {v:+.2f}" for k, v in list(y["drivers"].items())[:4]))
    lines.append(f"Worst draws (replay with linedrop simulate FILE --backend c): "
                 + (", ".join(paths["worst"]) if paths["worst"] else "none written"))
    lines.append(f"Every draw: {paths['csv']}; plots: {', '.join(paths['plots'])}")
    return "\n".join(lines)
