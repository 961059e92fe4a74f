"""The golden vectors against the C reference: every reachable branch taken (gcov), mutants caught.

Branch counts come from gcc's own coverage instrumentation and gcov (an outside tool); a mutant
is a one-token change of the C sources, caught when the replay driver's output on the vectors
differs from the unmutated build's. Short closed-loop runs keep the test to seconds; the
targeted open-loop vectors do not depend on the run length.
"""
import json
import pathlib
import random

import pytest

from harness.cli.main import main
from harness.port import c_host, c_mutants
from harness.port.targeted import TARGETED
from harness.port.vector_files import find_sets, read_set
from support.tools import require_tool

ARGS = ["--duration-s", "0.12", "--long-s", "0.2", "--seed", "7"]
#: Mutants drawn at random (seeded) besides the fixed shift mutant.
SAMPLE, SEED = 5, 20261204
#: The fixed one: the shift halving the perturbation in the window code, one bit further.
SHIFT_LINE, SHIFT_WHAT = "half = s->pert_amp >> 1;", "1 -> 2 #1"


@pytest.fixture(scope="module")
def vec_dir(tmp_path_factory):
    require_tool("gcov")
    out = tmp_path_factory.mktemp("vectors")
    assert main(["vectors", "--out", str(out), *ARGS, "--coverage"]) == 0
    return out


def _codes(vec_dir):
    params, vecs = read_set(find_sets(str(vec_dir))[0])
    return params, [(r[:, 0], r[:, 1]) for _, r in vecs], [name for name, _ in vecs]


def test_vectors_take_every_reachable_branch_of_the_c_reference(vec_dir):
    require_tool("gcov")
    cov = json.loads((vec_dir / "demo_mast-vectors.json").read_text())["c_branch_coverage"]
    assert cov["untaken_reachable"] == [] and cov["reachable_percent"] == 100.0, cov
    assert cov["taken"] + cov["unreachable"] == cov["branches"]


def test_mutant_finder_skips_comments_and_tells_unary_from_binary_minus():
    text = "/* a - b */\nint f(int x)\n{\n    return -x - 2; // x + 1\n}\n"
    whats = [m.what for m in c_mutants.mutants_of("t.c", text)]
    assert whats == ["drop unary - #1", "- -> + #1", "2 -> 3 #1"]


def _chosen(src):
    every = c_mutants.all_mutants(src)
    skip = set(c_mutants.read_equivalent(src))
    dead = c_mutants.uncalled(src)
    lines = {name: (pathlib.Path(src) / name).read_text().splitlines() for name in {m.file for m in every}}
    shift = [m for m in every if m.what == SHIFT_WHAT and SHIFT_LINE in lines[m.file][m.line - 1]]
    assert len(shift) == 1, shift
    pool = [m for m in every if m.key() not in skip and m.function not in dead and m != shift[0]]
    return shift[0], random.Random(SEED).sample(pool, SAMPLE)


def test_a_seeded_sample_of_mutants_and_a_window_shift_mutant_are_caught_early(vec_dir):
    require_tool("gcc")
    src = c_host.c_ref_dir()
    shift, sample = _chosen(src)
    params, codes, names = _codes(vec_dir)
    out = c_mutants.run(params, codes, chosen=[shift, *sample])
    results = out["results"]
    for m in [shift, *sample]:
        assert results[m][0] == "caught", (m, results[m])
    _, case, sample_index = results[shift]
    # Early: in one of the short targeted vectors at the head of the set (through ld_step),
    # within its first 16 windows, not deep in a closed-loop run.
    assert case < len(TARGETED) and sample_index < 16 << params.window_log2, (names[case], sample_index)
