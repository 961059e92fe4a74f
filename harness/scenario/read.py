"""Scenario files: TOML read with tomllib into checked, frozen Scenario dataclasses."""

from pathlib import Path

from harness.scenario import conductors
from harness.scenario.algo_toml import check_integers
from harness.scenario.keys import FAULT_KIND_KEYS, KEYS
from harness.scenario.toml_file import read_toml
from harness.errors import InputError
from harness.scenario.load_section import parse_load
from harness.scenario.specs import (DEFAULT_INDUCTANCE_H_PER_M, CableSpec, FaultSpec, LoadEndSpec, RunSpec,
                           Scenario, SensingSpec, SupplySpec)
from harness.scenario.validate import REQUIRED, Section, show
from harness.scenario.spread_section import parse_spread

#: The built-in demo scenario (an invented sensor mast), used when a command is given no file.
DEMO = str(Path(__file__).parent / "scenarios" / "demo_mast.toml")

SECTIONS = ("supply", "cable", "load_end", "load", "sensing", "algorithm", "run", "fault", "spread")
#: Default supply.max_v as a multiple of supply.target_v.
MAX_V_FACTOR = 1.25
#: Default supply.dac_full_scale_v as a multiple of supply.max_v.
DAC_FS_FACTOR = 1.1
#: Default sensing.v_full_scale_v as a multiple of supply.max_v.
ADC_V_FS_FACTOR = 1.25
#: Default sensing.i_full_scale_a: this multiple of supply.current_limit_a, or DEFAULT_I_FS_A without a limit.
ADC_I_FS_FACTOR = 1.25
DEFAULT_I_FS_A = 10.0


def _supply(src, t):
    s = Section(src, "supply", t, KEYS["supply"])
    target = s.number("target_v")
    max_v = s.number("max_v", default=MAX_V_FACTOR * target)
    min_v = s.number("min_v", default=0.0)
    if min_v > max_v:
        s.fail("min_v", f"must be <= supply.max_v = {max_v:g}", min_v)
    if not min_v <= target <= max_v:
        s.fail("target_v", f"must be in [supply.min_v, supply.max_v] = [{min_v:g}, {max_v:g}]", target)
    bw = s.number("loop_bandwidth_hz", default=0.0)
    limit = s.number("current_limit_a", default=None)
    bits = s.integer("dac_bits", default=12)
    dac_fs = s.number("dac_full_scale_v", default=DAC_FS_FACTOR * max_v, lo=max_v)
    dac_gain = s.number("dac_gain_error", default=0.0)
    s.finish()
    return SupplySpec(target_v=target, max_v=max_v, min_v=min_v, loop_bandwidth_hz=bw, current_limit_a=limit,
                      dac_bits=bits, dac_full_scale_v=dac_fs, dac_gain_error=dac_gain)


def _cable(src, t):
    s = Section(src, "cable", t, KEYS["cable"])
    r_given = s.number("resistance_ohm", default=None)
    need = REQUIRED if r_given is None else None
    if r_given is None and not (s.has("conductor_mm2") or s.has("awg")):
        s.fail("conductor_mm2", f"missing; give cable.conductor_mm2 in (0, 1000] or cable.awg in "
               f"[{conductors.AWG_MIN}, {conductors.AWG_MAX}], or cable.resistance_ohm")
    length = s.number("length_m", default=need)
    if s.has("conductor_mm2") and s.has("awg"):
        s.fail("awg", "give either cable.conductor_mm2 or cable.awg, not both", t["awg"])
    awg = s.integer("awg", default=None)
    area = s.number("conductor_mm2", default=need if awg is None else conductors.awg_area_mm2(awg))
    material = s.choice("material", default="copper")
    temp = s.number("temperature_c", default=20.0)
    temp_end = s.number("temperature_end_c", default=None)
    if r_given is None:
        r = float(conductors.loop_resistance_ohm(length, area, material, temp))
    else:
        r = r_given
    l_default = DEFAULT_INDUCTANCE_H_PER_M * length if length else 0.0
    inductance = s.number("inductance_h", default=l_default)
    s.finish()
    return CableSpec(resistance_ohm=r, material=material, temperature_c=temp, temperature_end_c=temp_end,
                     inductance_h=inductance, length_m=length, conductor_mm2=area, awg=awg)


