"""Atomic output files: write to a temporary file beside the target, then rename over it.

``check_file_target`` and ``check_folder_target`` check an output path before a long run
(``check_not_input``: an output is none of the run's input files);
``check_swap_target`` also tries the folder beside it that ``atomic_folder`` fills. ``finished``
names the outputs swapped in so far, so a message after a failure can say what it left.
"""
import contextlib
import os
import shutil
import tempfile

from harness.errors import InputError

#: Paths swapped in by atomic_write and atomic_folder in this process, in order.
_FINISHED = []


def finished():
    """Paths this process has replaced or created whole so far (a copy), oldest first."""
    return list(_FINISHED)


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
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
        _FINISHED.append(path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def _writable_folder(folder, option, path):
    if os.path.exists(folder) and not os.path.isdir(folder):
        raise InputError(f"{option} {path}: {folder} is a file, not a folder")
    if not os.path.isdir(folder):
        raise InputError(f"{option} {path}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{option} {path}: folder {folder} is not writable")


def check_file_target(path, option, inputs=None):
    """Before a run: ``path`` can be written as a file (one-line InputError naming ``option``).

    The temporary file atomic_write fills beside ``path`` is tried for real (access bits say
    nothing on a read-only mount, in /proc, or to root). ``inputs`` (``{option: path}``) are
    the files the run reads: ``path`` may be none of them.
    """
    if os.path.isdir(path):
        raise InputError(f"{option} {path}: is a folder; give a file name")
    check_not_input(path, option, inputs)
    folder = os.path.dirname(os.path.abspath(path))
    _writable_folder(folder, option, path)
    try:
        fd, probe = tempfile.mkstemp(dir=folder, prefix=".tmp-probe-")
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise InputError(f"{option} {path}: cannot create a file in {folder} "
                         f"({exc.strerror or type(exc).__name__})") from None


def _same(a, b):
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.realpath(a) == os.path.realpath(b)


def check_not_input(path, option, inputs):
    """One-line InputError if output ``path`` names one of ``inputs`` (``{option: path}``; None
    entries skipped): writing it would replace a file the run reads."""
    for other, given in (inputs or {}).items():
        if given is not None and _same(path, given):
            raise InputError(f"{option} {path}: is the input given as {other}; give another file name")


def _refuse_foreign(path, ours, option):
    if ours is None or not os.path.isdir(path):
        return
    other = sorted(set(os.listdir(path)) - set(ours))
    if other:
        raise InputError(f"{option} {path}: holds files this command did not write ({', '.join(other[:3])}"
                         f"{', ...' if len(other) > 3 else ''}); give a new or empty folder")


def check_folder_target(path, option, ours=None):
    """Before a run: ``path`` is a writable folder or can be created as one.

    With ``ours`` (the names a command writes there, the whole folder swapped in by
    :func:`atomic_folder`), an existing folder holding anything else is refused.
    """
    if os.path.exists(path):
        if not os.path.isdir(path):
            raise InputError(f"{option} {path}: exists and is not a folder")
        _writable_folder(path, option, path)
        _refuse_foreign(path, ours, option)
        return
    parent = os.path.dirname(os.path.abspath(path))
    while not os.path.exists(parent):      # makedirs will create the missing levels
        parent = os.path.dirname(parent)
    if not os.path.isdir(parent):
        raise InputError(f"{option} {path}: {parent} is not a folder")
    _writable_folder(parent, option, path)
    _probe_folder(parent, option, path)


def _probe_folder(parent, option, path):
    """A folder can be made in ``parent``, tried for real (access bits say nothing on a read-only
    mount, in /proc, or to root)."""
    try:
        os.rmdir(tempfile.mkdtemp(dir=parent, prefix=".tmp-probe-"))
    except OSError as exc:
        raise InputError(f"{option} {path}: cannot create a folder in {parent} "
                         f"({exc.strerror or type(exc).__name__})") from None


def check_swap_target(path, option, ours):
    """Before a run: as check_folder_target with ``ours``, and a folder can be made beside ``path``.

    atomic_folder fills its new folder in ``path``'s parent and renames there, so that parent
    must take a new entry; this is tried for real.
    """
    check_folder_target(path, option, ours)
    parent = os.path.dirname(os.path.abspath(path))
    while not os.path.isdir(parent):
        parent = os.path.dirname(parent)
    _probe_folder(parent, option, path)


@contextlib.contextmanager
def atomic_folder(path, ours, option="--out"):
    """Fill a new folder beside ``path``; on success swap it in for ``path`` whole.

    ``ours`` names the files the caller writes; an existing ``path`` holding anything else is
    refused (one-line InputError) rather than replaced. On any exception, Ctrl-C included, the
    new folder is removed and ``path`` is left exactly as it was. Yields the folder to fill.
    """
    _refuse_foreign(path, ours, option)
    parent = os.path.dirname(os.path.abspath(path))
    os.makedirs(parent, exist_ok=True)
    tmp = tempfile.mkdtemp(dir=parent, prefix=".tmp-" + os.path.basename(os.path.abspath(path)) + "-")
    old = None
    try:
        yield tmp
        os.chmod(tmp, 0o777 & ~_umask())
        if os.path.isdir(path):
            old = tempfile.mkdtemp(dir=parent, prefix=".old-")
            os.rmdir(old)
            os.rename(path, old)
        os.rename(tmp, path)
        _forget(tmp)
        _FINISHED.append(path)
    except BaseException:
        _forget(tmp)
        if old is not None and not os.path.exists(path):
            os.rename(old, path)
            old = None
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    finally:
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)


def _forget(folder):
    """Drop the files written inside ``folder`` (a temporary folder) from the finished list."""
    inside = os.path.join(os.path.abspath(folder), "")
    _FINISHED[:] = [p for p in _FINISHED if not os.path.abspath(p).startswith(inside)]


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask
