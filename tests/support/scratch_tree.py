"""A scratch copy of the source tree for mutation runs: the tree itself is never modified."""
import shutil
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def scratch_copy(dest, root=ROOT):
    """Copy the files of ``root`` git would commit (tracked, or untracked and not ignored) and
    the built C extension into the folder ``dest``."""
    files = subprocess.run(["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
                           cwd=root, check=True, capture_output=True).stdout
    for rel in files.decode().split("\0"):
        if rel and (root / rel).is_file():
            (dest / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(root / rel, dest / rel)
    for so in (root / "c_ref").glob("_linedrop_cffi*.so"):
        shutil.copy2(so, dest / "c_ref" / so.name)


def mutate_line(dest, path, old, new):
    """Replace the one line ``old`` of ``dest/path`` by ``new``; ValueError unless it is there once."""
    f = Path(dest) / path
    text = f.read_text()
    if text.count(old + "\n") != 1:
        raise ValueError(f"{path}: the line to mutate is not there exactly once: {old.strip()!r}")
    f.write_text(text.replace(old + "\n", new + "\n"))
