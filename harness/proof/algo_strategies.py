"""Hypothesis strategies for algorithm configs and adversarial ADC code sequences.

``configs`` draws any valid :class:`algo.config.AlgoConfig` within ``SETTINGS``
ranges (log-uniform across decades, plus the range ends and the default) and
its derived :class:`algo.params.Params`; configs whose range analysis fails are
filtered with ``assume``. ``realistic_configs`` stays near what a supply
designer would pick, so that ``realistic_sequences`` (a sine-modulated V/I
pair at the perturbation frequency with load steps) produces VALID windows and
moves the estimate and the correction. ``sequences`` mixes every kind.
"""
import math

import numpy as np
from hypothesis import assume, strategies as st

from algo.config import SETTINGS, AlgoConfig, ConfigError
from algo.params import GAIN_FRAC, S32_MAX, demod_shift_for, derive

CODE_MAX = 0xFFFF


def _float_in(key, lo=None, hi=None):
    """A float for setting ``key`` in ``[lo, hi]`` (default: its whole range)."""
    s = SETTINGS[key]
    lo = s.lo if lo is None else lo
    hi = s.hi if hi is None else hi
    ends = [x for x in (lo, hi, s.default) if lo <= x <= hi]
    inner = st.floats(lo, hi, allow_nan=False, allow_infinity=False)
    if lo > 0 and hi / lo > 100:
        log = st.floats(math.log(lo), math.log(hi)).map(lambda e: min(hi, max(lo, math.exp(e))))
        inner = st.one_of(inner, log)
    return st.one_of(st.sampled_from(ends), inner)


def _int_in(key, lo=None, hi=None):
    s = SETTINGS[key]
    lo, hi = int(s.lo if lo is None else lo), int(s.hi if hi is None else hi)
    if s.pow2:
        return st.sampled_from([1 << k for k in range(hi.bit_length()) if lo <= 1 << k <= hi])
    return st.integers(lo, hi)


def _build(values):
    """Config and params from ``values``; ``assume`` away ones the range analysis rejects."""
    try:
        cfg = AlgoConfig(**values)
        return cfg, derive(cfg)
    except ConfigError:
        assume(False)


# Settings whose integer image must fit int32 (or 15 bits): drawn last, below their limit.
_SCALED = ("r_max_ohm", "x_max_ohm", "esr_allowance_ohm", "r_step_max_ohm", "compensation",
           "pert_fraction", "swing_min_a", "step_min_a", "pert_min_v", "pert_max_v")


def _limits(v):
    """Largest value of each ``_SCALED`` setting whose scaled integer still fits its field."""
    v_lsb, i_lsb = v["v_full_scale_v"] / (1 << v["adc_bits"]), v["i_full_scale_a"] / (1 << v["adc_bits"])
    dac_lsb = v["dac_full_scale_v"] / (1 << v["dac_bits"])
    window_log2 = (v["period_samples"] * v["periods_per_window"]).bit_length() - 1
    try:
        ds = demod_shift_for(v["adc_bits"], v["table_bits"], window_log2, v["acc_bits"])
    except ConfigError:
        assume(False)
    r_scale = i_lsb / v_lsb * (1 << v["r_frac_bits"])
    swing_per_code = (1 << window_log2) / 2 * ((1 << (v["table_bits"] - 1)) - 1) / (1 << ds) / math.sqrt(2)
    top = S32_MAX * (1 - 1e-9)
    lim = dict.fromkeys(("r_max_ohm", "x_max_ohm", "esr_allowance_ohm", "r_step_max_ohm"), top / r_scale)
    lim["compensation"] = lim["pert_fraction"] = top / (v_lsb / dac_lsb * (1 << GAIN_FRAC))
    lim["swing_min_a"] = top * i_lsb / swing_per_code
    lim["step_min_a"] = top * i_lsb / v["period_samples"]
    lim["pert_min_v"] = lim["pert_max_v"] = 32767 * dac_lsb
    return lim, 1.0 / r_scale


