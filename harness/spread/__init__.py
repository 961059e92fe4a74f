"""``linedrop spread``: Monte-Carlo over production tolerances and conditions, in batched closed loop.

harness.scenario.spread_section reads a scenario's ``[spread]`` table; ``draws`` turns a draw index into one
plant, ``evaluate`` runs draws and takes each one's figures, ``report`` turns figures into a
yield with its confidence interval, plots and the worst draws as scenario files.
"""
