"""Firmware cost of ld_step on RV32IMC: instructions per sample in unicorn, code bytes and stack.

The RISC-V counterpart of :mod:`harness.port.firmware_cost`, on its inputs
(the closed-loop cable + capacitor plant with a load step, then the open-loop
adversarial codes, imported from there): builds the firmware sources with
``riscv64-unknown-elf-gcc -march=rv32imc``, runs ld_step in unicorn, checks
every command and every state field against the Python model, and counts
executed instructions. Code bytes are those of the linked image (after linker
relaxation shortens calls), which is what lands in flash.

    python -m harness.port.firmware_cost_riscv [--json]
"""
import argparse
import json
import subprocess
import sys
import tempfile

from elftools.elf.elffile import ELFFile

from algo import step as model
from algo.config import AlgoConfig
from algo.params import PARAM_FIELDS, derive
from algo.state import STATE_FIELDS
from c_ref.cortexm.build import worst_stack
from c_ref.riscv import build
from harness.port.firmware_cost import WINDOWS, adversarial_inputs, input_run

OPTS = ("-Os", "-O2")
# The keys `linedrop bench --firmware --json` carries (harness.port.firmware_cost.measure).
BENCH_KEYS = ("rv32_instr_mean", "rv32_instr_max", "rv32_instr_max_adversarial",
              "rv32_text_bytes_os", "rv32_bit_exact")


def _state_diff(emu, s):
    """``{field: (target, model)}`` of every state field where the target differs from ``s``."""
    got = emu.read_state()
    return {f: (got[f], getattr(s, f)) for f in STATE_FIELDS if got[f] != getattr(s, f)}


def _linked_bytes(elf, objs):
    """``(own, library)``: code bytes of the functions ``objs`` define, and of everything else.

    Sizes are read from the linked image's symbols; the library share is the rest of
    ``.text`` (picolibc/libgcc code and libgcc's read-only tables).
    """
    nm = subprocess.run([build.GCC.replace("gcc", "nm"), "--defined-only", "-j", *objs],
                        capture_output=True, text=True, check=True).stdout.split()
    with open(elf, "rb") as f:
        image = ELFFile(f)
        own = sum(sym["st_size"] for sym in image.get_section_by_name(".symtab").iter_symbols()
                  if sym["st_info"]["type"] == "STT_FUNC" and sym.name in set(nm))
        return own, image.get_section_by_name(".text")["sh_size"] - own


def run_rv32(opt, cfg, out_dir):
    """Build at ``opt``, run the closed loop then the adversarial input; return the figures.

    ``mismatch`` is the first step (or the initial state) where the target's command or
    a state field differs from the model's, else ``None``.
    """
    from c_ref.riscv.emu import STATE_ADDR, Rv32   # unicorn only when measuring

    elf, objs = build.link_bare(opt, out_dir)
    emu = Rv32(elf)
    p = derive(cfg)
    pa = emu.write_params({name: getattr(p, name) for name in PARAM_FIELDS})
    emu.call("ld_init", pa, STATE_ADDR)
    s = model.init(p)
    diff = _state_diff(emu, s)
    mismatch = {"sample": "ld_init", "fields": diff} if diff else None
    n = WINDOWS * p.window
    plant = input_run(cfg, n)
    next(plant)
    cmd = s.cmd
    counts, window_end = [], []

    def checked_step(k, v, i):
        """One ld_step on the target and in the model; returns ``(target command, instructions)``."""
        nonlocal mismatch
        cmd_c, instr = emu.call("ld_step", pa, STATE_ADDR, v, i)
        cmd_m = model.step(p, s, v, i)
        diff = _state_diff(emu, s)
        if mismatch is None and (diff or cmd_c != cmd_m):
            mismatch = {"sample": k, "cmd": (cmd_c, cmd_m), "fields": diff}
        return cmd_c, instr

    for k in range(n):
        windows = s.windows
        cmd, instr = checked_step(k, *plant.send(cmd))
        counts.append(instr)
        window_end.append(s.windows != windows)
    adversarial = [checked_step(n + k, v, i)[1] for k, (v, i) in enumerate(adversarial_inputs(p))]
    own, lib = _linked_bytes(elf, objs)
    ordinary = [c for c, end in zip(counts, window_end) if not end]
    stack, chain, unknown = worst_stack(objs)
    return {"instr_mean": sum(counts) / n, "instr_max": max(counts),
            "instr_sample_max": max(ordinary), "instr_max_adversarial": max(adversarial),
            "text_bytes": own, "lib_bytes": lib, "stack_static": stack, "stack_chain": chain,
            "stack_unknown": unknown, "stack_measured": (emu.stack_high_water() + 3) & ~3,
            "samples": n, "adversarial_samples": len(adversarial), "mismatch": mismatch}


def measure(cfg=None):
    """Every RV32IMC figure: ``{opt: run_rv32(...)}`` for -Os and -O2."""
    cfg = cfg or AlgoConfig()
    with tempfile.TemporaryDirectory() as tmp:
        return {opt: run_rv32(opt, cfg, f"{tmp}/rv32{opt}") for opt in OPTS}


def bench_figures(cfg=None):
    """The ``rv32_*`` keys of the firmware benchmark (-O2 counts, -Os code bytes).

    Without the RISC-V toolchain only ``rv32_missing`` (why) is given.
    """
    reason = build.toolchain_missing()
    if reason:
        return {"rv32_missing": reason}
    runs = measure(cfg)
    o2 = runs["-O2"]
    return dict(zip(BENCH_KEYS, (round(o2["instr_mean"], 2), o2["instr_max"],
                                 o2["instr_max_adversarial"], runs["-Os"]["text_bytes"],
                                 all(r["mismatch"] is None for r in runs.values()))))


def main(argv=None):
    """Print the RV32IMC cost figures (or ``--json``)."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--json", action="store_true", help="print every figure as JSON")
    args = ap.parse_args(argv)
    reason = build.toolchain_missing()
    if reason:
        print(f"firmware_cost_riscv: {reason}", file=sys.stderr)
        return 2
    runs = measure()
    if args.json:
        print(json.dumps(runs, indent=2))
        return 0
    rows = [("instructions per ld_step, mean", "instr_mean"),
            ("instructions, worst = window end", "instr_max"),
            ("instructions, worst non-window sample", "instr_sample_max"),
            ("instructions, worst on adversarial input", "instr_max_adversarial"),
            (".text bytes of the firmware sources, linked", "text_bytes"),
            ("picolibc/libgcc code and tables, bytes", "lib_bytes"),
            ("stack, static call graph, bytes", "stack_static"),
            ("stack, measured incl. libgcc, bytes", "stack_measured")]
    print(f"{'figure (RV32IMC)':44s} {'-O2':>8s} {'-Os':>8s}")
    for label, key in rows:
        print(f"{label:44s} {runs['-O2'][key]:>8.6g} {runs['-Os'][key]:>8.6g}")
    for opt, r in runs.items():
        print(f"{opt}: bit-exact with the Python model over {r['samples']} closed-loop and "
              f"{r['adversarial_samples']} adversarial samples: {r['mismatch'] is None}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
