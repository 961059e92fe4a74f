"""Firmware cost of ld_step on RV32IMC: instructions per sample in unicorn, code bytes and stack.

The RISC-V counterpart of :mod:`harness.port.firmware_cost`, which calls it
(``measure()`` there adds :func:`bench_figures`, so ``linedrop bench --firmware
--json`` carries the ``rv32_*`` keys) and hands it its inputs: the closed-loop
cable + capacitor plant with a load step (``input_run``), then the open-loop
adversarial codes (``adversarial_inputs``). They are passed in, not imported, so
the arrow between the two modules points one way. Builds the firmware sources
with ``riscv64-unknown-elf-gcc -march=rv32imc``, runs ld_step in unicorn,
checks every command and every state field against the Python model, and
counts executed instructions. Code bytes are given as the Cortex-M run gives them
(the objects' ``.text``) and as linked (after linker relaxation shortens calls,
only what the API reaches), which is what lands in flash.
"""
import subprocess
import tempfile

from elftools.elf.elffile import ELFFile

from algo import step as model
from algo.config import AlgoConfig
from algo.params import PARAM_FIELDS, derive
from algo.state import STATE_FIELDS
from c_ref.cortexm.build import worst_stack
from c_ref.riscv import build

OPTS = ("-Os", "-O2")


def _state_diff(emu, s):
    """``{field: (target, model)}`` of every state field where the target differs from ``s``."""
    got = emu.read_state()
    return {f: (got[f], getattr(s, f)) for f in STATE_FIELDS if got[f] != getattr(s, f)}


def _code_bytes(elf, objs):
    """``(objects, linked, library)`` code bytes.

    ``objects``: the ``.text*`` sections of ``objs``, every function compiled (the
    Cortex-M figure's definition). ``linked``: the functions of ``objs`` in the bare
    image, i.e. those the API reaches, after linker relaxation. ``library``: the rest
    of the image's ``.text`` (picolibc/libgcc code and libgcc's read-only tables).
    """
    objects = 0
    for path in objs:
        with open(path, "rb") as f:
            objects += sum(sec["sh_size"] for sec in ELFFile(f).iter_sections()
                           if sec.name.startswith(".text"))
    names = set(subprocess.run([build.GCC.replace("gcc", "nm"), "--defined-only", "-j", *objs],
                               capture_output=True, text=True, check=True).stdout.split())
    with open(elf, "rb") as f:
        image = ELFFile(f)
        linked = sum(sym["st_size"] for sym in image.get_section_by_name(".symtab").iter_symbols()
                     if sym["st_info"]["type"] == "STT_FUNC" and sym.name in names)
        return objects, linked, image.get_section_by_name(".text")["sh_size"] - linked


def run_rv32(opt, cfg, out_dir, input_run, adversarial_inputs, windows):
    """Build at ``opt``, run the closed loop then the adversarial input; return the figures.

    ``input_run(cfg, n)`` is the plant coroutine (send a command, get ``(adc_v, adc_i)``),
    run for ``windows`` windows; ``adversarial_inputs(p)`` the open-loop codes after it.
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
    n = windows * p.window
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
    objects, linked, lib = _code_bytes(elf, objs)
    ordinary = [c for c, end in zip(counts, window_end) if not end]
    stack, chain, unknown = worst_stack(objs)
    return {"instr_mean": sum(counts) / n, "instr_max": max(counts),
            "instr_sample_max": max(ordinary), "instr_max_adversarial": max(adversarial),
            "text_bytes": objects, "text_bytes_linked": linked, "lib_bytes": lib, "stack_static": stack, "stack_chain": chain,
            "stack_unknown": unknown, "stack_measured": (emu.stack_high_water() + 3) & ~3,
            "samples": n, "adversarial_samples": len(adversarial), "mismatch": mismatch}


def measure(cfg, input_run, adversarial_inputs, windows):
    """Every RV32IMC figure: ``{opt: run_rv32(...)}`` for -Os and -O2 (arguments as there)."""
    with tempfile.TemporaryDirectory() as tmp:
        return {opt: run_rv32(opt, cfg, f"{tmp}/rv32{opt}", input_run, adversarial_inputs, windows)
                for opt in OPTS}


def bench_figures(cfg, input_run, adversarial_inputs, windows):
    """The ``rv32_*`` keys of the firmware benchmark, named as the Cortex-M ones (``m4_*``).

    Counts at -O2 unless the key ends in ``_os``; ``rv32_bit_exact`` covers both builds.
    Without the RISC-V toolchain only ``rv32_missing`` (why) is given.
    """
    reason = build.toolchain_missing()
    if reason:
        return {"rv32_missing": reason}
    runs = measure(cfg, input_run, adversarial_inputs, windows)
    o2, os_ = runs["-O2"], runs["-Os"]
    return {"rv32_instr_mean": round(o2["instr_mean"], 2), "rv32_instr_max": o2["instr_max"],
            "rv32_instr_sample_max": o2["instr_sample_max"],
            "rv32_instr_max_adversarial": o2["instr_max_adversarial"],
            "rv32_instr_mean_os": round(os_["instr_mean"], 2), "rv32_instr_max_os": os_["instr_max"],
            "rv32_text_bytes_os": os_["text_bytes"], "rv32_text_bytes_o2": o2["text_bytes"],
            "rv32_text_bytes_os_linked": os_["text_bytes_linked"],
            "rv32_lib_bytes_os": os_["lib_bytes"],
            "rv32_stack_bytes": max(r["stack_static"] for r in runs.values()),
            "rv32_stack_bytes_measured": max(r["stack_measured"] for r in runs.values()),
            "rv32_bit_exact": all(r["mismatch"] is None for r in runs.values()),
            "rv32_mismatches": {opt: r["mismatch"] for opt, r in runs.items() if r["mismatch"]}}
