"""Baseline compensators run through the same harness as linedrop's algorithm, in float.

``none``: command = target, no perturbation. ``fixed``: a fixed IR setting
that was right at 20 degC, times the filtered measured current.
``difference``: a square-wave perturbation and a single-step difference
estimate, sampling voltage and current once at the end of each half period
(R = dV/dI). ``sense``: remote sense wires, a PI loop on the load voltage
read by the same voltage ADC (the yardstick: what running wires would give).
Each has the interface of algo.batch.BatchModel (step, state)
with ``r_est`` in V-code per I-code and ``corr`` in DAC codes.
"""
import numpy as np

from algo.ideal import constants

#: The difference baseline's correction smoothing per half period (its own, fixed: 2**-2).
DIFFERENCE_SMOOTHING = 0.25


class _Base:
    def __init__(self, cfgs):
        self.n = len(cfgs)
        c = [constants(x) for x in cfgs]
        for name in ("target", "cmd_min", "cmd_max", "corr_gain", "corr_max", "r_max", "window",
                     "period", "pert_max", "r_g", "swing_min"):
            setattr(self, name, np.array([x[name] for x in c], dtype=float))
        self.corr_g = np.full(self.n, DIFFERENCE_SMOOTHING)
        self.r_est = np.zeros(self.n)
        self.corr = np.zeros(self.n)
        self.cmd = self.target.copy()

    def field(self, name):
        return getattr(self, name)

    def state(self, k=0):
        return {"r_est": float(self.r_est[k]), "corr": float(self.corr[k]), "cmd": float(self.cmd[k])}


class NoCompensation(_Base):
    """Command = target, always."""

    def step(self, adc_v, adc_i):
        return self.cmd


class FixedCompensation(_Base):
    """Correction = k * R_fixed * I, with I filtered over about one window.

    Parameters
    ----------
    cfgs : list of AlgoConfig
    r_fixed_ohm : array_like
        The configured loop resistance per instance, ohm.
    """

    def __init__(self, cfgs, r_fixed_ohm):
        super().__init__(cfgs)
        scale = np.array([(c.i_full_scale_a / c.v_full_scale_v) for c in cfgs])
        self.r_est = np.asarray(r_fixed_ohm, dtype=float) * scale
        self.i_filt = None

    def step(self, adc_v, adc_i):
        i = np.asarray(adc_i, dtype=float)
        self.i_filt = i.copy() if self.i_filt is None else self.i_filt + (i - self.i_filt) / self.window
        self.corr = np.clip(self.r_est * self.i_filt * self.corr_gain, 0, self.corr_max)
        self.cmd = np.clip(self.target + self.corr, self.cmd_min, self.cmd_max)
        return self.cmd


class DifferenceEstimator(_Base):
    """Square perturbation of pert_max; R from one voltage and current sample per half period."""

    def __init__(self, cfgs):
        super().__init__(cfgs)
        self.phase = np.zeros(self.n, dtype=np.int64)
        self.hi = np.zeros((2, self.n))
        self.i_mean = np.zeros(self.n)
        self.period = self.period.astype(np.int64)

    def step(self, adc_v, adc_i):
        v, i = np.asarray(adc_v, dtype=float), np.asarray(adc_i, dtype=float)
        self.i_mean += (i - self.i_mean) / self.period
        self.phase = (self.phase + 1) % self.period
        half = self.period // 2
        end_hi = self.phase == half          # last sample of the high half
        self.hi[0] = np.where(end_hi, v, self.hi[0])
        self.hi[1] = np.where(end_hi, i, self.hi[1])
        end_lo = self.phase == 0             # last sample of the low half: estimate once per period
        dv, di = self.hi[0] - v, self.hi[1] - i
        ok = end_lo & (np.abs(di) > 0)
        r_raw = np.where(ok, dv / np.where(di == 0, 1, di), 0.0)
        ok &= (r_raw >= 0) & (r_raw <= self.r_max)
        self.r_est = np.where(ok, self.r_est + (r_raw - self.r_est) * self.r_g, self.r_est)
        tgt = np.clip(self.r_est * self.i_mean * self.corr_gain, 0, self.corr_max)
        self.corr = np.where(end_lo, self.corr + (tgt - self.corr) * self.corr_g, self.corr)
        square = np.where(self.phase < half, self.pert_max, -self.pert_max)
        self.cmd = np.clip(self.target + self.corr + square, self.cmd_min, self.cmd_max)
        return self.cmd


