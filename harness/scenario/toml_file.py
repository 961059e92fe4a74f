"""Read a TOML file with one-line errors naming the file (scenarios, algorithm configs)."""
import tomllib

from harness.errors import InputError


def read_toml(path, what="file"):
    """Parse a TOML file; unreadable or malformed files raise a one-line InputError."""
    try:
        with open(path, "rb") as f:
            return tomllib.load(f)
    except OSError as exc:
        raise InputError(f"{path}: cannot read {what}: {exc.strerror or exc.__class__.__name__}") from None
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {str(exc).splitlines()[0]}") from None
