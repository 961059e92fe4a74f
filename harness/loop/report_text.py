"""The words of a simulation report: what each figure means, its sign and unit, and plain numbers."""
import math
import os
from dataclasses import fields

import numpy as np

from algo.config import SETTINGS
from algo.state import STATUS_NAMES, STATUS_NONE
from harness.loop.metrics import FALL_FRACTION, SETTLE_BAND, TAIL
from harness.loop.spans import current_limit_spans, load_step_times
from harness.scenario.algo_setup import FROM_PLANT

#: One line per compensation the report compares (harness.loop.closed_loop.COMPENSATIONS).
COMPENSATION_LINES = {
    "linedrop": "linedrop's algorithm: perturbs the output, estimates the loop resistance and adds "
                "the estimated drop.",
    "none": "no compensation: the supply holds target_v at its own terminals.",
    "fixed": "a fixed setting: the loop resistance the cable has at 20 degC times the measured "
             "current (filtered over about a window).",
    "difference": "a square-wave perturbation and R = dV/dI from one voltage and current sample per "
                  "half period.",
    "sense": "remote sense wires: a PI loop on the load voltage itself (the yardstick; needs the "
             "extra wires).",
}

#: What each window outcome means (algo.state.STATUS_NAMES, all but none).
OUTCOME_LINES = {
    "valid": "estimate accepted",
    "low_swing": "current swing below swing_min_a: cable open or capacitor missing",
    "transient": "a load step inside the window: estimate discarded, correction held",
    "r_high": "real part above r_max_ohm: capacitor missing or no cable fits",
    "reactive": "quadrature part above x_max_ohm: capacitor too small or missing",
    "clipped": "a code at a rail: estimate discarded, perturbation halved",
    "r_low": "real part negative: no passive cable and capacitor fits",
}


def volts(x, places=3):
    """``x`` V in plain form, ``places`` decimals."""
    return f"{x:.{places}f} V"


def millis(seconds):
    """``seconds`` in ms, plain form."""
    return f"{seconds * 1e3:.1f} ms"


def plain(x, digits=6):
    """``x`` to ``digits`` significant digits, positional (never an exponent)."""
    return np.format_float_positional(x, precision=digits, unique=True, fractional=False, trim="-")


def ratio(x):
    """An improvement ratio in plain form (no exponent)."""
    if math.isinf(x):
        return "no error left"
    return f"{x:,.1f}" if x < 1000 else f"{x:,.0f}"


def definitions(sc, since_s):
    """Markdown list: every figure of the metrics table with its sign and unit."""
    target = sc.supply.target_v
    band = SETTLE_BAND * target
    tail = f"the last {plain(TAIL * 100)} % of the run"
    since = (f"the last load step or fault end ({plain(since_s)} s here)" if since_s > 0
             else "the start of the run (no load step or fault here)")
    return [
        f"- `load_error_v` (load error, V): target_v minus the mean load voltage over {tail}; "
        "positive = the load is below target, negative = above it.",
        "- `uncompensated_drop_v` (V): the drop the cable would cause with no compensation: the true "
        f"loop resistance at the end of the run times the mean supply current over {tail}.",
        "- `improvement` (ratio, no unit): uncompensated drop divided by the size of the load error, "
        "i.e. how many times smaller the error is than the drop left alone; 1 = no better than no "
        "compensation, higher is better.",
        f"- `ripple_load_v_pp` (load ripple, V peak to peak): highest minus lowest load voltage over {tail}.",
        "- `max_load_v` (max load, V): highest load voltage over the whole run, faults and load steps "
        "included.",
        "- `min_load_v` (min load, V): lowest load voltage over the whole run, faults and load steps "
        "included.",
        f"- `settling_s` (settling, ms): time after {since} from which the load voltage stays within "
        f"the {plain(SETTLE_BAND * 100)} % band of target ({plain(target)} V +- {band:.3f} V) to the end of the "
        "run; \"never\" when it is outside the band at the end.",
        "- `r_estimate_ohm` (final estimate, ohm): the compensation's loop-resistance estimate "
        "(cable + ESR) at the end of the run; 0 for a compensation that estimates nothing.",
    ]


