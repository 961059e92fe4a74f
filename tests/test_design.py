"""linedrop design: cable figures against published tables, warnings, JSON keys, outputs, bad input."""
import json
import math
from pathlib import Path

import numpy as np
import pytest

from algo.params import derive
from harness.scenario.algo_setup import algo_config
from harness.scenario.algo_toml import load_algo_config
from harness.cli.main import main
from harness.design.report import design_report
from harness.scenario.read import load_scenario

DEMO = "harness/scenario/scenarios/demo_mast.toml"

# Invented test plants. PoE-like: 48 V feed, constant-current powered device at the far end.
POE_AF = """
[supply]
target_v = 48.0
max_v = 57.0
[cable]
resistance_ohm = 20.0
[load_end]
capacitance_f = 2.2e-3
[load]
kind = "constant_current"
current_a = 0.35
[sensing]
i_full_scale_a = 1.0
"""

BASE = """
[supply]
target_v = {target}
max_v = {max_v}
loop_bandwidth_hz = {bw}
[cable]
resistance_ohm = {r}
inductance_h = {l}
[load_end]
capacitance_f = {c}
esr_ohm = {esr}
[load]
kind = "{kind}"
{key} = {value}
[sensing]
gain_error = {gain_error}
v_full_scale_v = 80.0
{algorithm}
"""


def write(tmp_path, text, name="s.toml"):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def plant(tmp_path, **kw):
    """A scenario file from BASE with defaults changed by ``kw`` (an invented 2-ohm run)."""
    v = dict(target=24.0, max_v=30.0, bw=0.0, r=2.0, l=0.0, c=22e-3, esr=0.0, kind="constant_current",
             key="current_a", value=1.5, gain_error=0.0, algorithm="")
    v.update(kw)
    return load_scenario(write(tmp_path, BASE.format(**v)))


def test_poe_af_channel_drop(tmp_path):
    """IEEE 802.3af: 20 ohm channel loop resistance at 350 mA gives a 7 V drop."""
    rep = design_report(load_scenario(write(tmp_path, POE_AF)))
    assert rep["r_cable_ohm"] == pytest.approx(20.0)
    assert rep["uncompensated_drop_v"] == pytest.approx(7.0, rel=1e-9)


def test_poe_at_type2_channel_drop(tmp_path):
    """IEEE 802.3at Type 2: 12.5 ohm channel loop resistance at 600 mA gives a 7.5 V drop."""
    text = POE_AF.replace("20.0", "12.5").replace("0.35", "0.6")
    rep = design_report(load_scenario(write(tmp_path, text)))
    assert rep["r_cable_ohm"] == pytest.approx(12.5)
    assert rep["uncompensated_drop_v"] == pytest.approx(7.5, rel=1e-9)


def test_lighting_run_matches_awg12_copper_table(tmp_path):
    """AWG 12 copper: 5.211 ohm/km per conductor at 20 degC (ASTM B258 / NBS Handbook 100).

    An invented 12 V garden lighting run of 40 m one way: the loop counts both conductors.
    The table value has four significant figures, hence the 1e-4 relative tolerance.
    """
    text = """
[supply]
target_v = 12.0
max_v = 14.0
[cable]
length_m = 40.0
awg = 12
temperature_c = 20.0
[load_end]
capacitance_f = 10e-3
esr_ohm = 0.02
[load]
kind = "lamp"
rated_v = 12.0
rated_w = 60.0
"""
    rep = design_report(load_scenario(write(tmp_path, text)))
    assert rep["r_cable_ohm"] == pytest.approx(2 * 40.0 * 5.211e-3, rel=1e-4)


def test_ripple_is_current_swing_times_capacitor_impedance(tmp_path):
    """Load ripple = 2 * dI * |ESR + 1/(j w C)| p-p, with ESR = 0 that is dI / (pi f C) (design brief 3.9)."""
    rep = design_report(plant(tmp_path))
    f, c = rep["perturbation_hz"], 22e-3
    assert rep["ripple_load_v_pp"] == pytest.approx(2 * rep["current_swing_a"] / (2 * math.pi * f * c), rel=1e-9)