def _load_end(src, t):
    s = Section(src, "load_end", t, KEYS["load_end"])
    c = s.number("capacitance_f")
    esr = s.number("esr_ohm", default=0.0)
    leak = s.number("leakage_ohm", default=None)
    s.finish()
    return LoadEndSpec(capacitance_f=c, esr_ohm=esr, leakage_ohm=leak)


def _sensing(src, t, supply):
    s = Section(src, "sensing", t, KEYS["sensing"])
    bits = s.integer("adc_bits", default=12)
    v_fs = s.number("v_full_scale_v", default=ADC_V_FS_FACTOR * supply.max_v, lo=supply.target_v)
    i_default = DEFAULT_I_FS_A if supply.current_limit_a is None else ADC_I_FS_FACTOR * supply.current_limit_a
    i_fs = s.number("i_full_scale_a", default=i_default)
    noise = s.number("noise_lsb_rms", default=0.5)
    offset = s.number("offset_lsb", default=0.0)
    gain = s.number("gain_error", default=0.0)
    i_gain = s.number("current_gain_error", default=0.0)
    i_offset = s.number("current_offset_lsb", default=0.0)
    rate = s.number("sample_rate_hz", default=32000.0)
    s.finish()
    return SensingSpec(v_full_scale_v=v_fs, i_full_scale_a=i_fs, adc_bits=bits, noise_lsb_rms=noise,
                       offset_lsb=offset, gain_error=gain, current_gain_error=i_gain,
                       current_offset_lsb=i_offset, sample_rate_hz=rate)


def _run(src, t):
    s = Section(src, "run", t, KEYS["run"])
    duration = s.number("duration_s", default=1.0)
    seed = s.integer("seed", default=0)
    start = s.choice("start", default="steady")
    s.finish()
    return RunSpec(duration_s=duration, seed=seed, start=start)


def _fault(src, n, t, run, sensing):
    s = Section(src, f"fault[{n}]", t, KEYS["fault"])
    kind = s.choice("kind")
    at = s.number("at_s", hi=run.duration_s)
    until = s.number("until_s", default=float("inf"), lo=at)
    code = channel = None
    if kind == "adc_stuck":
        code = s.integer("code", hi=2**sensing.adc_bits - 1)
        channel = s.choice("channel")
    s.finish(FAULT_KIND_KEYS[kind], why=f" for fault kind {show(kind)}")
    return FaultSpec(kind=kind, at_s=at, until_s=until, code=code, channel=channel)


def parse_scenario(data, source):
    """Build a Scenario from an already parsed TOML document.

    Parameters
    ----------
    data : dict
        Parsed TOML.
    source : str or pathlib.Path
        The file it came from (messages; ``load.profile_csv`` is relative to its folder).
    """
    src = str(source)
    for key, value in data.items():
        if key not in SECTIONS:
            raise InputError(f"{src}: {key}: unknown section; allowed: {', '.join(SECTIONS)}")
    for key in ("supply", "cable", "load_end", "load"):
        if key not in data:
            raise InputError(f"{src}: [{key}]: missing; required sections: supply, cable, load_end, load")
    supply = _supply(src, data["supply"])
    cable = _cable(src, data["cable"])
    load_end = _load_end(src, data["load_end"])
    run = _run(src, data.get("run", {}))
    load = parse_load(source, data["load"], supply.target_v, cable.resistance_ohm, run.duration_s)
    sensing = _sensing(src, data.get("sensing", {}), supply)
    algorithm = data.get("algorithm", {})
    if not isinstance(algorithm, dict):
        raise InputError(f"{src}: algorithm = {show(algorithm)}: must be a table [algorithm]")
    check_integers(algorithm, src)
    faults = data.get("fault", [])
    if not isinstance(faults, list):
        raise InputError(f"{src}: fault: must be an array of tables [[fault]]")
    faults = tuple(_fault(src, n, f, run, sensing) for n, f in enumerate(faults))
    spread = parse_spread(src, data.get("spread", {}))
    return Scenario(source=src, supply=supply, cable=cable, load_end=load_end, load=load, sensing=sensing,
                    run=run, faults=faults, algorithm=dict(algorithm), spread=spread)


def load_scenario(path):
    """Read and check one scenario file; raises InputError with a one-line message on bad input."""
    return parse_scenario(read_toml(path, "scenario"), Path(path))
