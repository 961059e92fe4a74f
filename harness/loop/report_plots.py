"""The simulation report's plots: waveforms of one run and load voltage of every compensation.

Both shade the faults (one colour per kind) and mark the load steps; the waveform plot also shades the windows the
algorithm rejected (a strip along the foot of each panel, one colour per outcome) and the
periods the supply sits at its current limit. Each kind has one legend entry.
"""
import os

import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from harness.atomic import atomic_write  # noqa: E402
from harness.loop.spans import fault_spans, load_step_times, shading  # noqa: E402

PANELS = (("v_load_v", "load voltage (V)"), ("v_supply_v", "supply voltage (V)"),
          ("i_supply_a", "supply current (A)"), ("r_estimate_ohm", "resistance estimate (ohm)"),
          ("correction_v", "correction (V)"))
#: Colour of each rejected window outcome (algo.state.STATUS_NAMES, all but valid and none).
OUTCOME_COLOURS = {"low_swing": "tab:orange", "transient": "tab:olive", "r_high": "tab:brown",
                   "reactive": "tab:pink", "clipped": "tab:cyan", "r_low": "tab:gray"}
#: Colours of the fault kinds, given out in the order the kinds first appear.
FAULT_COLOURS = ("tab:red", "tab:green", "tab:blue", "goldenrod", "tab:brown", "tab:gray")
LIMIT_COLOUR, STEP_COLOUR = "tab:purple", "0.35"
#: Height of the rejected-window strip, as a share of each panel.
STRIP = 0.07


def _shade(ax, shade):
    """Draw the spans of ``shade`` (harness.loop.spans.shading's dict) on one panel."""
    kinds = list(dict.fromkeys(kind for kind, _ in shade["faults"]))
    for kind, (a, e) in shade["faults"]:
        colour = FAULT_COLOURS[kinds.index(kind) % len(FAULT_COLOURS)]
        ax.axvspan(a, e, color=colour, alpha=0.10, lw=0, label=f"fault: {kind}")
    for a, e in shade.get("current_limit", ()):
        ax.axvspan(a, e, color=LIMIT_COLOUR, alpha=0.25, lw=0, label="at current limit")
    for name, spans in shade.get("rejected", {}).items():
        for a, e in spans:
            ax.axvspan(a, e, ymin=0.0, ymax=STRIP, color=OUTCOME_COLOURS.get(name, "k"), alpha=0.55,
                       lw=0, label=f"rejected window: {name}")
    for t in shade["load_steps"]:
        ax.axvline(t, color=STEP_COLOUR, ls=":", lw=1.0, label="load step")


def _legend(fig, axes, **kw):
    """One legend for the whole figure, one entry per label."""
    uniq = {}
    for ax in axes:
        for h, label in zip(*ax.get_legend_handles_labels()):
            uniq.setdefault(label, h)
    fig.legend(uniq.values(), uniq.keys(), fontsize=8, **kw)


def _save(fig, path):
    with atomic_write(path, "wb") as f:
        fig.savefig(f, format="png", dpi=110)
    plt.close(fig)


def plot_run(run, path, b=0):
    """Five stacked panels of one scenario over time, shaded as the module says.

    A decimated run (harness.loop.decimate) brings its shading, found from every sample.
    """
    sc = run.scenarios[b]
    shade = shading(run, b) if run.shading is None else run.shading[b]
    fig, axes = plt.subplots(len(PANELS), 1, figsize=(10, 12), sharex=True)
    for ax, (name, label) in zip(axes, PANELS):
        ax.plot(run.t_s, run.channels[name][:, b], lw=0.8, color="tab:blue")
        ax.set_ylabel(label)
        ax.grid(alpha=0.3)
        _shade(ax, shade)
    axes[0].axhline(sc.supply.target_v, color="k", ls="--", lw=0.8, label="target")
    axes[3].axhline(run.r_cable_ohm[b] + sc.load_end.esr_ohm, color="k", ls="-.", lw=0.8,
                    label="cable + ESR (end of run)")
    if sc.supply.current_limit_a is not None:
        axes[2].axhline(sc.supply.current_limit_a, color=LIMIT_COLOUR, ls="--", lw=0.8,
                        label="current limit")
    axes[-1].set_xlabel("time (s)")
    fig.suptitle(f"{os.path.basename(sc.source)}: {run.compensation} ({run.backend})")
    fig.tight_layout(rect=(0, 0, 0.78, 0.98))
    _legend(fig, axes, loc="upper left", bbox_to_anchor=(0.78, 0.96))
    _save(fig, path)


def plot_comparison(runs, path, b=0):
    """Load voltage of every compensation on the same scenario, overlaid; below, a +-3 % zoom."""
    sc = next(iter(runs.values())).scenarios[b]
    target = sc.supply.target_v
    shade = {"faults": fault_spans(sc), "load_steps": load_step_times(sc)}
    fig, axes = plt.subplots(2, 1, figsize=(10, 8), sharex=True)
    for ax in axes:
        for name, run in runs.items():
            ax.plot(run.t_s, run.channels["v_load_v"][:, b], lw=0.9, label=name)
        ax.axhline(target, color="k", ls="--", lw=0.8, label="target")
        _shade(ax, shade)
        ax.set_ylabel("load voltage (V)")
        ax.grid(alpha=0.3)
    axes[1].set_ylim(0.97 * target, 1.03 * target)
    axes[1].set_title("zoom: target +-3 %", fontsize=9)
    axes[1].set_xlabel("time (s)")
    axes[0].set_title("load voltage: linedrop against the baselines")
    fig.tight_layout(rect=(0, 0, 0.80, 1))
    _legend(fig, axes, loc="upper left", bbox_to_anchor=(0.80, 0.95))
    _save(fig, path)
