"""The simulated hardware: supply, cable, load capacitor, loads, sensing and faults.

``plant`` (``Plant``: exact zero-order-hold stepping of B scenarios), ``linear_model``,
``cable`` (resistance over a temperature ramp), ``loads``, ``faults``, ``sensing``
(``Adc``, ``Dac``) and ``rig`` (``build_rig``: a plant with its converters and faults).
"""
