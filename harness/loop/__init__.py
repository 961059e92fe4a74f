"""The closed loop: plant, ADC, algorithm or baseline and DAC, stepped in one place.

``closed_loop`` (``drive``, the only place the plant is stepped; ``simulate``, batched runs),
``lockstep`` (several implementations side by side, bit for bit), ``backends`` (model, C,
ideal behind one interface), ``baselines``, ``replay`` (recorded codes through a backend;
``model_trace``), ``adc_csv``, ``metrics``, ``report`` (report.md; its words in
``report_text``, its plots in ``report_plots``, the spans they shade in ``spans``) and ``cautions``.
"""
