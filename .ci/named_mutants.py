"""The one-line mutations the proof suite must kill (issue 15), each run in a scratch copy.

Usage: python .ci/named_mutants.py [NAME ...]   (all when none given)

For each mutation: copy the tracked tree (and the built C extension) to a temporary folder,
replace one line of one file, run the tests that are meant to kill it there under the ``ci``
hypothesis profile, and print KILLED or SURVIVED. A mutation of the algorithm goes into the
closed loop's model (algo/batch.py) or into the parameters both backends share (algo/params.py);
the killing tests run the model alone, so a kill is a behaviour the test checks, not the C
reference disagreeing with the mutated model (the scalar twins algo/step.py and
algo/estimator.py are held to the C by tests/test_bitexact_props.py). Exit status 1 if any survives. The source
tree is never modified.
"""
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
from support.scratch_tree import mutate_line, prefer_a_built_root, scratch_copy  # noqa: E402
prefer_a_built_root(sys.path)

KILLERS = "tests/test_proof_mutants.py"

# name: (file, line as it is, line as mutated, tests that must fail)
MUTANTS = {
    "ceiling_ignores_perturbation": (
        "algo/batch.py",
        "        cmax = np.minimum(p.corr_max_q[k], np.maximum(room - s.pert_amp[k], 0) << p.corr_frac[k])",
        "        cmax = p.corr_max_q[k]",
        KILLERS + "::test_the_correction_never_exceeds_the_headroom_less_the_perturbation_and_reaches_it_when_the_drop_needs_more"),
    "low_swing_disabled": (
        "algo/batch.py",
        "        low = m < p.swing_min[k]",
        "        low = m < 0",
        KILLERS + "::test_an_open_cable_reads_low_swing_from_its_first_whole_window"),
    "step_detector_4x_less_sensitive": (
        "algo/batch.py",
        "        jump = (s.have_prev[k] != 0) & (np.abs(psum - prev) > s.step_thr[k])",
        "        jump = (s.have_prev[k] != 0) & (np.abs(psum - prev) > 4 * s.step_thr[k])",
        KILLERS + "::test_a_load_step_twice_the_detector_threshold_reads_transient"),
    "esr_allowance_zero": (
        "algo/params.py",
        "        esr_q=_code(cfg.esr_allowance_ohm * r_scale),",
        "        esr_q=0,",
        KILLERS + "::test_the_esr_allowance_keeps_the_load_at_target_when_the_esr_carries_the_load"),
    "one_extra_fault_window": (
        "algo/params.py",
        "        fault_windows=cfg.fault_windows,",
        "        fault_windows=cfg.fault_windows + 1,",
        KILLERS + "::test_capacitor_open_forces_zero_at_the_end_of_exactly_fault_windows_bad_windows"),
    "cap_open_does_nothing": (
        "harness/plant/plant.py",
        "        self._c_want = np.where(cap_open, CAP_OPEN_RESIDUAL_F, self.c_f)",
        "        self._c_want = self.c_f",
        KILLERS + "::test_capacitor_open_passes_the_supply_ripple_to_the_load_as_the_rc_divider_predicts"),
    # Survivors of the cosmic-ray run over harness/plant/faults.py (PROOFS.md), killed since.
    "fault_starts_only_on_a_sample": (
        "harness/plant/faults.py",
        "        return (self._at <= t_s) & (t_s < self._until)",
        "        return (self._at == t_s) & (t_s < self._until)",
        KILLERS + "::test_a_fault_between_samples_acts_from_the_first_sample_after_it_until_the_first_at_its_end"),
    "fault_end_not_equal": (
        "harness/plant/faults.py",
        "        return (self._at <= t_s) & (t_s < self._until)",
        "        return (self._at <= t_s) & (t_s != self._until)",
        KILLERS + "::test_a_fault_between_samples_acts_from_the_first_sample_after_it_until_the_first_at_its_end"),
}


def run(name):
    """Apply mutant ``name`` in a scratch copy and run its killing tests; True if killed."""
    path, old, new, tests = MUTANTS[name]
    with tempfile.TemporaryDirectory(prefix=f"linedrop-mutant-{name}-") as tmp:
        dest = Path(tmp)
        scratch_copy(dest)
        mutate_line(dest, path, old, new)
        env = dict(os.environ, PYTHONPATH=f"{dest}{os.pathsep}{dest / 'tests'}",
                   HYPOTHESIS_PROFILE=os.environ.get("HYPOTHESIS_PROFILE", "ci"))
        res = subprocess.run([sys.executable, "-m", "pytest", "-q", "-x", "-p", "no:cacheprovider", *tests.split()],
                             cwd=dest, env=env, capture_output=True, text=True)
    killed = res.returncode == 1
    if res.returncode not in (0, 1):
        print(res.stdout[-2000:], res.stderr[-2000:], file=sys.stderr)
        raise SystemExit(f"{name}: pytest could not run (status {res.returncode})")
    print(f"{'KILLED  ' if killed else 'SURVIVED'} {name}: {path}: {new.strip()}")
    return killed


def main(names):
    """Run the named mutants (all when ``names`` is empty); status 1 if any survives."""
    unknown = [n for n in names if n not in MUTANTS]
    if unknown:
        raise SystemExit(f"unknown mutant {unknown[0]!r}; known: {', '.join(MUTANTS)}")
    survived = [n for n in (names or MUTANTS) if not run(n)]
    return 1 if survived else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
