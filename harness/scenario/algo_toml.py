"""Load an ``[algorithm]`` table from a TOML file into an AlgoConfig, with file-and-key errors."""
from algo.config import AlgoConfig, ConfigError, from_mapping
from harness.errors import InputError
from harness.scenario.toml_file import read_toml


def config_message(exc, name):
    """The text of a ConfigError with its key spelled ``name``: ``name = value: rule`` or ``name: rule``."""
    rule = str(exc).split(": ", 1)[1]
    return name + (" " + rule if rule.startswith("= ") else ": " + rule)


def config_from_table(table, path, section="algorithm"):
    """AlgoConfig from a mapping; errors name ``path`` and ``section.key``."""
    if not isinstance(table, dict):
        raise InputError(f"{path}: [{section}] must be a table")
    try:
        return from_mapping(table)
    except ConfigError as exc:
        raise InputError(f"{path}: {config_message(exc, f'{section}.{exc.key}')}") from None


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
