"""Atomic output files: write to a temporary file beside the target, then rename over it.

``check_file_target`` and ``check_folder_target`` check an output path before a long run.
"""
import contextlib
import os
import tempfile

from harness.errors import InputError


@contextlib.contextmanager
def atomic_write(path, mode="w", **kw):
    """Open a temporary file next to ``path``; on success rename it to ``path``.

    On any exception the temporary file is removed and ``path`` is left as it was.
    """
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".tmp-", suffix=os.path.basename(path))
    try:
        with os.fdopen(fd, mode, **kw) as f:
            yield f
        # mkstemp creates 0600; give the file the mode a plain open() would have.
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def _writable_folder(folder, option, path):
    if not os.path.isdir(folder):
        raise InputError(f"{option} {path}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{option} {path}: folder {folder} is not writable")


def check_file_target(path, option):
    """Before a run: ``path`` can be written as a file (one-line InputError naming ``option``)."""
    if os.path.isdir(path):
        raise InputError(f"{option} {path}: is a folder; give a file name")
    _writable_folder(os.path.dirname(os.path.abspath(path)), option, path)


def check_folder_target(path, option):
    """Before a run: ``path`` is a writable folder or can be created as one."""
    if os.path.exists(path):
        if not os.path.isdir(path):
            raise InputError(f"{option} {path}: exists and is not a folder")
        _writable_folder(path, option, path)
        return
    parent = os.path.dirname(os.path.abspath(path))
    while not os.path.exists(parent):      # makedirs will create the missing levels
        parent = os.path.dirname(parent)
    if not os.path.isdir(parent):
        raise InputError(f"{option} {path}: {parent} is not a folder")
    _writable_folder(parent, option, path)
