"""The regulation benchmark's figures, on hand-made waveforms, and the command end to end."""
import json
from dataclasses import replace

import numpy as np
import pytest

from algo.config import AlgoConfig
from harness.cli.main import main
from harness.design.regulation import figures
from harness.loop.closed_loop import COMPENSATIONS, Run
from harness.scenario.read import DEMO
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario

FS = 1000.0


def _run(v_load, step_s):
    """A one-scenario Run at 1 kHz whose load voltage is ``v_load`` and which steps at ``step_s``."""
    sc = make_scenario(rate=FS, duration=len(v_load) / FS,
                       load=LoadSpec("constant_current", 1.0, steps=((step_s, 1.5),), cutoff_v=1.0))
    cfg = AlgoConfig(sample_rate_hz=FS, period_samples=8, periods_per_window=4)
    t = (np.arange(len(v_load)) + 1) / FS
    return Run(t_s=t, channels={"v_load_v": np.asarray(v_load, np.float32)[:, None]}, scenarios=[sc],
               cfgs=[cfg], r_cable_ohm=np.array([2.0]), backend="model", compensation="linedrop")


def test_figures_of_a_hand_made_waveform():
    # Worked example: 24 V target; the load starts at 23 V, reaches target at sample 100 and
    # overshoots to 24.12 V at 150; the step at 0.5 s dips to 23.4 V, back in band from 700.
    v = np.full(1000, 24.0)
    v[:100] = 23.0
    v[150] = 24.12
    v[500:700] = 23.4
    fig = figures(_run(v, 0.5), err_none_v=2.0)
    assert fig["dip_v"] == pytest.approx(0.6, abs=1e-5)
    assert fig["overshoot_v"] == pytest.approx(0.12, abs=1e-5)
    assert fig["settle_ms"] == pytest.approx(201.0)          # t = 0.701 s is the first sample back in band
    assert fig["converge_ms"] == pytest.approx(101.0)
    assert fig["converge_windows"] == pytest.approx(101.0 / 32.0)    # 32-sample windows at 1 kHz
    assert fig["improvement"] == float("inf")                # the tail sits exactly at target


def test_a_load_that_never_returns_to_the_band_has_no_settling_time():
    v = np.full(1000, 24.0)
    v[500:] = 23.0
    fig = figures(_run(v, 0.5), err_none_v=2.0)
    assert fig["settle_ms"] is None
    assert fig["improvement"] == pytest.approx(2.0)


def test_bench_regulation_reports_every_compensation_side_by_side(capsys, tmp_path):
    assert main(["bench", "--regulation", "--scenarios", DEMO, "--windows", "6", "--json",
                 "--out", str(tmp_path / "o")]) == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out["demo_mast"]) == set(COMPENSATIONS)
    for comp, fig in out["demo_mast"].items():
        assert fig["overshoot_v"] >= 0.0 and fig["dip_v"] > 0.0, comp
    # Sense wires hold the load closest to target: the yardstick beats the uncompensated supply.
    assert out["demo_mast"]["sense"]["steady_error_v"] < out["demo_mast"]["none"]["steady_error_v"]
    assert (tmp_path / "o" / "regulation.png").stat().st_size > 0
    assert json.loads((tmp_path / "o" / "regulation.json").read_text()) == out


def test_a_lamp_string_is_benched_from_a_steady_warm_start_without_a_step():
    """The figure is convergence from a steady start (the issue's definition): a lamp string is
    not switched on cold in the benchmark, and it takes no load step."""
    from harness.design.regulation import bench_scenario
    from harness.scenario.read import load_scenario
    sc, _ = bench_scenario(load_scenario("harness/scenario/scenarios/garden_lamps.toml"))
    assert sc.run.start == "steady" and sc.load.steps == () and sc.faults == ()
