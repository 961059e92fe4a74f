"""Firmware cost figures: deterministic instruction counts, cycle bounds, code, state and stack
bytes on Cortex-M4/M0+, for ld_step and for the interrupt path (ld_step_isr, ld_window_work).

The code-size and state-size targets are strict xfails (not met at 0.5.0). The interrupt path's
instruction targets (M4 mean <= 40 and worst <= 80, M0+ worst <= 200) are not met either;
`linedrop bench --firmware` prints the figures and says so, and c_ref/cortexm/README.md explains
where the instructions go. Nothing here is timed.
"""
import importlib.util

import pytest

from c_ref.cortexm import build
from support.tools import skip_or_fail


@pytest.fixture(scope="module")
def cost():
    skip_or_fail(build.toolchain_missing())
    missing = [m for m in ("unicorn", "capstone", "elftools") if importlib.util.find_spec(m) is None]
    skip_or_fail(f"python packages missing: {', '.join(missing)} (pip install unicorn capstone "
          f"pyelftools)" if missing else None)
    from harness.port import firmware_cost
    return firmware_cost.measure()


def test_emulated_m4_and_m0plus_builds_match_the_model_on_every_step_at_os_and_o2(cost):
    assert cost["bit_exact"], cost["mismatches"]


@pytest.mark.xfail(strict=True, raises=AssertionError,
                   reason="0.5.0's step.c + estimator.c + fixed.c are 2.8 (M4) and 3.1 KiB (M0+) at -Os: "
                          "algorithm v2's 64-bit work, and the interrupt path's hand-over, commit and "
                          "staged law next to ld_step")
def test_code_size_at_os_is_within_two_kib_on_both_cores(cost):
    assert cost["text_bytes_os"] <= 2048


@pytest.mark.xfail(strict=True, raises=AssertionError,
                   reason="the interrupt path's hand-over (0.5.0: the w_* window record, the committed "
                          "amplitude, load-step threshold and correction inputs, the staged law's scratch) "
                          "grew ld_state_t from 96 to 164 B")
def test_state_fits_in_128_bytes(cost):
    assert cost["state_bytes"] <= 128


def test_algorithm_has_no_read_only_data_beyond_the_params_block(cost):
    assert cost["rodata_bytes_os"] == 0


def test_stack_analysis_leaves_only_library_routines_unsized(cost):
    assert all(name.startswith("__") for name in cost["stack_unknown"]), cost["stack_unknown"]
    assert cost["stack_chain"][0] == "ld_step"


def test_window_end_is_the_worst_case_sample(cost):
    for cpu in build.CPUS:
        assert cost[f"{cpu}_instr_max"] > cost[f"{cpu}_instr_sample_max"]


def test_benchmark_prints_the_cost_table(capsys):
    """Benchmark entry point: run with ``pytest -s`` to see the table."""
    skip_or_fail(build.toolchain_missing())
    from harness.port import firmware_cost
    assert firmware_cost.main([]) == 0
    out = capsys.readouterr().out
    with capsys.disabled():
        print("\n" + out)
    assert "Cortex-M4" in out and "bit-exact" in out


def test_line_profile_attributes_every_instruction_of_a_call_to_a_source_line(cost):
    from harness.port import firmware_cost
    # Eight windows: the first window end after the start (no estimate yet) is cheaper than the
    # rest, so the mean of two would sit well below the worst window end.
    ordinary, window_end = firmware_cost.profile_lines("m4", "-O2", windows=8)
    assert "?" not in "".join(ordinary) and any(k.startswith("step.c:") for k in ordinary)
    assert sum(window_end.values()) == pytest.approx(cost["m4_instr_max"], rel=0.1)
    assert sum(ordinary.values()) <= cost["m4_instr_sample_max"]


def test_benchmark_carries_the_rv32imc_figures_bit_exact(cost):
    """measure() adds harness/port/firmware_cost_riscv.py's rv32_* keys (tests/test_firmware_cost_riscv.py)."""
    from c_ref.riscv import build as rv32_build
    skip_or_fail(rv32_build.toolchain_missing())
    assert cost["rv32_bit_exact"], cost["rv32_mismatches"]
    assert cost["rv32_instr_max"] > cost["rv32_instr_sample_max"] > cost["rv32_instr_mean"] > 0


def test_the_interrupt_path_moves_the_window_work_out_of_the_interrupts_worst_sample(cost):
    # The split's point: the interrupt's worst is a period end's stage or a window end's hand-over,
    # far below ld_step's window-end sample, and the window's work is measured apart.
    for cpu in ("m4", "m0plus"):
        assert cost[f"{cpu}_isr_instr_max"] * 4 < cost[f"{cpu}_instr_max"]
        assert cost[f"{cpu}_window_instr_max"] > cost[f"{cpu}_isr_instr_max"]
        assert cost[f"{cpu}_isr_instr_mean"] <= cost[f"{cpu}_instr_mean"]


def test_cycle_bounds_sit_above_the_instruction_counts(cost):
    # Every instruction takes at least one cycle on these cores, loads and taken branches more.
    for cpu in ("m4", "m0plus"):
        assert cost[f"{cpu}_isr_cycles_max"] > cost[f"{cpu}_isr_instr_max"]
        assert cost[f"{cpu}_isr_cycles_mean"] > cost[f"{cpu}_isr_instr_mean"]
        assert cost[f"{cpu}_window_cycles_max"] > cost[f"{cpu}_window_instr_max"]


def test_an_interrupt_path_that_differs_from_the_model_at_one_call_is_reported_there(monkeypatch,
                                                                                    tmp_path):
    """The interrupt path's check can fail: a model corrupted after one call of its window work
    is caught at that call, naming the field."""
    skip_or_fail(build.toolchain_missing())
    from algo import step as real_model
    from algo.config import AlgoConfig
    from algo.params import PARAM_FIELDS, derive
    from c_ref.cortexm.emu import STATE_ADDR, CortexM
    from harness.port import cost_inputs

    calls = []

    real_work = cost_inputs.window_work

    def corrupted_work(p, s):
        did = real_work(p, s)
        calls.append(None)
        if len(calls) == 3:
            s.r_raw += 1
        return did

    monkeypatch.setattr(cost_inputs, "window_work", corrupted_work)
    p = derive(AlgoConfig())
    emu = CortexM(build.link_bare("m4", "-O2", str(tmp_path))[0], "m4")
    pa = emu.write_params({name: getattr(p, name) for name in PARAM_FIELDS})
    r = cost_inputs.isr_run(emu, STATE_ADDR, pa, AlgoConfig(), p, windows=5)
    assert r["mismatch"]["call"] == "ld_window_work"
    assert r["mismatch"]["sample"] == 3 * p.window - 1
    assert list(r["mismatch"]["fields"]) == ["r_raw"]
    assert real_model.step_isr is cost_inputs.model.step_isr
