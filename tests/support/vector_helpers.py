"""Shared by the vector and port-check tests: write a demo vector set once per module, read its note."""
import json

from harness.cli.main import main


def write_vectors(tmp_path_factory, args):
    """A demo vector set written by ``linedrop vectors`` with ``args``; returns its folder."""
    out = tmp_path_factory.mktemp("vectors")
    assert main(["vectors", "--out", str(out), *args]) == 0
    return out


def read_note(vec_dir):
    """The provenance JSON of the demo vector set in ``vec_dir``."""
    return json.loads((vec_dir / "demo_mast-vectors.json").read_text())
