"""The fixed-point model vectorised over many instances with numpy (mirrors c_ref/batch.c).

Same arithmetic as algo/step.py and algo/estimator.py, bit for bit, applied
to int64 arrays of shape (n,): one element per independent instance, each
with its own parameters. Range analysis keeps every intermediate below 2**63,
so int64 never wraps. The scalar model stays the readable, line-by-line
mirror of the C; this one is for speed and is tested equal to it. Per-period
and per-window work runs only on the instances whose period or window ended.
"""
import numpy as np

from algo.params import (GAIN_FRAC, DROP_FRAC, NORM_BITS, KT_FRAC, ROT_FRAC, SWING_FRAC, S32_MAX,
                         PARAM_FIELDS)
from algo.state import STATE_FIELDS
from algo import state as st

_S32 = (-(1 << 31), S32_MAX)
_CLEARED = ("acc_vi", "acc_vq", "acc_ii", "acc_iq", "isum", "vsum", "isum_h", "vsum_h", "count",
            "transient", "clipped")


class _Fields:
    """Attribute bag of int64 arrays, one per field."""

    def __init__(self, names, n):
        for name in names:
            setattr(self, name, np.zeros(n, dtype=np.int64))


def _rsr(x, s):
    """Vectorised algo.fixed.rshift_round: shift right by s >= 0, rounding half up."""
    return (x + ((np.int64(1) << s) >> 1)) >> s


def _sat32(x):
    return np.minimum(np.maximum(x, _S32[0]), _S32[1])


def _step_toward(x, target, s):
    """Vectorised algo.fixed.step_toward."""
    d = _rsr(target - x, s)
    d = np.where((d == 0) & (target != x), np.sign(target - x), d)
    return x + d


def _bit_length(u):
    """Vectorised bit length of non-negative values below 2**53."""
    return np.where(u > 0, np.frexp(u.astype(np.float64))[1], 0).astype(np.int64)


def _div_trunc(a, b):
    q = np.abs(a) // np.abs(b)
    return np.where((a >= 0) == (b >= 0), q, -q)


