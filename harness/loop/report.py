"""Report folder of a simulation: PNG plots, a metrics table and the cautions."""
import json
import os

import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from harness.atomic import atomic_write  # noqa: E402
from harness.loop.cautions import CAUTIONS, voltage_cautions  # noqa: E402

PANELS = (("v_load_v", "load voltage (V)"), ("v_supply_v", "supply voltage (V)"),
          ("i_supply_a", "supply current (A)"), ("r_estimate_ohm", "resistance estimate (ohm)"),
          ("correction_v", "correction (V)"))
ROWS = (("load_error_v", "load error (V)", "{:+.4f}"), ("improvement", "improvement (x)", "{:.1f}"),
        ("ripple_load_v_pp", "load ripple (V pp)", "{:.4f}"), ("max_load_v", "max load (V)", "{:.3f}"),
        ("min_load_v", "min load (V)", "{:.3f}"), ("settling_s", "settling (s)", "{:.3f}"),
        ("r_estimate_ohm", "final estimate (ohm)", "{:.4f}"))


def _shade_faults(ax, scenario):
    for f in scenario.faults:
        ax.axvspan(f.at_s, min(f.until_s, scenario.run.duration_s), color="tab:red", alpha=0.12,
                   label=f"fault: {f.kind}")


def _save(fig, path):
    with atomic_write(path, "wb") as f:
        fig.savefig(f, format="png", dpi=110)
    plt.close(fig)


def plot_run(run, path, b=0):
    """Five stacked panels of one scenario over time, faults shaded."""
    sc = run.scenarios[b]
    fig, axes = plt.subplots(len(PANELS), 1, figsize=(10, 11), sharex=True)
    for ax, (name, label) in zip(axes, PANELS):
        ax.plot(run.t_s, run.channels[name][:, b], lw=0.8)
        ax.set_ylabel(label)
        ax.grid(alpha=0.3)
        _shade_faults(ax, sc)
    axes[0].axhline(sc.supply.target_v, color="k", ls="--", lw=0.8, label="target")
    axes[3].axhline(run.r_cable_ohm[b] + sc.load_end.esr_ohm, color="k", ls="--", lw=0.8,
                    label="cable + ESR (end of run)")
    for ax in (axes[0], axes[3]):
        handles, labels = ax.get_legend_handles_labels()
        uniq = dict(zip(labels, handles))
        ax.legend(uniq.values(), uniq.keys(), loc="lower right", fontsize=8)
    axes[-1].set_xlabel("time (s)")
    fig.suptitle(f"{os.path.basename(sc.source)}: {run.compensation} ({run.backend})")
    fig.tight_layout()
    _save(fig, path)


def plot_comparison(runs, path, b=0):
    """Load voltage of every compensation on the same scenario, overlaid; below, a +-3 % zoom."""
    sc = next(iter(runs.values())).scenarios[b]
    target = sc.supply.target_v
    fig, axes = plt.subplots(2, 1, figsize=(10, 8), sharex=True)
    for ax in axes:
        for name, run in runs.items():
            ax.plot(run.t_s, run.channels["v_load_v"][:, b], lw=0.9, label=name)
        ax.axhline(target, color="k", ls="--", lw=0.8, label="target")
        _shade_faults(ax, sc)
        ax.set_ylabel("load voltage (V)")
        ax.grid(alpha=0.3)
    axes[1].set_ylim(0.97 * target, 1.03 * target)
    axes[1].set_title("zoom: target +-3 %", fontsize=9)
    axes[1].set_xlabel("time (s)")
    handles, labels = axes[0].get_legend_handles_labels()
    uniq = dict(zip(labels, handles))
    axes[0].legend(uniq.values(), uniq.keys(), fontsize=8)
    axes[0].set_title("load voltage: linedrop against the baselines")
    fig.tight_layout()
    _save(fig, path)


def metrics_table(all_metrics):
    """Markdown table: one column per compensation, one row per figure."""
    names = list(all_metrics)
    lines = ["| figure | " + " | ".join(names) + " |", "|---" * (len(names) + 1) + "|"]
    for key, label, fmt in ROWS:
        cells = []
        for n in names:
            v = all_metrics[n][key]
            cells.append("n/a" if v is None else fmt.format(v))
        lines.append(f"| {label} | " + " | ".join(cells) + " |")
    return "\n".join(lines) + "\n"


#: Every file write_report puts in its folder.
REPORT_FILES = ("waveforms.png", "comparison.png", "report.md", "metrics.json")


def write_report(out_dir, runs, all_metrics, b=0):
    """Write plots, metrics.md, metrics.json into ``out_dir`` (created if needed).

    ``runs`` and ``all_metrics`` are dicts keyed by compensation name; the first is linedrop's.
    """
    os.makedirs(out_dir, exist_ok=True)
    main = next(iter(runs))
    plot_run(runs[main], os.path.join(out_dir, "waveforms.png"), b)
    if len(runs) > 1:
        plot_comparison(runs, os.path.join(out_dir, "comparison.png"), b)
    m = all_metrics[main]
    warn = voltage_cautions(max(x["max_load_v"] for x in all_metrics.values()),
                            max(x["max_supply_v"] for x in all_metrics.values()))
    sc = runs[main].scenarios[b]
    text = [f"# linedrop simulation: {os.path.basename(sc.source)}", "",
            f"True loop resistance at the end of the run: {m['r_cable_ohm']:.4f} ohm; "
            f"ESR {sc.load_end.esr_ohm:.4f} ohm; uncompensated drop {m['uncompensated_drop_v']:.3f} V.",
            "", metrics_table(all_metrics), ""]
    if m.get("window_outcomes"):
        text += ["Windows by outcome (linedrop's algorithm): "
                 + ", ".join(f"{n} {c}" for n, c in m["window_outcomes"].items()) + ".", ""]
    text += ["![waveforms](waveforms.png)", ""]
    if len(runs) > 1:
        text += ["![comparison](comparison.png)", ""]
    text += warn + ([""] if warn else []) + ["## Cautions", ""] + [f"- {c}" for c in CAUTIONS]
    with atomic_write(os.path.join(out_dir, "report.md")) as f:
        f.write("\n".join(text) + "\n")
    with atomic_write(os.path.join(out_dir, "metrics.json")) as f:
        json.dump(all_metrics, f, indent=2)
    return warn
