"""Float64 "ideal" twin of the algorithm: same structure, exact arithmetic, no word lengths.

The yardstick for word-length tuning: every decision (window classification,
load-step detection, clamps, conditional integration, forced zero) is the one
the fixed-point model makes, in the same order, but sums, products and the
ratio are exact floats, the reference is an exact sine, the trend and phase
constants are exact and the command is not rounded to DAC codes. State fields
carry the fixed-point names in plain units: resistances in V-code per I-code,
correction, its target and integral, and the perturbation in DAC codes
(fractional); accumulators and swing in code x unit sine.
"""
import math

import numpy as np

from algo.config import AlgoConfig
from algo.state import STATE_FIELDS
from algo import state as st

_CONSTS = ("adc_max", "target", "cmd_min", "cmd_max", "period", "window", "r_max", "x_max",
           "esr", "r_step_max", "corr_gain", "pert_gain", "corr_max", "pert_min", "pert_max",
           "swing_min", "step_min", "step_rel", "swing_psum", "r_g", "r_shift", "ki", "kc",
           "kp_max", "kt_s", "kt_c", "rot_c", "rot_s", "fault_windows")
_CLEARED = ("acc_vi", "acc_vq", "acc_ii", "acc_iq", "isum", "vsum", "isum_h", "vsum_h", "count",
            "transient", "clipped")


def trend_constants(period, window):
    """(kt_s, kt_c) of algo.params.trend_constants for the exact unit sine and no demodulation
    shift: the trend's leak into the sine (cosine) sum per unit half-window sum difference."""
    if window < 2 * period:
        return 0.0, 0.0
    k = np.arange(window)
    t = k - (window - 1) / 2
    tab = np.sin(2 * np.pi * np.arange(period) / period)
    ts = float(np.sum(tab[k % period] * t))
    tc = float(np.sum(tab[(k + (period >> 2)) % period] * t))
    return ts / (window * window / 4), tc / (window * window / 4)


def constants(cfg: AlgoConfig):
    """The ideal's parameters in code units, from settings (no rounding).

    Resistances in V-code per I-code; command, correction and perturbation in DAC codes;
    accumulator-unit thresholds (swing_min) for a unit sine reference; kc = C / tau in
    (V-code per I-code)**-1, so kp = r_est * kc; ki = T_period / tau; swing_psum turns a swing
    into period-sum codes (as algo.params' swing_psum_q does for the fixed-point units).
    """
    v_lsb = cfg.v_full_scale_v / (1 << cfg.adc_bits)
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    r_scale = i_lsb / v_lsb
    period, window = cfg.period_samples, cfg.window_samples
    dac_max = (1 << cfg.dac_bits) - 1
    tau_s = cfg.loop_tau_s
    theta = 2 * math.pi * cfg.adc_phase_samples / period
    kt_s, kt_c = trend_constants(period, window)
    return dict(
        adc_max=(1 << cfg.adc_bits) - 1,
        target=cfg.target_v / dac_lsb,
        cmd_min=min(dac_max, cfg.min_v / dac_lsb),
        cmd_max=min(dac_max, cfg.max_v / dac_lsb),
        period=period,
        window=window,
        r_max=cfg.r_max_ohm * r_scale,
        x_max=cfg.x_max_ohm * r_scale,
        esr=cfg.esr_allowance_ohm * r_scale,
        r_step_max=cfg.r_step_max_ohm * r_scale,
        corr_gain=cfg.compensation * v_lsb / dac_lsb,
        pert_gain=cfg.pert_fraction * v_lsb / dac_lsb,
        corr_max=min(cfg.corr_max_v, max(0.0, cfg.max_v - cfg.target_v)) / dac_lsb,
        pert_min=cfg.pert_min_v / dac_lsb,
        pert_max=cfg.pert_max_v / dac_lsb,
        swing_min=cfg.swing_min_a / i_lsb * window / 2 / math.sqrt(2),
        step_min=cfg.step_min_a / i_lsb * period,
        step_rel=2.0 ** -cfg.step_rel_shift,
        swing_psum=2.0 * period / window,
        r_g=2.0 ** -cfg.r_filter_shift,
        r_shift=cfg.r_filter_shift,
        ki=period / cfg.sample_rate_hz / tau_s,
        kc=v_lsb / i_lsb * cfg.capacitance_f / tau_s,
        kp_max=cfg.kp_max,
        kt_s=kt_s,
        kt_c=kt_c,
        rot_c=math.cos(theta),
        rot_s=math.sin(theta),
        fault_windows=cfg.fault_windows,
    )


