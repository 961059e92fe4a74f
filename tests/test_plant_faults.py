"""Plant faults, current limit, temperature ramp and batch independence."""

import numpy as np
import pytest

from harness.plant.plant import Plant
from harness.scenario.specs import LOAD_SHORT_OHM, LoadSpec
from support.plant_factory import make_scenario

FS = 32000.0


def test_cable_open_stops_current_and_load_end_discharges_through_load():
    """Source: RC discharge v = V0 exp(-t / (R_L C)) (first-order circuit, from memory of any
    circuits text); no current can flow in an open cable. Tolerance 1e-6 of V0."""
    r_load, c = 20.0, 1e-3
    sc = make_scenario(r=1.0, l=1e-4, c=c, load=LoadSpec("resistive", r_load), faults=[("cable_open", 0.01, 0.05)])
    p = Plant([sc])
    p.reset_steady(24.0)
    while p.t_s < 0.01 - 0.5 / FS:
        p.step(24.0)
    v0 = p.last.v_load_v[0]
    obs = [p.step(24.0) for _ in range(int(0.02 * FS))]
    t = np.array([o.t_s for o in obs]) - 0.01
    assert all(o.i_supply_a[0] == 0.0 for o in obs)
    v = np.array([o.v_load_v[0] for o in obs])
    assert np.max(np.abs(v - v0 * np.exp(-t / (r_load * c)))) < 1e-6 * v0


def test_load_short_engages_current_limit_and_recovers():
    """During a short the supply holds its current limit, so the load end sits at
    I_lim * 0.01 ohm (Ohm's law); afterwards the DC point V_L = V_s - I R returns
    (DESIGN.md section 2). Tolerances 1e-9 A and 1e-6 V."""
    lim, r, i_load = 3.0, 2.0, 1.0
    sc = make_scenario(r=r, c=1e-3, load=LoadSpec("constant_current", i_load, cutoff_v=6.0), limit=lim,
                       faults=[("load_short", 0.01, 0.02)])
    p = Plant([sc])
    p.reset_steady(24.0)
    obs = [p.step(24.0) for _ in range(int(0.2 * FS))]
    during = [o for o in obs if 0.012 < o.t_s < 0.02]
    assert all(o.current_limited[0] and abs(o.i_supply_a[0] - lim) < 1e-9 for o in during)
    assert during[-1].v_load_v[0] == pytest.approx(lim * LOAD_SHORT_OHM, rel=1e-6)
    end = obs[-1]
    assert not end.current_limited[0]
    assert end.v_load_v[0] == pytest.approx(24.0 - i_load * r, abs=1e-6)


def test_cap_open_keeps_dc_operating_point():
    """With the capacitor removed the DC relation V_L = V_s - I R still holds once settled
    (DESIGN.md section 2: the capacitor carries no DC current). Tolerance 1e-6 V."""
    sc = make_scenario(r=2.0, l=1e-4, c=1e-3, esr=0.1, load=LoadSpec("constant_current", 1.5, cutoff_v=6.0),
                       faults=[("cap_open", 0.0, 1.0)])
    p = Plant([sc])
    p.reset_steady(24.0)
    for _ in range(int(0.02 * FS)):
        o = p.step(24.0)
    assert o.v_load_v[0] == pytest.approx(24.0 - 1.5 * 2.0, abs=1e-6)


def test_temperature_ramp_raises_drop_with_copper_coefficient():
    """Source: IEC 60028 copper coefficient 0.00393 /degC; V_L = V_s - I R (DESIGN.md 2).
    The ramp ends at run.duration_s and R holds after it; checked 25 RC time constants later.
    R is refreshed in steps of at most 0.01 %, so the tolerance is 1e-4 of the drop."""
    sc = make_scenario(r=2.0, c=1e-3, load=LoadSpec("constant_current", 1.5, cutoff_v=6.0), temp_end=70.0,
                       duration=0.1)
    p = Plant([sc])
    p.reset_steady(24.0)
    for _ in range(int(0.15 * FS)):
        o = p.step(24.0)
    drop = 24.0 - o.v_load_v[0]
    assert drop == pytest.approx(1.5 * 2.0 * (1 + 0.00393 * 50.0), rel=1e-4)


def test_scenario_trajectory_does_not_depend_on_its_batch():
    """Lockstep batching must not couple scenarios (design requirement of the harness; no
    outside source). Exact equality."""
    a = make_scenario(r=1.0, l=1e-4, c=2e-3, esr=0.05, load=LoadSpec("constant_power", 20.0, cutoff_v=6.0))
    b = make_scenario(r=3.0, c=1e-3, load=LoadSpec("lamp", 20.0, rated_v=20.0), limit=2.0,
                      faults=[("cable_open", 0.002, 0.004)])
    alone, both = Plant([a]), Plant([a, b])
    alone.reset_cold()
    both.reset_cold()
    for _ in range(400):
        x, y = alone.step(24.0), both.step(24.0)
        assert x.v_load_v[0] == y.v_load_v[0] and x.i_supply_a[0] == y.i_supply_a[0]
