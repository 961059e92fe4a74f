"""Float64 "ideal" twin of the algorithm: same structure, exact arithmetic, no word lengths.

The yardstick for word-length tuning: every decision (window classification,
load-step detection, clamps, forced zero) is the one the fixed-point model
makes, but sums, products and the ratio are exact floats, the reference is
an exact sine and the command is not rounded to DAC codes. State fields carry
the fixed-point names in plain units: resistances in V-code per I-code,
correction and perturbation in DAC codes (fractional).
"""
import math

import numpy as np

from algo.config import AlgoConfig
from algo.state import STATE_FIELDS
from algo import state as st

_CONSTS = ("adc_max", "target", "cmd_min", "cmd_max", "period", "window", "r_max", "x_max",
           "esr", "r_step_max", "r_gain", "corr_gain", "pert_gain", "corr_max", "pert_min",
           "pert_max", "swing_min", "step_min", "step_rel", "r_g", "corr_g", "fault_windows")


def constants(cfg: AlgoConfig):
    """The ideal's parameters in code units, from settings (no rounding)."""
    v_lsb = cfg.v_full_scale_v / (1 << cfg.adc_bits)
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    r_scale = i_lsb / v_lsb
    window = cfg.window_samples
    dac_max = (1 << cfg.dac_bits) - 1
    return dict(
        adc_max=(1 << cfg.adc_bits) - 1,
        target=cfg.target_v / dac_lsb,
        cmd_min=min(dac_max, cfg.min_v / dac_lsb),
        cmd_max=min(dac_max, cfg.max_v / dac_lsb),
        period=cfg.period_samples,
        window=window,
        r_max=cfg.r_max_ohm * r_scale,
        x_max=cfg.x_max_ohm * r_scale,
        esr=cfg.esr_allowance_ohm * r_scale,
        r_step_max=cfg.r_step_max_ohm * r_scale,
        r_gain=v_lsb / dac_lsb,
        corr_gain=cfg.compensation * v_lsb / dac_lsb,
        pert_gain=cfg.pert_fraction * v_lsb / dac_lsb,
        corr_max=min(cfg.corr_max_v, max(0.0, cfg.max_v - cfg.target_v)) / dac_lsb,
        pert_min=cfg.pert_min_v / dac_lsb,
        pert_max=cfg.pert_max_v / dac_lsb,
        swing_min=cfg.swing_min_a / i_lsb * window / 2 / math.sqrt(2),
        step_min=cfg.step_min_a / i_lsb * cfg.period_samples,
        step_rel=2.0 ** -cfg.step_rel_shift,
        r_g=2.0 ** -cfg.r_filter_shift,
        corr_g=2.0 ** -cfg.smoothing_shift,
        fault_windows=cfg.fault_windows,
    )


class IdealBatch:
    """``n`` float instances stepped together; same interface as algo.batch.BatchModel."""

    def __init__(self, cfg_list):
        self.n = len(cfg_list)
        for name in _CONSTS:
            setattr(self, name, np.array([constants(c)[name] for c in cfg_list], dtype=np.float64))
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
        self.clipped[(v == self.adc_max) | (i == self.adc_max) | (i == 0)] = 1
        ph = self.phase.astype(np.int64)
        sn = self.sin[self._idx, ph]
        cs = self.sin[self._idx, (ph + self.period // 4) % self.period]
        self.acc_vi += v * sn
        self.acc_vq += v * cs
        self.acc_ii += i * sn
        self.acc_iq += i * cs
        self.isum += i
        self.psum += i
        self.phase = (ph + 1) % self.period
        self.count += 1
        k = np.flatnonzero(self.phase == 0)
        if k.size:
            thr = np.maximum(self.step_min[k], self.psum_prev[k] * self.step_rel[k])
            jump = (self.have_prev[k] != 0) & (np.abs(self.psum[k] - self.psum_prev[k]) > thr)
            self.transient[k[jump]] = 1
            self.psum_prev[k] = self.psum[k]
            self.have_prev[k] = 1
            self.psum[k] = 0
        k = np.flatnonzero(self.count == self.window)
        if k.size:
            self._window_end(k)
        self.cmd = self._command()
        return self.cmd

    def run(self, adc_v, adc_i):
        """Step over columns of (n, T) inputs; returns (n, T) commands."""
        out = np.empty(np.shape(adc_v))
        for t in range(out.shape[1]):
            out[:, t] = self.step(adc_v[:, t], adc_i[:, t])
        return out

    def _window_end(self, k):
        ii, iq, vi, vq = self.acc_ii[k], self.acc_iq[k], self.acc_vi[k], self.acc_vq[k]
        low = np.maximum(np.abs(ii), np.abs(iq)) < self.swing_min[k]
        den = np.where(low, 1.0, ii * ii + iq * iq)
        r_raw = np.where(low, 0.0, (vi * ii + vq * iq) / den)
        x_raw = (vq * ii - vi * iq) / den
        status = np.select(
            [low, self.clipped[k] != 0, self.transient[k] != 0, r_raw > self.r_max[k],
             r_raw < 0, np.abs(x_raw) > self.x_max[k]],
            [st.STATUS_LOW_SWING, st.STATUS_CLIPPED, st.STATUS_TRANSIENT, st.STATUS_R_HIGH,
             st.STATUS_R_LOW, st.STATUS_REACTIVE],
            st.STATUS_VALID)
        valid = status == st.STATUS_VALID
        r_est = self.r_est[k]
        d = np.clip((np.maximum(r_raw, 0) - r_est) * self.r_g[k], -self.r_step_max[k],
                    self.r_step_max[k])
        r_est = np.where(valid, np.clip(r_est + d, 0, self.r_max[k]), r_est)
        held = (status == st.STATUS_TRANSIENT) | (status == st.STATUS_CLIPPED)
        bad = np.where(valid, 0, np.where(held, self.bad_windows[k],
                                          np.minimum(self.bad_windows[k] + 1, 0xFFFF)))
        forced = bad >= self.fault_windows[k]
        r_est = np.where(forced, 0.0, r_est)
        i_mean = self.isum[k] / self.window[k]
        tgt = np.clip(np.maximum(r_est - self.esr[k], 0) * i_mean * self.corr_gain[k], 0,
                      self.corr_max[k])
        self.corr_target[k] = np.where(valid | held, tgt, 0.0)
        amp = np.maximum(r_est * i_mean * self.pert_gain[k], self.pert_amp[k] / 2)
        amp = np.where(status == st.STATUS_CLIPPED, self.pert_amp[k] / 2, amp)
        amp = np.where(status == st.STATUS_LOW_SWING, self.pert_amp[k] * 2, amp)
        self.pert_amp[k] = np.clip(amp, self.pert_min[k], self.pert_max[k])
        corr = self.corr[k]
        self.corr[k] = np.where(forced, 0.0, corr + (self.corr_target[k] - corr) * self.corr_g[k])
        self.cmd_base[k] = self.target[k] + self.corr[k]
        self.r_raw[k] = r_raw
        self.r_est[k] = r_est
        self.bad_windows[k] = bad
        self.status[k] = status
        self.windows[k] += 1
        for name in ("acc_vi", "acc_vq", "acc_ii", "acc_iq", "isum", "count", "transient",
                     "clipped"):
            getattr(self, name)[k] = 0.0

    def field(self, name):
        """Live array of state field ``name`` across instances."""
        return getattr(self, name)

    def state(self, k=0):
        return {name: float(getattr(self, name)[k]) for name in STATE_FIELDS}

    def states(self):
        return {name: getattr(self, name).copy() for name in STATE_FIELDS}
