"""Replay text vectors through ld_step on an emulated RV32IMC core (QEMU virt) via semihosting.

The same text vector driver as the Cortex-M runs (c_ref/tools/replay_main.c,
format in c_ref/textvec.py), cross-built with the firmware sources and the
start-up code here, booted with ``-bios none`` so it starts at the base of
RAM in machine mode. Exit statuses and file handling are those of
:mod:`c_ref.cortexm.qemu_run`. picolibc writes both stdout and stderr as
semihosting console output (one character per call), which QEMU sends to
its stderr unless given a chardev: here it is QEMU's stdout, so the rows
are read from there (and an error message, with a non-zero status, too).
"""
import os

from c_ref.cortexm import qemu_run as cortexm_run
from c_ref.cortexm.qemu_run import DRIVER, QEMU_TIMEOUT_S, VECTOR_FILE, driver_missing  # noqa: F401
from c_ref.riscv import build


def build_image(opt, out_dir):
    """Link the text vector driver for rv32imc at ``opt``; return the ELF path."""
    os.makedirs(out_dir, exist_ok=True)
    return build.link_semihosting(opt, DRIVER, os.path.join(out_dir, f"replay_rv32{opt}.elf"))


def qemu_command(elf, vector_file=VECTOR_FILE):
    """The QEMU command line, wrapped in ``timeout``; the driver reads ``vector_file``."""
    return ["timeout", str(QEMU_TIMEOUT_S), build.QEMU, "-M", build.QEMU_MACHINE, "-bios", "none",
            "-nographic", "-monitor", "none", "-serial", "none", "-chardev", "stdio,id=ldcon",
            "-semihosting-config",
            f"enable=on,target=native,chardev=ldcon,arg=replay,arg={vector_file}", "-kernel", elf]


def run_text(elf, vectors, work_dir):
    """Run the text of a vector file on the RV32 target; return the driver's output text."""
    return cortexm_run.run_text(elf, vectors, work_dir, command=qemu_command)