class IdealBatch:
    """``n`` float instances stepped together; same interface as algo.batch.BatchModel."""

    def __init__(self, cfg_list):
        self.n = len(cfg_list)
        consts = [constants(c) for c in cfg_list]
        for name in _CONSTS:
            setattr(self, name, np.array([c[name] for c in consts], dtype=np.float64))
        self.period = self.period.astype(np.int64)
        self.window = self.window.astype(np.int64)
        width = int(self.period.max())
        n = np.arange(width)
        self.sin = np.where(n < self.period[:, None],
                            np.sin(2 * np.pi * n / self.period[:, None]), 0.0)
        self._idx = np.arange(self.n)
        for name in STATE_FIELDS:
            setattr(self, name, np.zeros(self.n))
        self.init(np.ones(self.n, dtype=bool))

    def init(self, mask):
        for name in STATE_FIELDS:
            getattr(self, name)[mask] = 0.0
        self.reset(mask)

    def reset(self, mask):
        for name in STATE_FIELDS:
            if name not in ("r_est", "windows"):
                getattr(self, name)[mask] = 0.0
        self.pert_amp[mask] = self.pert_min[mask]
        self.bad_windows[mask] = self.fault_windows[mask]
        self.cmd_base[mask] = self.target[mask]
        self.cmd[mask] = self._command()[mask]

    def _command(self):
        ph = self.phase.astype(np.int64)
        cmd = self.cmd_base + self.pert_amp * self.sin[self._idx, ph]
        return np.clip(cmd, self.cmd_min, self.cmd_max)

    def step(self, adc_v, adc_i):
        """One sample for every instance; returns the (unrounded) command in DAC codes."""
        v = np.clip(np.asarray(adc_v, dtype=np.float64), 0, self.adc_max)
        i = np.clip(np.asarray(adc_i, dtype=np.float64), 0, self.adc_max)
        flags = ((i == 0).astype(np.int64) | ((v == self.adc_max).astype(np.int64) << 1)
                 | ((i == self.adc_max).astype(np.int64) << 2))
        self.clipped = (self.clipped.astype(np.int64) | flags).astype(np.float64)
        self.i_zero[i == 0] = 1
        ph = self.phase.astype(np.int64)
        sn = self.sin[self._idx, ph]
        cs = self.sin[self._idx, (ph + self.period // 4) % self.period]
        self.acc_vi += v * sn
        self.acc_vq += v * cs
        self.acc_ii += i * sn
        self.acc_iq += i * cs
        self.isum += i
        self.vsum += v
        self.psum += i
        self.phase = (ph + 1) % self.period
        self.count += 1
        k = np.flatnonzero(self.phase == 0)
        if k.size:
            self._period_ends(k)
        self.cmd = self._command()
        return self.cmd

    def run(self, adc_v, adc_i):
        """Step over columns of (n, T) inputs; returns (n, T) commands."""
        out = np.empty(np.shape(adc_v))
        for t in range(out.shape[1]):
            out[:, t] = self.step(adc_v[:, t], adc_i[:, t])
        return out

    def _period_ends(self, k):
        """algo.step.step's period-end block, in its order: step detector, correction, psum
        cleared, half-window snapshot, window end, command base."""
        thr = np.maximum(self.step_min[k], self.swing[k] * self.swing_psum[k] * self.step_rel[k])
        jump = (self.have_prev[k] != 0) & (np.abs(self.psum[k] - self.psum_prev[k]) > thr)
        self.transient[k[jump]] = 1
        self.psum_prev[k] = self.psum[k]
        self.have_prev[k] = 1
        self._correct(k)
        self.psum[k] = 0
        self.i_zero[k] = 0
        h = k[self.count[k] == self.window[k] // 2]
        self.isum_h[h], self.vsum_h[h] = self.isum[h], self.vsum[h]
        w = k[self.count[k] == self.window[k]]
        if w.size:
            self._window_end(w)
        top = np.maximum(self.target[k], self.cmd_max[k] - self.pert_amp[k])
        self.cmd_base[k] = np.minimum(self.target[k] + self.corr[k], top)

    def _correct(self, k):
        """algo.step.correct in floats: corr = kp * e + integ, integ += ki * e, kp = r_est * kc,
        and the ring guard (kp off after a reversing step outgrowing the last by corr_max / 8)."""
        r_est, corr0, integ0, cmax = self.r_est[k], self.corr[k], self.integ[k], self.corr_max[k]
        du_prev = self.du_prev[k]
        tgt = np.maximum(r_est - self.esr[k], 0) * self.psum[k] / self.period[k] * self.corr_gain[k]
        tgt = np.where(self.i_zero[k] != 0, 0.0, tgt)
        e = tgt - corr0
        integ = integ0 + self.ki[k] * e
        on = self.kp_off[k] < 2
        kp = np.where(on, np.minimum(r_est * self.kc[k], self.kp_max[k]), 0.0)
        u = kp * e + integ
        integ = np.where((u > cmax) & (e > 0), integ0, integ)
        corr = np.clip(u, 0, cmax)
        du = corr - corr0
        rang = ((((du > 0) & (du_prev < 0)) | ((du < 0) & (du_prev > 0)))
                & (np.abs(du) > np.abs(du_prev) + cmax / 8))
        forced = (self.bad_windows[k] >= self.fault_windows[k]) | (self.valid_run[k] < 2)
        upd = on & ~forced
        self.kp_off[k] = np.where(upd, np.where(rang, self.kp_off[k] + 1, 0), self.kp_off[k])
        self.corr_target[k] = np.where(forced, 0.0, tgt)
        self.integ[k] = np.where(forced, 0.0, np.clip(integ, 0, cmax))
        self.corr[k] = np.where(forced, 0.0, corr)
        self.du_prev[k] = np.where(forced, 0.0, du)

    def _classify(self, k):
        """algo.estimator.classify in floats: trend removal, phase rotation, ratio, decisions."""
        di = self.isum[k] - 2 * self.isum_h[k]
        dv = self.vsum[k] - 2 * self.vsum_h[k]
        kt_s, kt_c = self.kt_s[k], self.kt_c[k]
        ii, iq = self.acc_ii[k] - di * kt_s, self.acc_iq[k] - di * kt_c
        vd, vqd = self.acc_vi[k] - dv * kt_s, self.acc_vq[k] - dv * kt_c
        vi = vd * self.rot_c[k] + vqd * self.rot_s[k]
        vq = vqd * self.rot_c[k] - vd * self.rot_s[k]
        m = np.maximum(np.abs(ii), np.abs(iq))
        low = m < self.swing_min[k]
        den = np.where(low, 1.0, ii * ii + iq * iq)
        r_raw = np.where(low, 0.0, (vi * ii + vq * iq) / den)
        x_raw = (vq * ii - vi * iq) / den
        status = np.select(
            [low, self.clipped[k] != 0, r_raw > self.r_max[k], self.transient[k] != 0,
             r_raw < 0, np.abs(x_raw) > self.x_max[k]],
            [st.STATUS_LOW_SWING, st.STATUS_CLIPPED, st.STATUS_R_HIGH, st.STATUS_TRANSIENT,
             st.STATUS_R_LOW, st.STATUS_REACTIVE],
            st.STATUS_VALID)
        self.swing[k] = np.where(status == st.STATUS_VALID, m, self.swing[k])
        return status, r_raw

    def _window_end(self, k):
        status, r_raw = self._classify(k)
        valid = status == st.STATUS_VALID
        r_est, run = self.r_est[k], self.valid_run[k]
        # Fast start: the first valid window is taken as it is and waits for a second within
        # r_step_max to confirm it (else that one replaces it), then gains 1/2 ... 2**-r_shift.
        bits = np.where(run > 0, np.frexp(run)[1], 0)
        g = 2.0 ** -np.minimum(bits, self.r_shift[k])
        d = np.clip((r_raw - r_est) * g, -self.r_step_max[k], self.r_step_max[k])
        anew = (run == 0) | ((run == 1) & (np.abs(r_raw - r_est) > self.r_step_max[k]))
        folded = np.where(anew, r_raw, np.clip(r_est + d, 0, self.r_max[k]))
        r_est = np.where(valid, folded, r_est)
        run = np.where(valid, np.where(anew, 1, np.minimum(run + 1, 0xFF)), run)
        held = (status == st.STATUS_TRANSIENT) | ((status == st.STATUS_CLIPPED)
                                                  & ~st.rails_fault(self.clipped[k].astype(np.int64)))
        bad = np.where(valid, 0, np.where(held, self.bad_windows[k],
                                          np.minimum(self.bad_windows[k] + 1, 0xFFFF)))
        forced = bad >= self.fault_windows[k]
        r_est = np.where(forced, 0.0, r_est)
        self.valid_run[k] = np.where(forced, 0.0, run)
        for name in ("corr", "corr_target", "integ", "du_prev"):
            getattr(self, name)[k[forced]] = 0.0
        i_mean = self.isum[k] / self.window[k]
        amp = np.maximum(r_est * i_mean * self.pert_gain[k], self.pert_amp[k] / 2)
        amp = np.where(status == st.STATUS_CLIPPED, self.pert_amp[k] / 2, amp)
        amp = np.where(status == st.STATUS_LOW_SWING, self.pert_amp[k] * 2, amp)
        self.pert_amp[k] = np.clip(amp, self.pert_min[k], self.pert_max[k])
        self.kp_off[k[valid]] = 0
        self.r_raw[k] = r_raw
        self.r_est[k] = r_est
        self.bad_windows[k] = bad
        self.status[k] = status
        self.windows[k] += 1
        for name in _CLEARED:
            getattr(self, name)[k] = 0.0

    def field(self, name):
        """Live array of state field ``name`` across instances."""
        return getattr(self, name)

    def state(self, k=0):
        return {name: float(getattr(self, name)[k]) for name in STATE_FIELDS}

    def states(self):
        return {name: getattr(self, name).copy() for name in STATE_FIELDS}
