"""Run functions of a bare Cortex-M ELF in the unicorn emulator and count the instructions they execute.

:class:`Target` is the part every port shares (c_ref/riscv/emu.py builds on it).

Instructions are counted per translated block (a block hook plus capstone),
so instructions skipped inside an IT block still count, as they take an
issue slot on the core. Struct layouts come from the ELF's DWARF, so the
params and state blocks are packed exactly as the target compiler laid them out.
"""
from capstone import CS_ARCH_ARM, CS_MODE_MCLASS, CS_MODE_THUMB, Cs
from elftools.elf.elffile import ELFFile
from unicorn import UC_ARCH_ARM, UC_HOOK_BLOCK, UC_MODE_MCLASS, UC_MODE_THUMB, Uc
from unicorn import arm_const as A

from c_ref.cortexm.elf_layout import pack, struct_layout, unpack

FLASH_BASE, FLASH_SIZE = 0x00000000, 0x00400000
RAM_BASE, RAM_SIZE = 0x20000000, 0x00100000
RETURN_ADDR = 0x003FF000          # holds a 'b .' the called function returns to
PARAMS_ADDR = RAM_BASE + 0x10000
STATE_ADDR = RAM_BASE + 0x20000
STACK_PAINT = 0xA5
STACK_WINDOW = 0x4000             # bytes below the stack top checked for use

# ARMv6-M has no exact M0+ model in unicorn; the M0 core runs the same ISA (Thumb-1 + a few
# Thumb-2 system instructions, no divider), which is what decides the instruction count.
_CPU_MODELS = {"m4": A.UC_CPU_ARM_CORTEX_M4, "m0plus": A.UC_CPU_ARM_CORTEX_M0}


class Target:
    """A bare ELF loaded into a unicorn engine, ready to call its functions and count instructions.

    The generic part shared by the ports; a subclass opens the engine for its core
    and gives, as class attributes, the memory map (``FLASH_BASE``, ``FLASH_SIZE``,
    ``RAM_BASE``, ``RAM_SIZE``, ``PARAMS_ADDR``, ``STATE_ADDR``), the stub called
    functions return to (``RETURN_ADDR``, ``RETURN_CODE``), the calling convention
    (``ARG_REGS``, ``SP_REG``, ``LINK_REG``, ``PC_REG``, ``CODE_BIT``: the bit set in
    a code address to call it), and :meth:`instruction_addrs`.

    Parameters
    ----------
    elf_path : str
        Image linked for the subclass's FLASH/RAM map, with DWARF.
    uc : unicorn.Uc
        The engine, CPU model set, nothing mapped yet.
    """

    def __init__(self, elf_path, uc):
        self.uc = uc
        self.uc.mem_map(self.FLASH_BASE, self.FLASH_SIZE)
        self.uc.mem_map(self.RAM_BASE, self.RAM_SIZE)
        self.symbols = {}
        with open(elf_path, "rb") as f:
            elf = ELFFile(f)
            for seg in elf.iter_segments():
                if seg["p_type"] == "PT_LOAD" and seg["p_filesz"]:
                    self.uc.mem_write(seg["p_vaddr"], seg.data())
            for sym in elf.get_section_by_name(".symtab").iter_symbols():
                if sym["st_info"]["type"] == "STT_FUNC":
                    self.symbols[sym.name] = (sym["st_value"] & ~self.CODE_BIT, sym["st_size"])
            self.params_layout = struct_layout(elf, "ld_params_t")
            self.state_layout = struct_layout(elf, "ld_state_t")
        self.uc.mem_write(self.RETURN_ADDR, self.RETURN_CODE)
        self.uc.mem_write(self._stack_window(), bytes([STACK_PAINT]) * STACK_WINDOW)
        self._block_addrs = {}
        self.count = 0
        self.by_function = {}
        self.by_address = None  # a dict while profile() is on: instruction address -> executions
        # Hand-written library routines (libgcc's __aeabi_ldivmod) carry no size: let
        # them run to the next symbol.
        starts = sorted({a for a, _ in self.symbols.values()}) + [self.FLASH_BASE + self.FLASH_SIZE]
        self._ranges = sorted((a, a + s if s else starts[starts.index(a) + 1], n)
                              for n, (a, s) in self.symbols.items())
        self.uc.hook_add(UC_HOOK_BLOCK, self._on_block)

    def instruction_addrs(self, code, address):
        """Addresses of the instructions in the block of bytes ``code`` at ``address``."""
        raise NotImplementedError

    def _stack_window(self):
        return self.RAM_BASE + self.RAM_SIZE - STACK_WINDOW

    def _on_block(self, uc, address, size, _user):
        key = (address, size)
        addrs = self._block_addrs.get(key)
        if addrs is None:
            addrs = self.instruction_addrs(bytes(uc.mem_read(address, size)), address)
            self._block_addrs[key] = addrs
        n = len(addrs)
        self.count += n
        if self.by_address is not None:
            for a in addrs:
                self.by_address[a] = self.by_address.get(a, 0) + 1
        fn = self.function_at(address)
        self.by_function[fn] = self.by_function.get(fn, 0) + n

    def function_at(self, address):
        """Name of the function whose code holds ``address`` (``"?"`` if none)."""
        for lo, hi, name in self._ranges:
            if lo <= address < hi:
                return name
        return "?"

    def call(self, name, *args):
        """Call ``name(args...)`` (up to four word arguments); return ``(result, instructions)``."""
        for reg, val in zip(self.ARG_REGS, args):
            self.uc.reg_write(reg, val & 0xFFFFFFFF)
        self.uc.reg_write(self.SP_REG, self.RAM_BASE + self.RAM_SIZE)
        self.uc.reg_write(self.LINK_REG, self.RETURN_ADDR | self.CODE_BIT)
        before = self.count
        self.uc.emu_start(self.symbols[name][0] | self.CODE_BIT, self.RETURN_ADDR, count=1_000_000)
        if self.uc.reg_read(self.PC_REG) & ~self.CODE_BIT != self.RETURN_ADDR:
            raise RuntimeError(f"{name} did not return within the instruction budget")
        return self.uc.reg_read(self.ARG_REGS[0]), self.count - before

    def stack_high_water(self):
        """Deepest stack use so far, bytes (from the painted region below the stack top)."""
        data = bytes(self.uc.mem_read(self._stack_window(), STACK_WINDOW))
        untouched = len(data) - len(data.lstrip(bytes([STACK_PAINT])))
        return STACK_WINDOW - untouched

    def write_params(self, values):
        """Place a params block (``{field: value}``) in RAM; return its address."""
        self.uc.mem_write(self.PARAMS_ADDR, pack(self.params_layout, values))
        return self.PARAMS_ADDR

    def read_state(self):
        """The state block at ``STATE_ADDR`` as ``{field: int}``."""
        return unpack(self.state_layout, bytes(self.uc.mem_read(self.STATE_ADDR,
                                                                self.state_layout[0])))


