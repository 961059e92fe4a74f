"""Which [algorithm] settings a run uses: a file's, the scenario's own table, or design's recommendation."""
from dataclasses import replace

from harness.design.calculator import recommend
from harness.errors import InputError
from harness.scenario.algo_setup import FROM_PLANT
from harness.scenario.algo_toml import load_algo_config
from harness.scenario.toml_file import read_toml


def algorithm_table(path):
    """The ``[algorithm]`` table of an algorithm file, checked (one-line errors naming the file)."""
    load_algo_config(path)
    table = dict(read_toml(path, "config").get("algorithm", {}))
    for key in table:
        if key in FROM_PLANT:
            section, name = FROM_PLANT[key]
            raise InputError(f"{path}: algorithm.{key}: the scenario's [{section}] {name} sets it; "
                             f"remove it from the algorithm file")
    return table


def with_settings(scenario, algorithm_path=None):
    """The scenario with the [algorithm] table a run uses, and one line saying where it came from.

    ``algorithm_path`` (a TOML file holding only ``[algorithm]``, as ``design --algorithm-out``
    writes it) replaces the scenario's table; without it the scenario's own table is used, and a
    scenario without one runs design's recommendation for its plant, which the line says in plain
    words (with the sample rate, where the recommendation changes it).
    """
    if algorithm_path:
        return replace(scenario, algorithm=algorithm_table(algorithm_path)), f"settings: {algorithm_path}"
    if scenario.algorithm:
        return scenario, "settings: the scenario's [algorithm] table"
    sc = recommended(scenario)
    rate = ""
    if sc.sensing.sample_rate_hz != scenario.sensing.sample_rate_hz:
        rate = f", at the {sc.sensing.sample_rate_hz:g} Hz sample rate it needs"
    return sc, ("settings: recommended by linedrop design for this plant (the scenario has no "
                f"[algorithm] table){rate}; linedrop design --algorithm-out FILE writes them")


def recommended(scenario):
    """The scenario with design's recommended [algorithm] table, at the sample rate it needs."""
    rec, fs = recommend(scenario)
    return replace(scenario, algorithm=dict(rec), sensing=replace(scenario.sensing, sample_rate_hz=fs))
