"""Cortex-M port: strict warning-free cross-builds, and bit-exact vectors on an emulated Cortex-M4 (QEMU).

The vectors go through the text vector driver (c_ref/tools/replay_main.c,
c_ref/textvec.py) built for the target. Every command and every state field
after every operation on the target must equal the Python model's, at zero
tolerance. Tests skip when the ARM
toolchain or QEMU is missing, or fail under LINEDROP_REQUIRE_TOOLS=1.
"""
import math
import random
import subprocess

import pytest

from algo import step as model
from algo.config import AlgoConfig
from algo.params import derive
from c_ref import textvec
from c_ref.cortexm import build, qemu_run
from c_ref.fuzz.gen_params_corpus import configs
from harness.port.firmware_cost import input_run
from support.tools import skip_or_fail

SEED = 31337
OPTS = ("-Os", "-O2")
# Routines the firmware objects may leave to libc/libgcc: memset (init/reset), 64-bit
# division (once per window) and, on ARMv6-M, 64-bit multiply and shifts.
ALLOWED_EXTERNALS = {"memset", "__aeabi_ldivmod", "__aeabi_lmul", "__aeabi_lasr", "__aeabi_llsl",
                     "__aeabi_llsr"}


@pytest.mark.parametrize("cpu", sorted(build.CPUS))
@pytest.mark.parametrize("opt", OPTS)
def test_firmware_sources_cross_compile_warning_free_under_strict_flags(cpu, opt, tmp_path):
    skip_or_fail(build.toolchain_missing())
    objs = build.compile_algo(cpu, opt, str(tmp_path))  # -Werror: any warning fails here
    nm = subprocess.run(["arm-none-eabi-nm", "-u", *objs], capture_output=True, text=True,
                        check=True).stdout
    undefined = {line.split()[-1] for line in nm.splitlines() if line.strip().startswith("U ")}
    defined = set(subprocess.run(["arm-none-eabi-nm", "--defined-only", "-j", *objs], capture_output=True,
                                 text=True, check=True).stdout.split())
    assert "ld_step" in defined
    assert undefined - defined <= ALLOWED_EXTERNALS, undefined - defined


@pytest.mark.parametrize("cpu", sorted(build.CPUS))
def test_window_division_links_from_libgcc_without_a_hardware_64_bit_divider(cpu, tmp_path):
    skip_or_fail(build.toolchain_missing())
    elf, _ = build.link_bare(cpu, "-Os", str(tmp_path))
    syms = subprocess.run(["arm-none-eabi-nm", elf], capture_output=True, text=True,
                          check=True).stdout
    assert " __aeabi_ldivmod" in syms
    assert not any(f" __aeabi_{f}" in syms for f in ("fadd", "dadd", "fmul", "dmul", "f2iz", "d2iz"))


def _closed_loop(p, cfg, n):
    """ADC codes from the small cable plant, driven by the model's own commands."""
    s = model.init(p)
    plant = input_run(cfg, n, seed=SEED)
    next(plant)
    v, i = plant.send(s.cmd)
    out = [(v, i)]
    for _ in range(n - 1):
        v, i = plant.send(model.step(p, s, v, i))
        out.append((v, i))
    return out


