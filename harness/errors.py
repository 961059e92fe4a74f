"""Error raised for bad user input (scenario TOML files, CSV load profiles), and reading with it."""
import contextlib


class InputError(ValueError):
    """Bad user input, with a one-line message naming the file, key and allowed range.

    The command-line front end turns this into exit status 2.
    """


@contextlib.contextmanager
def reading(path, what):
    """Turn a failure to read ``path`` (missing, a folder, unreadable, not UTF-8) into one InputError line."""
    try:
        yield
    except OSError as exc:
        raise InputError(f"{path}: cannot read {what}: {exc.strerror or type(exc).__name__}") from None
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
