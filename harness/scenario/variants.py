"""Scenario variants the jobs derive: the same plant with a load step added where it has none."""
from dataclasses import replace

#: A derived load step happens at this fraction of the run.
STEP_AT = 0.5
#: Factor of a derived load step on the load's current (resistive loads: divided).
STEP_FACTOR = 1.5


def with_load_step(scenario, duration_s):
    """The scenario's own load steps, or a derived one when none falls in the run; also says which."""
    load = scenario.load
    if any(at < duration_s for at, _ in load.steps):
        return scenario, "the scenario's own load steps"
    if load.kind == "lamp":
        run = replace(scenario.run, start="cold")
        return replace(scenario, run=run), "lamp switched on cold (inrush)"
    if load.kind == "resistive":
        value, how = load.value / STEP_FACTOR, f"load resistance / {STEP_FACTOR:g}"
    else:
        value, how = load.value * STEP_FACTOR, f"load {load.kind} x {STEP_FACTOR:g}"
    if load.kind == "constant_power":
        p_max = scenario.supply.target_v ** 2 / (4.0 * scenario.cable.resistance_ohm)
        value = min(value, 0.5 * p_max)
    step = ((round(STEP_AT * duration_s, 9), value),)
    return replace(scenario, load=replace(load, steps=step)), f"{how} at {STEP_AT * duration_s:g} s"
