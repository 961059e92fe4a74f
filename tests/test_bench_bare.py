"""bench's side-by-side pair: the bare-plant scenario and the ngspice netlist describe the same plant."""
import os
import re
import tempfile

import pytest

from harness.cli import bench_bare
from harness.scenario.read import load_scenario
from support.tools import require_tool


def _scenario():
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "bare.toml")
        with open(path, "w") as f:
            f.write(bench_bare.SCENARIO)
        return load_scenario(path)


def test_bare_plant_scenario_is_the_netlists_plant_at_40000_samples():
    sc = _scenario()
    assert sc.supply.loop_bandwidth_hz == 0.0
    assert sc.run.duration_s * sc.sensing.sample_rate_hz == 40000
    assert (sc.cable.resistance_ohm, sc.cable.inductance_h) == (bench_bare.R_OHM, bench_bare.L_H)
    assert (sc.load_end.capacitance_f, sc.load_end.esr_ohm) == (bench_bare.C_F, bench_bare.ESR_OHM)
    assert sc.load.value == bench_bare.I0_A and sc.load.steps == ((bench_bare.T_STEP_S, bench_bare.I1_A),)
    values = dict(re.findall(r"^(R1|L1|RESR|C1) \d \d (\S+)", bench_bare.NETLIST, re.M))
    assert [float(values[k]) for k in ("R1", "L1", "RESR", "C1")] == [
        bench_bare.R_OHM, bench_bare.L_H, bench_bare.ESR_OHM, bench_bare.C_F]


def test_bench_pair_times_simulate_and_ngspice_as_whole_processes():
    require_tool("ngspice")
    root = os.path.dirname(os.path.dirname(os.path.abspath(bench_bare.__file__)))
    figures, reason = bench_bare.measure(os.path.dirname(root))
    assert reason is None
    assert figures["simulate_bare_plant_1s_wall_s"] > 0 and figures["ngspice_bare_plant_1s_wall_s"] > 0


def test_bench_pair_says_why_ngspice_is_skipped_where_it_is_missing(monkeypatch):
    monkeypatch.setattr(bench_bare.shutil, "which", lambda name: None)
    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(bench_bare.__file__))))
    figures, reason = bench_bare.measure(root)
    assert figures["ngspice_bare_plant_1s_wall_s"] is None and "ngspice" in reason