class BatchModel:
    """``n`` independent fixed-point instances stepped together.

    Parameters
    ----------
    params_list : list of algo.params.Params
        One parameter block per instance.
    """

    def __init__(self, params_list):
        self.n = len(params_list)
        self.p = _Fields([f for f in PARAM_FIELDS if f != "ref_tab"], self.n)
        for name in vars(self.p):
            getattr(self.p, name)[:] = [getattr(q, name) for q in params_list]
        self.tab = np.array([q.ref_tab for q in params_list], dtype=np.int64)
        self.period = np.int64(1) << self.p.period_log2
        self.window = np.int64(1) << self.p.window_log2
        self.s = _Fields(STATE_FIELDS, self.n)
        self._idx = np.arange(self.n)
        # Loop invariants of the per-sample path, hoisted out of step().
        self._flat = self.tab.ravel()
        self._base = self._idx * self.tab.shape[1]
        self._pmask = self.period - 1
        self._quarter = self.period >> 2
        self._half_ds = (np.int64(1) << self.p.demod_shift) >> 1
        self._half_tab = (np.int64(1) << (self.p.tab_bits - 1)) >> 1
        self._tab_shift = self.p.tab_bits - 1
        self._half_window = self.window >> 1
        self.init(np.ones(self.n, dtype=bool))

    def init(self, mask):
        """Initialise the instances selected by boolean ``mask``."""
        for name in STATE_FIELDS:
            getattr(self.s, name)[mask] = 0
        self.reset(mask)

    def reset(self, mask):
        """Reset the selected instances, keeping their resistance estimate (algo.step.reset)."""
        s, p = self.s, self.p
        for name in STATE_FIELDS:
            if name not in ("r_est", "windows"):
                getattr(s, name)[mask] = 0
        s.pert_amp[mask] = s.pert_next[mask] = p.pert_min[mask]
        s.step_thr[mask] = s.thr_next[mask] = self._threshold(np.zeros(self.n, np.int64), self._idx)[mask]
        s.bad_windows[mask] = p.fault_windows[mask]
        s.cmd_base[mask] = p.target_code[mask]
        s.cmd[mask] = self._command()[mask]

    def _command(self):
        """algo.step._command for every instance."""
        s, p = self.s, self.p
        tab = self._flat.take(self._base + s.phase)
        pert = (s.pert_amp * tab + self._half_tab) >> self._tab_shift
        return np.minimum(np.maximum(s.cmd_base + pert, p.cmd_min), p.cmd_max)

    def step(self, adc_v, adc_i):
        """One sample for every instance; returns the command codes (int64, shape (n,))."""
        s, p = self.s, self.p
        v = np.minimum(np.maximum(np.asarray(adc_v, dtype=np.int64), 0), p.adc_max)
        i = np.minimum(np.maximum(np.asarray(adc_i, dtype=np.int64), 0), p.adc_max)
        s.clipped |= ((i == 0).astype(np.int64) | ((v == p.adc_max).astype(np.int64) << 1)
                      | ((i == p.adc_max).astype(np.int64) << 2))
        s.i_zero[i == 0] = 1
        ph = s.phase
        sn = self._flat.take(self._base + ph)
        cs = self._flat.take(self._base + ((ph + self._quarter) & self._pmask))
        ds, h = p.demod_shift, self._half_ds
        s.acc_vi += (v * sn + h) >> ds
        s.acc_vq += (v * cs + h) >> ds
        s.acc_ii += (i * sn + h) >> ds
        s.acc_iq += (i * cs + h) >> ds
        s.isum += i
        s.vsum += v
        s.psum += i
        s.phase = ph = (ph + 1) & self._pmask
        s.count += 1
        ends = ph == 0
        if ends.any():
            self._period_ends(np.flatnonzero(ends))
        s.cmd = self._command()
        return s.cmd

    def run(self, adc_v, adc_i):
        """Step over columns of (n, T) input arrays; returns (n, T) command codes."""
        adc_v, adc_i = np.asarray(adc_v), np.asarray(adc_i)
        out = np.empty(adc_v.shape, dtype=np.int64)
        for t in range(adc_v.shape[1]):
            out[:, t] = self.step(adc_v[:, t], adc_i[:, t])
        return out

    def _period_ends(self, k):
        """algo.step.step's period-end block, in its order, for instances ``k``."""
        s = self.s
        self._period_end(k)
        self._correct(k)
        count = s.count[k]
        h = k[count == self._half_window[k]]
        if h.size:
            s.isum_h[h], s.vsum_h[h] = s.isum[h], s.vsum[h]
        w = k[count == self.window[k]]
        if w.size:
            self._window_handover(w)
            self._window_work(w)
        p = self.p
        top = np.maximum(p.target_code[k], p.cmd_max[k] - s.pert_amp[k])
        s.cmd_base[k] = np.minimum(p.target_code[k] + _rsr(s.corr[k], p.corr_frac[k]), top)

    def _threshold(self, swing, k):
        """algo.estimator.step_threshold for instances ``k``."""
        p = self.p
        return _sat32(np.maximum(p.step_min[k], _rsr(swing * p.swing_psum_q[k],
                                                     SWING_FRAC + p.step_rel_shift[k])))

    def _period_end(self, k):
        """algo.step._period_end: the swing-relative load-step detector."""
        s = self.s
        psum, prev = s.psum[k], s.psum_prev[k]
        jump = (s.have_prev[k] != 0) & (np.abs(psum - prev) > s.step_thr[k])
        s.transient[k[jump]] = 1
        s.psum_prev[k] = psum
        s.iz_last[k] = s.i_zero[k]
        s.have_prev[k] = 1
        s.psum[k] = 0
        s.i_zero[k] = 0

    def _correct(self, k):
        """algo.step.correct (with drop_period): one period of the PI correction law and its
        ring guard, its three stages at once as ``step`` runs them."""
        s, p = self.s, self.p
        corr0, integ0, du_prev = s.corr[k], s.integ[k], s.du_prev[k]
        room = p.cmd_max[k] - p.target_code[k]     # algo.step.corr_ceiling
        cmax = np.minimum(p.corr_max_q[k], np.maximum(room - s.pert_amp[k], 0) << p.corr_frac[k])
        drop = _sat32(_rsr(s.r_c[k] * s.psum_prev[k], p.r_frac[k] + p.period_log2[k] - DROP_FRAC))
        tgt = np.clip(_rsr(drop * p.corr_gain_q[k], GAIN_FRAC + DROP_FRAC - p.corr_frac[k]),
                      0, S32_MAX)
        clip = s.iz_last[k] != 0
        tgt = np.where(clip, 0, tgt)
        e = np.where(clip, -np.maximum(corr0, integ0), tgt - corr0)
        integ = integ0 + _rsr(p.ki_q[k] * e, GAIN_FRAC)
        kp = s.kp[k]
        on = s.kp_off[k] < 2
        kp = np.where(on, kp, 0)
        u = _rsr(kp * e, GAIN_FRAC) + integ
        hold = (u > cmax) & (e > 0)
        integ = np.where(hold, integ0, integ)
        corr = np.clip(u, 0, cmax)
        du = corr - corr0
        rang = ((((du > 0) & (du_prev < 0)) | ((du < 0) & (du_prev > 0)))
                & (np.abs(du) - np.abs(du_prev) > np.abs(du_prev)) & (np.abs(du) > (p.corr_max_q[k] >> 6)))
        forced = s.corr_on[k] == 0
        upd = on & ~forced
        s.kp_off[k] = np.where(upd, np.where(rang, s.kp_off[k] + 1, 0), s.kp_off[k])
        trip = upd & (s.kp_off[k] >= 2)
        corr = np.where(trip, np.clip(integ, 0, cmax), corr)
        du = corr - corr0
        s.corr_target[k] = np.where(forced, 0, tgt)
        s.integ[k] = np.where(forced, 0, np.clip(integ, 0, cmax))
        s.corr[k] = np.where(forced, 0, corr)
        s.du_prev[k] = np.where(forced, 0, du)
        s.corr_prev[k] = np.where(forced, 0, corr0)

    def _window_handover(self, k):
        """algo.step._window_handover for instances ``k``: the w_* record, the next window's sums."""
        s = self.s
        for name in ("acc_vi", "acc_vq", "acc_ii", "acc_iq", "isum", "clipped", "transient"):
            getattr(s, "w_" + name)[k] = getattr(s, name)[k]
        s.w_di[k] = s.isum[k] - 2 * s.isum_h[k]
        s.w_dv[k] = s.vsum[k] - 2 * s.vsum_h[k]
        for name in _CLEARED:
            getattr(s, name)[k] = 0

    def _classify(self, k):
        """algo.estimator.classify for instances ``k``; sets swing where valid, returns (status, r_raw)."""
        s, p = self.s, self.p
        kt_s, kt_c = p.kt_s_q[k], p.kt_c_q[k]
        di, dv = s.w_di[k], s.w_dv[k]
        ii0 = s.w_acc_ii[k] - _rsr(di * kt_s, KT_FRAC)
        iq0 = s.w_acc_iq[k] - _rsr(di * kt_c, KT_FRAC)
        m = np.maximum(np.abs(ii0), np.abs(iq0))
        low = m < p.swing_min[k]
        vd = s.w_acc_vi[k] - _rsr(dv * kt_s, KT_FRAC)
        vqd = s.w_acc_vq[k] - _rsr(dv * kt_c, KT_FRAC)
        rc, rs = p.rot_c_q[k], p.rot_s_q[k]
        vi0 = _rsr(vd * rc + vqd * rs, ROT_FRAC)
        vq0 = _rsr(vqd * rc - vd * rs, ROT_FRAC)
        sh = np.maximum(0, _bit_length(m) - NORM_BITS)
        vi, vq = _sat32(_rsr(vi0, sh)), _sat32(_rsr(vq0, sh))
        lim = 1 << NORM_BITS                    # algo.estimator.classify's two checks
        ii, iq = np.clip(_rsr(ii0, sh), -lim, lim), np.clip(_rsr(iq0, sh), -lim, lim)
        low |= ii * ii + iq * iq == 0
        den = np.where(low, 1, ii * ii + iq * iq)
        num = vi * ii + vq * iq
        xnum = vq * ii - vi * iq
        r_raw = np.where(low, 0, _sat32(_div_trunc(num << p.r_frac[k], den)))
        status = np.select(
            [low, s.w_clipped[k] != 0, r_raw > p.r_max_q[k], s.w_transient[k] != 0, r_raw < 0,
             np.abs(xnum) << p.r_frac[k] > p.x_max_q[k] * den],
            [st.STATUS_LOW_SWING, st.STATUS_CLIPPED, st.STATUS_R_HIGH, st.STATUS_TRANSIENT,
             st.STATUS_R_LOW, st.STATUS_REACTIVE],
            st.STATUS_VALID)
        valid = status == st.STATUS_VALID
        s.swing[k] = np.where(valid, _sat32(m), s.swing[k])
        return status, r_raw

    def _window_work(self, k):
        """algo.estimator.window_work for instances ``k``, then algo.step._commit (as ``step``
        does it: in the call that ends the window)."""
        s, p = self.s, self.p
        status, r_raw = self._classify(k)
        s.r_raw[k] = r_raw
        valid = status == st.STATUS_VALID
        # update_estimate: the first valid window is taken as it is and waits for a second within
        # r_step_max to confirm it (else that one replaces it), then gains 1/2 ... 2**-r_shift.
        r_est, run, dmax = s.r_est[k], s.valid_run[k], p.r_step_max_q[k]
        shift = np.minimum(_bit_length(run), p.r_shift[k])
        d = np.clip(_step_toward(r_est, r_raw, shift) - r_est, -dmax, dmax)
        anew = (run == 0) | ((run == 1) & (np.abs(r_raw - r_est) > dmax))
        folded = np.where(anew, r_raw, np.clip(r_est + d, 0, p.r_max_q[k]))
        r_est = np.where(valid, folded, r_est)
        run = np.where(valid, np.where(anew, 1, np.minimum(run + 1, 0xFF)), run)
        held = (status == st.STATUS_TRANSIENT) | ((status == st.STATUS_CLIPPED) & ~st.rails_fault(s.w_clipped[k]))
        bad = np.where(valid, 0, np.where(held, s.bad_windows[k],
                                          np.minimum(s.bad_windows[k] + 1, 0xFFFF)))
        forced = bad >= p.fault_windows[k]
        r_est = np.where(forced, 0, r_est)
        run = np.where(forced, 0, run)
        s.valid_run[k] = run
        # algo.step._commit, in the same call: the correction's inputs, the ring guard back on
        # after a valid window, a correction held off at zero.
        s.on_next[k] = s.corr_on[k] = (~forced & (run >= 2)).astype(np.int64)
        for name in ("corr", "corr_target", "integ", "du_prev", "corr_prev"):
            getattr(s, name)[k[s.corr_on[k] == 0]] = 0
        s.rc_next[k] = s.r_c[k] = np.maximum(r_est - p.esr_q[k], 0)
        drop_total = _sat32(_rsr(r_est * s.w_isum[k], p.r_frac[k] + p.window_log2[k] - DROP_FRAC))
        amp0 = s.pert_amp[k]
        amp = np.maximum(_rsr(drop_total * p.pert_gain_q[k], GAIN_FRAC + DROP_FRAC), amp0 >> 1)
        amp = np.where(status == st.STATUS_CLIPPED, amp0 >> 1, amp)
        amp = np.where(status == st.STATUS_LOW_SWING, amp0 << 1, amp)
        s.pert_next[k] = s.pert_amp[k] = np.clip(amp, p.pert_min[k], p.pert_max[k])
        s.kp_next[k] = s.kp[k] = np.minimum(_rsr(r_est * p.kc_q[k], p.r_frac[k]), p.kp_max_q[k])
        s.thr_next[k] = s.step_thr[k] = self._threshold(s.swing[k], k)
        s.kp_off[k[valid]] = 0
        s.r_est[k] = r_est
        s.bad_windows[k] = bad
        s.status[k] = status
        s.windows[k] = (s.windows[k] + 1) & 0xFFFFFFFF

    def field(self, name):
        """Live array of state field ``name`` across instances."""
        return getattr(self.s, name)

    def state(self, k=0):
        """Every state field of instance ``k`` as a dict of ints."""
        return {name: int(getattr(self.s, name)[k]) for name in STATE_FIELDS}

    def states(self):
        """Every state field of every instance, as a dict of arrays (copies)."""
        return {name: getattr(self.s, name).copy() for name in STATE_FIELDS}
