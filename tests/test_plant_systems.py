"""The compiled loop's discretisation (c_ref/host/plant_systems.c) against scipy's zero-order hold.

Source: scipy.signal.cont2discrete(method="zoh") of the plant's own continuous model
(harness.plant.linear_model.continuous_model), assembled into the step matrices as
DiscreteSystems documents them; tolerance 1e-12 of the largest entry, as the numpy twin's
expm_batch is held to scipy.linalg.expm in test_plant.py.
"""
import numpy as np
import pytest
from scipy.signal import cont2discrete

from harness.loop import compiled
from harness.plant.linear_model import OUT_ROWS, DiscreteSystems, continuous_model
from support.tools import skip_or_fail



@pytest.fixture(autouse=True)
def _compiled_loop_built():
    """Each test skips, or fails under LINEDROP_REQUIRE_TOOLS=1, where the compiled loop is not built."""
    skip_or_fail(compiled.why_not("c", "none"))


DT = 1.0 / 32000.0
# (r, l, c, esr, g, omega, is_open): each branch of the model (inductive, resistive, open cable,
# ideal or bandwidth-limited supply, no ESR, a negative folded conductance, a stiff supply loop).
CASES = {
    "inductive_ideal": (1.5, 60e-6, 4.7e-3, 0.03, 0.002, 0.0, False),
    "inductive_loop": (1.5, 20e-6, 2.2e-3, 0.03, 0.2, 2 * np.pi * 2000.0, False),
    "resistive": (3.2, 0.0, 2.2e-3, 0.03, 0.05, 0.0, False),
    "resistive_no_esr": (0.8, 0.0, 1e-3, 0.0, 0.1, 2 * np.pi * 500.0, False),
    "open_cable": (1.5, 50e-6, 2.2e-3, 0.03, 0.04, 2 * np.pi * 1500.0, True),
    "negative_conductance": (1.5, 0.0, 2.2e-3, 0.03, -0.2, 0.0, False),
    "stiff_loop": (0.2, 1e-6, 1e-4, 0.01, 1.0, 2 * np.pi * 50e3, False),
}


def _scipy_w(r, l, c, esr, g, omega, is_open, current_mode, n_in):
    a, b, c_out, d = continuous_model(r, l, c, esr, g, omega, is_open, current_mode)
    phi, gamma, *_ = cont2discrete((a, b, c_out, d), DT, method="zoh")
    full = np.block([[phi, gamma], [c_out @ phi, c_out @ gamma + d]])
    return full[list(OUT_ROWS), :n_in].T


@pytest.mark.parametrize("name", sorted(CASES))
def test_compiled_discretisation_matches_scipy_zoh_in_both_supply_modes(name):
    from c_ref.host import binding
    w0, w1 = binding.systems(*CASES[name], DT)
    for got, current_mode in ((w0, False), (w1, True)):
        ref = _scipy_w(*CASES[name], current_mode, got.shape[0])
        np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12 * np.abs(ref).max())


@pytest.mark.parametrize("name", sorted(CASES))
def test_compiled_discretisation_is_the_numpy_plants_to_a_few_ulps(name):
    """The numpy twin runs the same algorithm (Pade 13, scaling and squaring); only the order of
    rounding in BLAS and LAPACK differs, a few ulps of the largest entry."""
    from c_ref.host import binding
    r, l, c, esr, g, omega, is_open = CASES[name]
    ds = DiscreteSystems(1, DT)
    ds.refresh(np.array([0]), *(np.array([v], dtype=float) for v in (r, l, c, esr, g, omega)),
               np.array([is_open]))
    for got, ref in zip(binding.systems(*CASES[name], DT), ds.w):
        ref = ref[:, :, 0]
        np.testing.assert_allclose(got, ref, rtol=0, atol=8 * np.spacing(np.abs(ref).max()))
