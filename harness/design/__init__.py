"""Design calculator: size perturbation, window, gains and word lengths for a plant.

``calculator`` (``recommend``, ``predict``, ``loop_summary``), ``loop_model`` (the
discrete-time small-signal model of the correction loop), ``operating_point`` (nonlinear
loads' DC operating points) and ``report`` (``design_report``, the text and warnings).
"""
