"""Hypothesis strategies that draw plants (supply, cable, capacitor, load, sensing) for property tests.

Import them to test a firmware port against the same plants the proof suite uses
(``harness/proof/PROOFS.md``); hypothesis is installed with linedrop.

A drawn :class:`DrawnPlant` is physical only: loop resistance 0.05-20 ohm, load capacitance
100 uF-47 mF with ESR, loop inductance 0-50 uH, supply bandwidth (or an ideal source), a load of
any kind (constant current, resistive, constant power, lamp) with steps, a 10-16 bit ADC with
noise, offset and gain error, and a cable temperature drift. :func:`design_scenario` turns it into
a :class:`harness.scenario.specs.Scenario` carrying the ``[algorithm]`` settings the design calculator
(:func:`harness.design.calculator.recommend`) picks for it. :func:`algorithm_overrides` draws the
algorithm's own settings anywhere in their documented ranges (``algo.config.SETTINGS``).

The only range the admitted plants leave out is the one DESIGN.md's sizing rules exclude: the
capacitor must be an AC short at a perturbation frequency that also sits a decade below the
supply bandwidth and at most fs/16 with fs <= MAX_RATE_HZ, i.e. ``f_lo = 10 / (2 pi R C)`` is at
most F_LO_MAX_HZ. :func:`unservable_plants` draws exactly those; the design calculator warns
about every one (tests/test_proof_strategies.py). The same rules keep the cable's wL below
R / design.L_SHORT at the perturbation, so admitted plants draw their inductance up to the value
that leaves an octave of band above f_lo (the calculator warns beyond it, tests/test_design.py).
"""
import math
from dataclasses import dataclass, replace

from hypothesis import strategies as st

from algo.config import SETTINGS
from harness.design import calculator as design
from harness.scenario.specs import (CableSpec, FaultSpec, LoadEndSpec, LoadSpec, RunSpec, Scenario, SensingSpec,
                           SupplySpec)

R_RANGE = (0.05, 20.0)          # loop resistance, ohm
C_RANGE = (100e-6, 47e-3)       # load capacitance, F
L_MAX_H = 50e-6                 # loop inductance, H
#: Smallest non-zero inductance drawn, H (a centimetre of wire; below it the plant is the L = 0
#: one, and denormal values such as 1e-274 H overflow the loop model's 1/L).
L_MIN_H = 1e-8
ADC_BITS = (10, 16)
#: Sample-rate ladder (Hz): the plant's ADC runs at one of these, so plants batch together.
RATES_HZ = tuple(1000.0 * 2 ** k for k in range(10))
MAX_RATE_HZ = RATES_HZ[-1]
#: Highest f_lo = AC_SHORT / (2 pi R C) the sizing rules serve: f_lo <= fs / 32 at the top rate.
F_LO_MAX_HZ = MAX_RATE_HZ / 32
F_LO_MIN_HZ = design.AC_SHORT / (2 * math.pi * R_RANGE[1] * C_RANGE[1])
#: Highest perturbation frequency the calculator can reach at all: the top rate, MIN_PERIOD
#: samples per period. Plants whose f_lo is above it (with an octave's room) are unservable.
F_REACH_HZ = MAX_RATE_HZ / design.MIN_PERIOD
#: Largest cable drop as a share of target_v per load kind; constant power stops at the design
#: calculator's CP_DROP_SHARE warning (a sizing rule, harness.design.report).
DROP_MAX = {"constant_current": 0.5, "resistive": 0.5, "constant_power": 0.2, "lamp": 0.5}
CURRENT_RANGE_A = (0.01, 100.0)
LOAD_KINDS = tuple(DROP_MAX)
#: Lamp filament thermal time constants drawn, s (miniature to mains-rated small lamps; from memory).
LAMP_TAU_RANGE_S = (1e-3, 50e-3)


@dataclass(frozen=True)
class DrawnPlant:
    """One physical plant; SI units (ohm, F, H, Hz, V, A, degC).

    ``load_current_a`` is the load's current at target_v; ``load_steps`` are ``(window, factor)``
    pairs: at that (fractional) measurement window the load's current becomes ``factor`` times
    ``load_current_a`` (converted to the kind's own quantity by :func:`load_spec`).
    """
    r_cable_ohm: float
    capacitance_f: float
    esr_ohm: float
    inductance_h: float
    bandwidth_hz: float          # 0: ideal voltage source
    target_v: float
    max_v: float
    load_kind: str
    load_current_a: float
    load_steps: tuple
    i_full_scale_a: float
    adc_bits: int
    dac_bits: int
    noise_lsb_rms: float
    offset_lsb: float
    gain_error: float
    temperature_c: float
    temperature_end_c: float     # equal to temperature_c: no drift
    sample_rate_hz: float
    lamp_tau_s: float = 0.05     # lamp filament thermal time constant, s (lamps only)

    @property
    def f_lo_hz(self):
        """Lowest perturbation frequency at which the capacitor is an AC short (design.AC_SHORT)."""
        return design.AC_SHORT / (2 * math.pi * self.r_cable_ohm * self.capacitance_f)


