"""libFuzzer target for ld_step: params corpus provenance, a clean build, and a short sanitized run.

The run length is LINEDROP_FUZZ_SECONDS (default 30); c_ref/fuzz/README.md
documents the longer run. Tests needing clang's libFuzzer skip when it is
missing, or fail under LINEDROP_REQUIRE_TOOLS=1.
"""
import os
import shutil
import subprocess
from dataclasses import replace

import pytest

from algo.config import AlgoConfig
from algo.params import derive
from c_ref.fuzz import gen_params_corpus as gen
from support.tools import skip_or_fail

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
C_REF = os.path.join(ROOT, "c_ref")
FUZZ_FLAGS = ["-std=c99", "-g", "-O1", "-Wall", "-Wextra", "-Werror",
              "-fsanitize=fuzzer,address,undefined", "-fno-sanitize-recover=all"]
SOURCES = [os.path.join(C_REF, "fuzz", "fuzz_step.c"), os.path.join(C_REF, "step.c"),
           os.path.join(C_REF, "estimator.c"), os.path.join(C_REF, "fixed.c")]


@pytest.fixture(scope="module")
def fuzzer(tmp_path_factory):
    """Path of the built fuzz target."""
    clang = shutil.which("clang")
    if clang is None:
        skip_or_fail("clang not found on PATH (apt install clang libclang-rt-14-dev)")
    exe = str(tmp_path_factory.mktemp("fuzz") / "fuzz_step")
    res = subprocess.run([clang, *FUZZ_FLAGS, "-I", C_REF, *SOURCES, "-o", exe],
                         capture_output=True, text=True)
    if res.returncode != 0 and "fuzzer" in res.stderr and "cannot find" in res.stderr:
        skip_or_fail(f"clang has no libFuzzer runtime (apt install libclang-rt-14-dev): "
                      f"{res.stderr.strip()[:200]}")
    assert res.returncode == 0, res.stderr
    return exe


def test_params_corpus_header_matches_its_seeded_generator():
    with open(gen.OUT) as f:
        assert f.read() == gen.render(), "run python -m c_ref.fuzz.gen_params_corpus"


def test_params_corpus_holds_only_blocks_that_derive_accepts_including_the_defaults():
    blocks = gen.configs()
    assert len(blocks) == gen.N_BLOCKS
    assert blocks[0][1] == derive(AlgoConfig())
    assert len({p.fingerprint() for _, p in blocks}) == gen.N_BLOCKS


def _run(exe, args, cwd):
    return subprocess.run(["timeout", "300", exe, *args], capture_output=True, text=True, cwd=cwd)


def test_fuzz_target_aborts_when_a_params_block_breaks_the_range_analysis(tmp_path):
    """The invariant checks are live: declaring 8-bit accumulators (which derive would reject)
    for the default block makes the first input abort, while the real corpus runs it cleanly."""
    clang = shutil.which("clang")
    if clang is None:
        skip_or_fail("clang not found on PATH")
    kw, p = gen.configs()[0]
    shutil.copy(SOURCES[0], tmp_path / "fuzz_step.c")
    (tmp_path / "params_corpus.h").write_text(gen.render(blocks=[(kw, replace(p, acc_bits=8))]))
    exe = str(tmp_path / "broken")
    res = subprocess.run([clang, *FUZZ_FLAGS, "-I", C_REF, str(tmp_path / "fuzz_step.c"),
                          *SOURCES[1:], "-o", exe], capture_output=True, text=True)
    if res.returncode != 0 and "cannot find" in res.stderr:
        skip_or_fail(f"clang has no libFuzzer runtime: {res.stderr.strip()[:200]}")
    assert res.returncode == 0, res.stderr
    sample = tmp_path / "flat.bin"
    sample.write_bytes(bytes([0, 0, 0]) + bytes([0xFF, 0x0F, 0xFF, 0x0F]) * 16)
    res = _run(exe, [str(sample)], tmp_path)
    assert res.returncode != 0 and "deadly signal" in res.stderr, res.stderr[-2000:]


def test_fuzz_target_runs_a_full_scale_input_cleanly(fuzzer, tmp_path):
    sample = tmp_path / "flat.bin"
    sample.write_bytes(bytes([0, 0, 0]) + bytes([0xFF, 0x0F, 0xFF, 0x0F]) * 16)
    res = _run(fuzzer, [str(sample)], tmp_path)
    assert res.returncode == 0, res.stderr[-2000:]


def test_short_sanitized_fuzz_run_finds_no_crash_or_undefined_behaviour(fuzzer, tmp_path):
    seconds = int(os.environ.get("LINEDROP_FUZZ_SECONDS", "30"))
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    # Seeds: each params block with a flat input, in raw and random-walk modes.
    for k in range(gen.N_BLOCKS):
        for mode in (0, 1, 3):
            (corpus / f"seed_{k}_{mode}").write_bytes(bytes([k, mode, 1]) + bytes([7, 1, 200, 0]) * 8)
    res = _run(fuzzer, [f"-max_total_time={seconds}", "-seed=1", "-rss_limit_mb=2048",
                        f"-artifact_prefix={tmp_path}/", str(corpus)], tmp_path)
    crashes = sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(("crash-", "leak-",
                                                                              "timeout-", "oom-")))
    assert res.returncode == 0 and not crashes, f"{crashes}\n{res.stderr[-3000:]}"
