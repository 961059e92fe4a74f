"""linedrop prove: Frama-C's value analysis (Eva) proves the C step free of runtime errors and the
state inside the range analysis's bounds, and it fails where it must.

What counts as a runtime error is ISO C99's undefined behaviour (6.5p5: a signed result outside
its type; 6.5.5p5: division by zero; 6.5.7p4: a left shift of a signed value past its type), which
Eva reports as alarms (Frama-C Eva user manual, "Alarms"). Each planted defect below is worked by
hand against those rules, so the expected alarm does not come from the project's own analysis.
"""
import os
import shutil

import pytest

from algo.config import AlgoConfig
from algo.params import derive
from harness.cli.main import main
from harness.port import prove as pv
from harness.port import prove_harness as ph
from support.tools import require_tool

SCENARIO_DIR = os.path.join(os.path.dirname(__file__), "..", "harness", "scenario", "scenarios")
SCENARIOS = ["demo_mast", "garden_lamps", "parking_camera", "mast_faults"]
C_FILES = ("step.c", "estimator.c", "fixed.c", "fixed.h", "linedrop.h")

@pytest.fixture(scope="module")
def default_params():
    return derive(AlgoConfig())


def _copy_sources(tmp_path, file, old, new):
    """A copy of the C reference with ``old`` replaced by ``new`` (once) in ``file``; returns
    (folder, 1-based line of the change)."""
    for name in C_FILES:
        shutil.copy(os.path.join(pv.C_REF, name), tmp_path / name)
    text = (tmp_path / file).read_text()
    assert text.count(old) == 1, f"{file}: {old!r} not found once (the C reference changed)"
    (tmp_path / file).write_text(text.replace(old, new))
    return str(tmp_path), text[:text.index(old)].count("\n") + 1


@pytest.mark.parametrize("scenario", SCENARIOS + [None])
def test_the_shipped_scenarios_and_the_default_config_prove(scenario):
    require_tool("frama-c")
    path = None if scenario is None else os.path.join(SCENARIO_DIR, scenario + ".toml")
    proof = pv.prove(pv.scenario_params(path))
    assert proof.alarms == []
    assert proof.harness_asserts == len(ph.ENTRIES) * len(ph.assertion_names(pv.scenario_params(path)))


# Each planted defect overflows only on one path of ld_step: every sample, a period end, a window end.
PLANTED = [
    # Demodulation shift quartered: 4095 * 32767 >> 1 (default ds 4 -> 1) is 67 092 832, and 256 of
    # them (one window) reach 1.7e10 > 2**31 - 1: the accumulator's int32 sum overflows.
    ("step.c", "s->acc_vi += ((v * sn) + half) >> ds;", "s->acc_vi += ((v * sn) + half) >> (ds >> 2);"),
    # The proportional product left in int32: kp = r_max_q * kc_q >> r_frac = 99 297 * 108 134 >> 16
    # = 163 838, the error up to the period's drop at r_max_q and a full period of code 4095:
    # (99 297 * 32 * 4095 >> 13) * corr_gain_q 65 536 >> 20 = 99 273; 163 838 * 99 273 = 1.6e10.
    ("step.c", "ld_rshift_round64((int64_t)kp * e, LD_GAIN_FRAC)",
     "ld_rshift_round64(kp * e, LD_GAIN_FRAC)"),
    # Doubling written as a shift by 26: pert_amp up to 62 gives 62 * 2**26 = 4.2e9 > 2**31 - 1
    # (C99 6.5.7p4; Eva reports it as a signed overflow of the shift).
    ("estimator.c", "return (int64_t)s->pert_amp * 2;", "return (int64_t)(s->pert_amp << 26);"),
]


@pytest.mark.parametrize("file,old,new", PLANTED, ids=["every-sample", "period-end", "window-end"])
def test_a_planted_overflow_is_an_alarm_at_its_line(tmp_path, default_params, file, old, new):
    require_tool("frama-c")
    # The figures worked in PLANTED's comments are the default config's.
    p = default_params
    assert (p.demod_shift, p.r_max_q, p.kc_q, p.corr_gain_q, p.pert_max) == (4, 99297, 108134, 65536, 62)
    folder, line = _copy_sources(tmp_path, file, old, new)
    proof = pv.prove(default_params, folder)
    at = [a for a in proof.alarms if a.where.endswith(f"{file}:{line}")]
    assert at, f"no alarm at {file}:{line}; got {proof.alarms}"
    assert any(a.kind == "signed_overflow" for a in at), at


def test_a_bound_too_narrow_for_one_field_is_an_assertion_alarm(monkeypatch, default_params):
    """cmd is clamped to [cmd_min, cmd_max] (step.c ld_command) and reaches cmd_max whenever
    cmd_base plus the perturbation exceeds it (cmd_base up to cmd_max by the range analysis):
    a bound one code lower cannot hold after ld_step or ld_step_isr (the two calls that write
    the command; ld_window_work leaves it alone, ld_init and ld_reset set it below the bound)."""
    require_tool("frama-c")
    real = ph.state_bounds

    def narrow(p):
        bounds = dict(real(p))
        bounds["cmd"] = (p.cmd_min, p.cmd_max - 1)
        return bounds

    monkeypatch.setattr(ph, "state_bounds", narrow)
    proof = pv.prove(default_params)
    asserts = [a for a in proof.alarms if a.kind == "user assertion"]
    assert [a.expression.split(":")[0] for a in asserts] == ["ld_step_cmd", "ld_step_isr_cmd"], \
        proof.alarms
    for a in asserts:
        assert a.expression.endswith(f"s.cmd ≤ {default_params.cmd_max - 1}")
        assert a.where.startswith(ph.HARNESS_NAME + ":")


def test_a_missing_scenario_file_is_one_line_naming_it_exit_2(capsys, tmp_path):
    missing = str(tmp_path / "nope.toml")
    assert main(["prove", missing]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and missing in err


def test_without_frama_c_the_command_says_what_to_install_exit_2(capsys, monkeypatch):
    monkeypatch.setenv("PATH", "/nonexistent")
    assert main(["prove"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "frama-c-base" in err


def test_the_command_prints_each_alarm_with_file_and_line_exit_1(capsys, tmp_path):
    require_tool("frama-c")
    folder, line = _copy_sources(tmp_path, *PLANTED[0])
    assert main(["prove", "--c-dir", folder]) == 1
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("default config: ") and "alarm" in out[0]
    alarms = [row.split(": ", 2) for row in out[1:]]
    assert all(len(a) == 3 and a[0].count(":") == 1 for a in alarms), out
    step_c = os.path.join(folder, "step.c")
    at = [a for a in alarms if a[0] == f"{os.path.relpath(step_c)}:{line}" or a[0] == f"{step_c}:{line}"]
    assert any(a[1].startswith("signed_overflow") for a in at), out
