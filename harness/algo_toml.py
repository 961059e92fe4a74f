"""Load an ``[algorithm]`` table from a TOML file into an AlgoConfig, with file-and-key errors."""
import tomllib

from algo.config import AlgoConfig, ConfigError, from_mapping
from harness.errors import InputError


def read_toml(path, what="file"):
    """Parse a TOML file; unreadable or malformed files raise a one-line InputError."""
    try:
        with open(path, "rb") as f:
            return tomllib.load(f)
    except OSError as exc:
        raise InputError(f"{path}: cannot read {what}: {exc.strerror or exc.__class__.__name__}") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {str(exc).splitlines()[0]}") from None


def config_from_table(table, path, section="algorithm"):
    """AlgoConfig from a mapping; errors name ``path`` and ``section.key``."""
    if not isinstance(table, dict):
        raise InputError(f"{path}: [{section}] must be a table")
    try:
        return from_mapping(table)
    except ConfigError as exc:
        raise InputError(f"{path}: {section}.{exc}") from None


def load_algo_config(path):
    """Read ``path`` (TOML) and return the AlgoConfig of its ``[algorithm]`` table.

    A missing ``path`` (None) gives the defaults.
    """
    if path is None:
        return AlgoConfig()
    doc = read_toml(path, "config")
    extra = set(doc) - {"algorithm"}
    if extra:
        raise InputError(f"{path}: unknown section(s) {', '.join(sorted(extra))}; "
                         f"an algorithm config holds only [algorithm]")
    return config_from_table(doc.get("algorithm", {}), path)
