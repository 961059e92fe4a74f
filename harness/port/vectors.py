"""Golden test vectors: ADC code sequences from closed-loop and open-loop runs, with the model's answer.

Each vector is a named sequence of ADC code pairs, fed to a fresh
``ld_init`` state, and the fixed-point model's command and every state field
after each sample. Closed-loop vectors come from the scenario and from
variants derived from it (no load step, a load step, one of each fault);
open-loop ones drive the ADC inputs to extreme codes and shapes the plant
never produces; targeted open-loop ones (harness/port/targeted.py) reach the paths the others
reach rarely or never. Everything is a function of the scenario and one seed.
"""
from dataclasses import dataclass, replace
from typing import Optional

import numpy as np

from algo.params import derive
from harness.scenario.algo_setup import algo_config
from harness.loop.closed_loop import simulate
from harness.loop.replay import model_trace
from harness.scenario.specs import FAULT_KINDS, FaultSpec
from harness.scenario.variants import with_load_step
from harness.port.targeted import TARGETED, targeted

#: Part of the run a derived fault is active, as fractions of the duration: the vector shows
#: normal operation, the fault, and the recovery after it.
FAULT_SPAN = (0.4, 0.7)
#: Windows in the long run when no length is given (slow drift: cable warming, estimate creep).
LONG_WINDOWS = 250
#: Windows in each segment of the open-loop extreme-code vector.
SEGMENT_WINDOWS = 2
#: Stuck-ADC faults freeze a channel at this fraction of its full scale.
STUCK_FRACTION = 0.25
#: Largest code an ld_step input can carry (uint16); the model clamps it to adc_max.
U16_MAX = 0xFFFF


@dataclass
class Vector:
    """One vector: ``name`` (file-name part), a one-line description and the ADC codes (int arrays).

    ``trace`` is the model's answer (model_trace); ``recorded_cmd`` the commands a
    closed loop recorded, kept only to check them against the trace.
    """
    name: str
    description: str
    adc_v: np.ndarray
    adc_i: np.ndarray
    trace: Optional[np.ndarray] = None
    recorded_cmd: Optional[np.ndarray] = None


def _fault(scenario, duration_s, kind, channel=None):
    at, until = (round(f * duration_s, 9) for f in FAULT_SPAN)
    code = None
    if kind == "adc_stuck":
        code = int(STUCK_FRACTION * (1 << scenario.sensing.adc_bits))
    spec = FaultSpec(kind=kind, at_s=at, until_s=until, code=code, channel=channel)
    what = kind if channel is None else f"{kind} ({channel} channel at code {code})"
    return spec, f"{what} from {at:g} s to {until:g} s"


def closed_loop_variants(scenario, duration_s):
    """Named scenario variants for the closed-loop vectors, each ``(name, description, Scenario)``.

    ``normal`` drops load steps and faults; ``load_step`` adds or keeps a step;
    each fault kind gets its own variant on top of ``normal`` (``adc_stuck`` one
    per channel).
    """
    base = replace(scenario, run=replace(scenario.run, duration_s=duration_s), faults=())
    normal = replace(base, load=replace(base.load, steps=()))
    stepped, how = with_load_step(base, duration_s)
    out = [("normal", "steady load, no faults", normal), ("load_step", how, stepped)]
    for name, kind, channel in _fault_variants():
        spec, text = _fault(normal, duration_s, kind, channel)
        out.append((name, text, replace(normal, faults=(spec,))))
    return out


def _fault_variants():
    """``(vector name, fault kind, channel)`` of each fault variant, in order."""
    for kind in FAULT_KINDS:
        for channel in (("i", "v") if kind == "adc_stuck" else (None,)):
            yield "fault_" + kind + ("" if channel is None else "_" + channel), kind, channel


def vector_names():
    """Names of every vector generate() returns, in order (known before any run)."""
    return [*(n for n, _, _ in TARGETED), "normal", "load_step", *(n for n, _, _ in _fault_variants()),
            "long", "extreme_codes"]


def long_variant(scenario, long_s):
    """The scenario as given (steps kept, faults dropped) over ``long_s`` seconds."""
    run = replace(scenario.run, duration_s=long_s)
    return ("long", f"the scenario as given over {long_s:g} s (slow drift)",
            replace(scenario, run=run, faults=()))


def long_duration(cfg, windows=LONG_WINDOWS):
    """Seconds covering ``windows`` measurement windows at the config's sample rate."""
    return windows * cfg.window_samples / cfg.sample_rate_hz


