"""Run functions of a bare RV32IMC ELF in the unicorn emulator and count the instructions they execute.

The memory map is c_ref/riscv/rv32.ld's; everything else (loading, struct
layouts from DWARF, counting per translated block, stack painting) is
:class:`c_ref.cortexm.emu.Target`'s. An instruction's length comes from its
own low two bits (RISC-V unprivileged spec, "Expanded Instruction-Length
Encoding": ``11`` is a 32-bit instruction, anything else a 16-bit compressed
one), so no disassembler is needed and none can stop short on an opcode it
does not know.
"""
from unicorn import UC_ARCH_RISCV, UC_MODE_RISCV32, Uc
from unicorn import riscv_const as R

from c_ref.cortexm.emu import Target

FLASH_BASE, FLASH_SIZE = 0x80000000, 0x00400000
RAM_BASE, RAM_SIZE = 0x80400000, 0x00100000
RETURN_ADDR = FLASH_BASE + FLASH_SIZE - 0x1000   # holds a 'j .' the called function returns to
PARAMS_ADDR = RAM_BASE + 0x10000
STATE_ADDR = RAM_BASE + 0x20000
# SiFive E31: RV32IMAC, the nearest unicorn model to an RV32IMC part (the algorithm has no atomics).
CPU_MODEL = R.UC_CPU_RISCV32_SIFIVE_E31


class Rv32(Target):
    """A bare ELF loaded into an emulated RV32IMC core, ready to call its functions.

    Parameters
    ----------
    elf_path : str
        Image linked by :func:`c_ref.riscv.build.link_bare`, with DWARF.
    """

    FLASH_BASE, FLASH_SIZE = FLASH_BASE, FLASH_SIZE
    RAM_BASE, RAM_SIZE = RAM_BASE, RAM_SIZE
    RETURN_ADDR, RETURN_CODE = RETURN_ADDR, (0x0000006F).to_bytes(4, "little")   # jal x0, 0
    PARAMS_ADDR, STATE_ADDR = PARAMS_ADDR, STATE_ADDR
    CODE_BIT = 0
    ARG_REGS = (R.UC_RISCV_REG_A0, R.UC_RISCV_REG_A1, R.UC_RISCV_REG_A2, R.UC_RISCV_REG_A3)
    SP_REG, LINK_REG, PC_REG = R.UC_RISCV_REG_SP, R.UC_RISCV_REG_RA, R.UC_RISCV_REG_PC

    def __init__(self, elf_path):
        uc = Uc(UC_ARCH_RISCV, UC_MODE_RISCV32)
        uc.ctl_set_cpu_model(CPU_MODEL)
        super().__init__(elf_path, uc)

    def instruction_addrs(self, code, address):
        """RV32 instructions of a block: 4 bytes where the low two bits are 11, else 2."""
        addrs, k = [], 0
        while k < len(code):
            addrs.append(address + k)
            k += 4 if code[k] & 3 == 3 else 2
        return addrs