def _log(lo, hi):
    return st.floats(math.log(lo), math.log(hi)).map(lambda e: min(hi, max(lo, math.exp(e))))


def rate_for(f_lo_hz, bandwidth_hz=0.0):
    """Ladder sample rate for a plant: about 64 f_lo, at most 256 times the band's top."""
    want = 64.0 * f_lo_hz
    if bandwidth_hz > 0:
        want = min(want, 25.6 * bandwidth_hz)   # 256 samples per period at a tenth of it
    return min(RATES_HZ, key=lambda r: abs(math.log(r / want)))


@st.composite
def plants(draw, f_lo_hz=None, kinds=LOAD_KINDS, max_steps=2, steps_after=0.0, servable=True, min_steps=0):
    """A :class:`DrawnPlant`; ``f_lo_hz`` (Hz) pins the AC-short corner to within a factor 1.4.

    Parameters
    ----------
    f_lo_hz : float, optional
        Batch corner (see :func:`plant_batches`); drawn log-uniformly when omitted.
    kinds : sequence of str
        Load kinds to draw from.
    max_steps : int
        Most load steps (lamps take none: a lamp is switched, not stepped).
    min_steps : int
        Fewest load steps of a plant that is not a lamp (the transient property asks for one).
    steps_after : float
        Earliest window of a load step.
    servable : bool
        False draws f_lo above F_LO_MAX_HZ (outside the sizing rules).
    """
    if servable:
        corner = f_lo_hz if f_lo_hz is not None else draw(_log(F_LO_MIN_HZ, F_LO_MAX_HZ))
        f_lo = corner * draw(st.floats(0.7, 1.4))
        f_lo = min(max(f_lo, F_LO_MIN_HZ), F_LO_MAX_HZ)
    else:
        f_lo = draw(_log(2 * F_REACH_HZ, design.AC_SHORT / (2 * math.pi * R_RANGE[0] * C_RANGE[0])))
    rc = design.AC_SHORT / (2 * math.pi * f_lo)
    r_lo, r_hi = max(R_RANGE[0], rc / C_RANGE[1]), min(R_RANGE[1], rc / C_RANGE[0])
    r = draw(_log(r_lo, r_hi))
    c = min(max(rc / r, C_RANGE[0]), C_RANGE[1])
    esr = draw(st.one_of(st.just(0.0), _log(1e-3, max(1e-3, min(1.0, r)))))
    f_lo = design.AC_SHORT / (2 * math.pi * r * c)
    # The sizing rules keep wL below R / L_SHORT at the perturbation: leave the band an octave.
    l_top = min(L_MAX_H, r / (design.L_SHORT * 2 * math.pi * 2 * f_lo)) if servable else L_MAX_H
    inductance = draw(st.one_of(st.just(0.0), _log(L_MIN_H, l_top))) if l_top > L_MIN_H else 0.0
    bw = draw(st.one_of(st.just(0.0), _log(20.0 * f_lo, max(20.0 * f_lo, 2e5))))
    kind = draw(st.sampled_from(kinds))
    target = draw(st.floats(5.0, 48.0))
    drop = draw(_log(0.005, DROP_MAX[kind]))
    current = min(max(drop * target / r, CURRENT_RANGE_A[0]), CURRENT_RANGE_A[1])
    steps = ()
    if kind != "lamp" and max_steps:
        top = DROP_MAX[kind] * target / (r * current)
        raw = draw(st.lists(st.tuples(st.floats(steps_after, steps_after + 20.0), st.floats(0.0, 1.5)),
                            min_size=min(min_steps, max_steps), max_size=max_steps))
        steps = tuple(sorted((round(w, 3), min(f, top) if f >= 0.05 else 0.0) for w, f in raw))
        steps = tuple(s for n, s in enumerate(steps) if n == 0 or s[0] > steps[n - 1][0])
    i_max = current * max([1.0] + [f for _, f in steps])
    needed = (r + esr) * i_max
    max_v = target + needed * draw(st.floats(1.3, 2.0)) + 0.02 * target
    t0 = draw(st.floats(-20.0, 60.0))
    t1 = draw(st.one_of(st.just(t0), st.floats(t0 - 20.0, t0 + 40.0)))
    return DrawnPlant(
        r_cable_ohm=r, capacitance_f=c, esr_ohm=esr, inductance_h=inductance, bandwidth_hz=bw,
        target_v=target, max_v=max_v, load_kind=kind, load_current_a=current, load_steps=steps,
        i_full_scale_a=i_max * draw(st.floats(1.5, 4.0)), adc_bits=draw(st.integers(*ADC_BITS)),
        dac_bits=draw(st.integers(12, 16)), noise_lsb_rms=draw(st.floats(0.0, 1.5)),
        offset_lsb=draw(st.floats(-2.0, 2.0)), gain_error=draw(st.floats(-0.01, 0.01)),
        temperature_c=t0, temperature_end_c=t1, sample_rate_hz=rate_for(f_lo, bw),
        lamp_tau_s=draw(_log(LAMP_TAU_RANGE_S[0], LAMP_TAU_RANGE_S[1])))


