"""``linedrop bench``'s side-by-side pair: ``linedrop simulate`` of a 1 s bare plant and ngspice on the same plant.

The plant: an ideal supply (no inner loop, no compensation) at 24 V, a 1.5 ohm / 60 uH cable,
4.7 mF with 30 mohm ESR at the load end and a constant-current load stepping from 1.5 A to
2.2 A at 0.5 s; 40,000 samples (40 kHz, 1 s). Both are timed as whole processes, start-up
included, one after the other in the same run.
"""
import os
import shutil
import subprocess
import sys
import tempfile
import time

R_OHM, L_H, C_F, ESR_OHM, V_S, I0_A, I1_A, T_STEP_S = 1.5, 60e-6, 4.7e-3, 0.03, 24.0, 1.5, 2.2, 0.5

SCENARIO = f"""[supply]
target_v = {V_S}
max_v = 30.0
loop_bandwidth_hz = 0.0

[cable]
resistance_ohm = {R_OHM}
inductance_h = {L_H}

[load_end]
capacitance_f = {C_F}
esr_ohm = {ESR_OHM}

[load]
kind = "constant_current"
current_a = {I0_A}
steps = [[{T_STEP_S}, {I1_A}]]

[sensing]
sample_rate_hz = 40000.0

[run]
duration_s = 1.0
start = "steady"
"""

NETLIST = f"""bare plant
V1 1 0 {V_S}
R1 1 2 {R_OHM}
L1 2 3 {L_H} IC={I0_A}
RESR 3 4 {ESR_OHM}
C1 4 0 {C_F} IC={V_S - R_OHM * I0_A}
I1 3 0 PWL(0 {I0_A} {T_STEP_S} {I0_A} {T_STEP_S + 1e-9} {I1_A} 1 {I1_A})
.tran 25e-6 1.0 0 25e-6 UIC
.control
run
wrdata {{out}} v(3)
.endc
.end
"""


def _timed(cmd, cwd):
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, timeout=600)
    return time.perf_counter() - t0, done


def measure(root):
    """Wall seconds of ``linedrop simulate`` (process start included, run from ``root``) and of
    ``ngspice -b`` on the same plant; the ngspice figure is None, with a reason, where it is missing.

    Returns (figures dict, reason or None)."""
    with tempfile.TemporaryDirectory() as tmp:
        toml, cir, out = (os.path.join(tmp, n) for n in ("bare.toml", "bare.cir", "v.txt"))
        with open(toml, "w") as f:
            f.write(SCENARIO)
        with open(cir, "w") as f:
            f.write(NETLIST.replace("{out}", out))
        sim_s, done = _timed([sys.executable, "-m", "harness.cli", "simulate", toml, "--compensation", "none"], root)
        if done.returncode != 0:
            raise RuntimeError(f"simulate of the bare plant failed: {done.stderr.strip()[-300:]}")
        figures = {"simulate_bare_plant_1s_wall_s": sim_s, "ngspice_bare_plant_1s_wall_s": None}
        if shutil.which("ngspice") is None:
            return figures, "ngspice not found on PATH (Debian package ngspice)"
        spice_s, _ = _timed(["ngspice", "-b", cir], tmp)
        # Batch mode with a .control block exits 1 even when it ran: judge by the data file.
        if not os.path.exists(out):
            return figures, "ngspice -b wrote no data"
        figures["ngspice_bare_plant_1s_wall_s"] = spice_s
        return figures, None
