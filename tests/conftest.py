"""Shared pytest setup: hypothesis profiles chosen by the HYPOTHESIS_PROFILE env var.

Profiles: ``dev`` (quick local runs), ``ci`` (the default, and what CI runs:
derandomized, so a CI run is repeatable), ``nightly`` (ten times ``ci``, random
examples each night, to keep exploring).
"""
import os

from hypothesis import HealthCheck, settings

CI_EXAMPLES = 100

settings.register_profile("dev", max_examples=20, deadline=None)
settings.register_profile("ci", max_examples=CI_EXAMPLES, deadline=None, print_blob=True,
                          derandomize=True,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("nightly", max_examples=10 * CI_EXAMPLES, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow])
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