def fault_lines(faults):
    """One sentence per fault of the metrics (``metrics()['faults']``), with its figures."""
    return [f"- {fault_sentence(f)}" for f in faults]


def fault_sentence(f):
    """One fault's figures in a sentence that reads right whether or not the correction fell."""
    end = "the end of the run" if math.isinf(f["until_s"]) else f"{plain(f['until_s'])} s"
    share = f"{plain(FALL_FRACTION * 100)} % of its value before the fault"
    fell = ("it never fell below " + share + " during the fault" if f["fall_time_s"] is None
            else f"it fell below {share} {millis(f['fall_time_s'])} after the fault began")
    return (f"{f['kind']} from {plain(f['at_s'])} s to {end}: the correction was "
            f"{volts(f['correction_before_v'])} before the fault and {volts(f['correction_at_end_v'])} "
            f"at its end; {fell}.")


def outcome_table(counts):
    """Markdown table of windows per outcome, by name, every outcome listed."""
    lines = ["| outcome | windows | meaning |", "|---|---|---|"]
    for code, name in sorted(STATUS_NAMES.items()):
        if code != STATUS_NONE:
            lines.append(f"| `{name}` | {counts.get(name, 0)} | {OUTCOME_LINES[name]} |")
    return lines


def _setting_source(key, sc, as_written, table_source, given):
    if key in sc.algorithm:
        return table_source if given is None or key in given else "linedrop design's recommendation"
    if key in FROM_PLANT:
        section, name = FROM_PLANT[key]
        now, was = getattr(getattr(sc, section), name), getattr(getattr(as_written, section), name)
        if now != was:
            return f"linedrop design's recommendation (the scenario's {section}.{name} is {plain(was)})"
        return f"the scenario's {section}.{name}"
    return "default (algo/config.py)"


def settings_table(cfg, sc, as_written, table_source, given=None):
    """Markdown table of every algorithm setting the run used, its unit and where it came from.

    ``cfg`` is the run's AlgoConfig, ``sc`` the scenario it ran (with the [algorithm] table in
    force), ``as_written`` the scenario as its file has it, ``table_source`` where that table
    came from, in words, and ``given`` the keys that table set (None: every key in force), the
    others in force being design's recommendation.
    """
    lines = ["| setting | value | meaning | from |", "|---|---|---|---|"]
    for f in fields(cfg):
        value = getattr(cfg, f.name)
        shown = str(value) if isinstance(value, int) else plain(value)
        lines.append(f"| `{f.name}` | {shown} | {SETTINGS[f.name].doc} | "
                     f"{_setting_source(f.name, sc, as_written, table_source, given)} |")
    return lines


def events(run, b=0):
    """One paragraph: the load steps and the time the supply spent at its current limit."""
    sc = run.scenarios[b]
    steps = load_step_times(sc)
    out = (f"Load steps at {', '.join(plain(t) + ' s' for t in steps)}." if steps
           else "No load step.")
    limit = sc.supply.current_limit_a
    if limit is None:
        return out + " The supply has no current limit."
    spans = (current_limit_spans(run.t_s, run.channels["i_supply_a"][:, b], limit) if run.shading is None
             else run.shading[b]["current_limit"])
    who = f" With {run.compensation}, the supply current"
    if not spans:
        return out + f"{who} never reached its {plain(limit)} A limit."
    total = sum(e - a for a, e in spans)
    spells = "1 spell" if len(spans) == 1 else f"{len(spans)} spells"
    return out + f"{who} sat at its {plain(limit)} A limit for {millis(total)} in all, in {spells}."


def header(sc, run, version):
    """Title and the lines naming the scenario, the tool version and what ran."""
    return [f"# linedrop simulation: {os.path.basename(sc.source)}", "",
            f"Scenario file: `{sc.source}`; {plain(sc.run.duration_s)} s at "
            f"{plain(run.cfgs[0].sample_rate_hz)} Hz. "
            f"Tool: {version}. Algorithm backend: {run.backend}.", ""]
