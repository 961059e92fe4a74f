"""Firmware cost of ld_step on Cortex-M4 and M0+: instructions per sample, code bytes, state and stack.

Cross-builds c_ref (step.c, estimator.c, fixed.c) with arm-none-eabi-gcc, runs ld_step
in the unicorn emulator in closed loop with a small cable + capacitor plant
(default settings, 1 A to 1.5 A load step), checks every command and state
field against the Python model, and counts executed instructions. Open-loop
adversarial input (random and full-scale codes) then bounds the data-dependent
window end. All figures are deterministic; none is a wall-clock time.

    python -m harness.port.firmware_cost [--json | --profile m4]
"""
import argparse
import collections
import json
import random
import subprocess
import sys
import tempfile

from elftools.elf.elffile import ELFFile

from algo import step as model
from algo.estimator import window_work
from algo.config import AlgoConfig
from algo.params import PARAM_FIELDS, derive
from algo.state import STATE_FIELDS
from c_ref.cortexm import build
from c_ref.cortexm.emu import STATE_ADDR, CortexM

# Targets of the firmware work: the interrupt path's mean and worst sample, code and state size.
TARGETS = {"m4_isr_instr_mean": 40, "m4_isr_instr_max": 80, "m0plus_isr_instr_max": 200,
           "text_bytes_os": 2048, "state_bytes": 128}

# Closed-loop plant for a realistic input sequence: ideal supply, loop resistance
# R_OHM, load capacitor C_F at the far end, constant-current load stepping once.
R_OHM, C_F = 1.0, 1e-3
I_LOAD_A, I_STEP_A = 1.0, 1.5
WINDOWS = 24
ADVERSARIAL_WINDOWS = 32
SEED = 20240601


def input_run(cfg, n_samples, seed=SEED):
    """A closed-loop plant as a coroutine: send a command code, get ``(adc_v, adc_i)``.

    Forward Euler at the sample rate (RC = 32 samples at the defaults), with
    +-1 LSB of seeded noise on each ADC channel; the load steps at mid-run.
    """
    rng = random.Random(seed)
    v_lsb = cfg.v_full_scale_v / (1 << cfg.adc_bits)
    i_lsb = cfg.i_full_scale_a / (1 << cfg.adc_bits)
    dac_lsb = cfg.dac_full_scale_v / (1 << cfg.dac_bits)
    dt = 1.0 / cfg.sample_rate_hz
    adc_max = (1 << cfg.adc_bits) - 1
    v_cap = cfg.target_v - R_OHM * I_LOAD_A
    cmd = yield
    for n in range(n_samples):
        v_s = cmd * dac_lsb
        i = (v_s - v_cap) / R_OHM
        i_load = I_LOAD_A if n < n_samples // 2 else I_STEP_A
        v_cap += dt * (i - i_load) / C_F
        codes = [min(adc_max, max(0, round(x / lsb) + rng.randint(-1, 1)))
                 for x, lsb in ((v_s, v_lsb), (i, i_lsb))]
        cmd = yield tuple(codes)


