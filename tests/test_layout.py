"""The folder tree is the architecture: sizes, import direction and no cycles, read from the source.

Every ``import`` in every module (function-level ones included) is parsed with ``ast``, so a
wrong-way arrow fails here even when it is imported lazily.
"""
import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
HARNESS = ROOT / "harness"
#: Layers of harness/, lowest first: a package may import its own layer or any lower one.
#: ``errors`` and ``atomic`` sit below everything; ``cli`` above everything.
LAYERS = [
    {"errors", "atomic"},
    {"scenario"},
    {"plant"},
    {"loop"},
    {"design"},
    {"tune", "port", "proof", "spread"},
    {"cli"},
]
#: Top-level modules kept only as import paths documented for users' own ports.
ALIASES = {"strategies": "proof", "lockstep_loop": "loop"}
MAX_TOP_LEVEL = 6
MAX_LINES = 400


def _module_name(path):
    rel = path.relative_to(ROOT).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _imports(path):
    """Absolute module names imported anywhere in ``path``."""
    tree = ast.parse(path.read_text(), str(path))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            subs = {f"{node.module}.{a.name}" for a in node.names}
            modules = {s for s in subs if _is_module(s)}
            out.update(modules)
            if len(modules) < len(subs):    # names from the package itself, not only its submodules
                out.add(node.module)
    return out


def _is_module(name):
    path = ROOT.joinpath(*name.split("."))
    return path.with_suffix(".py").is_file() or (path / "__init__.py").is_file()


def _modules(top):
    return {_module_name(p): p for p in (ROOT / top).rglob("*.py")}


def _layer(name):
    part = name.split(".")[1] if name.count(".") else ""
    part = ALIASES.get(part, part)
    for k, group in enumerate(LAYERS):
        if part in group:
            return k
    return None


def _graph():
    mods = _modules("harness")
    return {m: {i for i in _imports(p) if i in mods and i != m} for m, p in mods.items()}


def test_harness_top_level_holds_at_most_six_modules():
    top = sorted(p.name for p in HARNESS.glob("*.py"))
    assert len(top) <= MAX_TOP_LEVEL, top


@pytest.mark.parametrize("top", ["algo", "c_ref", "harness", "tests"])
def test_no_python_module_is_longer_than_400_lines(top):
    long = {str(p.relative_to(ROOT)): n for p in (ROOT / top).rglob("*.py")
            if (n := len(p.read_text().splitlines())) > MAX_LINES}
    assert not long


def test_every_harness_module_belongs_to_a_layer():
    assert not [m for m in _graph() if m != "harness" and _layer(m) is None]


def test_imports_point_down_the_layers_only():
    wrong = [f"{m} -> {i}" for m, deps in _graph().items() for i in deps
             if m != "harness" and _layer(i) is not None and _layer(i) > _layer(m)]
    assert not wrong


def test_plant_and_scenario_import_no_job_package():
    jobs = ("harness.loop", "harness.design", "harness.tune", "harness.port", "harness.proof", "harness.cli")
    bad = [f"{m} -> {i}" for m, deps in _graph().items() if m.startswith(("harness.plant", "harness.scenario"))
           for i in deps if i.startswith(jobs)]
    assert not bad


def test_scenario_does_not_import_the_plant():
    bad = [f"{m} -> {i}" for m, deps in _graph().items() if m.startswith("harness.scenario")
           for i in deps if i.startswith("harness.plant")]
    assert not bad


def test_algo_knows_nothing_of_the_harness_or_the_c_binding():
    bad = [f"{m} -> {i}" for m, p in _modules("algo").items() for i in _imports(p)
           if i.split(".")[0] in ("harness", "c_ref", "cffi")]
    assert not bad


def test_harness_reaches_cffi_only_through_the_c_binding():
    assert not [m for m, p in _modules("harness").items() if "cffi" in {i.split(".")[0] for i in _imports(p)}]


def test_harness_import_graph_has_no_cycle():
    graph = _graph()
    state, stack = {}, []

    def visit(m):
        state[m] = "open"
        stack.append(m)
        for d in sorted(graph[m]):
            if state.get(d) == "open":
                raise AssertionError("import cycle: " + " -> ".join(stack[stack.index(d):] + [d]))
            if d not in state:
                visit(d)
        stack.pop()
        state[m] = "done"

    for m in sorted(graph):
        if m not in state:
            visit(m)


def test_every_package_folder_is_installed_by_pyproject():
    # A folder missing from [tool.setuptools] packages works in the source tree and is absent
    # from a plain `pip install .` (what CI runs).
    import tomllib
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts) for top in ("algo", "harness", "c_ref")
             for p in (ROOT / top).rglob("__init__.py")}
    assert found == listed, (sorted(found - listed), sorted(listed - found))
