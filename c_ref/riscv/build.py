"""Cross-build helpers for RV32IMC: compile the algorithm, link QEMU and bare emulator images.

The RISC-V twin of :mod:`c_ref.cortexm.build`: the same firmware sources
(``ALGO_SOURCES``), strict warning set and API list, built with
``riscv64-unknown-elf-gcc -march=rv32imc -mabi=ilp32`` against picolibc.
``opt`` is a gcc optimisation flag such as ``"-Os"``.
"""
import functools
import os
import shutil

from c_ref.cortexm import build as cortexm_build
from c_ref.cortexm.build import ALGO_SOURCES, API, C_REF, WARNINGS, _run, link_fails

HERE = os.path.dirname(os.path.abspath(__file__))
GCC = "riscv64-unknown-elf-gcc"
QEMU = "qemu-system-riscv32"
QEMU_MACHINE = "virt"
PICOLIBC_SPECS = "/usr/lib/picolibc/riscv64-unknown-elf/picolibc.specs"
# Integer multiply/divide and compressed instructions, no atomics, no FPU: a small MCU core.
ARCH = ("-march=rv32imc", "-mabi=ilp32")
LINKER_SCRIPT = os.path.join(HERE, "rv32.ld")


@functools.lru_cache(maxsize=None)
def toolchain_missing():
    """``None`` if the cross compiler and picolibc's semihosting library link a program, else why not."""
    if shutil.which(GCC) is None:
        return f"{GCC} not found on PATH (apt install gcc-riscv64-unknown-elf)"
    if not os.path.exists(PICOLIBC_SPECS):
        return f"{PICOLIBC_SPECS} not found (apt install picolibc-riscv64-unknown-elf)"
    failed = link_fails(lambda src, out: link_semihosting("-Os", src, out, sources=()))
    if failed:
        return f"{GCC} cannot link an rv32imc semihosting image with picolibc: {failed}"
    return None


def qemu_missing():
    """``None`` if QEMU can emulate the RV32 virt board, else why not."""
    return cortexm_build.qemu_missing(QEMU, QEMU_MACHINE, "qemu-system-misc")


def compile_algo(opt, out_dir, extra=()):
    """Compile the firmware sources warning-free; return the object paths (``.su``/``.ci`` beside)."""
    os.makedirs(out_dir, exist_ok=True)
    flags = [*ARCH, f"--specs={PICOLIBC_SPECS}", opt, *WARNINGS, "-ffunction-sections",
             "-fdata-sections", "-fstack-usage", "-fcallgraph-info=su", "-g", *extra, "-I", C_REF]
    objs = [os.path.join(out_dir, src.replace(".c", ".o")) for src in ALGO_SOURCES]
    for src, obj in zip(ALGO_SOURCES, objs):
        _run([GCC, *flags, "-c", os.path.join(C_REF, src), "-o", obj])
    return objs


def link_semihosting(opt, main_src, out, sources=ALGO_SOURCES, extra=()):
    """Link ``main_src`` with the start-up code, linker script and picolibc's semihosting library.

    ``main_src`` may be any C file with ``int main(void)``. Returns ``out``.
    """
    srcs = [os.path.join(HERE, "startup.c"), main_src] + [os.path.join(C_REF, s) for s in sources]
    _run([GCC, *ARCH, opt, "-std=c99", "-Wall", "-Wextra", "-ffunction-sections", "-fdata-sections",
          *extra, "-I", C_REF, f"--specs={PICOLIBC_SPECS}", "--oslib=semihost", "-nostartfiles",
          "-T", LINKER_SCRIPT, "-Wl,--gc-sections", *srcs, "-o", out])
    return out


def link_bare(opt, out_dir):
    """Link the algorithm alone (no start-up, no main) for the unicorn emulator.

    Keeps the public API and the picolibc/libgcc routines it pulls in
    (``memset``, 64-bit division). Returns ``(elf_path, object_paths)``.
    """
    objs = compile_algo(opt, out_dir)
    elf = os.path.join(out_dir, "linedrop_bare.elf")
    keep = [f"-Wl,-u,{name}" for name in API]
    _run([GCC, *ARCH, opt, f"--specs={PICOLIBC_SPECS}", "-nostartfiles", "-T", LINKER_SCRIPT,
          "-Wl,-e,ld_step", "-Wl,--gc-sections", *keep, *objs, "-o", elf])
    return elf, objs
