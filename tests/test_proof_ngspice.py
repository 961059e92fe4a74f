"""Plant transients against ngspice (general-purpose circuit simulator, Debian package ``ngspice``).

Source of the reference: ngspice-39 (or later) run in batch mode (``ngspice -b``) on a netlist this
test writes: an ideal supply at a fixed command -> cable R and L -> capacitor C in series with its
ESR, in parallel with a constant-current load stepped by a PWL source. harness.plant.plant must give the
same load voltage within 0.1 % at every sample of the run.
"""
import os
import subprocess
import tempfile

import numpy as np
import pytest

from harness.plant.plant import Plant
from harness.scenario.specs import LoadSpec
from support.plant_factory import make_scenario
from support.tools import require_tool

RATE = 32000.0
DURATION = 0.02
CASES = [  # R (ohm), L (H), C (F), ESR (ohm), load before and after (A), step time (s)
    (2.0, 20e-6, 1e-3, 0.05, 1.0, 1.5, 0.005),
    (0.2, 50e-6, 4.7e-3, 0.01, 5.0, 0.5, 0.004),
    (10.0, 0.0, 470e-6, 0.2, 0.2, 0.8, 0.006),
]


def _ngspice_load_v(r, l, c, esr, i0, i1, t_step, vs, t_s):
    i_l0, v_c0 = i0, vs - r * i0
    ind = f"L1 2 3 {l!r} IC={i_l0!r}" if l > 0 else "V_L 2 3 0"
    net = f"""linedrop plant check
V1 1 0 {vs!r}
R1 1 2 {r!r}
{ind}
RESR 3 4 {esr!r}
C1 4 0 {c!r} IC={v_c0!r}
I1 3 0 PWL(0 {i0!r} {t_step!r} {i0!r} {t_step + 1e-9!r} {i1!r} 1 {i1!r})
.tran 1e-7 {DURATION!r} 0 1e-6 UIC
.control
run
wrdata {{out}} v(3)
.endc
.end
"""
    with tempfile.TemporaryDirectory() as tmp:
        out, cir = os.path.join(tmp, "out.txt"), os.path.join(tmp, "plant.cir")
        with open(cir, "w") as f:
            f.write(net.replace("{out}", out))
        run = subprocess.run(["ngspice", "-b", cir], capture_output=True, text=True, timeout=120)
        # Batch mode with a .control block exits 1 ("no .plot lines") even when it ran: judge
        # by the data file.
        assert os.path.exists(out), f"ngspice wrote no data: {run.stdout[-500:]} {run.stderr[-500:]}"
        data = np.loadtxt(out)
    return np.interp(t_s, data[:, 0], data[:, 1])


@pytest.mark.parametrize("r, l, c, esr, i0, i1, t_step", CASES)
def test_plant_load_voltage_matches_ngspice_within_a_tenth_of_a_percent(r, l, c, esr, i0, i1, t_step):
    """Source: ngspice (see module docstring); tolerance 0.1 % of the load voltage, every sample.

    The load step is placed on a sample edge so both simulators apply it at the same instant.
    """
    require_tool("ngspice")
    vs = 24.0
    t_step = round(t_step * RATE) / RATE
    load = LoadSpec("constant_current", i0, steps=((t_step, i1),), cutoff_v=1.0)
    sc = make_scenario(r=r, l=l, c=c, esr=esr, load=load, rate=RATE, duration=DURATION, noise=0.0)
    plant = Plant([sc])
    plant.reset_steady(np.array([vs]))
    n = int(round(DURATION * RATE))
    v = np.array([plant.step(np.array([vs])).v_load_v[0] for _ in range(n)])
    t_s = (np.arange(n) + 1) / RATE
    ref = _ngspice_load_v(r, l, c, esr, i0, i1, t_step, vs, t_s)
    err = np.abs(v - ref) / np.abs(ref)
    assert err.max() <= 1e-3, f"worst relative error {err.max():.2e} at t = {t_s[err.argmax()]:.6f} s"