#: Remote sense: the closed-loop time constant is at least this many samples (sampling and
#: ADC noise), and at least SENSE_TAU_BW supply time constants 1/(2*pi*bandwidth). Common
#: practice for a digital PI loop around a slower analog stage; no source.
SENSE_TAU_SAMPLES = 20.0
SENSE_TAU_BW = 3.0
#: Largest proportional gain of the remote-sense PI, volts of command per volt of error: it
#: multiplies the voltage ADC's noise into the command (common practice; no source).
SENSE_GAIN_MAX = 10.0


class RemoteSense(_Base):
    """Sense wires: the voltage ADC reads the load end and a PI loop holds it at target.

    What a user would build if they could run wires: the same supply (bandwidth, limits), the
    same DAC and the same voltage ADC (bits, full scale, noise), only wired to the load end
    (the closed loop converts ``v_load_v`` for it). The PI's zero cancels the cable-capacitor
    pole at 1/(R*C) of the scenario's cable and capacitor; its gain gives a closed-loop time
    constant of R*C / K, K = min(SENSE_GAIN_MAX, R*C / tau_min) with tau_min from
    SENSE_TAU_SAMPLES and SENSE_TAU_BW. The integral is clamped to [0, corr_max] and holds while the command is
    pinned at a limit (no windup).

    Parameters
    ----------
    cfgs : list of AlgoConfig
    scenarios : list of harness.scenario.specs.Scenario
    """

    def __init__(self, cfgs, scenarios):
        super().__init__(cfgs)
        fs = np.array([c.sample_rate_hz for c in cfgs])
        rc = np.array([(s.cable.resistance_ohm + s.load_end.esr_ohm) * s.load_end.capacitance_f
                       for s in scenarios])
        bw = np.array([s.supply.loop_bandwidth_hz for s in scenarios])
        tau_min = np.maximum(SENSE_TAU_SAMPLES / fs,
                             np.where(bw > 0, SENSE_TAU_BW / (2 * np.pi * np.where(bw > 0, bw, 1.0)), 0.0))
        self.k_p = np.minimum(SENSE_GAIN_MAX, rc / tau_min)
        self.k_i = self.k_p / (rc * fs)           # per sample: K * Ts / T_i with T_i = R*C
        v_lsb = np.array([c.v_full_scale_v / (1 << c.adc_bits) for c in cfgs])
        dac_lsb = np.array([c.dac_full_scale_v / (1 << c.dac_bits) for c in cfgs])
        self.v_to_dac = v_lsb / dac_lsb
        self.target_v_code = np.array([c.target_v for c in cfgs]) / v_lsb
        self.integ = np.zeros(self.n)

    def step(self, adc_v, adc_i):
        e = (self.target_v_code - np.asarray(adc_v, dtype=float)) * self.v_to_dac   # DAC codes
        # Conditional integration: no integrating while the command is pinned at a limit in
        # the direction the error pushes (the P term alone saturates it at a large error).
        unsat = self.target + self.k_p * e + self.integ
        pinned = ((unsat >= self.cmd_max) & (e > 0)) | ((unsat <= self.cmd_min) & (e < 0))
        self.integ = np.clip(np.where(pinned, self.integ, self.integ + self.k_i * e), 0.0, self.corr_max)
        self.corr = np.clip(self.k_p * e + self.integ, -self.target, self.corr_max)
        self.cmd = np.clip(self.target + self.corr, self.cmd_min, self.cmd_max)
        return self.cmd