def scale_load(plant, k):
    """``plant`` with its load current ``k`` times larger, and with it the part of max_v above
    target that covers the drop (the drawn 1.3-2 times, less the 2 % of target margin) and the
    current ADC's full scale: the same plant with a ``k`` times larger drop."""
    margin = 0.02 * plant.target_v
    return replace(plant, load_current_a=plant.load_current_a * k, i_full_scale_a=plant.i_full_scale_a * k,
                   max_v=plant.target_v + (plant.max_v - plant.target_v - margin) * k + margin)


def load_room(plant):
    """Largest factor :func:`scale_load` may apply while the heaviest load the plant reaches keeps
    within its kind's DROP_MAX and CURRENT_RANGE_A."""
    i_max = plant.load_current_a * max([1.0] + [f for _, f in plant.load_steps])
    return max(1.0, min(DROP_MAX[plant.load_kind] * plant.target_v / (plant.r_cable_ohm * i_max),
                        CURRENT_RANGE_A[1] / i_max))


def unservable_plants():
    """Plants whose capacitor cannot be an AC short at any frequency the sizing rules allow."""
    return plants(servable=False, max_steps=0)


@st.composite
def plant_batches(draw, size=8, **kw):
    """``size`` plants sharing one AC-short corner (so, mostly, one sample rate): one simulate call."""
    corner = draw(_log(F_LO_MIN_HZ, F_LO_MAX_HZ))
    return draw(st.lists(plants(f_lo_hz=corner, **kw), min_size=size, max_size=size))


def load_spec(plant, steps_s=()):
    """LoadSpec of the plant's load; ``steps_s`` are ``(time_s, current factor)`` pairs."""
    v, i = plant.target_v, plant.load_current_a
    cutoff = 0.25 * v
    if plant.load_kind == "lamp":
        return LoadSpec("lamp", value=v * i, rated_v=v, thermal_tau_s=plant.lamp_tau_s)
    if plant.load_kind == "constant_current":
        conv = lambda f: i * f                                   # noqa: E731
    elif plant.load_kind == "resistive":
        conv = lambda f: v / (i * f) if f > 0 else 1e6           # noqa: E731  (disconnected)
    else:
        conv = lambda f: v * i * f                               # noqa: E731
    steps = tuple((t, conv(f)) for t, f in steps_s)
    return LoadSpec(plant.load_kind, value=conv(1.0), steps=steps,
                    cutoff_v=0.0 if plant.load_kind == "resistive" else cutoff)


def base_scenario(plant, duration_s=1.0, steps_s=(), faults=(), seed=0, start="steady", rate_hz=None):
    """The plant as a Scenario with an empty [algorithm] table (all SI units)."""
    max_v = plant.max_v
    return Scenario(
        source="drawn plant",
        supply=SupplySpec(target_v=plant.target_v, max_v=max_v, loop_bandwidth_hz=plant.bandwidth_hz,
                          dac_bits=plant.dac_bits, dac_full_scale_v=1.1 * max_v),
        cable=CableSpec(resistance_ohm=plant.r_cable_ohm, temperature_c=plant.temperature_c,
                        temperature_end_c=(None if plant.temperature_end_c == plant.temperature_c
                                           else plant.temperature_end_c),
                        inductance_h=plant.inductance_h),
        load_end=LoadEndSpec(capacitance_f=plant.capacitance_f, esr_ohm=plant.esr_ohm),
        load=load_spec(plant, steps_s),
        sensing=SensingSpec(v_full_scale_v=1.25 * max_v, i_full_scale_a=plant.i_full_scale_a,
                            adc_bits=plant.adc_bits, noise_lsb_rms=plant.noise_lsb_rms,
                            offset_lsb=plant.offset_lsb, gain_error=plant.gain_error,
                            sample_rate_hz=rate_hz or plant.sample_rate_hz),
        run=RunSpec(duration_s=duration_s, seed=seed, start=start),
        faults=tuple(faults))


