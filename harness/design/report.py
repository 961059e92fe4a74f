"""The design report of a scenario: plant figures, recommended settings, predictions and warnings."""
import math
from dataclasses import replace

from harness.loop.cautions import cautions_for
from harness.scenario.algo_setup import FROM_PLANT, algo_config
from harness.design import calculator as d
from harness.design.operating_point import (correction_at_target, correction_ceiling_v, current_at,
                                            load_values, pert_for)


#: Extra-low-voltage limit, V DC (SELV, about 60 V DC per the design brief; IEC 61140 class III
#: from memory). Lighting and Class 2 circuits have lower limits.
ELV_LIMIT_V = 60.0
#: Constant-power load: warn when the cable drop exceeds this share of the load voltage (the
#: loop model's gain margin falls with it; common practice, no published source).
CP_DROP_SHARE = 0.2
#: Warn when ESR exceeds this share of the cable resistance.
ESR_SHARE = 0.2
#: R*C corner: warn when f is below this multiple of the corner.
CORNER_WARN = 3.0
#: r_max_ohm at least this multiple of the hottest cable plus ESR: room for a window read high by
#: noise or a sensing gain error (the calculator's gain-margin room, GM_TARGET; the recommended
#: r_max_ohm is R_MAX_FACTOR = 2 times it).
R_MAX_ROOM = d.GM_TARGET


def _limit_warnings(sc, cfg, fig):
    """Warnings where a limit (estimate range, supply current, converter full scale) is below what
    the plant needs; ``fig`` carries the compensated current and the current swing."""
    out = []
    r_hot = fig["r_cable_range_ohm"][1] + sc.load_end.esr_ohm
    if cfg.r_max_ohm < R_MAX_ROOM * r_hot:
        out.append(f"r_max_ohm = {cfg.r_max_ohm:.3g} ohm leaves no room above the loop resistance the "
                   f"estimate reads, {r_hot:.3g} ohm (hottest cable plus ESR): windows are rejected as "
                   f"r_high and the load is left uncompensated; set r_max_ohm to at least "
                   f"{R_MAX_ROOM * r_hot:.3g} ohm")
    i_peak = fig["compensated_current_a"] + fig["current_swing_a"]
    limit = sc.supply.current_limit_a
    if limit is not None and i_peak > limit:
        out.append(f"the load draws up to {fig['compensated_current_a']:.3g} A at the target voltage "
                   f"({i_peak:.3g} A with the perturbation), above the supply's current_limit_a = "
                   f"{limit:g} A: the supply limits, the load sags and the estimate fails; raise the "
                   "limit or lighten the load")
    sen = sc.sensing
    i_top = sen.i_full_scale_a * (1 - 2.0 ** -sen.adc_bits)
    if i_peak > i_top:
        out.append(f"the current ADC reads up to {i_top:.3g} A (i_full_scale_a = {sen.i_full_scale_a:g} A) "
                   f"but the supply carries up to {i_peak:.3g} A with the perturbation: the current "
                   "clips, no window is valid and nothing is corrected; raise i_full_scale_a")
    if sen.v_full_scale_v < sc.supply.max_v:
        out.append(f"the voltage ADC reads up to {sen.v_full_scale_v:g} V (v_full_scale_v) but the supply "
                   f"may output up to max_v = {sc.supply.max_v:g} V: a raised output clips the voltage "
                   "reading, and windows with a code at the rail hold the estimate instead of "
                   "measuring it, so it cannot start or follow the cable; raise v_full_scale_v above max_v")
    return out