@st.composite
def configs(draw, max_window=16384):
    """Any valid ``(AlgoConfig, Params)``, with a window of at most ``max_window`` samples.

    Settings scaled into int32 fields are drawn up to the edge of what fits,
    so the largest representable parameters get exercised too.
    """
    v = {}
    for key, s in SETTINGS.items():
        if key not in _SCALED:
            v[key] = draw(_int_in(key) if s.kind is int else _float_in(key))
    v["period_samples"] = draw(_int_in("period_samples", hi=min(256, max_window)))
    v["periods_per_window"] = draw(_int_in("periods_per_window",
                                           hi=min(64, max_window // v["period_samples"])))
    v["max_v"] = draw(_float_in("max_v", hi=v["dac_full_scale_v"]))
    v["min_v"] = draw(_float_in("min_v", hi=v["max_v"]))
    v["target_v"] = draw(_float_in("target_v", lo=v["min_v"], hi=v["max_v"]))
    lim, r_lsb_ohm = _limits(v)
    for key in _SCALED:
        s = SETTINGS[key]
        lo = max(s.lo, r_lsb_ohm) if key == "r_max_ohm" else s.lo
        hi = min(s.hi, lim[key])
        assume(lo <= hi)
        v[key] = draw(_float_in(key, lo=lo, hi=hi))
    v["pert_min_v"], v["pert_max_v"] = sorted((v["pert_min_v"], v["pert_max_v"]))
    return _build(v)


@st.composite
def realistic_configs(draw, max_window=1024):
    """Configs a supply designer would plausibly choose, able to produce VALID windows."""
    v_fs = draw(st.floats(5.0, 100.0))
    target = draw(st.floats(0.2 * v_fs, 0.7 * v_fs))
    period = draw(_int_in("period_samples", lo=8, hi=min(256, max_window)))
    i_fs = draw(st.floats(0.5, 20.0))
    # At least 0.3 V-code per I-code at r_max, so a cable's swing spans several V codes.
    r_lo = max(0.5, 0.3 * v_fs / i_fs)
    r_max = draw(st.floats(r_lo, max(4 * r_lo, 20.0)))
    max_v = draw(st.floats(target + 0.05 * v_fs, v_fs))
    # The perturbation's peak rides on the correction under max_v (algo.step.corr_ceiling): a
    # designer leaves the correction at least half the headroom (common practice, no published
    # source; linedrop design warns when the two do not fit).
    pert_max = min(SETTINGS["pert_max_v"].default, 0.5 * (max_v - target))
    v = dict(
        adc_bits=draw(st.integers(10, 16)), dac_bits=draw(st.integers(10, 16)),
        v_full_scale_v=v_fs, dac_full_scale_v=v_fs, i_full_scale_a=i_fs,
        target_v=target, min_v=0.0, max_v=max_v,
        pert_max_v=pert_max, pert_min_v=min(SETTINGS["pert_min_v"].default, pert_max),
        period_samples=period,
        periods_per_window=draw(_int_in("periods_per_window", lo=2,
                                        hi=max(2, min(64, max_window // period)))),
        table_bits=draw(st.integers(12, 16)), acc_bits=32,
        r_frac_bits=draw(st.integers(12, 16)), r_max_ohm=r_max,
        x_max_ohm=draw(st.floats(0.5 * r_max, 4 * r_max)),
        r_filter_shift=draw(st.integers(0, 4)),
        loop_tau_ms=1e3 * period / SETTINGS["sample_rate_hz"].default * draw(st.floats(1.0, 16.0)),
        capacitance_f=draw(st.floats(0.0, 0.02)), kp_max=draw(st.floats(0.0, 32.0)),
        adc_phase_samples=draw(st.floats(-1.0, 1.0)),
        compensation=draw(st.floats(0.5, 1.0)), corr_frac_bits=draw(st.integers(0, 8)),
        corr_max_v=draw(st.floats(0.5, 10.0)), fault_windows=draw(st.integers(1, 20)),
        step_min_a=draw(st.floats(0.01, 0.2)), step_rel_shift=draw(st.integers(2, 5)),
        swing_min_a=draw(st.floats(0.0, 0.005)),
    )
    return _build(v)


def _rng(draw):
    return np.random.default_rng(draw(st.integers(0, 2**32 - 1)))


def _length(draw, p, min_windows, max_windows):
    """Whole windows plus a part window, so runs also end mid-window."""
    return draw(st.integers(min_windows, max_windows)) * p.window + draw(st.integers(0, p.window - 1))


def _codes(p):
    return st.one_of(st.sampled_from([0, 1, p.adc_max - 1, p.adc_max, min(p.adc_max + 1, CODE_MAX), CODE_MAX]),
                     st.integers(0, p.adc_max), st.integers(0, CODE_MAX))


@st.composite
def listed_sequences(draw, p, max_len=600):
    """Short sequences drawn code by code: the best shrinking, for short windows."""
    pairs = draw(st.lists(st.tuples(_codes(p), _codes(p)), min_size=1, max_size=max_len))
    return [a for a, _ in pairs], [b for _, b in pairs]


@st.composite
def random_sequences(draw, p, min_windows=0, max_windows=4):
    """Uniform random codes over the ADC range or the whole 16-bit range (clamped by the step)."""
    n = _length(draw, p, min_windows, max_windows)
    hi = draw(st.sampled_from([p.adc_max, CODE_MAX]))
    rng = _rng(draw)
    return rng.integers(0, hi + 1, n).tolist(), rng.integers(0, hi + 1, n).tolist()


@st.composite
def extreme_sequences(draw, p, min_windows=0, max_windows=4):
    """Codes taken only from 0, adc_max and 65535, constant or switching at random."""
    n = _length(draw, p, min_windows, max_windows)
    levels = np.array([0, p.adc_max, CODE_MAX])
    if draw(st.booleans()):
        a, b = draw(st.sampled_from(levels.tolist())), draw(st.sampled_from(levels.tolist()))
        return [a] * n, [b] * n
    rng = _rng(draw)
    return levels[rng.integers(0, 3, n)].tolist(), levels[rng.integers(0, 3, n)].tolist()


@st.composite
def step_sequences(draw, p, min_windows=0, max_windows=4):
    """Piecewise-constant codes with a few steps at random samples."""
    n = _length(draw, p, min_windows, max_windows)
    out = []
    for _ in range(2):
        edges = sorted(draw(st.lists(st.integers(0, max(n - 1, 0)), max_size=6)))
        levels = draw(st.lists(_codes(p), min_size=len(edges) + 1, max_size=len(edges) + 1))
        seq = np.full(n, levels[0], dtype=np.int64)
        for edge, level in zip(edges, levels[1:]):
            seq[edge:] = level
        out.append(seq.tolist())
    return out[0], out[1]


@st.composite
def square_sequences(draw, p, min_windows=0, max_windows=4):
    """Full-scale square waves at the perturbation period or another period, any phase."""
    n = _length(draw, p, min_windows, max_windows)
    t = np.arange(n)
    out = []
    for _ in range(2):
        period = draw(st.sampled_from([p.period, p.period, 2 * p.period, p.period // 2,
                                       draw(st.integers(2, 3 * p.period))]))
        shift = draw(st.integers(0, period - 1))
        hi = draw(st.sampled_from([p.adc_max, CODE_MAX]))
        lo = draw(st.sampled_from([0, 0, hi // 2]))
        out.append(np.where((t + shift) % period < period // 2, hi, lo).tolist())
    return out[0], out[1]


@st.composite
def realistic_sequences(draw, cfg, p, min_windows=3, max_windows=8, max_steps=3):
    """Supply-side V and I codes for a cable with the perturbation riding on the load current.

    The current swings sinusoidally at the perturbation frequency (a few tenths
    of a radian off the reference phase); the voltage swing is ``R`` times it in
    phase plus ``X`` times it in quadrature, with ``R`` below ``r_max`` and
    ``X`` well below ``x_max``. Up to ``max_steps`` load steps move the mean
    current (and the voltage by ``R`` times as much) at random samples; each
    can spoil the window it lands in and the next. A code or two of noise is
    added.
    """
    n = _length(draw, p, min_windows, max_windows)
    full = p.adc_max
    per_ohm = cfg.i_full_scale_a / cfg.v_full_scale_v          # V codes per I code per ohm
    i_mean = draw(st.floats(0.25, 0.5)) * full
    amp = draw(st.floats(0.03, 0.15)) * full
    r_top = 0.6 * cfg.r_max_ohm * per_ohm
    r_codes = draw(st.floats(0.05, 1.0)) * r_top
    r_codes = min(r_top, max(r_codes, 3.0 / amp))     # a swing of 3 V codes or more if it fits
    x_codes = draw(st.floats(-0.3, 0.3)) * min(cfg.x_max_ohm * per_ohm, r_top)
    scale = min(1.0, 0.2 * full / (amp * max(abs(r_codes), abs(x_codes), 1e-9)))
    r_codes, x_codes = r_codes * scale, x_codes * scale
    phase = draw(st.floats(-0.5, 0.5))
    noise = draw(st.integers(0, 2))
    rng = _rng(draw)
    t = np.arange(n)
    theta = 2 * np.pi * t / p.period + phase
    i_dc = np.full(n, i_mean)
    for edge in draw(st.lists(st.integers(0, max(n - 1, 0)), max_size=max_steps)):
        i_dc[edge:] *= draw(st.floats(0.6, 1.5))
    # Keep both channels off their rails (a code at 0 or adc_max makes the window CLIPPED): the
    # swing plus the noise plus one code of room on each side, for the current and for the
    # voltage, whose load-step offset can otherwise carry it onto a rail.
    room = noise + 1
    i_dc = np.clip(i_dc, amp + room, full - amp - room)
    i = i_dc + amp * np.sin(theta)
    v_ac = amp * (r_codes * np.sin(theta) + x_codes * np.cos(theta))
    v_peak = amp * float(np.hypot(r_codes, x_codes))
    v = np.clip(0.5 * full - r_codes * (i_dc - i_mean), v_peak + room, full - v_peak - room) + v_ac
    i = i + rng.integers(-noise, noise + 1, n)
    v = v + rng.integers(-noise, noise + 1, n)
    clip = lambda x: np.clip(np.floor(x + 0.5), 0, full).astype(np.int64).tolist()  # noqa: E731
    return clip(v), clip(i)


def sequences(cfg, p, min_windows=0, max_windows=4):
    """Every kind of ADC sequence for one config."""
    kinds = [random_sequences(p, min_windows, max_windows),
             extreme_sequences(p, min_windows, max_windows),
             step_sequences(p, min_windows, max_windows),
             square_sequences(p, min_windows, max_windows),
             realistic_sequences(cfg, p, max(min_windows, 1), max(max_windows, 1))]
    if min_windows == 0 and p.window <= 128:
        kinds.append(listed_sequences(p))
    return st.one_of(kinds)


@st.composite
def cases(draw, max_window=1024, min_windows=0, max_windows=4):
    """``(cfg, params, (adc_v, adc_i))`` across every config and sequence kind."""
    cfg, p = draw(st.one_of(configs(max_window), realistic_configs(max_window)))
    return cfg, p, draw(sequences(cfg, p, min_windows, max_windows))