def run_closed_loop(variants, overrides=None):
    """Simulate ``(name, description, Scenario)`` variants on the model; return a Vector each.

    Variants sharing run length and start run as one lockstep batch. The
    command codes recorded in the loop are checked against a fresh model
    replay, so a vector is exactly what ld_step returns for its inputs.
    """
    groups = {}
    for k, (_, _, sc) in enumerate(variants):
        groups.setdefault((sc.run.duration_s, sc.run.start), []).append(k)
    out = [None] * len(variants)
    for members in groups.values():
        run = simulate([variants[k][2] for k in members], backend="model", overrides=overrides,
                       channels=("adc_v_code", "adc_i_code", "command_code"))
        for col, k in enumerate(members):
            name, text, _ = variants[k]
            ch = {c: run.channels[c][:, col].astype(np.int64) for c in run.channels}
            out[k] = Vector(name, text, ch["adc_v_code"], ch["adc_i_code"], recorded_cmd=ch["command_code"])
    return out


def extreme_codes(cfg, seed):
    """Open-loop vector of extreme inputs, SEGMENT_WINDOWS windows per segment.

    Segments: all zero; full scale; 65535 (clamped to adc_max); one channel
    high and the other low, both ways; samples alternating 0 / 65535; a
    current sine one code inside full scale (a code at a rail makes the window
    clipped) with the voltage in phase (estimate above r_max), in quadrature
    (reactive) and in antiphase (negative real part); a small in-phase sine whose current level
    jumps inside a window (load-step detector); seeded uniform codes over the
    whole uint16 range.
    """
    n = SEGMENT_WINDOWS * cfg.window_samples
    top = (1 << cfg.adc_bits) - 1
    mid, amp = top // 2, top // 2 - 1
    t = np.arange(n)
    phase = 2 * np.pi * t / cfg.period_samples
    sine = np.rint(mid + amp * np.sin(phase)).astype(np.int64)
    cosine = np.rint(mid + amp * np.cos(phase)).astype(np.int64)
    small = np.rint(amp / 4 * np.sin(phase)).astype(np.int64)
    jump = np.where(t < n // 2 + cfg.window_samples // 4, top // 4, top // 2) + small
    alternate = np.where(t % 2 == 0, 0, U16_MAX)
    rng = np.random.default_rng(seed)
    full = lambda c: np.full(n, c, dtype=np.int64)  # noqa: E731
    segments = [(full(0), full(0)), (full(top), full(top)), (full(U16_MAX), full(U16_MAX)),
                (full(U16_MAX), full(0)), (full(0), full(U16_MAX)), (alternate, alternate[::-1].copy()),
                (sine, sine), (cosine, sine), (2 * mid - sine, sine), (mid + small, jump),
                (rng.integers(0, U16_MAX + 1, n), rng.integers(0, U16_MAX + 1, n))]
    adc_v = np.concatenate([v for v, _ in segments])
    adc_i = np.concatenate([i for _, i in segments])
    return Vector("extreme_codes", "open loop: zero, full scale, 65535 (clamped), crossed extremes, "
                  "alternating, in-phase, quadrature and antiphase near-full-scale sines, a current jump, "
                  "seeded uniform codes",
                  adc_v, adc_i)


def generate(scenario, duration_s=None, long_s=None, seed=None, overrides=None):
    """Every vector of a scenario.

    Parameters
    ----------
    scenario : harness.scenario.specs.Scenario
    duration_s : float, optional
        Length of each closed-loop run, s (default: the scenario's run.duration_s).
    long_s : float, optional
        Length of the long run, s (default: LONG_WINDOWS windows, at least ``duration_s``).
    seed : int, optional
        Generator seed: ADC noise of every run and the random segment (default: run.seed).
    overrides : dict, optional
        Algorithm settings replacing the scenario's own.

    Returns
    -------
    cfg : algo.config.AlgoConfig
    seed : int
    vectors : list of Vector, each with ``trace`` (model_trace) attached.
    """
    seed = scenario.run.seed if seed is None else seed
    scenario = replace(scenario, run=replace(scenario.run, seed=seed))
    cfg = algo_config(scenario, overrides)
    duration_s = scenario.run.duration_s if duration_s is None else duration_s
    long_s = max(duration_s, long_duration(cfg)) if long_s is None else long_s
    variants = closed_loop_variants(scenario, duration_s) + [long_variant(scenario, long_s)]
    params = derive(cfg)
    # The short targeted vectors come first: a port that breaks what they aim at fails early.
    vectors = [Vector(name, text, v, i) for name, text, v, i in targeted(params)]
    vectors += run_closed_loop(variants, overrides) + [extreme_codes(cfg, seed)]
    for vec in vectors:
        vec.trace = model_trace(params, vec.adc_v, vec.adc_i)
        if vec.recorded_cmd is not None and not np.array_equal(vec.recorded_cmd, vec.trace[:, 0]):
            raise AssertionError(f"vector {vec.name}: closed-loop commands differ from the model replay")
    return cfg, seed, vectors
