"""Cycle bounds of Thumb instructions on Cortex-M4 and Cortex-M0+, from the cores' published timings.

Sources: ARM Cortex-M4 Technical Reference Manual, section 3.3 "Instruction set summary" (the
cycle-count table), and ARM Cortex-M0+ Technical Reference Manual, section 3.3 (the instruction
summary table). The figures are quoted from memory of those tables. Where a table gives a range,
the upper end is taken, so a count bounds the core's time with zero-wait-state memory and no bus
contention: on the M4 a taken branch's pipeline refill P is 1 to 3 cycles (3 here), a load or a
store 1 or 2 (2: one that pipelines with its neighbour takes 1), a divide 2 to 12 (12). The M0+
figures assume the single-cycle multiplier (the small, 32-cycle one is a build option of the
core: see your part's data sheet).

:func:`timing` gives ``(cycles, taken)`` for one instruction: the cycles it takes when it does
not branch, and the extra cycles when it does (a branch taken, or a load or pop into pc). The
emulator (c_ref/cortexm/emu.py) adds ``taken`` when the next block does not start right after
the instruction.
"""
import re

#: Pipeline refill on a taken branch, cycles (the upper end of each table's range).
REFILL = {"m4": 3, "m0plus": 1}
_COND = ("eq|ne|cs|hs|cc|lo|mi|pl|vs|vc|hi|ls|ge|lt|gt|le|al")
_BRANCH = re.compile(rf"^b({_COND})?$")


def _registers(op_str):
    """Number of registers in a register list ``{r4, r5, lr}`` (ranges ``r4-r7`` counted out)."""
    inner = op_str[op_str.index("{") + 1:op_str.index("}")]
    n = 0
    for part in inner.split(","):
        part = part.strip()
        if "-" in part:
            lo, hi = (int(x.strip()[1:]) for x in part.split("-"))
            n += hi - lo + 1
        elif part:
            n += 1
    return n


def _writes_pc(op_str):
    return re.search(r"\bpc\b", op_str.split(",")[0] if "{" not in op_str else op_str) is not None


def timing(cpu, mnemonic, op_str):
    """``(cycles, taken)`` of one instruction on ``cpu`` (``"m4"`` or ``"m0plus"``); see the module."""
    m = mnemonic.split(".")[0]                     # ldr.w, b.n: the width does not change it
    p = REFILL[cpu]
    if _BRANCH.match(m) or m in ("cbz", "cbnz"):
        return 1, p
    if m in ("bl", "blx", "bx"):
        base = {"m4": 1, "m0plus": {"bl": 2, "blx": 1, "bx": 1}[m]}[cpu]
        return base, p
    if m in ("tbb", "tbh"):
        return 2, p
    if m in ("push", "pop", "stm", "stmia", "stmdb", "ldm", "ldmia", "ldmdb", "stmea", "ldmfd"):
        n = 1 + _registers(op_str)
        if m.startswith(("pop", "ldm")) and "pc" in op_str:
            return n, p + (1 if cpu == "m0plus" else 0)
        return n, 0
    if m in ("ldrd", "strd"):
        return 3, 0
    if m.startswith(("ldr", "str")):
        if m.startswith("ldr") and _writes_pc(op_str):
            return 2, p
        return 2, 0
    if m in ("sdiv", "udiv"):
        return 12, 0
    if m in ("mov", "add") and re.match(r"^\s*pc\b", op_str):
        return 1, p
    return 1, 0
