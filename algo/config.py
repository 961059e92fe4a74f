"""User-facing algorithm settings in physical units, with defaults and allowed ranges.

These are the keys of a scenario's or replay config's ``[algorithm]`` table.
``algo.params.derive`` turns a validated :class:`AlgoConfig` into the integer
parameter block that the fixed-point model and the C reference run on.
"""
from dataclasses import dataclass, fields, replace
import math

POW2 = "power of two"


@dataclass(frozen=True)
class Setting:
    """One key: default, inclusive range, integer-ness and a one-line meaning."""
    default: float
    lo: float
    hi: float
    kind: type
    doc: str
    pow2: bool = False


SETTINGS = {
    # Sensing and command converters.
    "sample_rate_hz": Setting(32000.0, 1000.0, 1e6, float, "ADC sample (and step) rate, Hz"),
    "adc_bits": Setting(12, 8, 16, int, "ADC resolution of the voltage and current channels, bits"),
    "v_full_scale_v": Setting(33.0, 0.1, 1000.0, float, "supply-voltage ADC full scale, V"),
    "i_full_scale_a": Setting(5.0, 0.001, 1000.0, float, "supply-current ADC full scale, A"),
    "dac_bits": Setting(12, 8, 16, int, "command DAC resolution, bits"),
    "dac_full_scale_v": Setting(33.0, 0.1, 1000.0, float, "command DAC full scale, V"),
    # Output.
    "target_v": Setting(24.0, 0.0, 1000.0, float, "voltage wanted at the load, V"),
    "min_v": Setting(0.0, 0.0, 1000.0, float, "lowest command, V"),
    "max_v": Setting(28.0, 0.0, 1000.0, float, "highest command whatever the estimate, V"),
    # Perturbation and demodulation.
    "period_samples": Setting(32, 4, 256, int, "perturbation period, samples", pow2=True),
    "periods_per_window": Setting(8, 1, 64, int, "perturbation periods per measurement window", pow2=True),
    "table_bits": Setting(16, 8, 16, int, "sine reference table word length, bits (signed)"),
    "acc_bits": Setting(32, 20, 32, int, "demodulation accumulator word length, bits (signed)"),
    "pert_fraction": Setting(0.1, 0.01, 0.5, float, "perturbation current swing as a fraction of load current"),
    "pert_min_v": Setting(0.05, 0.0, 100.0, float, "perturbation amplitude floor, V peak"),
    "pert_max_v": Setting(0.5, 0.0, 100.0, float, "perturbation amplitude ceiling, V peak"),
    # Estimate.
    "r_frac_bits": Setting(16, 8, 16, int, "fraction bits of the resistance estimate (V-code per I-code)"),
    "r_max_ohm": Setting(10.0, 0.001, 1000.0, float, "largest plausible loop resistance + ESR, ohm"),
    "x_max_ohm": Setting(10.0, 0.001, 1000.0, float, "largest plausible reactance at the perturbation, ohm"),
    "adc_phase_samples": Setting(0.0, -2.0, 2.0, float,
                                 "lead of the sampled voltage over the voltage driving the cable, samples"),
    "esr_allowance_ohm": Setting(0.0, 0.0, 100.0, float, "the load end's share of the estimate (capacitor ESR, with the load's incremental resistance in parallel; design computes it), subtracted from it, ohm"),
    "r_filter_shift": Setting(2, 0, 8, int, "estimate filter, steady: each valid window moves it 2**-shift of the way"),
    "r_step_max_ohm": Setting(2.5, 0.0, 1000.0, float, "largest estimate change in one window, ohm"),
    "swing_min_a": Setting(0.01, 0.0, 100.0, float, "smallest current swing amplitude accepted, A peak"),
    "step_rel_shift": Setting(1, 0, 8, int, "load-step detector: period-mean change above 2**-shift of the current swing"),
    "step_min_a": Setting(0.05, 0.0, 100.0, float, "load-step detector: absolute floor of that change, A"),
    "fault_windows": Setting(6, 1, 1000, int, "windows without a valid estimate before the correction is forced to zero"),
    # Correction.
    "compensation": Setting(1.0, 0.0, 1.0, float, "fraction k of the estimated drop that is added"),
    "loop_tau_ms": Setting(0.0, 0.0, 10000.0, float,
                           "closed-loop time constant of the correction, ms (at least one period; "
                           "0: four periods)"),
    "capacitance_f": Setting(1e-3, 0.0, 10.0, float,
                             "load capacitance the proportional gain assumes (kp = R-hat * C / tau), F"),
    "kp_max": Setting(32.0, 0.0, 256.0, float, "ceiling of the proportional gain"),
    "corr_frac_bits": Setting(4, 0, 8, int, "fraction bits of the correction state (DAC codes)"),
    "corr_max_v": Setting(1000.0, 0.0, 1000.0, float,
                          "largest correction, V (never more than max_v - target_v less the perturbation's peak)"),
}


def _default(key):
    s = SETTINGS[key]
    return s.kind(s.default)