def golden_cases():
    """Seeded vector set: ``(name, params, operations)``.

    Default settings in closed loop through a load step, then a reset and
    re-convergence, and with a purely reactive response; every code 0..65535 at random
    and at the extremes (clamps, saturation, the estimator's bad-window paths) under the
    default, the widest and the narrowest word lengths and five seeded valid blocks.
    """
    rng = random.Random(SEED)
    cfg = AlgoConfig()
    p = derive(cfg)
    loop = _closed_loop(p, cfg, 12 * p.window)
    cases = [("defaults_closed_loop_load_step_reset", p,
              [("s", v, i) for v, i in loop] + [("r",)] + [("s", v, i) for v, i in loop[:3000]]
              + [("i",)] + [("s", v, i) for v, i in loop[:300]])]
    # The interrupt path on the same codes, the window work at once, as late as the next period
    # end allows, two periods late, and not at all (the next window is dropped as late).
    delays = (0, p.period - 1, 2 * p.period + 3, None)
    work = [end + delays[k % 4] for k, end in enumerate(range(p.window - 1, len(loop), p.window))
            if delays[k % 4] is not None]
    cases.append(("defaults_interrupt_path_window_work_timing", p,
                  textvec.isr_samples([v for v, _ in loop], [i for _, i in loop], work)))
    # Capacitor missing: the voltage swing leads the current swing by a quarter period.
    ph = [2 * math.pi * n / p.period for n in range(4 * p.window)]
    cases.append(("defaults_quadrature_response", p,
                  [("s", 2000 + round(200 * math.cos(x)), 800 + round(40 * math.sin(x)))
                   for x in ph]))
    # Voltage swing in phase with the current, five times r_max_q's ratio: no cable fits.
    cases.append(("defaults_in_phase_above_r_max", p,
                  [("s", 2000 + round(200 * math.sin(x)), 800 + round(40 * math.sin(x)))
                   for x in ph]))
    # Voltage swing in antiphase with the current: a negative real part.
    cases.append(("defaults_antiphase_response", p,
                  [("s", 2000 - round(200 * math.sin(x)), 800 + round(40 * math.sin(x)))
                   for x in ph]))
    extremes = (0, 1, 0x7FFF, 0x8000, 0xFFFE, 0xFFFF)
    for k, (_, pk) in enumerate(configs()[:8]):
        n = min(4 * pk.window, 4096) + 3
        cases.append((f"block{k}_random_codes", pk,
                      [("s", rng.randrange(65536), rng.randrange(65536)) for _ in range(n)]))
        cases.append((f"block{k}_extreme_codes", pk,
                      [("s", rng.choice(extremes + (pk.adc_max,)),
                        rng.choice(extremes + (pk.adc_max,))) for _ in range(n)]))
    return cases


@pytest.fixture(scope="module")
def golden():
    """The vector text, the case names per output row, and the model's rows."""
    cases = golden_cases()
    names = [name for name, _, ops in cases for _ in ops]
    text = textvec.dumps([(p, ops) for _, p, ops in cases],
                         comment=f"tests/test_cortexm.py golden_cases(), seed {SEED}")
    return text, names, textvec.model_output([(p, ops) for _, p, ops in cases])


@pytest.mark.parametrize("opt", OPTS)
def test_cortex_m4_in_qemu_matches_the_model_bit_for_bit_on_every_state_field(golden, opt,
                                                                              tmp_path):
    replay_golden_on_target(golden, build, qemu_run, opt, str(tmp_path))


def replay_golden_on_target(golden, port_build, port_run, opt, work_dir):
    """Replay the golden vectors on a port's QEMU target at ``opt``; every row must equal the model's.

    ``port_build``/``port_run`` are a port's build and QEMU runner modules (c_ref/cortexm,
    c_ref/riscv). Skips (or fails under LINEDROP_REQUIRE_TOOLS=1) when a tool is missing.
    """
    for reason in (port_build.toolchain_missing(), port_build.qemu_missing(),
                   port_run.driver_missing()):
        skip_or_fail(reason)
    _, names, want = golden
    got = textvec.parse_output(port_run.run_text(port_run.build_image(opt, work_dir), golden[0],
                                                 work_dir))
    assert len(got) == len(want)
    for k, ((cmd_c, st_c), (cmd_m, st_m), name) in enumerate(zip(got, want, names)):
        diff = {f: (st_c[f], st_m[f]) for f in st_m if st_c[f] != st_m[f]}
        assert cmd_c == cmd_m and not diff, f"{name}, row {k}: cmd {cmd_c} vs {cmd_m}, {diff}"


def test_golden_cases_reach_valid_estimates_and_every_fault_status(golden):
    """The vector set is not vacuous: the target is checked on each window outcome."""
    statuses = {st["status"] for _, st in golden[2]}
    assert statuses >= {1, 2, 3, 4, 5, 6, 7}, statuses