class CortexM(Target):
    """A bare ELF loaded into an emulated Cortex-M, ready to call its functions.

    Parameters
    ----------
    elf_path : str
        Image linked for the FLASH/RAM map of c_ref/cortexm/cortexm.ld, with DWARF.
    cpu : str
        ``"m4"`` or ``"m0plus"``.
    """

    FLASH_BASE, FLASH_SIZE = FLASH_BASE, FLASH_SIZE
    RAM_BASE, RAM_SIZE = RAM_BASE, RAM_SIZE
    RETURN_ADDR, RETURN_CODE = RETURN_ADDR, b"\xfe\xe7"   # b .
    PARAMS_ADDR, STATE_ADDR = PARAMS_ADDR, STATE_ADDR
    CODE_BIT = 1                    # Thumb: bit 0 of a code address selects the state
    ARG_REGS = (A.UC_ARM_REG_R0, A.UC_ARM_REG_R1, A.UC_ARM_REG_R2, A.UC_ARM_REG_R3)
    SP_REG, LINK_REG, PC_REG = A.UC_ARM_REG_SP, A.UC_ARM_REG_LR, A.UC_ARM_REG_PC

    def __init__(self, elf_path, cpu):
        uc = Uc(UC_ARCH_ARM, UC_MODE_THUMB | UC_MODE_MCLASS)
        uc.ctl_set_cpu_model(_CPU_MODELS[cpu])
        self._cs = Cs(CS_ARCH_ARM, CS_MODE_THUMB | CS_MODE_MCLASS)
        super().__init__(elf_path, uc)

    def instruction_addrs(self, code, address):
        """Thumb instructions of a block, via capstone (16- and 32-bit encodings)."""
        return [ins[0] for ins in self._cs.disasm_lite(code, address)]
