"""The ``[spread]`` table of a scenario: which production tolerances and conditions a draw varies.

A pair ``[lo, hi]`` is drawn uniformly between its ends; a tolerance ``t`` draws a factor
uniformly in ``[1 - t, 1 + t]`` (or an offset in ``[-t, t]``). Absent keys vary nothing. The
keys, defaults and ranges are ``KEYS["spread"]`` (harness.scenario.keys), documented in
harness/scenario/SCENARIO_KEYS.md.
"""
from dataclasses import dataclass
from typing import Optional

from harness.scenario.keys import KEYS
from harness.scenario.validate import Section, interval, show

#: Keys whose value is a pair [lo, hi] of numbers inside the key's range.
PAIRS = ("temperature_c", "load_range")


@dataclass(frozen=True)
class Tolerances:
    """What a draw varies (see the module docstring); ``None`` / 0 vary nothing."""
    temperature_c: Optional[tuple] = None
    capacitance_tol: float = 0.0
    esr_tol: float = 0.0
    esr_doubling_c: float = 0.0
    adc_gain_tol: float = 0.0
    adc_offset_lsb: float = 0.0
    bandwidth_tol: float = 0.0
    dac_gain_tol: float = 0.0
    current_gain_tol: float = 0.0
    current_offset_lsb: float = 0.0
    load_range: Optional[tuple] = None

    def varies(self):
        """Names of the keys that vary something."""
        return [k for k in KEYS["spread"] if getattr(self, k) not in (None, 0.0)]


def _pair(sec, name):
    if not sec.has(name):
        return None
    r = sec.keys[name]
    shown = interval(r.lo, r.hi, r.lo_open, r.hi_open)
    rule = f"must be a pair [lo, hi] with lo <= hi, each in {shown}"
    v = sec.table[name]
    if not isinstance(v, list) or len(v) != 2:
        sec.fail(name, rule, v)
    for x in v:
        if isinstance(x, bool) or not isinstance(x, (int, float)) or not (r.lo <= x <= r.hi) \
                or (r.lo_open and x == r.lo) or (r.hi_open and x == r.hi):
            sec.fail(name, rule, v)
    if v[0] > v[1]:
        sec.fail(name, rule, v)
    return (float(v[0]), float(v[1]))


def parse_spread(src, table):
    """Tolerances from a parsed ``[spread]`` table; a one-line InputError names the file and key."""
    sec = Section(src, "spread", table, KEYS["spread"])
    sec.finish()
    values = {name: _pair(sec, name) if name in PAIRS else sec.number(name, 0.0) for name in KEYS["spread"]}
    return Tolerances(**values)


def describe(tol):
    """One line of what the draws vary, as a scenario file would spell the keys."""
    parts = [f"{k} = {show(list(v)) if isinstance(v, tuple) else f'{v:g}'}"
             for k in tol.varies() for v in [getattr(tol, k)]]
    return ", ".join(parts) if parts else "nothing but the ADC noise (no [spread] keys)"
