"""The algorithm settings of a scenario: its [algorithm] table plus what [supply] and [sensing] fix."""
from algo.config import ConfigError, from_mapping
from harness.errors import InputError
from harness.scenario.algo_toml import config_message

#: Settings a scenario takes from its plant sections, never from [algorithm].
FROM_PLANT = {
    "target_v": ("supply", "target_v"), "max_v": ("supply", "max_v"), "min_v": ("supply", "min_v"),
    "dac_bits": ("supply", "dac_bits"), "dac_full_scale_v": ("supply", "dac_full_scale_v"),
    "adc_bits": ("sensing", "adc_bits"), "v_full_scale_v": ("sensing", "v_full_scale_v"),
    "i_full_scale_a": ("sensing", "i_full_scale_a"), "sample_rate_hz": ("sensing", "sample_rate_hz"),
}


def algo_config(scenario, overrides=None):
    """AlgoConfig for ``scenario`` (a harness.scenario.specs.Scenario); ``overrides`` win over the file."""
    table = dict(scenario.algorithm)
    for key in FROM_PLANT:
        if key in table:
            section, name = FROM_PLANT[key]
            raise InputError(f"{scenario.source}: algorithm.{key}: set it as {section}.{name}, "
                             f"not in [algorithm]")
    for key, (section, name) in FROM_PLANT.items():
        table[key] = getattr(getattr(scenario, section), name)
    table.update(overrides or {})
    try:
        return from_mapping(table)
    except ConfigError as exc:
        if exc.key in FROM_PLANT and exc.key not in (overrides or {}):
            # Name the key the user wrote: the plant section's, with the algorithm's range.
            section, name = FROM_PLANT[exc.key]
            raise InputError(f"{scenario.source}: {config_message(exc, f'{section}.{name}')} "
                             f"(the algorithm's range)") from None
        raise InputError(f"{scenario.source}: {config_message(exc, f'algorithm.{exc.key}')}") from None
