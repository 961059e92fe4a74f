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


#: Settings that fix the perturbation's timing: a table that sets one keeps the scenario's
#: sample rate, and design's recommendation (made for its own period and rate) fills nothing in.
TIMING_KEYS = ("period_samples", "periods_per_window")


def given_table(scenario, algorithm_path=None):
    """The [algorithm] keys the user wrote: the algorithm file's, else the scenario's (a dict)."""
    return algorithm_table(algorithm_path) if algorithm_path else dict(scenario.algorithm)


def with_settings(scenario, algorithm_path=None):
    """The scenario with the [algorithm] table a run uses, and one line saying where it came from.

    ``algorithm_path`` (a TOML file holding only ``[algorithm]``, as ``design --algorithm-out``
    writes it) replaces the scenario's table; without it the scenario's own table is used. Every
    key the table does not set comes from design's recommendation for the plant (a scenario
    without a table runs the recommendation whole), which the line says in plain words, with the
    sample rate where the recommendation changes it. A table that sets the timing
    (TIMING_KEYS) is run as written, the rest at the defaults, since the recommendation is made
    for its own period and rate.
    """
    given = given_table(scenario, algorithm_path)
    where = algorithm_path or "the scenario's [algorithm] table"
    rec = recommended(replace(scenario, algorithm={}))
    if given and set(rec.algorithm) <= set(given):      # a whole table, as design writes it
        return replace(scenario, algorithm=given), f"settings: {where}"
    if any(k in given for k in TIMING_KEYS):
        return replace(scenario, algorithm=given), (f"settings: {where}, as written (it sets the "
                                                    "timing; the keys it does not set take their defaults)")
    sc = replace(rec, algorithm={**rec.algorithm, **given})
    rate = ""
    if sc.sensing.sample_rate_hz != scenario.sensing.sample_rate_hz:
        rate = f", at the {sc.sensing.sample_rate_hz:g} Hz sample rate it needs"
    if not given:
        why = f"{algorithm_path} sets no key" if algorithm_path else "the scenario has no [algorithm] table"
        return sc, (f"settings: recommended by linedrop design for this plant ({why}){rate}; "
                    "linedrop design --algorithm-out FILE writes them")
    return sc, (f"settings: {', '.join(sorted(given))} from {where}; the rest recommended by "
                f"linedrop design for this plant{rate}")


def recommended(scenario):
    """The scenario with design's recommended [algorithm] table, at the sample rate it needs."""
    rec, fs = recommend(scenario)
    return replace(scenario, algorithm=dict(rec), sensing=replace(scenario.sensing, sample_rate_hz=fs))
