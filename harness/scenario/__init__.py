"""Scenario files: specs, reading and validation, writing, conductor tables, algorithm settings.

``specs`` (the frozen dataclasses), ``read`` (``load_scenario``, ``DEMO``), ``validate``,
``load_section``, ``profile`` (load-current CSVs), ``write`` (``scenario_to_toml``),
``conductors`` (AWG and material tables), ``toml_file`` (``read_toml``), ``algo_setup``
(``algo_config``: a scenario's AlgoConfig) and ``algo_toml`` (an ``[algorithm]``-only file).
SCENARIO_KEYS.md documents every key; ``scenarios/`` holds the shipped examples.
"""