class ConfigError(ValueError):
    """A setting is unknown, of the wrong type or out of range; ``key`` names it."""

    def __init__(self, key, message):
        super().__init__(f"{key}: {message}")
        self.key = key


@dataclass(frozen=True)
class AlgoConfig:
    """Algorithm settings in physical units; see ``SETTINGS`` for units and ranges."""
    sample_rate_hz: float = _default("sample_rate_hz")
    adc_bits: int = _default("adc_bits")
    v_full_scale_v: float = _default("v_full_scale_v")
    i_full_scale_a: float = _default("i_full_scale_a")
    dac_bits: int = _default("dac_bits")
    dac_full_scale_v: float = _default("dac_full_scale_v")
    target_v: float = _default("target_v")
    min_v: float = _default("min_v")
    max_v: float = _default("max_v")
    period_samples: int = _default("period_samples")
    periods_per_window: int = _default("periods_per_window")
    table_bits: int = _default("table_bits")
    acc_bits: int = _default("acc_bits")
    pert_fraction: float = _default("pert_fraction")
    pert_min_v: float = _default("pert_min_v")
    pert_max_v: float = _default("pert_max_v")
    r_frac_bits: int = _default("r_frac_bits")
    r_max_ohm: float = _default("r_max_ohm")
    x_max_ohm: float = _default("x_max_ohm")
    adc_phase_samples: float = _default("adc_phase_samples")
    esr_allowance_ohm: float = _default("esr_allowance_ohm")
    r_filter_shift: int = _default("r_filter_shift")
    r_step_max_ohm: float = _default("r_step_max_ohm")
    swing_min_a: float = _default("swing_min_a")
    step_rel_shift: int = _default("step_rel_shift")
    step_min_a: float = _default("step_min_a")
    fault_windows: int = _default("fault_windows")
    compensation: float = _default("compensation")
    loop_tau_ms: float = _default("loop_tau_ms")
    capacitance_f: float = _default("capacitance_f")
    kp_max: float = _default("kp_max")
    corr_frac_bits: int = _default("corr_frac_bits")
    corr_max_v: float = _default("corr_max_v")

    def __post_init__(self):
        for f in fields(self):
            check_value(f.name, getattr(self, f.name))
        if not self.min_v <= self.target_v <= self.max_v:
            raise ConfigError("target_v", f"= {self.target_v}: must be in [min_v, max_v] = "
                                          f"[{self.min_v}, {self.max_v}]")
        if self.max_v > self.dac_full_scale_v:
            raise ConfigError("max_v", f"= {self.max_v}: must not exceed dac_full_scale_v = "
                                       f"{self.dac_full_scale_v}")
        if self.pert_min_v > self.pert_max_v:
            raise ConfigError("pert_min_v", f"= {self.pert_min_v}: must not exceed pert_max_v = "
                                            f"{self.pert_max_v}")
        period_ms = 1e3 * self.period_samples / self.sample_rate_hz
        if 0 < self.loop_tau_ms < period_ms:
            raise ConfigError("loop_tau_ms", f"= {self.loop_tau_ms}: must be at least one perturbation "
                                             f"period, {period_ms:.4g} ms, here")
        if self.period_samples * self.periods_per_window > 16384:
            raise ConfigError("periods_per_window", "period_samples * periods_per_window must be "
                                                    "in [4, 16384]")

    @property
    def window_samples(self):
        """Samples in one measurement window."""
        return self.period_samples * self.periods_per_window

    @property
    def loop_tau_s(self):
        """The correction's closed-loop time constant in force, s (loop_tau_ms, 0: four periods)."""
        if self.loop_tau_ms > 0:
            return self.loop_tau_ms * 1e-3
        return 4.0 * self.period_samples / self.sample_rate_hz

    @property
    def perturbation_hz(self):
        """Perturbation frequency, Hz."""
        return self.sample_rate_hz / self.period_samples

    def with_(self, **changes):
        """A copy with some settings changed (validated again)."""
        return replace(self, **changes)


def check_value(key, value):
    """Raise :class:`ConfigError` unless ``value`` is allowed for ``key``."""
    s = SETTINGS.get(key)
    if s is None:
        raise ConfigError(key, f"unknown key; allowed: {', '.join(SETTINGS)}")
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ConfigError(key, f"= {value!r}: must be a number in [{s.lo:g}, {s.hi:g}]")
    if s.kind is int and value != int(value):
        raise ConfigError(key, f"= {value!r}: must be an integer in [{s.lo:g}, {s.hi:g}]")
    if not (math.isfinite(value) and s.lo <= value <= s.hi):
        raise ConfigError(key, f"= {value!r}: must be in [{s.lo:g}, {s.hi:g}]")
    if s.pow2 and int(value) & (int(value) - 1):
        raise ConfigError(key, f"= {value!r}: must be a power of two in [{s.lo:g}, {s.hi:g}]")


def from_mapping(table):
    """Build an :class:`AlgoConfig` from a TOML ``[algorithm]`` table (missing keys default)."""
    for key, value in table.items():
        check_value(key, value)
    kw = {k: (int(v) if SETTINGS[k].kind is int else float(v)) for k, v in table.items()}
    return AlgoConfig(**kw)
