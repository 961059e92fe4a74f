"""Replay text vectors through ld_step on an emulated Cortex-M4 (QEMU mps2-an386) via semihosting.

Cross-builds the text vector driver (c_ref/tools/replay_main.c, format in
c_ref/textvec.py) with the firmware sources and the start-up code here,
boots it under QEMU with the vector file as its argument, and returns what
it printed: one line per operation, the command and every state field.
"""
import os
import subprocess

from c_ref.cortexm import build

DRIVER = os.path.join(build.C_REF, "tools", "replay_main.c")
QEMU_TIMEOUT_S = 60
VECTOR_FILE = "vectors.txt"
# Exit statuses: the driver's own, the start-up code's fault handler, and timeout(1).
EXIT_REASONS = {2: "malformed vector file", 3: "semihosting I/O error", 70: "CPU fault",
                124: f"timed out after {QEMU_TIMEOUT_S} s"}


def driver_missing():
    """``None`` if the text vector driver is in the tree, else why not."""
    return None if os.path.exists(DRIVER) else f"{DRIVER} not found"


def build_image(opt, out_dir, cpu="m4"):
    """Link the text vector driver for ``cpu`` at ``opt``; return the ELF path."""
    os.makedirs(out_dir, exist_ok=True)
    return build.link_semihosting(cpu, opt, DRIVER, os.path.join(out_dir, f"replay{opt}.elf"))


def qemu_command(elf, vector_file=VECTOR_FILE):
    """The QEMU command line, wrapped in ``timeout``; the driver reads ``vector_file``."""
    return ["timeout", str(QEMU_TIMEOUT_S), build.QEMU, "-M", build.QEMU_MACHINE, "-nographic",
            "-monitor", "none", "-serial", "none",
            "-semihosting-config", f"enable=on,target=native,arg=replay,arg={vector_file}",
            "-kernel", elf]


def run_text(elf, vectors, work_dir, command=qemu_command):
    """Run the text of a vector file on the target; return the driver's output text.

    The vector file is written to ``work_dir``, where QEMU runs and where it is
    left for inspection (``vectors.txt``, ``replay_out.txt``). ``command(elf)``
    gives the QEMU command line (another port passes its own).
    """
    with open(os.path.join(work_dir, VECTOR_FILE), "w") as f:
        f.write(vectors)
    res = subprocess.run(command(elf), cwd=work_dir, capture_output=True, text=True)
    with open(os.path.join(work_dir, "replay_out.txt"), "w") as f:
        f.write(res.stdout)
    if res.returncode != 0:
        why = EXIT_REASONS.get(res.returncode, "unexpected exit status")
        raise RuntimeError(f"QEMU run failed with status {res.returncode} ({why}): "
                           f"{(res.stdout + res.stderr)[-500:]}")
    return res.stdout
