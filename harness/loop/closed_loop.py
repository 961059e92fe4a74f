"""The closed loop: plant, ADC, algorithm (or a baseline) and command DAC, B scenarios at once.

:func:`drive` is the only place the plant is stepped; :func:`simulate` (recorded runs),
:func:`stream` (the same runs handed on in chunks, for runs too long to hold),
:class:`harness.loop.lockstep.LockstepLoop` (implementations side by side) and the word-length
tuner (:func:`harness.tune.evaluate.evaluate`) are modes of it.
"""
from dataclasses import dataclass

import numpy as np

from harness.loop import backends, compiled
from harness.scenario.algo_setup import algo_config
from harness.loop.baselines import DifferenceEstimator, FixedCompensation, NoCompensation, RemoteSense
from harness.plant.rig import build_rig
from harness.scenario.conductors import temperature_scale

COMPENSATIONS = ("linedrop", "none", "fixed", "difference", "sense")
CHANNELS = ("v_supply_v", "i_supply_a", "v_load_v", "command_v", "r_estimate_ohm", "correction_v")
#: Integer channels recorded only on request (exact in float32): the ADC codes the algorithm
#: took at each sample and the command code it returned for the next one.
CODE_CHANNELS = ("adc_v_code", "adc_i_code", "command_code")
#: The algorithm's window counter and last window's outcome (algo.state STATUS_*), recorded by
#: default for linedrop's algorithm (the baselines have no windows): metrics counts outcomes.
OUTCOME_CHANNELS = ("windows", "status", "kp_off")
#: The progress bar's settings (tqdm): on stderr when it is a terminal; with the run's length
#: known, tqdm shows the samples done, the time elapsed and left, and the rate.
PROGRESS = {"unit": "sample", "unit_scale": True, "leave": False, "disable": None, "mininterval": 0.5}
#: Samples per call of the compiled loop between progress-bar updates.
PROGRESS_STEP = 32768


@dataclass
class Run:
    """Recorded closed-loop run: ``t_s`` (T,), each channel (T, B) float32, and the inputs."""
    t_s: np.ndarray
    channels: dict
    scenarios: list
    cfgs: list
    r_cable_ohm: np.ndarray   # true loop resistance at the end of the run, (B,)
    backend: str
    compensation: str
    #: Per scenario, what the report shades (harness.loop.spans.shading's dict) when the
    #: channels are a decimated copy (harness.loop.decimate); None: found from the channels.
    shading: list = None
    #: Which plant ran: "compiled", or "numpy" with the reason the compiled loop did not.
    plant_path: str = "numpy"


def _units(compensator, cfgs, fixed_point):
    """Per-instance factors turning state r_est into ohm and corr into volts."""
    r_unit = np.array([c.v_full_scale_v / c.i_full_scale_a for c in cfgs])
    corr_unit = np.array([c.dac_full_scale_v / (1 << c.dac_bits) for c in cfgs])
    if fixed_point:
        r_unit = r_unit / np.array([1 << c.r_frac_bits for c in cfgs])
        corr_unit = corr_unit / np.array([1 << c.corr_frac_bits for c in cfgs])
    return r_unit, corr_unit


def _r_at_20c(scenario):
    """Loop resistance the scenario's cable has at 20 degC (what a fixed setting was tuned to)."""
    c = scenario.cable
    return c.resistance_ohm * temperature_scale(c.material, c.temperature_c, 20.0)


def make_compensator(compensation, backend, cfgs, scenarios):
    """The algorithm (on ``backend``) or a baseline, for ``len(cfgs)`` instances."""
    if compensation == "linedrop":
        return backends.make(backend, cfgs), backend != "ideal"
    if compensation == "none":
        return NoCompensation(cfgs), False
    if compensation == "fixed":
        return FixedCompensation(cfgs, [_r_at_20c(s) for s in scenarios]), False
    if compensation == "difference":
        return DifferenceEstimator(cfgs), False
    if compensation == "sense":
        return RemoteSense(cfgs, scenarios), False
    raise ValueError(f"unknown compensation {compensation!r}; choose from {COMPENSATIONS}")


def _value(name, obs, command_v, v_code, i_code, cmd):
    """One recorded channel's values at this sample."""
    if name == "v_load_v":
        return obs.v_load_v
    if name == "v_supply_v":
        return obs.v_supply_v
    if name == "i_supply_a":
        return obs.i_supply_a
    if name == "command_v":
        return command_v
    if name == "adc_v_code":
        return v_code
    if name == "adc_i_code":
        return i_code
    return cmd  # command_code


