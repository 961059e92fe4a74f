"""One Monte-Carlo draw: the nominal scenario with its [spread] tolerances applied.

Draw ``k`` of seed ``s`` takes its numbers from its own generator,
``numpy.random.default_rng(SeedSequence([s, k]))``, in a fixed order, so a draw is the same
whichever worker runs it, in whatever batch, and whatever the number of draws. The algorithm
settings are the nominal plant's (``linedrop design``'s, computed once): production firmware
is built once for every unit.
"""
from dataclasses import replace

import numpy as np

from harness.scenario.conductors import temperature_scale
from harness.scenario.keys import KEYS

#: The generator's numbers, in the order they are taken (one each, whether or not a key varies).
ORDER = ("temperature_c", "capacitance_tol", "esr_tol", "adc_gain_tol", "adc_offset_lsb",
         "bandwidth_tol", "load_range", "dac_gain_tol", "current_gain_tol", "current_offset_lsb")
_T_LO, _T_HI = KEYS["cable"]["temperature_c"].lo, KEYS["cable"]["temperature_c"].hi


def _between(u, pair):
    return pair[0] + u * (pair[1] - pair[0])


def _factor(u, tol):
    return 1.0 + tol * (2.0 * u - 1.0)


def draw_values(tol, seed, k, nominal):
    """The drawn quantities of draw ``k`` (a dict, JSON-ready) and its ADC noise seed.

    ``nominal`` is the scenario the draws vary; quantities a key does not vary keep its values.
    """
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), int(k)]))
    u = dict(zip(ORDER, (float(x) for x in rng.random(len(ORDER)))))
    noise_seed = int(rng.integers(0, 2**63 - 1))
    t0 = nominal.cable.temperature_c
    t = _between(u["temperature_c"], tol.temperature_c) if tol.temperature_c else t0
    esr_temp = 2.0 ** ((t0 - t) / tol.esr_doubling_c) if tol.esr_doubling_c > 0 else 1.0
    values = {"temperature_c": t,
              "capacitance_factor": _factor(u["capacitance_tol"], tol.capacitance_tol),
              "esr_factor": _factor(u["esr_tol"], tol.esr_tol) * esr_temp,
              "adc_gain_error": nominal.sensing.gain_error + tol.adc_gain_tol * (2.0 * u["adc_gain_tol"] - 1.0),
              "adc_offset_lsb": nominal.sensing.offset_lsb + tol.adc_offset_lsb * (2.0 * u["adc_offset_lsb"] - 1.0),
              "bandwidth_factor": _factor(u["bandwidth_tol"], tol.bandwidth_tol),
              "load_factor": _between(u["load_range"], tol.load_range) if tol.load_range else 1.0,
              "dac_gain_error": nominal.supply.dac_gain_error + tol.dac_gain_tol * (2.0 * u["dac_gain_tol"] - 1.0),
              "current_gain_error": (nominal.sensing.current_gain_error
                                     + tol.current_gain_tol * (2.0 * u["current_gain_tol"] - 1.0)),
              "current_offset_lsb": (nominal.sensing.current_offset_lsb
                                     + tol.current_offset_lsb * (2.0 * u["current_offset_lsb"] - 1.0))}
    return values, noise_seed


def apply(nominal, values, noise_seed):
    """The scenario of one draw: ``nominal`` with ``values`` (draw_values) and the noise seed.

    The cable's resistance follows its temperature (the material's coefficient,
    harness.scenario.conductors); a temperature reached at the run's end moves by as much. The
    ESR is the nominal one times ``esr_factor`` (its tolerance and, with ``esr_doubling_c``, its
    rise in the cold). The load's main value and every step value are scaled by ``load_factor``.
    """
    c, le, ld, se, su = nominal.cable, nominal.load_end, nominal.load, nominal.sensing, nominal.supply
    t = values["temperature_c"]
    cable = replace(c, temperature_c=t,
                    resistance_ohm=float(c.resistance_ohm * temperature_scale(c.material, c.temperature_c, t)),
                    temperature_end_c=None if c.temperature_end_c is None
                    else min(_T_HI, max(_T_LO, c.temperature_end_c + t - c.temperature_c)))
    f = values["load_factor"]
    load = replace(ld, value=ld.value * f, steps=tuple((at, v * f) for at, v in ld.steps))
    return replace(nominal, cable=cable,
                   load_end=replace(le, capacitance_f=le.capacitance_f * values["capacitance_factor"],
                                    esr_ohm=le.esr_ohm * values["esr_factor"]),
                   load=load,
                   sensing=replace(se, gain_error=min(0.5, max(-0.5, values["adc_gain_error"])),
                                   offset_lsb=values["adc_offset_lsb"],
                                   current_gain_error=min(0.5, max(-0.5, values["current_gain_error"])),
                                   current_offset_lsb=values["current_offset_lsb"]),
                   supply=replace(su, loop_bandwidth_hz=su.loop_bandwidth_hz * values["bandwidth_factor"],
                                  dac_gain_error=min(0.5, max(-0.5, values["dac_gain_error"]))),
                   run=replace(nominal.run, seed=noise_seed))


def draw(nominal, tol, seed, k):
    """(scenario, values) of draw ``k``: :func:`draw_values` applied by :func:`apply`."""
    values, noise_seed = draw_values(tol, seed, k, nominal)
    return apply(nominal, values, noise_seed), values
