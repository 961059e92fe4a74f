"""The firmware cost runs' inputs and the interrupt path's run, shared by every target.

A closed-loop plant for a realistic input sequence (``input_run``), open-loop codes meant to
lengthen the data-dependent window work (``adversarial_inputs``), the check of a target's
result and state against the Python model after a call (``mismatch_at``), and the run of the
interrupt path with the main loop's window work (``isr_run``) on any emulated target whose
``call(name, *args)`` returns ``(r0, instructions)`` and whose ``read_state()`` gives the state
block as ``{field: int}`` (c_ref/cortexm/emu.py, c_ref/riscv/emu.py).
"""
import random

from algo import step as model
from algo.estimator import window_work
from algo.state import STATE_FIELDS, WIN_PENDING

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


def mismatch_at(emu, s, k, what, got_c, got_m):
    """``None`` if the target's result ``got_c`` and every state field equal the model's
    (``got_m``, state ``s``), else a dict naming sample ``k``, the call and each difference."""
    got = emu.read_state()
    fields = {f: (got[f], getattr(s, f)) for f in STATE_FIELDS if got[f] != getattr(s, f)}
    if got_c == got_m and not fields:
        return None
    return {"sample": k, "call": what, "result": (got_c, got_m), "fields": fields}


def isr_run(emu, state_addr, pa, cfg, p, windows=WINDOWS):
    """The interrupt path in the same closed loop: ``ld_step_isr`` every sample and
    ``ld_window_work`` right after each window end (the main loop's first chance), then the
    adversarial input; every call checked against the model. Returns the ISR and window-work
    instruction figures (and cycle bounds on a target with published timings) and the first
    mismatch (or ``None``)."""
    emu.call("ld_init", pa, state_addr)
    s = model.init(p)
    n = windows * p.window
    plant = input_run(cfg, n)
    next(plant)
    v, i = plant.send(s.cmd)
    isr, work, isr_cycles, work_cycles, mismatch = [], [], [], [], None

    def check(k, what, got_c, got_m):
        nonlocal mismatch
        mismatch = mismatch or mismatch_at(emu, s, k, what, got_c, got_m)

    def one(k, v, i):
        cmd_c, instr = emu.call("ld_step_isr", pa, state_addr, v, i)
        isr_cycles.append(emu.last_cycles)
        check(k, "ld_step_isr", cmd_c, model.step_isr(p, s, v, i))
        if s.w_state == WIN_PENDING:            # the main loop's first chance to run the work
            did_c, w_instr = emu.call("ld_window_work", pa, state_addr)
            work_cycles.append(emu.last_cycles)
            check(k, "ld_window_work", did_c, window_work(p, s))
            work.append(w_instr)
        return cmd_c, instr

    for k in range(n):
        cmd_c, instr = one(k, v, i)
        isr.append(instr)
        if k + 1 < n:
            v, i = plant.send(cmd_c)
    adversarial = max(one(n + k, v, i)[1] for k, (v, i) in enumerate(adversarial_inputs(p)))
    idle_c, idle = emu.call("ld_window_work", pa, state_addr)
    check(n, "ld_window_work (idle)", idle_c, window_work(p, s))
    out = {"isr_instr_mean": sum(isr) / len(isr), "isr_instr_max": max(isr),
           "isr_instr_max_adversarial": adversarial, "window_instr_max": max(work),
           "window_instr_mean": sum(work) / len(work), "window_instr_idle": idle,
           "mismatch": mismatch}
    if None not in isr_cycles + work_cycles:       # a target with published timings
        out.update(isr_cycles_mean=sum(isr_cycles) / len(isr_cycles), isr_cycles_max=max(isr_cycles),
                   window_cycles_max=max(work_cycles))
    return out
