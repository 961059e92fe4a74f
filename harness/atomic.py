"""Atomic output files: write to a temporary file beside the target, then rename over it."""
import contextlib
import os
import tempfile


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