def window_s(scenario):
    """Measurement window (s) of a scenario whose [algorithm] table is filled."""
    a = scenario.algorithm
    return a["period_samples"] * a["periods_per_window"] / scenario.sensing.sample_rate_hz


def design_scenario(plant, windows, faults=(), seed=0, start="steady", overrides=None, extra_s=0.0):
    """Scenario of ``plant`` with the design calculator's [algorithm] settings, run for ``windows``.

    ``extra_s`` (s) is added to the run and to every event time (windows are counted after it):
    the proof suite lets a lamp's filament settle that long first.

    Load steps (``plant.load_steps``) and ``faults`` (``(kind, at_window, until_window)``, until
    may be ``math.inf``) are placed in measurement windows of the recommended configuration.
    ``overrides`` replace recommended settings. Returns the Scenario; its
    ``sensing.sample_rate_hz`` is the rate the calculator asks for.
    """
    probe = base_scenario(plant, steps_s=tuple((0.5, f) for _, f in plant.load_steps))
    rec, fs = design.recommend(probe)
    rec = dict(rec, **(overrides or {}))
    win = rec["period_samples"] * rec["periods_per_window"] / fs
    steps = tuple((extra_s + w * win, f) for w, f in plant.load_steps if w < windows)
    fs_specs = tuple(FaultSpec(kind, extra_s + at * win, extra_s + until * win) for kind, at, until in faults)
    sc = base_scenario(plant, extra_s + windows * win, steps, fs_specs, seed, start, rate_hz=fs)
    return replace(sc, algorithm=rec)


def algorithm_overrides(scenario):
    """Algorithm settings drawn anywhere in their documented ranges (SETTINGS), for ``scenario``.

    Window length stays within a factor of 4 of the recommended one so a batch still runs for
    a bounded time; settings fixed by the plant ([supply], [sensing]) are not drawn.
    """
    a = scenario.algorithm
    n_win = a["period_samples"] * a["periods_per_window"]
    per = st.sampled_from([p for p in (4, 8, 16, 32, 64, 128, 256) if p <= n_win * 4])

    def _set(key):
        s = SETTINGS[key]
        if s.kind is int:
            return st.integers(int(s.lo), int(s.hi))
        return st.one_of(st.sampled_from([s.lo, s.hi]), st.floats(s.lo, s.hi))

    @st.composite
    def draw_it(draw):
        out = {}
        period = draw(per)
        ppw_top = max(1, min(64, 4 * n_win // period))
        out["period_samples"] = period
        out["periods_per_window"] = draw(st.sampled_from([q for q in (1, 2, 4, 8, 16, 32, 64) if q <= ppw_top]))
        for key in ("compensation", "r_filter_shift", "corr_frac_bits", "capacitance_f", "kp_max",
                    "adc_phase_samples", "step_rel_shift", "fault_windows", "table_bits",
                    "r_frac_bits", "pert_fraction"):
            if draw(st.booleans()):
                out[key] = draw(_set(key))
        if draw(st.booleans()):     # at least one period (AlgoConfig's rule), up to 64
            period_ms = 1e3 * period / scenario.sensing.sample_rate_hz
            out["loop_tau_ms"] = period_ms * draw(st.floats(1.0, 64.0))
        out["fault_windows"] = min(out.get("fault_windows", a["fault_windows"]), 64)
        for key, top in (("r_max_ohm", 4 * a["r_max_ohm"]), ("x_max_ohm", 4 * a["x_max_ohm"]),
                         ("r_step_max_ohm", 4 * a["r_max_ohm"]), ("corr_max_v", 1000.0),
                         ("esr_allowance_ohm", a["r_max_ohm"])):
            if draw(st.booleans()):
                out[key] = draw(st.floats(0.0 if key != "r_max_ohm" else 0.01, top))
        return out

    return draw_it()
