"""Replay ADC vectors through ld_step on an emulated Cortex-M4 (QEMU mps2-an386) via semihosting.

Builds c_ref/cortexm/semihost_main.c with the firmware sources, writes the
binary input it reads (see that file's header), boots it under QEMU in a
scratch directory and returns the state after ``ld_init`` and after every
step, unpacked with the image's own struct layout.
"""
import os
import struct
import subprocess

from c_ref.cortexm import build
from c_ref.cortexm.elf_layout import pack, struct_layout, unpack

MAIN = os.path.join(build.HERE, "semihost_main.c")
QEMU_TIMEOUT_S = 60
EXIT_REASONS = {2: "struct size mismatch", 3: "semihosting I/O error",
                4: "ld_step's return value differs from state.cmd", 70: "CPU fault",
                124: f"timed out after {QEMU_TIMEOUT_S} s"}


def build_image(opt, out_dir, cpu="m4"):
    """Link the vector runner at ``opt``; return the ELF path (with DWARF)."""
    os.makedirs(out_dir, exist_ok=True)
    return build.link_semihosting(cpu, opt, MAIN, os.path.join(out_dir, f"vectors{opt}.elf"),
                                  extra=("-g",))


def qemu_command(elf):
    """The QEMU command line, wrapped in ``timeout``."""
    return ["timeout", str(QEMU_TIMEOUT_S), build.QEMU, "-M", build.QEMU_MACHINE, "-nographic",
            "-monitor", "none", "-serial", "none",
            "-semihosting-config", "enable=on,target=native", "-kernel", elf]


def run_vectors(elf, cases, work_dir):
    """Run ``cases`` on the target.

    Parameters
    ----------
    elf : str
        Image from :func:`build_image`.
    cases : list of (dict, sequence of (int, int))
        Per case, the params as ``{field: value}`` (``ref_tab`` a sequence) and
        the (v, i) ADC code pairs, each 0..65535.
    work_dir : str
        Scratch directory; QEMU runs there and the files are left for inspection.

    Returns
    -------
    list of list of dict
        Per case, the state fields after ``ld_init`` and after each step.
    """
    p_layout = struct_layout(elf, "ld_params_t")
    s_layout = struct_layout(elf, "ld_state_t")
    blob = [b"LDV1", struct.pack("<III", p_layout[0], s_layout[0], len(cases))]
    for params, samples in cases:
        blob.append(pack(p_layout, params))
        blob.append(struct.pack("<I", len(samples)))
        blob.append(b"".join(struct.pack("<HH", v, i) for v, i in samples))
    with open(os.path.join(work_dir, "linedrop_in.bin"), "wb") as f:
        f.write(b"".join(blob))
    res = subprocess.run(qemu_command(elf), cwd=work_dir, capture_output=True, text=True)
    if res.returncode != 0:
        why = EXIT_REASONS.get(res.returncode, "unexpected exit status")
        raise RuntimeError(f"QEMU run failed with status {res.returncode} ({why}): "
                           f"{res.stderr[-500:]}")
    with open(os.path.join(work_dir, "linedrop_out.bin"), "rb") as f:
        data = f.read()
    if data[:4] != b"LDS1":
        raise RuntimeError("linedrop_out.bin does not start with LDS1")
    size, pos, out = s_layout[0], 4, []
    for _, samples in cases:
        states = []
        for _ in range(len(samples) + 1):
            states.append(unpack(s_layout, data[pos:pos + size]))
            pos += size
        out.append(states)
    if pos != len(data):
        raise RuntimeError(f"linedrop_out.bin has {len(data) - pos} unexpected trailing bytes")
    return out
