"""C build-variant matrix: the replay driver built at -O0, -O2, -m32 and with UBSan+ASan is bit-exact with the model.

Each variant is built once per session with the strict warning flags; every
hypothesis example writes one text vector file (several cases, with resets
and re-inits among the samples), runs the driver on it and compares the
command and every ld_state_t field after every operation, with no tolerance.
"""
import pytest
from hypothesis import given, settings, strategies as st

from c_ref import textvec
from support.cbuild import VARIANTS, build_driver, run_driver
from harness.proof import algo_strategies as sa
from support.tools import require_tool

_builds = {}


@pytest.fixture(scope="session")
def driver_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("replay_builds")


@pytest.fixture(scope="session", params=sorted(VARIANTS))
def driver(request, driver_dir):
    """Path of the replay driver built in one variant (built on first use)."""
    variant = request.param
    require_tool(VARIANTS[variant][1])
    if variant not in _builds:
        _builds[variant] = build_driver(driver_dir, variant)
    return _builds[variant]


@st.composite
def _case_ops(draw, cp, min_windows, max_windows):
    """One config's operations: its samples with a few resets and re-inits dropped in."""
    cfg, p = cp
    adc_v, adc_i = draw(sa.sequences(cfg, p, min_windows, max_windows))
    ops = textvec.samples(adc_v, adc_i)
    for _ in range(draw(st.integers(0, 3))):
        ops.insert(draw(st.integers(0, len(ops))), (draw(st.sampled_from("ri")),))
    return p, ops


def _cases(max_window, min_windows, max_windows, max_cases):
    one = st.one_of(sa.configs(max_window), sa.realistic_configs(max_window)).flatmap(
        lambda cp: _case_ops(cp, min_windows, max_windows))
    return st.lists(one, min_size=1, max_size=max_cases)


def _assert_driver_matches_model(exe, cases):
    res = run_driver(exe, textvec.dumps(cases))
    assert res.returncode == 0, f"driver exited {res.returncode}:\n{res.stderr[-3000:]}"
    assert res.stderr == "", f"driver wrote to stderr (sanitizer report?):\n{res.stderr[-3000:]}"
    got = textvec.parse_output(res.stdout)
    want = textvec.model_output(cases)
    assert len(got) == len(want), f"{len(got)} output lines for {len(want)} operations"
    ops = [op for _, case_ops in cases for op in case_ops]
    for n, ((c_cmd, c_state), (py_cmd, py_state), op) in enumerate(zip(got, want, ops)):
        if (c_cmd, c_state) != (py_cmd, py_state):
            diff = {k: (py_state[k], c_state[k]) for k in py_state if py_state[k] != c_state[k]}
            if c_cmd != py_cmd:
                diff["<command>"] = (py_cmd, c_cmd)
            raise AssertionError(f"operation {n} {op}: " + ", ".join(
                f"{k}: python={a} c={b}" for k, (a, b) in diff.items()))


def _examples(fraction):
    return settings(max_examples=max(3, int(settings.default.max_examples * fraction)))


@_examples(0.25)
@given(cases=_cases(max_window=1024, min_windows=0, max_windows=4, max_cases=4))
def test_every_build_variant_matches_model_on_every_operation_and_field(driver, cases):
    _assert_driver_matches_model(driver, cases)


@_examples(0.08)
@given(cases=_cases(max_window=64, min_windows=20, max_windows=30, max_cases=2))
def test_every_build_variant_matches_model_over_long_runs(driver, cases):
    _assert_driver_matches_model(driver, cases)


@_examples(0.1)
@given(cases=_cases(max_window=16384, min_windows=1, max_windows=2, max_cases=1))
def test_every_build_variant_matches_model_with_the_longest_windows(driver, cases):
    _assert_driver_matches_model(driver, cases)


@pytest.mark.parametrize("text, complaint", [
    ("p 1 2 3\n", "expected header"),
    ("LDTV 1\np 1 2 3\n", "needs 33 values"),
    ("LDTV 1\ns 1 2\n", "complete parameter block"),
    ("LDTV 1\nt 1 2\n", "'t' before 'p'"),
    ("LDTV 1\np" + " 0" * 25 + " 4294967296\n", "out-of-range"),
    ("LDTV 1\nx\n", "unknown line type"),
])
def test_driver_rejects_malformed_vectors_naming_the_line(driver_dir, text, complaint):
    require_tool("gcc")
    exe = _builds.get("O2") or _builds.setdefault("O2", build_driver(driver_dir, "O2"))
    res = run_driver(exe, text)
    assert res.returncode == 2
    assert complaint in res.stderr and "line " in res.stderr