def test_demo_has_no_warnings():
    """The demo mast is sized sensibly: none of the warnings below fire on it."""
    assert design_report(load_scenario(DEMO))["warnings"] == []


OWN_ALGO = "[algorithm]\nperiod_samples = 32\n"     # 1 kHz at 32 kHz: analysed as given


@pytest.mark.parametrize("kw,phrase", [
    (dict(c=0.5e-3, algorithm=OWN_ALGO), "not an AC short"),
    (dict(c=0.1e-3, algorithm=OWN_ALGO), "R*C corner"),
    (dict(bw=500.0, algorithm=OWN_ALGO), "loop bandwidth"),
    (dict(max_v=25.0), "headroom"),
    (dict(target=48.0, max_v=65.0, r=4.0), "extra-low-voltage"),
    (dict(kind="constant_power", key="power_w", value=60.0), "constant-power"),
    (dict(esr=1.0), "capacitor's ESR"),
    (dict(l=200e-6, algorithm=OWN_ALGO), "inductive reactance"),
    (dict(c=22e-3, gain_error=0.3, algorithm="[algorithm]\nperiod_samples = 32\nloop_tau_ms = 1.0\n"
          "capacitance_f = 0.022\nkp_max = 64.0\n"), "unstable"),
    (dict(c=22e-3, algorithm="[algorithm]\nperiod_samples = 32\nloop_tau_ms = 4.0\n"
          "capacitance_f = 0.022\nkp_max = 64.0\n"), "little margin"),
])
def test_each_warning_fires_on_a_plant_built_for_it(tmp_path, kw, phrase):
    """Each plain-language warning fires on an invented plant that breaks its rule.

    Rules: AC short and corner (design brief 3.9; factor 10 and 3 common practice, no published
    source), supply bandwidth (same), cable inductance wL below R / 3 (same), headroom = max_v - target_v, extra-low voltage about
    60 V DC (design brief 5), constant-power drop share and ESR share (common practice, no
    published source), loop margin (harness.design.loop_model).
    """
    warnings = design_report(plant(tmp_path, **kw))["warnings"]
    assert any(phrase in w for w in warnings), warnings


def test_json_keys(capsys):
    """--json prints one object with the documented keys and types."""
    assert main(["design", DEMO, "--json"]) == 0
    rep = json.loads(capsys.readouterr().out)
    for key in ("r_cable_ohm", "perturbation_hz", "sample_rate_hz", "min_capacitance_f",
                "predicted_load_error_v", "stability_margin", "gain_margin", "convergence_s",
                "ripple_load_v_pp", "word_lengths", "algorithm"):
        assert isinstance(rep[key], (int, float, dict)), key
    assert isinstance(rep["warnings"], list) and all(isinstance(w, str) for w in rep["warnings"])
    assert 0 < rep["stability_margin"] < 1


def test_report_carries_the_cautions(capsys):
    """The readable report ends with the cautions line (design brief 5); the lamp line only
    where the load is a lamp (the demo's is a constant-current mast, garden_lamps' lamps)."""
    assert main(["design", DEMO]) == 0
    out = capsys.readouterr().out.splitlines()[-1]
    assert out.startswith("Cautions:")
    assert "max_v" in out and "cable heating" in out and "60 V" in out and "Lamp life" not in out
    lamps = str(Path(DEMO).with_name("garden_lamps.toml"))
    assert main(["design", lamps]) == 0
    assert "Lamp life" in capsys.readouterr().out.splitlines()[-1]


def test_algorithm_out_and_header_round_trip(tmp_path, capsys):
    """--algorithm-out loads back through load_algo_config; --header is derive() of that config."""
    toml_path, h_path = tmp_path / "algo.toml", tmp_path / "p.h"
    assert main(["design", DEMO, "--algorithm-out", str(toml_path), "--header", str(h_path)]) == 0
    rep = design_report(load_scenario(DEMO))
    cfg = load_algo_config(str(toml_path))
    for key, value in rep["algorithm"].items():
        assert getattr(cfg, key) == pytest.approx(value), key
    sc = load_scenario(DEMO)
    full = algo_config(sc, dict(rep["algorithm"], sample_rate_hz=rep["recommended_sample_rate_hz"]))
    assert derive(full).fingerprint() in h_path.read_text()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["algo.toml", "p.h"]   # no temp files left


