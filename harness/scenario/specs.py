"""Frozen dataclasses describing one simulated scenario (what a scenario file parses into)."""

import math
from dataclasses import dataclass, field
from typing import Optional

#: Capacitance left at the load end while a ``cap_open`` fault is active, F: stray cable and
#: load-input capacitance (common practice, no published source; an assumed round value).
CAP_OPEN_RESIDUAL_F = 1e-6

#: Loop inductance per metre of run used when ``cable.inductance_h`` is omitted, H/m
#: (about 0.3 uH/m per conductor for a two-core cable, from memory; common practice).
DEFAULT_INDUCTANCE_H_PER_M = 0.6e-6

#: Load resistance while a ``load_short`` fault is active, ohm.
LOAD_SHORT_OHM = 0.01

#: Default restart voltage of a load's undervoltage lockout: this fraction of the way from its
#: cut-off to target_v.
RESTART_SHARE = 0.5

LOAD_KINDS = ("constant_current", "resistive", "constant_power", "lamp")
FAULT_KINDS = ("cable_open", "cap_open", "load_short", "adc_stuck")


@dataclass(frozen=True)
class SupplySpec:
    """Supply settings (all volts in V, currents in A, bandwidth in Hz)."""

    target_v: float
    max_v: float
    min_v: float = 0.0
    loop_bandwidth_hz: float = 0.0  # 0: ideal voltage source
    current_limit_a: Optional[float] = None  # None: no limit
    dac_bits: int = 12
    dac_full_scale_v: float = 0.0  # volts for code 2**dac_bits
    dac_gain_error: float = 0.0  # the supply's output per code is (1 + this) times what the firmware assumes


@dataclass(frozen=True)
class CableSpec:
    """Cable: loop resistance at t = 0 (ohm) and how it drifts with temperature."""

    resistance_ohm: float  # loop value at temperature_c (resolved from gauge if not given)
    material: str = "copper"
    temperature_c: float = 20.0
    temperature_end_c: Optional[float] = None  # reached at the end of the run
    inductance_h: float = 0.0  # loop inductance
    length_m: Optional[float] = None
    conductor_mm2: Optional[float] = None  # resolved from awg if awg was given
    awg: Optional[int] = None


@dataclass(frozen=True)
class LoadEndSpec:
    """Load-end capacitor (F) with ESR (ohm) and optional parallel leakage (ohm)."""

    capacitance_f: float
    esr_ohm: float = 0.0
    leakage_ohm: Optional[float] = None  # None: no leakage


@dataclass(frozen=True)
class LoadSpec:
    """Load at the cable end.

    ``value`` is the kind's main quantity (current_a, resistance_ohm or power_w; rated_w for a
    lamp). ``steps`` are (time_s, value) pairs that replace ``value`` from time_s on.
    ``profile`` is (time_s, current_a) pairs for a constant-current load from a CSV file.
    A constant-current or constant-power load with ``cutoff_v`` > 0 turns off below
    ``cutoff_v`` and back on at ``restart_v`` or above (V); ``restart_v`` None derives it from
    ``cutoff_v`` (see restart_voltage).
    """

    kind: str
    value: float = 0.0
    rated_v: Optional[float] = None
    thermal_tau_s: float = 0.05
    cutoff_v: float = 0.0
    steps: tuple = ()
    profile: tuple = ()
    profile_csv: Optional[str] = None
    restart_v: Optional[float] = None


def restart_voltage(load, target_v=float("inf")):
    """Restart voltage (V) of ``load``'s undervoltage lockout under supply.target_v ``target_v`` (V).

    The given ``load.restart_v``, else RESTART_SHARE of the way from cutoff_v to
    target_v, so it stays in [cutoff_v, target_v). A restart just above the cut-off would turn a
    heavy constant-power load on where its current pulls the load end straight back below the
    cut-off (below the lower, unstable root of V = V_s - R P / V), and it would hiccup for ever.
    """
    if load.restart_v is not None:
        return load.restart_v
    if not math.isfinite(target_v):
        return load.cutoff_v
    return load.cutoff_v + RESTART_SHARE * (target_v - load.cutoff_v)


@dataclass(frozen=True)
class SensingSpec:
    """ADC on the supply-side voltage and current, and the sample rate (Hz)."""

    v_full_scale_v: float
    i_full_scale_a: float
    adc_bits: int = 12
    noise_lsb_rms: float = 0.5
    offset_lsb: float = 0.0
    gain_error: float = 0.0  # fractional, e.g. 0.01 reads 1 % high
    current_gain_error: float = 0.0  # the current channel's own, on top of gain_error
    current_offset_lsb: float = 0.0  # the current channel's own, on top of offset_lsb
    sample_rate_hz: float = 32000.0


@dataclass(frozen=True)
class RunSpec:
    """Run length (s), random seed and initial state (``"steady"`` or ``"cold"``)."""

    duration_s: float = 1.0
    seed: int = 0
    start: str = "steady"


@dataclass(frozen=True)
class FaultSpec:
    """A fault active over [at_s, until_s); ``code``/``channel`` only for ``adc_stuck``."""

    kind: str
    at_s: float
    until_s: float = float("inf")
    code: Optional[int] = None
    channel: Optional[str] = None  # "v" or "i"


@dataclass(frozen=True)
class Scenario:
    """One scenario: plant, sensing, run settings, faults and the algorithm settings (opaque)."""

    source: str
    supply: SupplySpec
    cable: CableSpec
    load_end: LoadEndSpec
    load: LoadSpec
    sensing: SensingSpec
    run: RunSpec = RunSpec()
    faults: tuple = ()
    algorithm: dict = field(default_factory=dict, compare=False, hash=False)
    #: The [spread] table's tolerances (harness.scenario.spread_section.Tolerances); only
    #: ``linedrop spread`` reads them, every other command checks and ignores them.
    spread: object = field(default=None, compare=False, hash=False)
