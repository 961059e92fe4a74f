"""linedrop algorithm: fixed-point model of perturb / measure / correct, and its float ideal twin."""

VERSION = "0.5.0"
