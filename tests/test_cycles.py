"""Cycle bounds of Thumb instructions (c_ref/cortexm/cycles.py) against the cores' published timings.

Expected values from the ARM Cortex-M4 Technical Reference Manual, section 3.3 (instruction set
summary: ALU 1, MUL/MLA and the 64-bit multiplies 1, LDR and STR 2, LDRD/STRD 1 + 2, PUSH/POP
and LDM/STM 1 + N, a branch 1 + P with the refill P at most 3, SDIV/UDIV 2 to 12) and the ARM
Cortex-M0+ Technical Reference Manual, section 3.3 (ALU and MULS with the fast multiplier 1,
loads and stores 2, PUSH/POP 1 + N, a taken conditional branch 2 and one not taken 1, B 2,
BL 3, BX 2), quoted from memory of those tables; where they give a range, the upper end (the
module's rule). The last test runs a compiled function in the emulator and works its cycles out
by hand from the same tables.
"""
import tempfile

import pytest

from c_ref.cortexm import build
from c_ref.cortexm.cycles import timing
from support.tools import skip_or_fail

CASES = [
    ("m4", "adds", "r0, r1, r2", 1), ("m4", "mul", "r0, r1, r2", 1),
    ("m4", "smull", "r0, r1, r2, r3", 1), ("m4", "smlal", "r0, r1, r2, r3", 1),
    ("m4", "sdiv", "r0, r1, r2", 12), ("m4", "ldr.w", "r0, [r1, #4]", 2),
    ("m4", "str", "r0, [r1]", 2), ("m4", "ldrd", "r0, r1, [r2]", 3),
    ("m4", "push", "{r4, r5, r6, lr}", 5), ("m4", "ldm", "r0!, {r1, r2}", 3),
    ("m4", "b", "#0x100", 1 + 3), ("m4", "bne", "#0x100", 1 + 3), ("m4", "bl", "#0x100", 1 + 3),
    ("m4", "bx", "lr", 1 + 3), ("m4", "cbz", "r0, #0x100", 1 + 3),
    ("m0plus", "adds", "r0, r1, r2", 1), ("m0plus", "muls", "r0, r1, r0", 1),
    ("m0plus", "ldr", "r0, [r1, #4]", 2), ("m0plus", "strh", "r0, [r1]", 2),
    ("m0plus", "push", "{r4, r5, lr}", 4), ("m0plus", "b", "#0x100", 2),
    ("m0plus", "beq", "#0x100", 2), ("m0plus", "bl", "#0x100", 3), ("m0plus", "bx", "lr", 2),
]


@pytest.mark.parametrize("cpu, mnemonic, op_str, taken_cycles", CASES,
                         ids=[f"{c}-{m}" for c, m, _, _ in CASES])
def test_an_instruction_takes_the_published_cycles(cpu, mnemonic, op_str, taken_cycles):
    base, extra = timing(cpu, mnemonic, op_str)
    assert base + extra == taken_cycles


@pytest.mark.parametrize("cpu", ["m4", "m0plus"])
def test_a_conditional_branch_not_taken_takes_one_cycle(cpu):
    assert timing(cpu, "bne", "#0x100")[0] == 1


@pytest.mark.parametrize("cpu, want", [("m4", 1 + (1 + 3)), ("m0plus", 1 + 1 + 2)])
def test_the_emulator_counts_a_compiled_function_as_worked_by_hand(cpu, want):
    # ld_version at -O2: on the M4 'mov.w r0, #0x500; bx lr' (1, then 1 + P); on the M0+
    # 'movs r0, #0xa0; lsls r0, r0, #3; bx lr' (1, 1, then 2).
    skip_or_fail(build.toolchain_missing())
    from c_ref.cortexm.emu import CortexM
    with tempfile.TemporaryDirectory() as tmp:
        emu = CortexM(build.link_bare(cpu, "-O2", tmp)[0], cpu)
        assert emu.call("ld_version")[0] == 0x500
        assert emu.last_cycles == want
