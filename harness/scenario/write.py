"""Write a Scenario back as scenario-file TOML, so a failing drawn scenario can be replayed.

``parse_scenario(tomllib.loads(scenario_to_toml(sc)), src)`` gives ``sc`` back field for field
(floats are written with ``repr``, which round-trips exactly).
"""
import math

from harness.scenario.keys import MAIN_KEY


def _v(x):
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        return "inf" if x == math.inf else repr(x)
    if isinstance(x, str):
        return '"' + x.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(x, (list, tuple)):
        return "[" + ", ".join(_v(e) for e in x) + "]"
    raise TypeError(f"cannot write {x!r} as TOML")


def _table(name, items, array=False):
    head = f"[[{name}]]" if array else f"[{name}]"
    return [head] + [f"{k} = {_v(v)}" for k, v in items if v is not None] + [""]


def scenario_to_toml(sc, comment=None):
    """TOML text of harness.scenario.specs.Scenario ``sc`` (``comment``: lines put first, as # comments)."""
    out = [f"# {line}" for line in (comment or "").splitlines()]
    s, c, le, ld, se, r = sc.supply, sc.cable, sc.load_end, sc.load, sc.sensing, sc.run
    out += _table("supply", [("target_v", s.target_v), ("max_v", s.max_v), ("min_v", s.min_v),
                             ("loop_bandwidth_hz", s.loop_bandwidth_hz), ("current_limit_a", s.current_limit_a),
                             ("dac_bits", s.dac_bits), ("dac_full_scale_v", s.dac_full_scale_v),
                             ("dac_gain_error", s.dac_gain_error)])
    out += _table("cable", [("resistance_ohm", c.resistance_ohm), ("material", c.material),
                            ("temperature_c", c.temperature_c), ("temperature_end_c", c.temperature_end_c),
                            ("inductance_h", c.inductance_h), ("length_m", c.length_m)])
    out += _table("load_end", [("capacitance_f", le.capacitance_f), ("esr_ohm", le.esr_ohm),
                               ("leakage_ohm", le.leakage_ohm)])
    key = MAIN_KEY[ld.kind]
    load = [("kind", ld.kind), (key, ld.value)]
    if ld.kind == "lamp":
        load += [("rated_v", ld.rated_v), ("thermal_tau_s", ld.thermal_tau_s)]
    else:
        load += [("steps", [list(p) for p in ld.steps]) if ld.steps else ("steps", None)]
    if ld.kind in ("constant_current", "constant_power"):
        load += [("cutoff_v", ld.cutoff_v), ("restart_v", ld.restart_v)]
    if ld.profile_csv is not None:
        raise ValueError("a scenario with load.profile_csv is written by hand, not by scenario_to_toml")
    out += _table("load", load)
    out += _table("sensing", [("adc_bits", se.adc_bits), ("v_full_scale_v", se.v_full_scale_v),
                              ("i_full_scale_a", se.i_full_scale_a), ("noise_lsb_rms", se.noise_lsb_rms),
                              ("offset_lsb", se.offset_lsb), ("gain_error", se.gain_error),
                              ("current_gain_error", se.current_gain_error),
                              ("current_offset_lsb", se.current_offset_lsb),
                              ("sample_rate_hz", se.sample_rate_hz)])
    out += _table("run", [("duration_s", r.duration_s), ("seed", r.seed), ("start", r.start)])
    for f in sc.faults:
        out += _table("fault", [("kind", f.kind), ("at_s", f.at_s),
                                ("until_s", None if f.until_s == math.inf else f.until_s),
                                ("code", f.code), ("channel", f.channel)], array=True)
    if sc.algorithm:
        out += _table("algorithm", sorted(sc.algorithm.items()))
    return "\n".join(out)
