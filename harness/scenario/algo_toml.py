"""Load an ``[algorithm]`` table from a TOML file into an AlgoConfig, with file-and-key errors."""
from algo.config import SETTINGS, AlgoConfig, ConfigError, from_mapping
from harness.errors import InputError
from harness.scenario.toml_file import read_toml
from harness.scenario.validate import show


def config_message(exc, name):
    """The text of a ConfigError with its key spelled ``name``: ``name = value: rule`` or ``name: rule``."""
    rule = str(exc).split(": ", 1)[1]
    return name + (" " + rule if rule.startswith("= ") else ": " + rule)


def check_integers(table, path, section="algorithm"):
    """Refuse a TOML float (``12.0``, ``nan``, ``inf``) for an integer setting, as the scenario's
    integer keys (``supply.dac_bits``) are refused: one line naming ``path`` and ``section.key``."""
    for key, value in table.items():
        s = SETTINGS.get(key)
        if s is not None and s.kind is int and isinstance(value, float):
            what = "a power of two" if s.pow2 else "an integer"
            raise InputError(f"{path}: {section}.{key} = {show(value)}: must be {what} in "
                             f"[{s.lo:g}, {s.hi:g}]")


def config_from_table(table, path, section="algorithm"):
    """AlgoConfig from a mapping read from a file; errors name ``path`` and ``section.key``."""
    if not isinstance(table, dict):
        raise InputError(f"{path}: [{section}] must be a table")
    check_integers(table, path, section)
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
    if "algorithm" not in doc:
        raise InputError(f"{path}: no [algorithm] table; an algorithm config holds [algorithm] and its "
                         f"settings, as linedrop design --algorithm-out writes it")
    return config_from_table(doc["algorithm"], path)
