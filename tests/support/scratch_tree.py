"""A scratch copy of the source tree for mutation runs: the tree itself is never modified."""
import importlib
import importlib.machinery
import shutil
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
#: The compiled modules ``pip install`` builds, by import name.
EXTENSIONS = ("c_ref._linedrop_cffi", "c_ref.host._plant_loop_cffi")


def prefer_a_built_root(path, root=ROOT):
    """Put ``root`` first on the import ``path`` (a list, sys.path) when it holds its own built C
    reference, so scratch_copy takes this tree's extensions rather than those of whichever
    linedrop is installed (an editable install of another checkout would otherwise win)."""
    if any((root / "c_ref" / f"_linedrop_cffi{s}").is_file() for s in importlib.machinery.EXTENSION_SUFFIXES):
        path.insert(0, str(root))


def scratch_copy(dest, root=ROOT):
    """Copy the files of ``root`` git would commit (tracked, or untracked and not ignored) and
    the built C extensions into the folder ``dest``.

    The extensions are taken from the copy of linedrop this process imports: after a plain
    ``pip install .`` that is the installed package (the source tree holds none), after
    ``pip install -e .`` the source tree. Without them the scratch tree's tests would import
    that installed copy instead (tests/conftest.py), and a mutation of the scratch tree would
    go untested."""
    files = subprocess.run(["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
                           cwd=root, check=True, capture_output=True).stdout
    for rel in files.decode().split("\0"):
        if rel and (root / rel).is_file():
            (dest / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(root / rel, dest / rel)
    for name in EXTENSIONS:
        built = Path(importlib.import_module(name).__file__)
        shutil.copy2(built, Path(dest, *name.split(".")[:-1]) / built.name)


def mutate_line(dest, path, old, new):
    """Replace the one line ``old`` of ``dest/path`` by ``new``; ValueError unless it is there once."""
    f = Path(dest) / path
    text = f.read_text()
    if text.count(old + "\n") != 1:
        raise ValueError(f"{path}: the line to mutate is not there exactly once: {old.strip()!r}")
    f.write_text(text.replace(old + "\n", new + "\n"))