def adversarial_inputs(p, windows=ADVERSARIAL_WINDOWS, seed=SEED):
    """Open-loop ADC codes meant to lengthen the data-dependent parts of a window end.

    Cycles through random 16-bit codes, full-scale extremes and full-scale square
    waves (in phase and inverted), so the accumulators, the bit-length loop and the
    64-bit division see large and odd magnitudes. Returns a list of ``(v, i)``.
    """
    rng = random.Random(seed)
    top, half = p.adc_max, (p.adc_max + 1) // 2
    out = []
    for w in range(windows):
        mode = w % 4
        a_v, a_i = rng.choice([0, 10, top]), rng.choice([1, 10, top])
        for k in range(p.window):
            sgn = 1 if k % p.period < p.period // 2 else -1
            if mode == 0:
                out.append((rng.randrange(65536), rng.randrange(65536)))
            elif mode == 1:
                out.append((rng.choice([0, top]), rng.choice([0, top])))
            else:
                d_i = sgn if mode == 2 else -sgn
                out.append((min(top, max(0, half + sgn * a_v // 2)),
                            min(top, max(0, half + d_i * a_i // 2))))
    return out


def _section_bytes(objs):
    """Sum of ``.text*`` and ``.rodata*`` section sizes over object files."""
    text = rodata = 0
    for path in objs:
        with open(path, "rb") as f:
            for sec in ELFFile(f).iter_sections():
                if sec.name.startswith(".text"):
                    text += sec["sh_size"]
                elif sec.name.startswith(".rodata"):
                    rodata += sec["sh_size"]
    return text, rodata


def run_cpu(cpu, opt, cfg, out_dir):
    """Build for ``cpu`` at ``opt``, run the closed loop then adversarial input; return figures.

    Every step of both runs is checked against the Python model (``mismatch`` holds
    the first difference, or ``None``).
    """
    elf, objs = build.link_bare(cpu, opt, out_dir)
    emu = CortexM(elf, cpu)
    p = derive(cfg)
    pa = emu.write_params({name: getattr(p, name) for name in PARAM_FIELDS})
    emu.call("ld_init", pa, STATE_ADDR)
    state_size, _ = emu.call("ld_state_size")
    s = model.init(p)
    n = WINDOWS * p.window
    plant = input_run(cfg, n)
    next(plant)
    v, i = plant.send(s.cmd)
    counts, window_end, mismatch = [], [], None

    def one_step(k, v, i):
        nonlocal mismatch
        before_windows = s.windows
        cmd_c, instr = emu.call("ld_step", pa, STATE_ADDR, v, i)
        cmd_m = model.step(p, s, v, i)
        got = emu.read_state()
        if mismatch is None and (cmd_c != cmd_m or any(got[f] != getattr(s, f)
                                                       for f in STATE_FIELDS)):
            mismatch = {"sample": k, "cmd": (cmd_c, cmd_m),
                        "fields": {f: (got[f], getattr(s, f)) for f in STATE_FIELDS
                                   if got[f] != getattr(s, f)}}
        return cmd_c, instr, s.windows != before_windows

    emu.by_function.clear()
    for k in range(n):
        cmd_c, instr, end = one_step(k, v, i)
        counts.append(instr)
        window_end.append(end)
        if k + 1 < n:
            v, i = plant.send(cmd_c)
    by_function = dict(emu.by_function)
    adversarial_max = max(one_step(n + k, v, i)[1]
                          for k, (v, i) in enumerate(adversarial_inputs(p)))
    isr = _isr_run(emu, pa, cfg, p)
    text, rodata = _section_bytes(objs)
    stack_static, chain, unknown = build.worst_stack(objs)
    per_sample = [c for c, w in zip(counts, window_end) if not w]
    return {"instr_mean": sum(counts) / len(counts), "instr_max": max(counts),
            "instr_sample_mean": sum(per_sample) / len(per_sample),
            "instr_sample_max": max(per_sample),
            "instr_by_function": {fn: c / len(counts) for fn, c in
                                  sorted(by_function.items(), key=lambda x: -x[1])},
            "instr_max_adversarial": adversarial_max,
            "text_bytes": text, "rodata_bytes": rodata,
            "lib_bytes": _library_bytes(elf, text), "state_bytes": state_size,
            "stack_static": stack_static, "stack_chain": chain, "stack_unknown": unknown,
            "stack_measured": (emu.stack_high_water() + 3) & ~3,
            "status_last": s.status, "r_est_last": s.r_est,
            "mismatch": mismatch or isr.pop("mismatch"), "samples": n, **isr}


def _isr_run(emu, pa, cfg, p):
    """The interrupt path in the same closed loop: ``ld_step_isr`` every sample and
    ``ld_window_work`` right after each window end (the main loop's first chance), then the
    adversarial input; every call checked against the model. Returns the ISR and window-work
    instruction figures and the first mismatch (or ``None``)."""
    emu.call("ld_init", pa, STATE_ADDR)
    s = model.init(p)
    n = WINDOWS * p.window
    plant = input_run(cfg, n)
    next(plant)
    v, i = plant.send(s.cmd)
    isr, work, mismatch = [], [], None

    def check(k, what, got_c, got_m):
        nonlocal mismatch
        got = emu.read_state()
        if mismatch is None and (got_c != got_m or any(got[f] != getattr(s, f) for f in STATE_FIELDS)):
            mismatch = {"sample": k, "call": what, "result": (got_c, got_m),
                        "fields": {f: (got[f], getattr(s, f)) for f in STATE_FIELDS
                                   if got[f] != getattr(s, f)}}

    def one(k, v, i):
        cmd_c, instr = emu.call("ld_step_isr", pa, STATE_ADDR, v, i)
        check(k, "ld_step_isr", cmd_c, model.step_isr(p, s, v, i))
        if s.w_state == 1:                      # WIN_PENDING: the main loop runs the work
            did_c, w_instr = emu.call("ld_window_work", pa, STATE_ADDR)
            check(k, "ld_window_work", did_c, window_work(p, s))
            work.append(w_instr)
        return cmd_c, instr

    for k in range(n):
        cmd_c, instr = one(k, v, i)
        isr.append(instr)
        if k + 1 < n:
            v, i = plant.send(cmd_c)
    adversarial = max(one(n + k, v, i)[1] for k, (v, i) in enumerate(adversarial_inputs(p)))
    idle_c, idle = emu.call("ld_window_work", pa, STATE_ADDR)
    check(n, "ld_window_work (idle)", idle_c, window_work(p, s))
    return {"isr_instr_mean": sum(isr) / len(isr), "isr_instr_max": max(isr),
            "isr_instr_max_adversarial": adversarial, "window_instr_max": max(work),
            "window_instr_mean": sum(work) / len(work), "window_instr_idle": idle,
            "mismatch": mismatch}


def profile_lines(cpu="m4", opt="-O2", cfg=None, windows=8):
    """Where the instructions go, by source line: two Counters of mean executions per call.

    Returns ``(ordinary, window_end)``: ``{"file.c:line": instructions}`` averaged over
    the ordinary samples and over the window-end samples of a closed-loop run.
    """
    cfg = cfg or AlgoConfig()
    p = derive(cfg)
    with tempfile.TemporaryDirectory() as tmp:
        elf, _ = build.link_bare(cpu, opt, tmp)
        emu = CortexM(elf, cpu)
        pa = emu.write_params({name: getattr(p, name) for name in PARAM_FIELDS})
        emu.call("ld_init", pa, STATE_ADDR)
        s = model.init(p)
        plant = input_run(cfg, windows * p.window)
        next(plant)
        v, i = plant.send(s.cmd)
        sums = {False: collections.Counter(), True: collections.Counter()}
        calls = collections.Counter()
        for k in range(windows * p.window):
            emu.by_address = {}
            before = s.windows
            cmd, _ = emu.call("ld_step", pa, STATE_ADDR, v, i)
            model.step(p, s, v, i)
            end = s.windows != before
            sums[end].update(emu.by_address)
            calls[end] += 1
            if k + 1 < windows * p.window:
                v, i = plant.send(cmd)
        addrs = sorted(set(sums[False]) | set(sums[True]))
        lines = subprocess.run([build.GCC.replace("gcc", "addr2line"), "-e", elf,
                                *map(hex, addrs)], capture_output=True, text=True,
                               check=True).stdout.split("\n")
    where = {a: ln.split("/")[-1].split(" ")[0] for a, ln in zip(addrs, lines)}
    out = []
    for end in (False, True):
        c = collections.Counter()
        for a, n in sums[end].items():
            c[where[a]] += n / calls[end]
        out.append(c)
    return tuple(out)


def _library_bytes(elf, own_text):
    """Code bytes the linker added to the algorithm's own: libc/libgcc routines."""
    with open(elf, "rb") as f:
        return ELFFile(f).get_section_by_name(".text")["sh_size"] - own_text


def measure(cfg=None):
    """Every figure of the cost table, as a dict (keys documented in the README)."""
    cfg = cfg or AlgoConfig()
    out = {}
    with tempfile.TemporaryDirectory() as tmp:
        runs = {(cpu, opt): run_cpu(cpu, opt, cfg, f"{tmp}/{cpu}{opt}")
                for cpu in build.CPUS for opt in ("-Os", "-O2")}
    for cpu in build.CPUS:
        r = runs[(cpu, "-O2")]
        out[f"{cpu}_instr_mean"] = round(r["instr_mean"], 2)
        out[f"{cpu}_instr_max"] = r["instr_max"]
        out[f"{cpu}_instr_sample_max"] = r["instr_sample_max"]
        out[f"{cpu}_instr_max_adversarial"] = r["instr_max_adversarial"]
        out[f"{cpu}_instr_mean_os"] = round(runs[(cpu, "-Os")]["instr_mean"], 2)
        out[f"{cpu}_instr_max_os"] = runs[(cpu, "-Os")]["instr_max"]
        out[f"{cpu}_text_bytes_os"] = runs[(cpu, "-Os")]["text_bytes"]
        out[f"{cpu}_text_bytes_o2"] = r["text_bytes"]
        out[f"{cpu}_lib_bytes_os"] = runs[(cpu, "-Os")]["lib_bytes"]
        out[f"{cpu}_instr_by_function"] = {k: round(v, 2) for k, v in
                                           r["instr_by_function"].items()}
        out[f"{cpu}_isr_instr_mean"] = round(r["isr_instr_mean"], 2)
        out[f"{cpu}_isr_instr_max"] = r["isr_instr_max"]
        out[f"{cpu}_isr_instr_max_adversarial"] = r["isr_instr_max_adversarial"]
        out[f"{cpu}_window_instr_max"] = r["window_instr_max"]
        out[f"{cpu}_window_instr_mean"] = round(r["window_instr_mean"], 2)
    out["window_instr_max"] = max(out[f"{c}_window_instr_max"] for c in build.CPUS)
    out["text_bytes_os"] = max(out[f"{c}_text_bytes_os"] for c in build.CPUS)
    out["rodata_bytes_os"] = max(runs[(c, "-Os")]["rodata_bytes"] for c in build.CPUS)
    out["state_bytes"] = runs[("m4", "-O2")]["state_bytes"]
    out["stack_bytes"] = max(r["stack_static"] for r in runs.values())
    out["stack_bytes_measured"] = max(r["stack_measured"] for r in runs.values())
    out["stack_chain"] = max(runs.values(), key=lambda r: r["stack_static"])["stack_chain"]
    out["stack_unknown"] = sorted({u for r in runs.values() for u in r["stack_unknown"]})
    out["bit_exact"] = all(r["mismatch"] is None for r in runs.values())
    out["mismatches"] = {f"{c}{o}": r["mismatch"] for (c, o), r in runs.items() if r["mismatch"]}
    out["samples"] = runs[("m4", "-O2")]["samples"]
    out["last_status"] = runs[("m4", "-O2")]["status_last"]
    out["targets_met"] = {k: out[k] <= v for k, v in TARGETS.items()}
    from harness.port import firmware_cost_riscv   # RV32IMC: the rv32_* keys, from its own module
    out.update(firmware_cost_riscv.bench_figures(cfg, input_run, adversarial_inputs, WINDOWS))
    return out


def main(argv=None):
    """Print the cost table (or ``--json``)."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--json", action="store_true", help="print the figures as JSON")
    ap.add_argument("--profile", choices=sorted(build.CPUS),
                    help="instead, print the costliest source lines on that core at -O2")
    args = ap.parse_args(argv)
    reason = build.toolchain_missing()
    if reason:
        print(f"firmware_cost: {reason}", file=sys.stderr)
        return 2
    if args.profile:
        for title, c in zip(("ordinary sample", "window-end sample"), profile_lines(args.profile)):
            print(f"{title}: {sum(c.values()):.1f} instructions; costliest lines:")
            for line, n in c.most_common(12):
                print(f"  {line:24s} {n:7.1f}")
        return 0
    m = measure()
    if args.json:
        print(json.dumps(m, indent=2))
        return 0
    rows = [("instructions per ld_step, mean (-O2)", "m4_instr_mean", "m0plus_instr_mean"),
            ("instructions, worst = window end (-O2)", "m4_instr_max", "m0plus_instr_max"),
            ("instructions, worst non-window sample", "m4_instr_sample_max",
             "m0plus_instr_sample_max"),
            ("instructions, worst on adversarial input", "m4_instr_max_adversarial",
             "m0plus_instr_max_adversarial"),
            ("instructions per ld_step, mean (-Os)", "m4_instr_mean_os", "m0plus_instr_mean_os"),
            ("instructions, worst (-Os)", "m4_instr_max_os", "m0plus_instr_max_os"),
            (".text bytes, step.c + estimator.c + fixed.c, -Os", "m4_text_bytes_os", "m0plus_text_bytes_os"),
            (".text bytes, -O2", "m4_text_bytes_o2", "m0plus_text_bytes_o2"),
            ("libc/libgcc routines pulled in, bytes", "m4_lib_bytes_os", "m0plus_lib_bytes_os")]
    print(f"{'figure':44s} {'Cortex-M4':>10s} {'Cortex-M0+':>10s}")
    for label, a, b in rows:
        print(f"{label:44s} {m[a]:>10} {m[b]:>10}")
    print(f"sizeof(ld_state_t) {m['state_bytes']} B; .rodata {m['rodata_bytes_os']} B; "
          f"stack {m['stack_bytes']} B static ({' -> '.join(m['stack_chain'])}), "
          f"{m['stack_bytes_measured']} B measured incl. {', '.join(m['stack_unknown']) or '-'}")
    print(f"bit-exact with the Python model over {m['samples']} closed-loop samples and "
          f"{ADVERSARIAL_WINDOWS} adversarial windows: "
          f"{m['bit_exact']}")
    for key, ok in m["targets_met"].items():
        print(f"target {key} <= {TARGETS[key]}: {'met' if ok else 'NOT met'} ({m[key]})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
