"""linedrop vectors: descriptive files, provenance, every fault and window status, byte-identical reruns."""
import dataclasses
import hashlib
import os

import numpy as np
import pytest

from algo import VERSION
from algo.config import AlgoConfig
from algo.params import derive
from algo.state import STATE_FIELDS, STATUS_NAMES
from c_ref.binding import CBatch
from harness.port import vectors
from harness.cli.main import main
from support.vector_helpers import read_note, write_vectors
from harness.cli.vectors import DEMO
from harness.scenario.read import load_scenario
from harness.scenario.specs import FAULT_KINDS
from harness.port.vector_files import COLUMNS, find_sets, parse_vector_csv, read_set

# Short runs keep the test quick; the long run still spans several windows.
ARGS = ["--duration-s", "0.12", "--long-s", "0.2", "--seed", "7"]
NAMES = ["estimate_jump", "zero_resistance", "ring_guard", "ring_edges", "proportional_off",
         "ceiling_drops", "ceiling_edge", "rail_combinations", "reactive_edge", "exact_limits",
         "step_threshold", "valid_run_saturates",
         "normal", "load_step", "fault_cable_open", "fault_cap_open", "fault_load_short",
         "fault_adc_stuck_i", "fault_adc_stuck_v", "long", "extreme_codes"]


@pytest.fixture(scope="module")
def vec_dir(tmp_path_factory):
    return write_vectors(tmp_path_factory, ARGS)


def _rows(vec_dir, name):
    path = vec_dir / f"demo_mast-{name}.csv"
    return parse_vector_csv(str(path), path.read_text())


def test_rerun_with_the_same_inputs_writes_byte_identical_files(vec_dir, tmp_path):
    assert main(["vectors", DEMO, "--out", str(tmp_path), *ARGS]) == 0
    first = sorted(os.listdir(vec_dir))
    assert first == sorted(os.listdir(tmp_path))
    for name in first:
        assert (vec_dir / name).read_bytes() == (tmp_path / name).read_bytes(), name


def test_another_seed_changes_the_closed_loop_vectors(vec_dir, tmp_path):
    assert main(["vectors", "--out", str(tmp_path), *ARGS[:-1], "8"]) == 0
    assert (vec_dir / "demo_mast-normal.csv").read_bytes() != (tmp_path / "demo_mast-normal.csv").read_bytes()


def test_files_have_descriptive_names_a_header_line_and_one_row_per_sample(vec_dir):
    expected = {f"demo_mast-{n}.csv" for n in NAMES} | {"demo_mast-vectors.json", "demo_mast-params.h"}
    assert set(os.listdir(vec_dir)) == expected
    for entry in read_note(vec_dir)["vectors"]:
        lines = (vec_dir / entry["file"]).read_text().splitlines()
        assert lines[0] == "adc_v,adc_i,command," + ",".join(STATE_FIELDS)
        assert len(lines) - 1 == entry["samples"] > 0


def test_every_fault_kind_has_its_own_closed_loop_variant():
    scenario = load_scenario(DEMO)
    variants = vectors.closed_loop_variants(scenario, 0.5)
    kinds = {sc.faults[0].kind for _, _, sc in variants if sc.faults}
    assert kinds == set(FAULT_KINDS)
    normal = dict((n, sc) for n, _, sc in variants)["normal"]
    assert normal.faults == () and normal.load.steps == ()


def test_every_window_status_appears_somewhere_in_the_set(vec_dir):
    seen = set()
    for name in NAMES:
        seen |= set(_rows(vec_dir, name)[:, COLUMNS.index("status")].tolist())
    assert seen == set(STATUS_NAMES)


def test_extreme_vector_holds_zero_full_scale_and_clamped_65535_codes(vec_dir):
    rows = _rows(vec_dir, "extreme_codes")
    adc_max = derive(AlgoConfig(**read_note(vec_dir)["algo_config"])).adc_max
    for col in (0, 1):
        assert {0, adc_max, 65535} <= set(rows[:, col].tolist())


def test_long_run_defaults_to_at_least_200_windows():
    cfg = AlgoConfig()
    assert vectors.long_duration(cfg) * cfg.sample_rate_hz / cfg.window_samples >= 200