def _warnings(sc, cfg, fig):
    """Plain-language warnings for configuration ``cfg`` on scenario ``sc`` given figures ``fig``."""
    out = _limit_warnings(sc, cfg, fig)
    f, c, r = cfg.perturbation_hz, sc.load_end.capacitance_f, fig["r_cable_range_ohm"][0]
    xc = 1.0 / (2 * math.pi * f * c)
    if xc > r / d.AC_SHORT:
        out.append(f"the load capacitor is not an AC short at {f:.4g} Hz: its reactance {xc:.3g} ohm is "
                   f"more than a tenth of the cable's {r:.3g} ohm; fit at least "
                   f"{fig['min_capacitance_f']:.3g} F or raise the perturbation frequency")
    if f < CORNER_WARN * fig["rc_corner_hz"]:
        out.append(f"the perturbation frequency {f:.4g} Hz is not well above the R*C corner "
                   f"{fig['rc_corner_hz']:.4g} Hz: the capacitor charging current swamps the measurement")
    xl = 2 * math.pi * f * sc.cable.inductance_h
    if xl > r / d.L_SHORT:
        out.append(f"the cable's inductive reactance {xl:.3g} ohm at {f:.4g} Hz is more than a third of "
                   f"its {r:.3g} ohm resistance: the sampled current lags the command and the "
                   "estimate is biased; lower the perturbation frequency (and fit a larger capacitor "
                   "so it stays an AC short)")
    bw = sc.supply.loop_bandwidth_hz
    if bw > 0 and f > bw:
        out.append(f"the perturbation frequency {f:.4g} Hz is above the supply's loop bandwidth "
                   f"{bw:.4g} Hz: the swing shrinks; keep it at or below {bw:.4g} Hz")
    room = fig["headroom_v"] - fig["perturbation_peak_v"]
    if fig["correction_needed_v"] > room:
        out.append(f"the correction would need up to {fig['correction_needed_v']:.3g} V (at the "
                   f"{fig['compensated_current_a']:.3g} A the load draws at the target voltage) but the "
                   f"supply has only {fig['headroom_v']:.3g} V of headroom (max_v - target_v), "
                   f"{fig['perturbation_peak_v']:.3g} V of it taken by the perturbation's peak: the load "
                   "will sag at high current")
    if sc.supply.max_v > ELV_LIMIT_V:
        out.append(f"the supply may output up to max_v = {sc.supply.max_v:g} V, above the {ELV_LIMIT_V:g} V DC "
                   "extra-low-voltage limit: the supply and load voltages could pass it")
    if sc.load.kind == "constant_power":
        share = max(x["drop_v"] / max(x["load_v"], 1e-9) for x in fig["loads"])
        if share > CP_DROP_SHARE:
            out.append(f"the constant-power load's cable drop is {100 * share:.0f} % of its voltage: its "
                       "negative incremental resistance erodes the loop margin and it can collapse if "
                       "the supply sags; use heavier cable or a higher supply voltage")
    esr = sc.load_end.esr_ohm
    if esr > ESR_SHARE * r:
        out.append(f"the capacitor's ESR {esr:.3g} ohm is {100 * esr / r:.0f} % of the cable resistance: "
                   "the estimate includes it, so set esr_allowance_ohm from the capacitor's data")
    i_min = min(x["current_a"] for x in fig["loads"])
    w = 2 * math.pi * f
    z = abs(r + esr + 1j * w * sc.cable.inductance_h + 1 / (1j * w * c))
    if cfg.pert_min_v / z > d.LIGHT_LOAD_SHARE * i_min:
        out.append(f"the lightest load ({i_min:.3g} A) is below twice the perturbation floor's current "
                   f"swing ({cfg.pert_min_v / z:.3g} A): the current swings near zero and the current "
                   "ADC clips it, so at that load no estimate can be formed and the correction falls "
                   "back toward zero; use a finer current ADC or a heavier minimum load")
    zc = esr + 1 / (1j * w * c)
    ripple = cfg.pert_max_v * abs(zc) / z
    if ripple > d.RIPPLE_FRACTION * sc.supply.target_v:
        out.append(f"the perturbation the converters need ({cfg.pert_max_v:.3g} V) puts {ripple:.3g} V peak of "
                   f"ripple on the load, more than {100 * d.RIPPLE_FRACTION:.2g} % of target: the capacitor's "
                   "ESR or a coarse DAC or voltage ADC lets it through; use a lower-ESR capacitor or "
                   "finer converters")
    gm = fig["gain_margin"]
    if fig["spectral_radius"] >= 1.0:
        out.append("the correction loop is unstable: the correction will ring and hit its limits; "
                   "raise loop_tau_ms")
    elif gm < d.GM_TARGET:
        out.append(f"the correction loop has little margin: an estimate {100 * (gm - 1):.0f} % high "
                   "(sensing gain, ESR) makes it ring; raise loop_tau_ms")
    return out


