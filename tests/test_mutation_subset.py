"""The CI subset of the nightly mutation run (.ci/mutation): one cosmic-ray mutant, chosen by the
line it mutates, is applied to a scratch copy and must be killed by the test written for it.

Chosen: Sub -> Add in the correction's ceiling in algo/batch.py, the closed loop's model (the
room becomes the headroom plus the perturbation's peak instead of less it, so only corr_max_q
bounds the correction, and the command's own cap then carries less than the law believes),
killed by test_proof_mutants.py's headroom example. Needs cosmic-ray (the [test] extra); skipped without it,
failed under LINEDROP_REQUIRE_TOOLS=1.
"""
import json
import os
import shutil
import subprocess
import sys

from support.scratch_tree import ROOT, scratch_copy
from support.tools import skip_or_fail

MODULE = "algo/batch.py"
LINE = "cmax = np.minimum(p.corr_max_q[k], np.maximum(room - s.pert_amp[k], 0) << p.corr_frac[k])"
OPERATOR = "core/ReplaceBinaryOperator_Sub_Add"
KILLER = "tests/test_proof_mutants.py::test_the_correction_never_exceeds_the_headroom_less_the_perturbation_and_reaches_it_when_the_drop_needs_more"


def _cosmic_ray():
    skip_or_fail(None if shutil.which("cosmic-ray") else "cosmic-ray not found on PATH (pip install '.[test]')")


def _occurrence(work):
    """Occurrence number of OPERATOR on LINE, from a cosmic-ray session over MODULE."""
    lineno = next(n for n, text in enumerate((work / MODULE).read_text().splitlines(), 1) if LINE in text)
    (work / "cr.toml").write_text(f'[cosmic-ray]\nmodule-path = "{MODULE}"\ntimeout = 60.0\nexcluded-modules = []\n'
                                  'test-command = "true"\n[cosmic-ray.distributor]\nname = "local"\n')
    subprocess.run(["cosmic-ray", "init", "cr.toml", "s.sqlite"], cwd=work, check=True, capture_output=True)
    dump = subprocess.run(["cosmic-ray", "dump", "s.sqlite"], cwd=work, check=True, capture_output=True, text=True)
    found = [m["occurrence"] for item, _ in map(json.loads, dump.stdout.splitlines()) for m in item["mutations"]
             if m["operator_name"] == OPERATOR and m["start_pos"][0] == lineno]
    assert len(found) == 1, f"{OPERATOR} on {MODULE}:{lineno}: {found}"
    return found[0]


def test_the_chosen_cosmic_ray_mutant_of_the_headroom_clamp_is_killed(tmp_path):
    _cosmic_ray()
    scratch_copy(tmp_path)
    before = (tmp_path / MODULE).read_text()
    subprocess.run(["cosmic-ray", "apply", MODULE, OPERATOR, str(_occurrence(tmp_path))], cwd=tmp_path, check=True,
                   capture_output=True)
    after = (tmp_path / MODULE).read_text()
    assert after != before and "np.maximum(room + s.pert_amp[k], 0)" in after
    env = dict(os.environ, PYTHONPATH=f"{tmp_path}{os.pathsep}{tmp_path / 'tests'}", HYPOTHESIS_PROFILE="ci")
    res = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", KILLER], cwd=tmp_path,
                         env=env, capture_output=True, text=True)
    assert res.returncode == 1, res.stdout[-1500:] + res.stderr[-1500:]
    assert "1 failed" in res.stdout
    assert (ROOT / MODULE).read_text() != after      # the source tree itself is untouched