def test_provenance_names_scenario_settings_params_seed_and_version(vec_dir):
    note = read_note(vec_dir)
    cfg = AlgoConfig(**note["algo_config"])
    assert note["scenario"] == {"file": "demo_mast.toml",
                                "sha256": hashlib.sha256(open(DEMO, "rb").read()).hexdigest()}
    assert note["params_fingerprint"] == derive(cfg).fingerprint()
    assert note["generator_seed"] == 7 and note["tool_version"] == VERSION
    assert note["word_lengths"]["adc_bits"] == cfg.adc_bits
    assert note["word_lengths"]["state"]["windows"] == "uint32_t"
    assert dataclasses.asdict(cfg) == note["algo_config"]
    header = (vec_dir / note["params_header"]).read_text()
    assert f'"{note["params_fingerprint"]}"' in header and "static const ld_params_t" in header
    for entry in note["vectors"]:
        assert hashlib.sha256((vec_dir / entry["file"]).read_bytes()).hexdigest() == entry["sha256"]


def test_closed_loop_vector_is_what_the_c_reference_answers_on_every_sample(vec_dir):
    """The vector is written from the Python model (model_trace); the C reference, stepped one
    sample at a time over its ADC codes from ld_init, must give the same command and every state
    field after every sample, exactly. (It replaces a check of model_trace against its own
    output, which could not fail.)"""
    rows = _rows(vec_dir, "load_step")
    params = derive(AlgoConfig(**read_note(vec_dir)["algo_config"]))
    c = CBatch([params])
    for t, (v, i) in enumerate(rows[:, :2].tolist()):
        cmd = int(c.run(np.array([[v]], np.uint16), np.array([[i]], np.uint16))[0][0])
        state = c.state(0)
        assert [cmd] + [state[f] for f in STATE_FIELDS] == rows[t, 2:].tolist(), f"sample {t}"


@pytest.mark.parametrize("args, message", [
    (["/nonexistent/x.toml"], "cannot read scenario"),
    (["--duration-s", "0"], "--duration-s"),
    (["--long-s", "-1"], "--long-s"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, args, message):
    assert main(["vectors", "--out", str(tmp_path), *args]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and message in err
    assert os.listdir(tmp_path) == []


GARDEN = os.path.join(os.path.dirname(DEMO), "garden_lamps.toml")


def _files(folder):
    return {n: (folder / n).read_bytes() for n in sorted(os.listdir(folder))}


def test_a_second_scenario_joins_the_folder_and_leaves_the_first_set_as_it_was(tmp_path):
    out = tmp_path / "vectors"
    assert main(["vectors", DEMO, "--out", str(out), *ARGS]) == 0
    demo = _files(out)
    assert main(["vectors", GARDEN, "--out", str(out), *ARGS]) == 0
    both = _files(out)
    assert {n: both[n] for n in demo} == demo
    assert len(both) == 2 * len(demo) and sorted(os.listdir(tmp_path)) == ["vectors"]
    for note in find_sets(str(out)):
        read_set(note)          # hashes and params check out for both sets
    assert main(["vectors", DEMO, "--out", str(out), *ARGS[:-1], "8"]) == 0   # rewrite the first set
    again = _files(out)
    assert {n: again[n] for n in both if n.startswith("garden_lamps-")} == \
        {n: both[n] for n in both if n.startswith("garden_lamps-")}
    assert again["demo_mast-normal.csv"] != demo["demo_mast-normal.csv"]


def _refused_before_the_run(monkeypatch, capsys, argv, *words):
    def must_not_run(*a, **kw):
        raise AssertionError("the run started")
    monkeypatch.setattr(vectors, "generate", must_not_run)
    assert main(["vectors", *argv]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("linedrop vectors: error: --out "), err
    for w in words:
        assert w in err, err


def test_out_naming_an_existing_file_is_refused_before_the_run(tmp_path, capsys, monkeypatch):
    f = tmp_path / "a_file"
    f.write_text("keep me")
    _refused_before_the_run(monkeypatch, capsys, ["--out", str(f)], "is not a folder")
    assert f.read_text() == "keep me"


def test_out_in_a_place_nothing_can_be_created_is_refused_before_the_run(capsys, monkeypatch):
    # /proc takes no new entries, even from root (proc(5)); access bits alone would not say so.
    _refused_before_the_run(monkeypatch, capsys, ["--out", "/proc/linedrop-vectors"], "cannot create")


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into a read-only folder anyway")
def test_out_in_a_read_only_folder_is_refused_before_the_run(tmp_path, capsys, monkeypatch):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        _refused_before_the_run(monkeypatch, capsys, ["--out", str(ro / "v")], "not writable")
    finally:
        ro.chmod(0o755)


def test_a_folder_holding_other_files_is_refused_and_left_alone(tmp_path, capsys, monkeypatch):
    (tmp_path / "notes.txt").write_text("mine")
    _refused_before_the_run(monkeypatch, capsys, ["--out", str(tmp_path)], "notes.txt")
    assert os.listdir(tmp_path) == ["notes.txt"]
