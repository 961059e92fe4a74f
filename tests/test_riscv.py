"""RISC-V port: strict warning-free rv32imc builds, and bit-exact vectors on an emulated RV32IMC core (QEMU).

The golden vector set is the Cortex-M port's (tests/test_cortexm.py), replayed
through the same text vector driver built for rv32imc with picolibc. Every
command and every state field after every operation on the target must equal
the Python model's, at zero tolerance. Tests skip when the RISC-V toolchain,
picolibc or QEMU is missing, or fail under LINEDROP_REQUIRE_TOOLS=1.
"""
import subprocess

import pytest

from c_ref.riscv import build, qemu_run
from support.tools import skip_or_fail
from test_cortexm import OPTS, golden, replay_golden_on_target  # noqa: F401  (a fixture)

NM = build.GCC.replace("gcc", "nm")
# Routines the firmware objects may leave to picolibc/libgcc: memset (init/reset), the 64-bit
# division (once per window) and, at -Os, 64-bit shifts by a run-time amount. RV32IM multiplies
# 32 x 32 -> 64 in hardware (mul/mulh), so no multiply routine.
ALLOWED_EXTERNALS = {"memset", "__divdi3", "__ashldi3", "__ashrdi3", "__lshrdi3"}


def _symbols(*paths, defined):
    flag = "--defined-only" if defined else "-u"
    out = subprocess.run([NM, flag, *paths], capture_output=True, text=True, check=True).stdout
    return {line.split()[-1] for line in out.splitlines() if len(line.split()) >= 2}


@pytest.mark.parametrize("opt", OPTS)
def test_firmware_sources_cross_compile_for_rv32imc_warning_free_under_strict_flags(opt, tmp_path):
    skip_or_fail(build.toolchain_missing())
    objs = build.compile_algo(opt, str(tmp_path))  # -Werror: any warning fails here
    defined = _symbols(*objs, defined=True)
    assert set(build.API) <= defined, set(build.API) - defined
    assert _symbols(*objs, defined=False) - defined <= ALLOWED_EXTERNALS


def test_objects_are_rv32imc_with_compressed_instructions_and_no_float(tmp_path):
    """The ELF header's flags (RISC-V psABI: 0x1 = RVC, float ABI bits 0x6 clear) and machine."""
    skip_or_fail(build.toolchain_missing())
    elf, _ = build.link_bare("-Os", str(tmp_path))
    header = subprocess.run([build.GCC.replace("gcc", "readelf"), "-h", elf], capture_output=True,
                            text=True, check=True).stdout
    assert "ELF32" in header and "RISC-V" in header
    assert "RVC" in header and "soft-float ABI" in header, header
    syms = _symbols(elf, defined=True)
    assert "__divdi3" in syms
    assert not syms & {"__adddf3", "__addsf3", "__muldf3", "__mulsf3", "__fixdfsi", "__fixsfsi"}


@pytest.mark.parametrize("opt", OPTS)
def test_rv32imc_in_qemu_matches_the_model_bit_for_bit_on_every_state_field(golden, opt,  # noqa: F811
                                                                           tmp_path):
    replay_golden_on_target(golden, build, qemu_run, opt, str(tmp_path))

def test_a_trap_on_the_target_ends_the_run_with_its_own_status(tmp_path):
    """An illegal instruction (RISC-V 'unimp') must reach the start-up trap vector, not hang QEMU."""
    skip_or_fail(build.toolchain_missing())
    skip_or_fail(build.qemu_missing())
    src = tmp_path / "trap.c"
    src.write_text("int main(void) { __asm__ volatile(\"unimp\"); return 0; }\n")
    elf = build.link_semihosting("-O2", str(src), str(tmp_path / "trap.elf"), sources=())
    with pytest.raises(RuntimeError, match="status 70 .CPU fault"):
        qemu_run.run_text(elf, "", str(tmp_path))
