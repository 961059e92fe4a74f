"""linedrop's host harness: the plant, the closed loop and the jobs built on it.

Subpackages, arrows pointing down only (tests/test_layout.py walks the imports):

- ``cli``       the ``linedrop`` command, one module per subcommand;
- ``design``, ``tune``, ``port``, ``proof``   the jobs: sizing, word-length search,
  golden vectors and port checks, property-test strategies and bounds;
- ``loop``      the one closed loop (batched, lock-step), backends, baselines, replay,
  metrics, reports;
- ``plant``, ``scenario``   the simulated hardware, and the scenario files that describe it;
- ``errors``, ``atomic``    the one-line input error and atomic output writes, used by all.
"""
