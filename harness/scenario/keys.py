"""Every key each scenario section allows and its range, as data: the reader checks with it,
tests/test_keys_docs.py holds SCENARIO_KEYS.md to it.

A bound is a number or the name of another key (as SCENARIO_KEYS.md writes it), whose value
the reader passes in. Converter keys the algorithm also reads take the algorithm's range
(``algo.config.SETTINGS``), narrowed where the plant needs it.
"""
from dataclasses import dataclass

from algo.config import SETTINGS
from harness.scenario.conductors import AWG_MAX, AWG_MIN, MATERIALS
from harness.scenario.specs import FAULT_KINDS, LOAD_KINDS


@dataclass(frozen=True)
class Range:
    """A number (or integer) in the interval from ``lo`` to ``hi``, each end open or closed."""
    lo: object
    hi: object
    lo_open: bool = False
    hi_open: bool = False
    integer: bool = False


@dataclass(frozen=True)
class Choice:
    """One of the strings ``options``."""
    options: tuple


#: A key whose value is neither a number nor a choice (a path, a list of steps).
FREE = None


def _algo(key, lo=None, lo_open=False):
    """The algorithm's range of ``key``, with the plant's own lower bound if given."""
    s = SETTINGS[key]
    integer = s.kind is int
    conv = int if integer else float
    return Range(conv(s.lo) if lo is None else lo, conv(s.hi), lo_open=lo_open, integer=integer)


KEYS = {
    "supply": {
        "target_v": Range(0.0, 1000.0, lo_open=True),
        "max_v": Range(0.0, 1000.0, lo_open=True),
        "min_v": Range(0.0, 1000.0),
        "loop_bandwidth_hz": Range(0.0, 1e6),
        "current_limit_a": Range(0.0, 1000.0, lo_open=True),
        "dac_bits": _algo("dac_bits"),
        "dac_full_scale_v": _algo("dac_full_scale_v", lo="max_v"),
        "dac_gain_error": Range(-0.5, 0.5),
    },
    "cable": {
        "resistance_ohm": Range(0.0, 1000.0, lo_open=True),
        "length_m": Range(0.0, 10000.0, lo_open=True),
        "conductor_mm2": Range(0.0, 1000.0, lo_open=True),
        "awg": Range(AWG_MIN, AWG_MAX, integer=True),
        "material": Choice(tuple(MATERIALS)),
        "temperature_c": Range(-60.0, 250.0),
        "temperature_end_c": Range(-60.0, 250.0),
        "inductance_h": Range(0.0, 1.0),
    },
    "load_end": {
        "capacitance_f": Range(0.0, 10.0, lo_open=True),
        "esr_ohm": Range(0.0, 100.0),
        "leakage_ohm": Range(0.0, 1e12, lo_open=True),
    },
    "load": {
        "kind": Choice(LOAD_KINDS),
        "current_a": Range(0.0, 1000.0),
        "profile_csv": FREE,
        "resistance_ohm": Range(0.0, 1e6, lo_open=True),
        "power_w": Range(0.0, 1e5),
        "rated_v": Range(0.0, 1000.0, lo_open=True),
        "rated_w": Range(0.0, 1e5, lo_open=True),
        "thermal_tau_s": Range(0.0, 100.0, lo_open=True),
        "cutoff_v": Range(0.0, "target_v", lo_open=True, hi_open=True),
        "restart_v": Range("cutoff_v", "target_v", hi_open=True),
        "steps": FREE,
    },
    "sensing": {
        "adc_bits": _algo("adc_bits"),
        "v_full_scale_v": _algo("v_full_scale_v", lo="target_v", lo_open=True),
        "i_full_scale_a": _algo("i_full_scale_a"),
        "noise_lsb_rms": Range(0.0, 100.0),
        "offset_lsb": Range(-1000.0, 1000.0),
        "gain_error": Range(-0.5, 0.5),
        "current_gain_error": Range(-0.5, 0.5),
        "current_offset_lsb": Range(-1000.0, 1000.0),
        "sample_rate_hz": _algo("sample_rate_hz"),
    },
    "run": {
        "duration_s": Range(0.0, 3600.0, lo_open=True),
        "seed": Range(0, 2**63 - 1, integer=True),
        "start": Choice(("steady", "cold")),
    },
    # linedrop spread's production tolerances (harness.scenario.spread_section; pairs are [lo, hi]).
    "spread": {
        "temperature_c": Range(-60.0, 250.0),
        "capacitance_tol": Range(0.0, 0.9),
        "esr_tol": Range(0.0, 0.9),
        "esr_doubling_c": Range(0.0, 100.0),
        "adc_gain_tol": Range(0.0, 0.1),
        "adc_offset_lsb": Range(0.0, 100.0),
        "bandwidth_tol": Range(0.0, 0.9),
        "dac_gain_tol": Range(0.0, 0.1),
        "current_gain_tol": Range(0.0, 0.1),
        "current_offset_lsb": Range(0.0, 100.0),
        "load_range": Range(0.0, 10.0, lo_open=True),
    },
    "fault": {
        "kind": Choice(FAULT_KINDS),
        "at_s": Range(0.0, "run.duration_s", hi_open=True),
        "until_s": Range("at_s", 3600.0, lo_open=True),
        "code": Range(0, "2^adc_bits − 1", integer=True),
        "channel": Choice(("v", "i")),
    },
}

#: The main key of each load kind (its value; load.steps change it).
MAIN_KEY = {"constant_current": "current_a", "resistive": "resistance_ohm", "constant_power": "power_w",
            "lamp": "rated_w"}
#: Keys of [load] by kind.
LOAD_KIND_KEYS = {
    "constant_current": ("kind", "current_a", "profile_csv", "steps", "cutoff_v", "restart_v"),
    "resistive": ("kind", "resistance_ohm", "steps"),
    "constant_power": ("kind", "power_w", "steps", "cutoff_v", "restart_v"),
    "lamp": ("kind", "rated_v", "rated_w", "thermal_tau_s"),
}
#: Keys of a [[fault]] by kind.
FAULT_KIND_KEYS = {kind: ("kind", "at_s", "until_s") + (("code", "channel") if kind == "adc_stuck" else ())
                   for kind in FAULT_KINDS}
