"""Read a TOML file with one-line errors naming the file (scenarios, algorithm configs)."""
import tomllib

from harness.errors import InputError, reading


def read_toml(path, what="file"):
    """Parse a TOML file; unreadable or malformed files raise a one-line InputError."""
    try:
        with reading(path, what), open(path, "rb") as f:
            return tomllib.load(f)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {str(exc).splitlines()[0]}") from None