def design_report(sc):
    """Everything ``linedrop design`` reports for scenario ``sc`` (see harness.cli.design)."""
    rec, fs = d.recommend(sc)
    own = bool(sc.algorithm)
    cfg = algo_config(sc) if own else algo_config(sc, dict(rec, sample_rate_hz=fs))
    r_min, r_max = d.resistance_range(sc)
    le = sc.load_end
    loads = d.uncompensated(sc, algo_config(replace(sc, algorithm={})), r_max)
    i_comp = max(current_at(sc, v, sc.supply.target_v) for v in load_values(sc.load))
    f = cfg.perturbation_hz
    corr_needed = correction_at_target(sc, cfg, r_max)
    loop = d.loop_summary(sc, cfg)
    fig = {
        "configuration": "scenario" if own else "recommended",
        "r_cable_ohm": sc.cable.resistance_ohm,
        "r_cable_range_ohm": [r_min, r_max],
        "temperature_range_c": [sc.cable.temperature_c, sc.cable.temperature_end_c
                                if sc.cable.temperature_end_c is not None else sc.cable.temperature_c],
        "loads": loads,
        "uncompensated_drop_v": max(x["drop_v"] for x in loads),
        "perturbation_hz": f,
        "period_samples": cfg.period_samples,
        "periods_per_window": cfg.periods_per_window,
        "window_s": cfg.window_samples / cfg.sample_rate_hz,
        "sample_rate_hz": cfg.sample_rate_hz,
        "recommended_sample_rate_hz": fs,
        "rc_corner_hz": 1.0 / (2 * math.pi * (r_max + le.esr_ohm) * le.capacitance_f),
        "capacitor_reactance_ohm": 1.0 / (2 * math.pi * f * le.capacitance_f),
        "min_capacitance_f": d.AC_SHORT / (2 * math.pi * f * r_min),
        "compensation": cfg.compensation,
        "loop_tau_ms": 1e3 * cfg.loop_tau_s,
        "capacitance_f": cfg.capacitance_f,
        "adc_phase_samples": cfg.adc_phase_samples,
        "r_max_ohm": cfg.r_max_ohm,
        "esr_allowance_ohm": cfg.esr_allowance_ohm,
        "corr_max_v": correction_ceiling_v(cfg, r_max + le.esr_ohm, i_comp),
        "perturbation_peak_v": pert_for(cfg, r_max + le.esr_ohm, i_comp),
        "headroom_v": max(0.0, sc.supply.max_v - sc.supply.target_v),
        "compensated_current_a": i_comp,
        "correction_needed_v": corr_needed,
        "pert_min_v": cfg.pert_min_v,
        "pert_max_v": cfg.pert_max_v,
        "word_lengths": {"adc_bits": _adc_bits(sc, cfg), "table_bits": cfg.table_bits,
                         "acc_bits": cfg.acc_bits, "r_frac_bits": cfg.r_frac_bits,
                         "corr_frac_bits": cfg.corr_frac_bits},
        "stability_margin": loop["stability_margin"],
        "spectral_radius": loop["spectral_radius"],
        "gain_margin": loop["gain_margin"],
        "convergence_windows": loop["convergence_windows"],
        "convergence_s": loop["convergence_s"],
        "dominant_poles": [[float(p.real), float(p.imag)] for p in loop["poles"]
                           if abs(p) >= 0.5 * loop["spectral_radius"]],
    }
    fig.update(d.predict(sc, cfg))
    fig["warnings"] = _warnings(sc, cfg, fig)
    fig["cautions"] = cautions_for(sc.load.kind)
    fig["algorithm"] = {k: v for k, v in rec.items() if k not in FROM_PLANT}
    fig["from_plant"] = {k: (fs if k == "sample_rate_hz" else getattr(getattr(sc, s), n))
                         for k, (s, n) in FROM_PLANT.items()}
    return fig


def _adc_bits(sc, cfg):
    """ADC bits so the perturbation floor's current swing spans FLOOR_LSB codes (12 .. 16)."""
    z = sc.cable.resistance_ohm + sc.load_end.esr_ohm
    swing = max(cfg.pert_min_v, 1e-9) / z
    need = math.ceil(math.log2(d.FLOOR_LSB * sc.sensing.i_full_scale_a / swing))
    return min(16, max(12, need))
