"""``linedrop design``: size the algorithm for a scenario's plant and report what it will do.

Reads a scenario file (its [algorithm] table is optional; when present, that configuration is
the one analysed, otherwise the recommended one is) and prints a report, or with ``--json``
one JSON object with these keys (units in the names):

r_cable_ohm, r_cable_range_ohm [min, max], temperature_range_c [start, end],
loads [{value, current_a, drop_v, load_v}] (uncompensated, hottest cable),
uncompensated_drop_v, perturbation_hz, period_samples, periods_per_window, window_s,
sample_rate_hz, recommended_sample_rate_hz, rc_corner_hz, capacitor_reactance_ohm,
min_capacitance_f, compensation, loop_tau_ms (closed-loop time constant of the correction),
capacitance_f (the C its proportional gain assumes), adc_phase_samples, r_max_ohm,
esr_allowance_ohm (the ESR and load-end share the correction leaves out), corr_max_v (the
highest correction the command carries at the largest current: within headroom_v less
perturbation_peak_v, the perturbation riding on top of it), headroom_v, perturbation_peak_v,
compensated_current_a (largest supply current with the load at target_v),
correction_needed_v (at that current), pert_min_v, pert_max_v, word_lengths {adc_bits, table_bits, acc_bits,
r_frac_bits, corr_frac_bits}, stability_margin (1 - spectral radius of the period-rate loop),
spectral_radius, gain_margin (factor on the estimate to instability), convergence_windows,
convergence_s, dominant_poles [[re, im]], predicted_load_error_v (steady error plus
quantisation bound plus the lag behind a drifting cable), load_error_steady_v, quantisation_error_v,
drift_lag_error_v, esr_sensitivity_v_per_ohm and gain_sensitivity_v_per_pct (how far the load
rises at the largest current per ohm of ESR above the allowance and per 1 % of voltage-ADC gain
error: the estimate is the ratio of the two channels, so the current channel's own gain cancels in
the drop it gives), ripple_load_v_pp,
current_swing_a, warnings [str], cautions [str] (the usual cautions; the lamp line for lamp loads
only), configuration ("scenario" or "recommended"), algorithm
(recommended [algorithm] keys), from_plant (the settings [supply]/[sensing] fix).

``--algorithm-out FILE.toml`` writes the recommended [algorithm] table (the [supply]/[sensing]
settings as comments); ``--header FILE.h`` writes the params header of the analysed
configuration. Both are written atomically.
"""
import json
import math

from algo.params import derive
from harness.scenario.algo_setup import algo_config
from harness.atomic import atomic_write, check_file_target
from harness.design.report import design_report
from harness.port.params_header import params_header
from harness.scenario.read import load_scenario

def add_parser(sub):
    p = sub.add_parser("design", help="size perturbation, window, gains and word lengths for a scenario",
                       description="Recommend algorithm settings for a scenario's plant and predict "
                                   "regulation error, ripple, convergence and loop margin.")
    p.add_argument("scenario", metavar="SCENARIO.toml", help="scenario file ([algorithm] optional)")
    p.add_argument("--json", action="store_true", help="print every figure as one JSON object")
    p.add_argument("--algorithm-out", metavar="FILE.toml", help="write the recommended [algorithm] table")
    p.add_argument("--header", metavar="FILE.h", help="write the params header of the analysed configuration")
    p.set_defaults(func=run)


def _toml_value(v):
    return repr(float(v)) if isinstance(v, float) else str(int(v))


def algorithm_toml(rep, source):
    """Text of the recommended [algorithm] table, with the plant-fixed settings as comments."""
    lines = [f"# Recommended by linedrop design for {source}.",
             "# Set in [supply] / [sensing], not here:"]
    lines += [f"#   {k} = {_toml_value(v)}" for k, v in rep["from_plant"].items()]
    lines += ["", "[algorithm]"]
    lines += [f"{k} = {_toml_value(v)}" for k, v in rep["algorithm"].items()]
    return "\n".join(lines) + "\n"


