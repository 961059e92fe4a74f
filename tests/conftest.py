"""Shared pytest setup: the copy of linedrop under test, and hypothesis profiles.

``python -m pytest`` puts the working directory first on sys.path, so in the project root
after a plain ``pip install .`` the source tree (whose c_ref/ holds no compiled extension:
that was built into the installed copy) would shadow the installed package, and every test
of the C reference would fail to import it. :func:`use_a_built_copy` then takes the source
tree off sys.path, so ``python -m pytest`` tests the installed copy, as plain ``pytest``
does. A built source tree (``pip install -e .``) is left first and tested.

Hypothesis profiles, chosen by the HYPOTHESIS_PROFILE env var: ``dev`` (quick local runs), ``ci`` (the default, and what CI runs:
derandomized, so a CI run is repeatable), ``nightly`` (ten times ``ci``, random
examples each night, to keep exploring), ``mutation`` (``ci`` without shrinking, for .ci/mutation).
"""
import importlib.machinery
import os
import sys
from pathlib import Path

from hypothesis import HealthCheck, Phase, settings

ROOT = Path(__file__).resolve().parent.parent
PACKAGES = ("algo", "c_ref", "harness")


def _built(folder):
    """Whether ``folder``/c_ref holds the compiled C reference."""
    return any((Path(folder) / "c_ref" / f"_linedrop_cffi{suffix}").is_file()
               for suffix in importlib.machinery.EXTENSION_SUFFIXES)


def use_a_built_copy(root=ROOT, path=sys.path, modules=sys.modules):
    """Take an unbuilt source tree ``root`` off ``path`` when another entry holds a built copy."""
    if _built(root):
        return
    here = [p for p in path if Path(p or ".").resolve() == root]
    if not here or not any(_built(p) for p in path if p not in here):
        return      # nothing better to offer: c_ref.binding says how to build it
    for p in here:
        path.remove(p)
    for name in [m for m in modules if m.split(".")[0] in PACKAGES]:
        del modules[name]   # anything imported from the source tree before this point


use_a_built_copy()

CI_EXAMPLES = 100

settings.register_profile("dev", max_examples=20, deadline=None)
settings.register_profile("ci", max_examples=CI_EXAMPLES, deadline=None, print_blob=True,
                          derandomize=True,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("nightly", max_examples=10 * CI_EXAMPLES, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow])
# The mutation run's (.ci/mutation): ci's derandomized examples, without the shrink phase (a mutant
# is killed or not by the same examples; shrinking only costs time) and without the example
# database (a failure found against one mutant is not replayed against the next).
settings.register_profile("mutation", parent=settings.get_profile("ci"), database=None,
                          phases=(Phase.explicit, Phase.reuse, Phase.generate, Phase.target))
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