@pytest.mark.parametrize("text,key", [
    (POE_AF.replace("resistance_ohm = 20.0", "resistance_ohm = -1.0"), "cable.resistance_ohm"),
    (POE_AF + "[algorithm]\ncompensation = 2.0\n", "algorithm.compensation"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, text, key):
    """Bad input: exit 2, one stderr line naming the file, the key and the allowed range."""
    path = write(tmp_path, text)
    assert main(["design", path]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and path in err and key in err and "]" in err   # "[lo, hi]" or "(lo, hi]"


def test_missing_file_exits_2(tmp_path, capsys):
    """A scenario that cannot be read: exit 2, the path named."""
    assert main(["design", str(tmp_path / "none.toml")]) == 2
    assert "none.toml" in capsys.readouterr().err


def test_recommended_frequency_keeps_the_cable_inductance_small(tmp_path):
    """The calculator lowers the perturbation so wL stays below R / L_SHORT (common practice,
    no published source) when the capacitor still allows it, and then warns about nothing."""
    import math
    sc = plant(tmp_path, r=0.5, l=20e-6, c=47e-3)
    rep = design_report(sc)
    f = rep["perturbation_hz"]
    assert 2 * math.pi * f * 20e-6 <= 0.5 / 3
    assert not any("inductive" in w for w in rep["warnings"]), rep["warnings"]


def test_first_order_filter_trails_a_ramp_by_d_times_1_minus_a_over_a():
    """The steady lag drift_lag_v uses: x[k] = x[k-1] + a (r[k] - x[k-1]) on r[k] = k d trails it by
    d (1 - a) / a (final-value theorem; computed here with scipy.signal.lfilter)."""
    from scipy.signal import lfilter
    a, d = 0.25, 0.01
    r = d * np.arange(400)
    x = lfilter([a], [1.0, a - 1.0], r)
    assert r[-1] - x[-1] == pytest.approx(d * (1 - a) / a, rel=1e-9)


def test_prediction_counts_the_lag_behind_a_warming_cable(tmp_path):
    """A 2 ohm copper loop warming 20 -> 45 degC over 1 s ramps at 2 * 0.00393 * 25 ohm/s (IEC 60028);
    the load error it leaves is that rate times (4 windows + loop_tau) times the current (r_filter_shift 2)."""
    base = plant(tmp_path)
    text = BASE.format(target=24.0, max_v=30.0, bw=0.0, r=2.0, l=0.0, c=22e-3, esr=0.0, kind="constant_current",
                       key="current_a", value=1.5, gain_error=0.0, algorithm="")
    rep = design_report(load_scenario(write(tmp_path, text.replace("inductance_h", "temperature_c = 20.0\n"
                                                                   "temperature_end_c = 45.0\ninductance_h"))))
    rho = 2.0 * 0.00393 * 25.0
    lag_s = 4 * rep["window_s"] + 1e-3 * rep["loop_tau_ms"]
    assert rep["drift_lag_error_v"] == pytest.approx(rho * lag_s * 1.5, rel=1e-3)
    assert design_report(base)["drift_lag_error_v"] == 0.0
    assert rep["predicted_load_error_v"] == pytest.approx(
        abs(rep["load_error_steady_v"]) + rep["quantisation_error_v"] + rep["drift_lag_error_v"], rel=1e-12)


START_BIAS = """
[supply]
target_v = 24.0
max_v = 32.0
[cable]
resistance_ohm = 2.0
[load_end]
capacitance_f = 22e-3
esr_ohm = 1.0
[load]
kind = "{kind}"
{load}
"""


@pytest.mark.parametrize("kind, load, fast", [("constant_power", "power_w = 60.0", True),
                                              ("constant_current", "current_a = 2.5", False)])
def test_start_bias_is_the_load_ends_share_at_the_sagged_point_less_at_target(tmp_path, kind, load, fast):
    """Invented 24 V run, 2 ohm, 22 mF with 1 ohm ESR. 60 W constant power sags uncompensated to
    V = 12 + sqrt(144 - 120) = 16.9 V (V^2 - 24 V + 120 = 0) and draws 2.5 A at target. The load
    end is Zc = ESR + 1/(j w C) in parallel with the load's incremental resistance -V^2/P (circuit
    algebra, Z = Zc / (1 + g Zc) with g = -P/V^2); the bias is the real part's excess at 16.9 V
    over 24 V, times 2.5 A. The calculator takes the shares from the sampled plant, which adds the
    sampling's own small part: within 5 % of the circuit-algebra figure. A constant-current load's
    share does not move with its voltage: no bias, and the steady filter."""
    from dataclasses import replace
    from harness.design import calculator as calc
    path = tmp_path / "p.toml"
    path.write_text(START_BIAS.format(kind=kind, load=load))
    sc = load_scenario(path)
    rec, fs = calc.recommend(replace(sc, algorithm={}))
    bias = calc.start_bias_v(sc, dict(rec, sample_rate_hz=fs))
    f = fs / rec["period_samples"]
    zc = 1.0 + 1.0 / (1j * 2 * math.pi * f * 22e-3)
    if kind == "constant_power":
        v_sag = 12.0 + math.sqrt(24.0)
        share = [(zc / (1.0 - 60.0 / v ** 2 * zc)).real for v in (v_sag, 24.0)]
        assert bias == pytest.approx((share[0] - share[1]) * 2.5, rel=0.05)
    else:
        assert abs(bias) < 1e-9
    assert (bias > calc.START_BIAS_SHARE * 24.0) is fast
    assert rec.get("r_filter_shift", 2) == (calc.FAST_FILTER_SHIFT if fast else 2)


def test_the_loop_margins_are_twice_the_estimate_move_the_proof_suite_accepts():
    """The calculator's robustness rule (GM_TARGET above, LOW_TARGET below) is stated as twice
    the move through a load step that the proof suite lets a valid window make; the two must
    not drift apart."""
    from harness.design import calculator as calc
    from harness.proof.bounds import TRANSIENT_R_REL
    assert calc.GM_TARGET == pytest.approx(1.0 + 2.0 * TRANSIENT_R_REL)
    assert calc.LOW_TARGET == pytest.approx(1.0 - 2.0 * TRANSIENT_R_REL)


def test_the_esr_and_adc_gain_sensitivities_are_the_load_shifts_the_plant_shows():
    # Circuit law: the ESR carries no DC current, so ESR the allowance does not cover is corrected
    # as if it were cable and the load rises by that excess times the current; both ADC channels
    # reading 1 + g times high scale the correction by 1 + g. The simulated plant (exact
    # zero-order-hold of the R-L-C-ESR network) must show the shifts design predicts, within
    # the DAC LSB and the estimate's LSB times the current (quantisation_error_v).
    from dataclasses import replace
    from harness.design.settings import recommended
    from harness.loop.closed_loop import simulate
    from harness.loop.metrics import metrics
    sc = recommended(load_scenario(DEMO))
    rep = design_report(sc)

    def error(s):
        return metrics(simulate([s], backend="c"))["load_error_v"]

    base = error(sc)
    d_esr = 0.05
    esr = error(replace(sc, load_end=replace(sc.load_end, esr_ohm=sc.load_end.esr_ohm + d_esr)))
    gain = error(replace(sc, sensing=replace(sc.sensing, gain_error=sc.sensing.gain_error + 0.01)))
    slack = rep["quantisation_error_v"]
    assert base - esr == pytest.approx(d_esr * rep["esr_sensitivity_v_per_ohm"], abs=slack)
    assert base - gain == pytest.approx(rep["gain_sensitivity_v_per_pct"], abs=slack)
    assert d_esr * rep["esr_sensitivity_v_per_ohm"] > 5 * slack and rep["gain_sensitivity_v_per_pct"] > 5 * slack
