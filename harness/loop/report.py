"""Report folder of a simulation: plots, report.md (figures defined, faults, outcomes, settings), metrics.json."""
import json
import os

from harness.atomic import atomic_write
from harness.loop.cautions import cautions_for, voltage_cautions
from harness.loop.metrics import last_event_s
from harness.loop.report_plots import plot_comparison, plot_run
from harness.loop.report_text import (COMPENSATION_LINES, definitions, events, fault_lines, header, outcome_table,
                                      ratio, settings_table)

#: Rows of the metrics table: metrics key, label with unit, formatter of a value that is not None.
ROWS = (("load_error_v", "load error (V)", "{:+.4f}".format),
        ("improvement", "improvement (ratio)", ratio),
        ("ripple_load_v_pp", "load ripple (V peak to peak)", "{:.4f}".format),
        ("max_load_v", "max load (V)", "{:.3f}".format),
        ("min_load_v", "min load (V)", "{:.3f}".format),
        ("settling_s", "settling (ms)", lambda s: f"{s * 1e3:.1f}"),
        ("r_estimate_ohm", "final estimate (ohm)", "{:.4f}".format))
#: What a None value of a row means, in the table.
NONE_CELLS = {"settling_s": "never"}


def metrics_table(all_metrics):
    """Markdown table: one column per compensation, one row per figure."""
    names = list(all_metrics)
    lines = ["| figure | " + " | ".join(names) + " |", "|---" * (len(names) + 1) + "|"]
    for key, label, fmt in ROWS:
        cells = [NONE_CELLS.get(key, "n/a") if all_metrics[n][key] is None else fmt(all_metrics[n][key])
                 for n in names]
        lines.append(f"| {label} | " + " | ".join(cells) + " |")
    return "\n".join(lines) + "\n"


#: Every file write_report puts in its folder.
REPORT_FILES = ("waveforms.png", "comparison.png", "report.md", "metrics.json")


def _body(runs, all_metrics, b, settings):
    main = next(iter(runs))
    run, m = runs[main], all_metrics[main]
    sc = run.scenarios[b]
    text = header(sc, run, settings["version"])
    text += [f"True loop resistance at the end of the run: {m['r_cable_ohm']:.4f} ohm; "
             f"ESR {sc.load_end.esr_ohm:.4f} ohm; uncompensated drop {m['uncompensated_drop_v']:.3f} V.",
             "", events(run, b), "", "## Figures", "", metrics_table(all_metrics)]
    text += definitions(sc, last_event_s(sc)) + ["", "Compensations compared:", ""]
    text += [f"- `{n}`: {COMPENSATION_LINES[n]}" for n in all_metrics] + [""]
    if m["faults"]:
        text += [f"## Faults ({main})", "",
                 "The correction before a fault is its value at the last sample before the fault "
                 "began; at its end, at the last sample inside it (V).", ""]
        text += fault_lines(m["faults"]) + [""]
    if "linedrop" in runs:
        algo_run = runs["linedrop"]
        text += ["## Windows by outcome (linedrop)", ""]
        text += outcome_table(all_metrics["linedrop"]["window_outcomes"]) + [""]
        text += ["## Algorithm settings", "", settings["line"], "",
                 f"Every setting linedrop's algorithm ran with; \"{settings['table_source']}\" marks "
                 "the keys of the [algorithm] table in force:", ""]
        text += settings_table(algo_run.cfgs[b], algo_run.scenarios[b], settings["as_written"],
                               settings["table_source"], settings.get("given")) + [""]
    text += ["![waveforms](waveforms.png)", "",
             "Shaded: faults (red), the supply at its current limit (purple), and along the foot of "
             "each panel the windows the algorithm rejected, one colour per outcome; dotted lines: "
             "load steps.", ""]
    if len(runs) > 1:
        text += ["![comparison](comparison.png)", ""]
    return text


def write_report(out_dir, runs, all_metrics, b=0, settings=None):
    """Write plots, report.md and metrics.json into ``out_dir`` (created if needed).

    ``runs`` and ``all_metrics`` are dicts keyed by compensation name; the first is the one the
    user asked for. ``settings`` says what ran: ``version`` (the tool's, in words),
    ``as_written`` (the scenario as its file has it, before design's recommendation changed it)
    ``table_source`` (where the [algorithm] table came from, a few words) and ``line`` (the
    sentence simulate prints about it); by default the scenario run and "the scenario".
    Returns the voltage cautions.
    """
    main = next(iter(runs))
    settings = dict({"version": "unknown", "as_written": runs[main].scenarios[b],
                     "table_source": "the scenario", "line": ""}, **(settings or {}))
    os.makedirs(out_dir, exist_ok=True)
    plot_run(runs[main], os.path.join(out_dir, "waveforms.png"), b)
    if len(runs) > 1:
        plot_comparison(runs, os.path.join(out_dir, "comparison.png"), b)
    warn = voltage_cautions(max(x["max_load_v"] for x in all_metrics.values()),
                            max(x["max_supply_v"] for x in all_metrics.values()))
    text = _body(runs, all_metrics, b, settings)
    text += warn + ([""] if warn else []) + ["## Cautions", ""] + [
        f"- {c}" for c in cautions_for(runs[main].scenarios[b].load.kind)]
    with atomic_write(os.path.join(out_dir, "report.md")) as f:
        f.write("\n".join(text) + "\n")
    with atomic_write(os.path.join(out_dir, "metrics.json")) as f:
        json.dump(all_metrics, f, indent=2)
    return warn
