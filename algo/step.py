"""Per-sample step, init and reset (mirrors c_ref/step.c).

One call per ADC sample: demodulate the voltage and current codes against
the sine and cosine references, watch for load steps at each period end,
finish the window when it is full, and return the next command code.
Integer-only; no division.
"""
from algo.fixed import sat, rshift_round
from algo.estimator import command_base, window_end
from algo.state import State


def _command(p, s):
    """Command code for the next sample: the per-window base plus the perturbation.

    Scaling and overflow: pert_amp (<= 2**15) times a table entry (< 2**15)
    is below 2**30; cmd_base is at most 2**16 + 2**16 codes; the int32 sum is
    clamped to [cmd_min, cmd_max].
    """
    pert = rshift_round(s.pert_amp * p.ref_tab[s.phase], p.tab_bits - 1)
    return sat(s.cmd_base + pert, p.cmd_min, p.cmd_max)


def init(p):
    """A fresh state: no estimate, no correction, perturbation at its floor."""
    s = State()
    reset(p, s)
    return s


def reset(p, s):
    """Restart measurement and drop the correction; keep the resistance estimate.

    The estimate is only a starting point: the correction stays at zero until a
    valid window after the reset recomputes it.
    """
    r_est, windows = s.r_est, s.windows
    s.__init__()
    s.r_est, s.windows = r_est, windows
    s.pert_amp = p.pert_min
    s.bad_windows = p.fault_windows
    s.cmd_base = command_base(p, s)
    s.cmd = _command(p, s)


def _period_end(p, s):
    """Flag a load step when consecutive whole-period current sums differ too much.

    Scaling and overflow: period sums are below 2**24 (256 samples of 16-bit
    codes), so their difference and the shifted threshold fit int32.
    """
    if s.have_prev:
        thr = max(p.step_min, s.psum_prev >> p.step_rel_shift)
        if abs(s.psum - s.psum_prev) > thr:
            s.transient = 1
    s.psum_prev = s.psum
    s.have_prev = 1
    s.psum = 0


def step(p, s, adc_v, adc_i):
    """Take one pair of ADC codes, return the command code for the next sample.

    Scaling and overflow: codes are clamped to [0, adc_max] (< 2**16) and a
    table entry is below 2**15 in magnitude, so each product fits int32; the
    demodulation shift was chosen offline (algo.params.demod_shift_for) so a
    window of shifted products fits acc_bits <= 32. isum is below
    2**14 * 2**16 = 2**30. The rail test compares clamped codes only.
    """
    v = sat(adc_v, 0, p.adc_max)
    i = sat(adc_i, 0, p.adc_max)
    if v == p.adc_max or i == p.adc_max or i == 0:
        s.clipped = 1
    n = p.period - 1
    sn = p.ref_tab[s.phase]
    cs = p.ref_tab[(s.phase + (p.period >> 2)) & n]
    s.acc_vi += rshift_round(v * sn, p.demod_shift)
    s.acc_vq += rshift_round(v * cs, p.demod_shift)
    s.acc_ii += rshift_round(i * sn, p.demod_shift)
    s.acc_iq += rshift_round(i * cs, p.demod_shift)
    s.isum += i
    s.psum += i
    s.phase = (s.phase + 1) & n
    s.count += 1
    if s.phase == 0:
        _period_end(p, s)
        if s.count == p.window:
            window_end(p, s)
    s.cmd = _command(p, s)
    return s.cmd