def drive(rig, step, cmd, n_t, v_at_load=False):
    """Run ``rig`` in closed loop for ``n_t`` samples; yields after each sample.

    Each sample the command codes returned by the previous one, clamped to the DAC's codes,
    set the supply (held for the whole sample), the plant advances one sample, the ADC converts
    its supply-side voltage and current, and ``step(v_code, i_code)`` returns the next commands.

    Parameters
    ----------
    rig : harness.plant.rig.Rig
        Reset by the caller.
    step : callable
        ``step(v_code, i_code) -> cmd``: int arrays (B,) in, command codes (B,) out.
    cmd : array_like, shape (B,)
        Command codes in force at the first sample (the algorithm's state after init).
    n_t : int
    v_at_load : bool
        The voltage ADC reads the load end (the ``sense`` baseline's wires).

    Yields
    ------
    (k, command_v, obs, v_code, i_code, cmd)
        Sample index from 0, the supply command applied (V, a buffer reused every sample),
        the plant's Observation at the sample's end, the ADC codes and the next commands.
    """
    v_per_code = rig.dac.v_per_code
    code_max = rig.dac.code_max.astype(np.float64)
    command_v = np.empty(len(rig.scenarios))
    cmd = np.array(cmd, dtype=np.float64)
    for k in range(n_t):
        np.multiply(np.minimum(np.maximum(cmd, 0.0), code_max), v_per_code, out=command_v)
        obs = rig.plant.step(command_v)
        v_code, i_code = rig.sample(obs, v_at_load)
        cmd = step(v_code, i_code)
        yield k, command_v, obs, v_code, i_code, cmd


def simulate(scenarios, backend="model", compensation="linedrop", overrides=None, progress=False,
             channels=CHANNELS + OUTCOME_CHANNELS, plant="auto"):
    """Run scenarios (same sample rate, duration and start) in closed loop.

    Parameters
    ----------
    scenarios : list of harness.scenario.specs.Scenario
    backend : {"model", "c", "ideal"}
    compensation : {"linedrop", "none", "fixed", "difference", "sense"}
    overrides : dict, optional
        Algorithm settings that replace the scenario's own.
    progress : bool
        Show a progress bar.
    channels : sequence of str
        Channels to record: any of CHANNELS and CODE_CHANNELS, and OUTCOME_CHANNELS (kept
        only for linedrop's algorithm). By default CHANNELS and OUTCOME_CHANNELS.
    plant : {"auto", "numpy", "compiled"}
        The numpy plant (the reference), the compiled loop (harness.loop.compiled; an error
        where it cannot run the combination) or the compiled loop where it can (default).
    """
    kept = {}

    def keep(k0, t_s, rec):
        kept.update(t_s=t_s, channels=rec)

    run = stream(scenarios, keep, backend, compensation, overrides, progress, channels, plant=plant)
    run.t_s, run.channels = kept["t_s"], kept["channels"]
    return run