def _json_ready(x):
    if isinstance(x, dict):
        return {k: _json_ready(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_json_ready(v) for v in x]
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return float(x) if hasattr(x, "dtype") else x


def report_text(rep):
    """The readable report."""
    r0, r1 = rep["r_cable_range_ohm"]
    t0, t1 = rep["temperature_range_c"]
    w = rep["word_lengths"]
    out = [f"Configuration analysed: {rep['configuration']}",
           f"Cable loop resistance: {rep['r_cable_ohm']:.4g} ohm"
           + (f" ({r0:.4g} .. {r1:.4g} ohm over {t0:g} .. {t1:g} degC)" if t0 != t1 else ""),
           "Uncompensated drop (hottest cable):"]
    out += [f"  load {x['value']:g}: {x['current_a']:.3g} A -> {x['drop_v']:.3g} V" for x in rep["loads"]]
    out += [f"Perturbation: {rep['perturbation_hz']:.4g} Hz = {rep['period_samples']} samples at "
            f"{rep['sample_rate_hz']:g} Hz, window {rep['periods_per_window']} periods "
            f"({1e3 * rep['window_s']:.3g} ms)",
            f"  recommended sample rate {rep['recommended_sample_rate_hz']:g} Hz; R*C corner "
            f"{rep['rc_corner_hz']:.3g} Hz; capacitor reactance {rep['capacitor_reactance_ohm']:.3g} ohm; "
            f"minimum capacitance {rep['min_capacitance_f']:.3g} F",
            f"  amplitude floor {rep['pert_min_v']:.3g} V, ceiling {rep['pert_max_v']:.3g} V (peak)",
            f"Compensation {rep['compensation']:g}, loop time constant {rep['loop_tau_ms']:.3g} ms "
            f"(zero at R*C with C = {rep['capacitance_f']:.3g} F), ADC phase "
            f"{rep['adc_phase_samples']:.3g} samples,",
            f"  r_max {rep['r_max_ohm']:.3g} ohm, correction max {rep['corr_max_v']:.3g} V "
            f"(needs {rep['correction_needed_v']:.3g} V, headroom {rep['headroom_v']:.3g} V less the "
            f"perturbation's peak {rep['perturbation_peak_v']:.3g} V)",
            f"Word lengths: ADC {w['adc_bits']}, table {w['table_bits']}, accumulator {w['acc_bits']}, "
            f"r_frac {w['r_frac_bits']}, corr_frac {w['corr_frac_bits']} bits",
            f"Predicted load error: {1e3 * rep['predicted_load_error_v']:.3g} mV "
            f"(steady {1e3 * rep['load_error_steady_v']:.3g} mV + quantisation "
            f"{1e3 * rep['quantisation_error_v']:.3g} mV"
            + (f" + drift lag {1e3 * rep['drift_lag_error_v']:.3g} mV" if rep["drift_lag_error_v"] else "") + ")",
            f"Sensitivity at {rep['compensated_current_a']:.3g} A: the load rises "
            f"{1e3 * rep['esr_sensitivity_v_per_ohm'] / 100:.3g} mV per 10 mOhm the ESR rises above "
            f"what the {1e3 * rep['esr_allowance_ohm']:.3g} mOhm allowance was set for (the cold raises it), and "
            f"{1e3 * rep['gain_sensitivity_v_per_pct']:.3g} mV per 1 % the voltage ADC reads high",
            f"Perturbation ripple at the load: {1e3 * rep['ripple_load_v_pp']:.3g} mV p-p",
            f"Loop: stability margin {rep['stability_margin']:.3f} (spectral radius "
            f"{rep['spectral_radius']:.3f}), gain margin x{rep['gain_margin']:.3g}, "
            f"converges to 1 % in {rep['convergence_windows']:.3g} windows ({rep['convergence_s']:.3g} s)"]
    out += ["Warnings:"] + [f"  - {x}" for x in rep["warnings"]] if rep["warnings"] else ["Warnings: none"]
    out += ["Cautions: " + " ".join(rep["cautions"])]
    return "\n".join(out)


def run(args):
    inputs = {"the scenario": args.scenario}
    for option, target in (("--algorithm-out", args.algorithm_out), ("--header", args.header)):
        if target:
            check_file_target(target, option, inputs)
            inputs[option] = target
    sc = load_scenario(args.scenario)
    rep = design_report(sc)
    if args.algorithm_out:
        with atomic_write(args.algorithm_out) as f:
            f.write(algorithm_toml(rep, args.scenario))
    if args.header:
        overrides = None if sc.algorithm else dict(rep["algorithm"],
                                                   sample_rate_hz=rep["recommended_sample_rate_hz"])
        text = params_header(derive(algo_config(sc, overrides)),
                             comment=f"linedrop design {args.scenario}")
        with atomic_write(args.header) as f:
            f.write(text)
    if args.json:
        print(json.dumps(_json_ready(rep), indent=1))
    else:
        print(report_text(rep))
    return 0
