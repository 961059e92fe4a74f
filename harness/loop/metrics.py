"""Figures of merit of a closed-loop run: load error, improvement, settling, ripple, fault recovery."""
import math

import numpy as np

from algo.state import STATUS_NAMES, STATUS_NONE

#: Share of the run at its end over which steady figures are averaged.
TAIL = 0.2
#: Settling band around the target, as a fraction of target_v.
SETTLE_BAND = 0.01
#: A fault's correction has fallen when it is below this share of its pre-fault value.
FALL_FRACTION = 0.05


def last_event_s(scenario):
    """Time of the last load step or fault end (s); 0 when there is none."""
    times = [t for t, _ in scenario.load.steps]
    times += [f.until_s for f in scenario.faults if math.isfinite(f.until_s)]
    times = [t for t in times if t < scenario.run.duration_s]
    return max(times, default=0.0)


def settling_s(t_s, v_load, target, since_s):
    """Time after ``since_s`` from which v_load stays within SETTLE_BAND of target; None if never."""
    after = t_s > since_s
    out = np.abs(v_load[after] - target) > SETTLE_BAND * target
    if not out.any():
        return 0.0
    last = np.flatnonzero(out)[-1]
    if last == out.size - 1:
        return None
    return float(t_s[after][last + 1] - since_s)


def fault_figures(t_s, corr_v, fault):
    """Correction at the fault's end (V) and time for it to fall below 5 % of its pre-fault value (s)."""
    before = t_s < fault.at_s
    pre = float(corr_v[before][-1]) if before.any() else 0.0
    during = (t_s >= fault.at_s) & (t_s < fault.until_s)
    end_idx = np.flatnonzero(during)
    at_end = float(corr_v[end_idx[-1]]) if end_idx.size else float(corr_v[-1])
    fallen = during & (corr_v <= FALL_FRACTION * pre)
    fall_s = float(t_s[np.flatnonzero(fallen)[0]] - fault.at_s) if fallen.any() else None
    return {"kind": fault.kind, "at_s": fault.at_s, "until_s": fault.until_s,
            "correction_before_v": pre, "correction_at_end_v": at_end, "fall_time_s": fall_s}


def window_outcomes(run, b=0):
    """Windows finished in the run per outcome name ({name: count}), or None for a baseline.

    A window ends at the sample where the algorithm's window counter moves; the status it
    leaves there is that window's outcome.
    """
    if "windows" not in run.channels:
        return None
    w = run.channels["windows"][:, b].astype(np.int64)
    status = run.channels["status"][:, b].astype(np.int64)
    ends = np.flatnonzero(np.diff(np.concatenate([[0], w])) != 0)
    counts = np.bincount(status[ends], minlength=len(STATUS_NAMES))
    return {STATUS_NAMES[k]: int(counts[k]) for k in sorted(STATUS_NAMES) if k != STATUS_NONE}


def metrics(run, b=0):
    """The metrics dict of scenario ``b`` of a harness.loop.closed_loop.Run (JSON-ready)."""
    sc = run.scenarios[b]
    ch = {k: v[:, b].astype(np.float64) for k, v in run.channels.items()}
    t = run.t_s
    target = sc.supply.target_v
    tail = t >= t[-1] * (1 - TAIL)
    r_cable = float(run.r_cable_ohm[b])
    uncomp = r_cable * float(ch["i_supply_a"][tail].mean())
    err = target - float(ch["v_load_v"][tail].mean())
    settle = settling_s(t, ch["v_load_v"], target, last_event_s(sc))
    return {
        "r_cable_ohm": r_cable,
        "r_estimate_ohm": float(ch["r_estimate_ohm"][-1]),
        "uncompensated_drop_v": uncomp,
        "load_error_v": err,
        "improvement": abs(uncomp) / abs(err) if err != 0 else math.inf,
        "max_load_v": float(ch["v_load_v"].max()),
        "min_load_v": float(ch["v_load_v"].min()),
        "max_supply_v": float(ch["v_supply_v"].max()),
        "ripple_load_v_pp": float(np.ptp(ch["v_load_v"][tail])),
        "settling_s": settle,
        "converged": bool(settle is not None and abs(err) <= SETTLE_BAND * target),
        "faults": [fault_figures(t, ch["correction_v"], f) for f in sc.faults],
        "window_outcomes": window_outcomes(run, b),
    }
