"""RV32IMC firmware cost: bit-exact in unicorn at -Os and -O2, figures positive and deterministic.

The instruction counter splits blocks by the RISC-V length encoding; it is held
to GNU objdump's disassembly of the same image. Nothing here is timed.
"""
import re
import subprocess

import pytest

from algo import step as real_model
from algo.config import AlgoConfig
from c_ref.riscv import build
from support.tools import require_module, skip_or_fail

CORRUPTED_SAMPLE = 300
BENCH_KEYS = {"rv32_instr_mean", "rv32_instr_max", "rv32_instr_max_adversarial", "rv32_text_bytes_os"}


def _need_tools():
    skip_or_fail(build.toolchain_missing())
    for name in ("unicorn", "elftools"):
        require_module(name)
    from harness.port import firmware_cost_riscv
    return firmware_cost_riscv


def _inputs():
    """The Cortex-M cost run's inputs, as firmware_cost.measure() hands them over."""
    from harness.port.firmware_cost import WINDOWS, adversarial_inputs, input_run
    return input_run, adversarial_inputs, WINDOWS


@pytest.fixture(scope="module")
def runs():
    return _need_tools().measure(AlgoConfig(), *_inputs())


def test_emulated_rv32imc_matches_the_model_on_every_step_at_os_and_o2(runs):
    for opt, r in runs.items():
        assert r["mismatch"] is None, (opt, r["mismatch"])
        assert r["samples"] > 0 and r["adversarial_samples"] > 0


def test_figures_are_positive_and_the_same_on_a_second_run(runs):
    again = _need_tools().measure(AlgoConfig(), *_inputs())
    assert again == runs
    for r in runs.values():
        for key in ("instr_mean", "instr_max", "instr_sample_max", "instr_max_adversarial",
                    "text_bytes", "text_bytes_linked", "lib_bytes", "stack_static",
                    "stack_measured"):
            assert r[key] > 0, key


def test_window_end_is_the_worst_sample_and_os_is_the_smaller_build(runs):
    for r in runs.values():
        assert r["instr_max"] > r["instr_sample_max"] > r["instr_mean"]
    assert runs["-Os"]["text_bytes"] < runs["-O2"]["text_bytes"]


def test_linking_only_shrinks_the_code(runs):
    """Relaxation turns 8-byte calls into 4- or 2-byte jumps; --gc-sections drops what the API
    does not reach; nothing grows."""
    for r in runs.values():
        assert 0 < r["text_bytes_linked"] < r["text_bytes"]


def test_stack_analysis_leaves_only_library_routines_unsized(runs):
    for r in runs.values():
        assert r["stack_chain"][0] == "ld_step"
        assert all(name.startswith("__") or name == "memset" for name in r["stack_unknown"])


def test_instruction_boundaries_agree_with_objdump_on_every_firmware_function(tmp_path):
    """GNU objdump (binutils) decodes the same bytes; every instruction address must match."""
    _need_tools()
    from c_ref.riscv.emu import Rv32
    elf, _ = build.link_bare("-Os", str(tmp_path))
    emu = Rv32(elf)
    dump = subprocess.run([build.GCC.replace("gcc", "objdump"), "-d", elf], capture_output=True,
                          text=True, check=True).stdout
    sized = {name: where for name, where in emu.symbols.items() if where[1]}
    assert {"ld_step", "__divdi3"} <= set(sized)
    for name, (start, size) in sized.items():
        body = dump.split(f"<{name}>:\n")[1].split("\n\n")[0]
        want = [int(m.group(1), 16) for m in re.finditer(r"^\s*([0-9a-f]+):\s", body, re.M)]
        code = bytes(emu.uc.mem_read(start, size))
        assert emu.instruction_addrs(code, start) == want, name


def test_a_model_that_differs_at_one_sample_is_reported_there(monkeypatch, tmp_path):
    """The check can fail: a model corrupted at one step is caught at that step and field."""
    module = _need_tools()
    calls = []

    class Corrupted:
        init = staticmethod(real_model.init)

        @staticmethod
        def step(p, s, v, i):
            cmd = real_model.step(p, s, v, i)
            calls.append(None)
            if len(calls) == CORRUPTED_SAMPLE + 1:
                s.integ += 1
            return cmd

    monkeypatch.setattr(module, "model", Corrupted)
    r = module.run_rv32("-O2", AlgoConfig(), str(tmp_path), *_inputs())
    assert r["mismatch"]["sample"] == CORRUPTED_SAMPLE
    assert list(r["mismatch"]["fields"]) == ["integ"]


def test_bench_carries_the_rv32_keys_from_these_runs(runs, monkeypatch):
    module = _need_tools()
    monkeypatch.setattr(module, "measure", lambda *args: runs)
    got = module.bench_figures(AlgoConfig(), *_inputs())
    assert BENCH_KEYS <= set(got) and all(k.startswith("rv32_") for k in got)
    assert got["rv32_instr_mean"] == round(runs["-O2"]["instr_mean"], 2)
    assert got["rv32_instr_max"] == runs["-O2"]["instr_max"]
    assert got["rv32_instr_max_adversarial"] == runs["-O2"]["instr_max_adversarial"]
    assert got["rv32_text_bytes_os"] == runs["-Os"]["text_bytes"]
    assert got["rv32_bit_exact"] is True
