"""The regulation benchmark's table (text, JSON) and plot, written atomically."""
import json
import math
import os

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from harness.atomic import atomic_folder, atomic_write  # noqa: E402
from harness.design.regulation import FIGURES  # noqa: E402

HEAD = {"improvement": "improvement", "dip_v": "dip V", "settle_ms": "settle ms",
        "overshoot_v": "overshoot V", "converge_ms": "converge ms", "converge_windows": "windows"}


def _cell(key, value):
    if value is None:
        return "never"
    if key == "improvement":
        return "inf" if math.isinf(value) else f"{value:,.1f}x"
    return f"{value:.3f}" if key.endswith("_v") else f"{value:.1f}"


def table(results):
    """Plain-text table, one row per scenario and compensation."""
    cols = [k for k, _ in FIGURES]
    rows = [["scenario", "compensation"] + [HEAD[k] for k in cols]]
    for name, per in results.items():
        for comp, fig in per.items():
            rows.append([name, comp] + [_cell(k, fig[k]) for k in cols])
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    return "\n".join("  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths)))
                     for r in rows)


def as_json(results):
    """``results`` with infinite figures (no steady error at all) as None: valid JSON."""
    return {n: {c: {k: None if isinstance(v, float) and math.isinf(v) else v for k, v in fig.items()}
                for c, fig in per.items()} for n, per in results.items()}


#: The files :func:`write` puts in its folder.
FILES = ("regulation.json", "regulation.png")


def write(out_dir, results):
    """Write ``regulation.json`` and ``regulation.png`` into ``out_dir`` (swapped in whole)."""
    with atomic_folder(out_dir, FILES) as folder:
        _write_files(folder, results)
    return [os.path.join(out_dir, name) for name in FILES]


def _write_files(out_dir, results):
    js = os.path.join(out_dir, "regulation.json")
    with atomic_write(js) as f:
        json.dump(as_json(results), f, indent=2)
    plot(results, os.path.join(out_dir, "regulation.png"))


def plot(results, path):
    """Grouped bars: one panel per figure, one group per scenario, one bar per compensation."""
    names = list(results)
    comps = list(next(iter(results.values())))
    panels = [("improvement", "steady improvement (x, log)"), ("dip_v", "dip after the load step (V)"),
              ("settle_ms", "time to stay within 1 % (ms)"), ("overshoot_v", "overshoot above target (V)")]
    fig, axes = plt.subplots(len(panels), 1, figsize=(10, 12))
    width = 0.8 / len(comps)
    for ax, (key, label) in zip(axes, panels):
        for j, comp in enumerate(comps):
            vals = [results[n][comp][key] for n in names]
            shown = [0.0 if v is None or (isinstance(v, float) and math.isinf(v)) else v for v in vals]
            xs = [i + (j - (len(comps) - 1) / 2) * width for i in range(len(names))]
            ax.bar(xs, shown, width, label=comp)
            for x, v in zip(xs, vals):
                if v is None or (isinstance(v, float) and math.isinf(v)):
                    ax.text(x, 0.02, "never" if v is None else "inf", transform=ax.get_xaxis_transform(),
                            rotation=90, ha="center", va="bottom", fontsize=7)
        ax.set_ylabel(label, fontsize=9)
        ax.set_xticks(range(len(names)), names, fontsize=8)
        if key == "improvement":
            ax.set_yscale("log")
        ax.grid(True, axis="y", alpha=0.3)
    axes[0].legend(ncol=len(comps), fontsize=8)
    fig.suptitle("Regulation with design's own settings, per scenario and compensation")
    fig.tight_layout()
    with atomic_write(path, "wb") as f:
        fig.savefig(f, format="png", dpi=100)
    plt.close(fig)