def stream(scenarios, sink, backend="model", compensation="linedrop", overrides=None, progress=False,
           channels=CHANNELS + OUTCOME_CHANNELS, chunk_samples=None, plant="auto"):
    """Run scenarios in closed loop as :func:`simulate` does, handing the samples on in chunks.

    Memory stays bounded by ``chunk_samples`` whatever the run's length; the samples are the
    same, bit for bit, whatever the chunk size.

    Parameters
    ----------
    sink : callable
        ``sink(k0, t_s, channels)`` after every ``chunk_samples`` samples and at the end: the
        index of the chunk's first sample, its times (s, (n,)) and ``{name: (n, B) float32}``.
        The arrays are reused for the next chunk, so a sink copies what it keeps.
    chunk_samples : int, optional
        Samples per chunk (default: the whole run in one chunk).
    Other parameters as :func:`simulate`.

    Returns
    -------
    Run
        Everything but the samples: ``t_s`` and ``channels`` are left empty.
    """
    durations = {s.run.duration_s for s in scenarios}
    if len(durations) != 1:
        raise ValueError(f"scenarios in one batch must share run.duration_s, got {sorted(durations)}")
    reason = None if plant == "numpy" else compiled.why_not(backend, compensation)
    if plant not in compiled.PLANT_CHOICES or (plant == "compiled" and reason):
        raise ValueError(f"plant {plant!r}: {reason or 'choose from ' + ', '.join(compiled.PLANT_CHOICES)}")
    cfgs = _configs(scenarios, overrides)
    rig = build_rig(scenarios)
    n_t = int(round(durations.pop() * cfgs[0].sample_rate_hz))
    rig.adc.plan(n_t)    # the first noise block is drawn on the worker while the rest is set up
    try:
        comp, fixed_point = make_compensator(compensation, backend, cfgs, scenarios)
        obs = rig.reset()
    except BaseException:
        rig.adc.close()
        raise
    r_unit, corr_unit = _units(comp, cfgs, fixed_point)
    chunk = n_t if chunk_samples is None else max(1, min(int(chunk_samples), n_t))
    if compensation != "linedrop":
        channels = [n for n in channels if n not in OUTCOME_CHANNELS]
    rec = {name: np.empty((chunk, len(scenarios)), dtype=np.float32) for name in channels}
    if plant != "numpy" and reason is None:
        loop = compiled.CompiledLoop(rig, comp, r_unit, corr_unit)
        _stream_compiled(loop, rec, sink, n_t, chunk, cfgs[0].sample_rate_hz, progress, compensation)
        rig.adc.close()
        return Run(t_s=np.empty(0), channels={}, scenarios=list(scenarios), cfgs=cfgs,
                   r_cable_ohm=np.asarray(loop.r_cable_ohm(), dtype=float).copy(), backend=backend,
                   compensation=compensation, plant_path="compiled")
    samples = drive(rig, comp.step, comp.field("cmd"), n_t, v_at_load=compensation == "sense")
    if progress:
        from tqdm import tqdm
        samples = tqdm(samples, total=n_t, desc=f"simulate ({compensation})", **PROGRESS)
    plain = [n for n in channels if n not in ("r_estimate_ohm", "correction_v") + OUTCOME_CHANNELS]
    outcome = {name: rec[name] for name in channels if name in OUTCOME_CHANNELS}
    rows = {name: rec[name] for name in plain}
    r_rec = rec.get("r_estimate_ohm")
    c_rec = rec.get("correction_v")
    for k, command_v, obs, v_code, i_code, cmd in samples:
        t = k % chunk
        for name, dst in rows.items():
            dst[t] = _value(name, obs, command_v, v_code, i_code, cmd)
        if r_rec is not None:
            np.multiply(comp.field("r_est"), r_unit, out=r_rec[t], casting="unsafe")
        if c_rec is not None:
            np.multiply(comp.field("corr"), corr_unit, out=c_rec[t], casting="unsafe")
        for name, dst in outcome.items():
            dst[t] = comp.field(name)
        if t == chunk - 1 or k == n_t - 1:
            k0 = k - t
            sink(k0, sample_times(k0, t + 1, cfgs[0].sample_rate_hz),
                 {name: a if t == chunk - 1 else a[:t + 1] for name, a in rec.items()})
    if n_t == 0:
        sink(0, sample_times(0, 0, cfgs[0].sample_rate_hz), {name: a[:0] for name, a in rec.items()})
    rig.adc.close()
    return Run(t_s=np.empty(0), channels={}, scenarios=list(scenarios), cfgs=cfgs,
               r_cable_ohm=np.asarray(obs.r_cable_ohm, dtype=float).copy(), backend=backend,
               compensation=compensation, plant_path="numpy" if plant == "numpy" else f"numpy ({reason})")


def _configs(scenarios, overrides):
    """``algo_config`` of each scenario, read once for a scenario given more than once."""
    done = {}
    return [done[id(s)] if id(s) in done else done.setdefault(id(s), algo_config(s, overrides))
            for s in scenarios]


def _stream_compiled(loop, rec, sink, n_t, chunk, rate_hz, progress, compensation):
    """:func:`stream`'s loop on the compiled plant: chunks of ``chunk`` samples into ``rec``."""
    bar = None
    if progress:
        from tqdm import tqdm
        bar = tqdm(total=n_t, desc=f"simulate ({compensation})", **PROGRESS)
    for k0 in range(0, n_t, chunk):
        n = min(chunk, n_t - k0)
        for j in range(0, n, PROGRESS_STEP):
            loop.run(k0 + j, min(PROGRESS_STEP, n - j), rec, j)
            if bar is not None:
                bar.update(min(PROGRESS_STEP, n - j))
        sink(k0, sample_times(k0, n, rate_hz), {name: a if n == chunk else a[:n] for name, a in rec.items()})
    if n_t == 0:
        sink(0, sample_times(0, 0, rate_hz), {name: a[:0] for name, a in rec.items()})
    if bar is not None:
        bar.close()


def sample_times(k0, n, sample_rate_hz):
    """Times (s) of samples ``k0 .. k0 + n - 1``: sample k is recorded at the end of its interval."""
    return (np.arange(k0, k0 + n) + 1) / sample_rate_hz
