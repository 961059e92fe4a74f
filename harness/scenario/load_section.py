"""Parsing and checking of a scenario file's [load] table."""

from pathlib import Path

from harness.scenario.profile import read_profile
from harness.scenario.keys import KEYS, LOAD_KIND_KEYS, MAIN_KEY
from harness.scenario.specs import LoadSpec
from harness.scenario.validate import Section, interval, show

#: Fraction of supply.target_v used as the default load.cutoff_v (constant current / power).
CUTOFF_FRACTION = 0.25
DEFAULT_LAMP_TAU_S = 0.05


def _steps(sec, main, duration_s):
    r = KEYS["load"][main]
    lo, hi, lo_open = r.lo, r.hi, r.lo_open
    raw = sec.table.get("steps", [])
    if not isinstance(raw, list):
        sec.fail("steps", "must be a list of [time_s, value] pairs", raw)
    out, prev = [], None
    for n, pair in enumerate(raw):
        key = f"steps[{n}]"
        if not isinstance(pair, list) or len(pair) != 2:
            sec.fail(key, "must be a [time_s, value] pair", pair)
        t, v = pair
        ok_t = (not isinstance(t, bool) and isinstance(t, (int, float)) and 0.0 <= t <= duration_s
                and (prev is None or t > prev))
        if not ok_t:
            after = "[0" if prev is None else f"({prev:g}"
            sec.fail(f"{key}[0]", f"time must be in {after}, {duration_s:g}] (after the previous step, "
                     "within run.duration_s)", t)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (lo < v <= hi if lo_open else lo <= v <= hi):
            sec.fail(f"{key}[1]", f"must be in {interval(lo, hi, lo_open)}", v)
        out.append((float(t), float(v)))
        prev = t
    return tuple(out)


def parse_load(source, table, target_v, r_loop_ohm, duration_s):
    """Build the LoadSpec of a ``[load]`` table.

    Parameters
    ----------
    source : str or pathlib.Path
        Scenario file (messages; ``profile_csv`` is relative to its folder).
    table : dict
        The parsed table.
    target_v : float
        supply.target_v, V (default cut-off, upper bound of the restart voltage and the
        deliverable-power check).
    r_loop_ohm : float
        Cable loop resistance at the start, ohm.
    duration_s : float
        run.duration_s, s (step times must lie within it).
    """
    sec = Section(str(source), "load", table, KEYS["load"])
    kind = sec.choice("kind")
    key = MAIN_KEY[kind]
    profile, profile_csv = (), None
    if kind == "constant_current" and sec.has("profile_csv"):
        if sec.has(key):
            sec.fail("profile_csv", f"give either load.{key} or load.profile_csv, not both", table["profile_csv"])
        if sec.has("steps"):
            sec.fail("steps", "cannot be combined with load.profile_csv")
        profile_csv = sec.string("profile_csv")
        path = Path(source).parent / profile_csv
        profile = read_profile(path, shown=str(path))
        value = profile[0][1]
    else:
        value = sec.number(key)
    steps = () if kind == "lamp" else _steps(sec, key, duration_s)
    rated_v, tau, cutoff, restart = None, DEFAULT_LAMP_TAU_S, 0.0, None
    if kind == "lamp":
        rated_v = sec.number("rated_v")
        tau = sec.number("thermal_tau_s", default=DEFAULT_LAMP_TAU_S)
    if kind in ("constant_current", "constant_power"):
        cutoff = sec.number("cutoff_v", default=CUTOFF_FRACTION * target_v, hi=target_v)
        restart = sec.number("restart_v", default=None, lo=cutoff, hi=target_v)
    if kind == "constant_power":
        p_max = target_v**2 / (4.0 * r_loop_ohm)
        for where, p in [(key, value)] + [(f"steps[{n}][1]", v) for n, (_, v) in enumerate(steps)]:
            if p >= p_max:
                sec.fail(where, f"must be below supply.target_v**2 / (4 * loop resistance) = {p_max:.4g} W, "
                         "the most the cable can deliver", p)
    sec.finish(LOAD_KIND_KEYS[kind], why=f' for load.kind = {show(kind)}')
    return LoadSpec(kind=kind, value=value, rated_v=rated_v, thermal_tau_s=tau, cutoff_v=cutoff,
                    steps=steps, profile=profile, profile_csv=profile_csv, restart_v=restart)
