"""Algorithm state (mirrors ``ld_state_t`` in c_ref/linedrop.h), field for field."""
from dataclasses import dataclass, fields

# Window outcome codes (``status``), shared with C as LD_STATUS_*.
STATUS_NONE = 0        # no window finished yet
STATUS_VALID = 1       # estimate accepted
STATUS_LOW_SWING = 2   # current swing too small: cable open or capacitor missing
STATUS_TRANSIENT = 3   # load step inside the window: estimate discarded, correction held
STATUS_R_HIGH = 4      # real part above r_max: capacitor missing or no cable fits
STATUS_REACTIVE = 5    # quadrature part above x_max: capacitor too small or missing
STATUS_CLIPPED = 6     # a code at adc_max (either channel) or current at 0: estimate discarded, held
STATUS_R_LOW = 7       # real part negative: no passive cable and capacitor fits
# Window hand-over between step_isr and window_work (``w_state``), shared with C as LD_WIN_*.
WIN_IDLE = 0      # no finished window waits: the interrupt path owns every field
WIN_PENDING = 1   # a finished window's sums are in the w_* record for window_work
WIN_DONE = 2      # window_work has finished; the next period end commits it
STATUS_NAMES = {STATUS_NONE: "none", STATUS_VALID: "valid", STATUS_LOW_SWING: "low_swing",
                STATUS_TRANSIENT: "transient", STATUS_R_HIGH: "r_high",
                STATUS_REACTIVE: "reactive", STATUS_CLIPPED: "clipped", STATUS_R_LOW: "r_low"}


@dataclass
class State:
    """RAM state of one instance; formats as in ``ld_state_t``."""
    acc_vi: int = 0       # int32: voltage x sine, sum of products >> demod_shift
    acc_vq: int = 0       # int32: voltage x cosine
    acc_ii: int = 0       # int32: current x sine
    acc_iq: int = 0       # int32: current x cosine
    isum: int = 0         # int32: sum of current codes over the window
    vsum: int = 0         # int32: sum of voltage codes over the window
    isum_h: int = 0       # int32: isum at the window's half (trend removal)
    vsum_h: int = 0       # int32: vsum at the window's half
    psum: int = 0         # int32: sum of current codes over the current period
    psum_prev: int = 0    # int32: sum over the previous whole period
    r_est: int = 0        # int32: loop resistance estimate incl. ESR, Q r_frac V-code/I-code
    r_raw: int = 0        # int32: last window's raw real part (saturated), same format
    corr: int = 0         # int32: correction applied, Q corr_frac DAC codes
    corr_target: int = 0  # int32: the last period's estimated drop (R-hat - ESR) * I, same format
    integ: int = 0        # int32: integral part of the correction, same format, in [0, corr_max_q]
    du_prev: int = 0      # int32: the last period's change of corr, same format
    pert_amp: int = 0     # int32: perturbation amplitude, DAC codes
    cmd_base: int = 0     # int32: target_code + rounded correction, DAC codes (set per period)
    swing: int = 0        # int32: last valid window's current swing, demodulation units (sets step_thr)
    windows: int = 0      # uint32: windows finished (wraps)
    phase: int = 0        # uint16: sample index within the perturbation period
    count: int = 0        # uint16: sample index within the window
    bad_windows: int = 0  # uint16: consecutive windows without a valid estimate (saturates)
    cmd: int = 0          # uint16: last command, DAC code
    have_prev: int = 0    # uint8: psum_prev holds a whole period
    transient: int = 0    # uint8: a load step was seen in this window
    status: int = 0       # uint8: outcome of the last window (STATUS_*)
    clipped: int = 0      # uint8: rails hit in this window: 1 current at 0, 2 voltage at adc_max, 4 current at adc_max
    valid_run: int = 0    # uint8: valid windows since init, reset or a forced zero (saturates)
    kp_off: int = 0       # uint8: ring guard: 1 after one growing reversal, 2 (P off) after two, to a valid window
    i_zero: int = 0       # uint8: a current code 0 in this period (the load draws less than the swing)
    # The finished window, as the window work reads it (filled at every window end).
    w_acc_vi: int = 0     # int32: acc_vi at the window end
    w_acc_vq: int = 0     # int32: acc_vq
    w_acc_ii: int = 0     # int32: acc_ii
    w_acc_iq: int = 0     # int32: acc_iq
    w_isum: int = 0       # int32: isum
    w_di: int = 0         # int32: isum - 2 * isum_h, the current's half-window trend
    w_dv: int = 0         # int32: vsum - 2 * vsum_h
    pert_next: int = 0    # int32: perturbation amplitude the window work chose (committed to pert_amp)
    step_thr: int = 0     # int32: load-step threshold in force, period-sum codes, saturated to int32
    thr_next: int = 0     # int32: the threshold from the window work's swing (committed to step_thr)
    r_c: int = 0          # int32: R-hat - ESR in force for the correction, Q r_frac, >= 0
    rc_next: int = 0      # int32: the window work's r_est - esr_q, floored at 0 (committed to r_c)
    kp: int = 0           # int32: proportional gain in force, Q GAIN_FRAC in [0, kp_max_q]
    kp_next: int = 0      # int32: the window work's gain from r_est (committed to kp)
    corr_prev: int = 0    # int32: corr before this period's step, between the law's stages 2 and 3
    w_clipped: int = 0    # uint8: clipped at the window end
    w_transient: int = 0  # uint8: transient at the window end
    w_state: int = 0      # uint8: WIN_*, the hand-over to window_work
    late_windows: int = 0  # uint8: windows dropped because the window work had not finished (saturates)
    corr_on: int = 0      # uint8: 1: the correction runs (a confirmed estimate, no forced zero)
    on_next: int = 0      # uint8: the window work's corr_on (committed)
    iz_last: int = 0      # uint8: i_zero of the last whole period, for the law's stages


STATE_FIELDS = [f.name for f in fields(State)]


def rails_fault(clipped):
    """A clipped window that counts toward the forced zero: the voltage at its rail (flag 2), or
    the current at both rails (flags 1 and 4) in one window."""
    return ((clipped & 2) != 0) | ((clipped & 5) == 5)     # ints or numpy arrays alike
