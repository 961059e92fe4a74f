"""Conductor tables: AWG sizes, material resistivity and loop resistance at a temperature."""

import math

import numpy as np

#: Resistivity at 20 degC in ohm*mm^2/m and temperature coefficient at 20 degC in 1/degC.
#: Copper: annealed copper standard, IEC 60028 (1/58 ohm*mm^2/m, 0.00393 /degC).
#: Aluminium: hard-drawn aluminium wire, IEC 60889 (0.028264 ohm*mm^2/m, 0.00403 /degC).
MATERIALS = {
    "copper": (1.0 / 58.0, 0.00393),
    "aluminium": (0.028264, 0.00403),
    "aluminum": (0.028264, 0.00403),    # the same metal, US spelling
}

#: Reference temperature of the resistivity values, degC.
T_REF_C = 20.0

#: Gauge numbers accepted by :func:`awg_area_mm2`; -3 is 0000 (4/0), -2 is 000, -1 is 00, 0 is 0.
AWG_MIN = -3
AWG_MAX = 40


def awg_diameter_mm(awg):
    """Diameter of a solid conductor of American Wire Gauge ``awg``.

    Parameters
    ----------
    awg : int
        Gauge number, ``AWG_MIN`` .. ``AWG_MAX`` (0000 is -3).

    Returns
    -------
    float
        Diameter in mm, d = 0.127 mm * 92**((36 - n) / 39) (ASTM B258 definition).
    """
    return 0.127 * 92.0 ** ((36 - awg) / 39.0)


def awg_area_mm2(awg):
    """Cross-section in mm^2 of a solid conductor of gauge ``awg`` (see :func:`awg_diameter_mm`)."""
    d = awg_diameter_mm(awg)
    return math.pi * d * d / 4.0


def resistivity_ohm_mm2_per_m(material, temperature_c):
    """Resistivity of ``material`` at ``temperature_c``.

    Parameters
    ----------
    material : str
        Key of :data:`MATERIALS`.
    temperature_c : float or ndarray
        Conductor temperature, degC.

    Returns
    -------
    float or ndarray
        Resistivity, ohm*mm^2/m, linear in temperature: rho20 * (1 + alpha20 * (T - 20)).
    """
    rho20, alpha = MATERIALS[material]
    return rho20 * (1.0 + alpha * (np.asarray(temperature_c, dtype=float) - T_REF_C))


def conductor_resistance_ohm(length_m, area_mm2, material="copper", temperature_c=T_REF_C):
    """Resistance of ONE conductor of ``length_m`` and ``area_mm2`` at ``temperature_c``, ohm."""
    return resistivity_ohm_mm2_per_m(material, temperature_c) * length_m / area_mm2


def loop_resistance_ohm(length_m, area_mm2, material="copper", temperature_c=T_REF_C):
    """Loop resistance of a two-conductor run, ohm.

    Parameters
    ----------
    length_m : float
        One-way run length (supply to load), m. The loop counts both conductors.
    area_mm2 : float
        Cross-section of each conductor, mm^2.
    material : str
        ``"copper"`` or ``"aluminium"``.
    temperature_c : float or ndarray
        Conductor temperature, degC.

    Returns
    -------
    float or ndarray
        Loop resistance, ohm.
    """
    return 2.0 * conductor_resistance_ohm(length_m, area_mm2, material, temperature_c)


def temperature_scale(material, from_c, to_c):
    """Ratio R(to_c) / R(from_c) for ``material`` (both temperatures in degC)."""
    return resistivity_ohm_mm2_per_m(material, to_c) / resistivity_ohm_mm2_per_m(material, from_c)
