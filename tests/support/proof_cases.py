"""Proof-property cases generated where the checks run: loads and load steps above the light-load
current (bounds.light_load_a), made so before the run instead of counted out after it."""
from dataclasses import replace

from harness.design.calculator import perturbation_floor
from harness.design.operating_point import load_current
from harness.proof import bounds as bd
from harness.proof import strategies as hs
from harness.scenario.algo_setup import algo_config

#: One plant in AS_DRAWN of a batch (the first) keeps its drawn load and steps, light loads and
#: load dumps included, so the overshoot and settled checks still run on them.
AS_DRAWN = 6
#: A lifted plant's load is at least 1 / CONVERTER_SHARE times converter_light_a.
CONVERTER_SHARE = 1.0 / 16.0
#: Rounds of lifting: max_v, and with it the voltage ADC's and the DAC's LSB, grows with the drop.
ROUNDS = 4


def as_drawn(n):
    """Whether plant ``n`` of a batch keeps its drawn load and steps (AS_DRAWN)."""
    return n % AS_DRAWN == 0


def converter_light_a(probe):
    """bounds.light_load_a of scenario ``probe`` were its perturbation floor the converters' own
    (calculator.perturbation_floor with no load current to spare): the light-load current no
    load can lower by its own size, A."""
    cfg = algo_config(probe)
    conv = perturbation_floor(probe, 0.0, 0.0)
    return bd.light_load_a(cfg.with_(pert_min_v=conv), probe, probe.cable.resistance_ohm + probe.load_end.esr_ohm)


def above_converter_floor(plant, prepare=lambda p: p):
    """``prepare(plant)`` with its load scaled up (strategies.scale_load, at most load_room) until
    converter_light_a is at most CONVERTER_SHARE of its current, or as far as the room goes.

    ``prepare`` (DrawnPlant -> DrawnPlant) is what the property does to a plant before the run
    (anti-windup: its own max_v), applied after every scaling since the floor depends on it.
    """
    k, top = 1.0, hs.load_room(plant)
    p = prepare(plant)
    for _ in range(ROUNDS):
        share = converter_light_a(hs.design_scenario(p, 1)) / p.load_current_a
        k_next = min(top, 1.1 * k * share / CONVERTER_SHARE)
        if share <= CONVERTER_SHARE or k_next <= k:
            break
        k = k_next
        p = prepare(hs.scale_load(plant, k))
    return p


def light_steps(sc):
    """Whether a load step of scenario ``sc`` goes below bounds.light_load_a at sc's own settings
    (current at target_v)."""
    cfg = algo_config(sc)
    r_loop = sc.cable.resistance_ohm + sc.load_end.esr_ohm
    return any(load_current(sc.load, v, cfg.target_v)[0] < bd.light_load_a(cfg, sc, r_loop) for _, v in sc.load.steps)


def steps_above_light(plant, windows):
    """``plant`` with every load step raised to at least twice the light-load current (the load's
    own current at most, so the drawn headroom covers every step), the floor doubled while a step
    of ``design_scenario(plant, windows)`` is still light at the settings it gets; ``plant`` as it
    is where its own load is light."""
    probe = hs.design_scenario(plant, 1)
    floor = 2 * bd.light_load_a(algo_config(probe), probe, plant.r_cable_ohm + plant.esr_ohm) / plant.load_current_a
    if floor >= 1.0:
        return plant    # the load is light itself: raising its steps would remove them
    for _ in range(ROUNDS):
        p = replace(plant, load_steps=tuple((w, max(f, floor)) for w, f in plant.load_steps))
        if floor >= 1.0 or not light_steps(hs.design_scenario(p, windows)):
            break
        floor = min(2 * floor, 1.0)
    return p
