"""Builds Scenario objects for plant and sensing tests without scenario files."""

from harness.scenario.specs import CableSpec, FaultSpec, LoadEndSpec, LoadSpec, RunSpec, Scenario, SensingSpec, SupplySpec


def make_scenario(r=2.0, l=0.0, c=1e-3, esr=0.0, leak=None, bw=0.0, limit=None, load=None, rate=32000.0,
                  faults=(), target=24.0, max_v=30.0, temp_end=None, duration=1.0, seed=0, noise=0.5):
    """One scenario; SI units throughout (ohm, H, F, Hz, A, V, s)."""
    return Scenario(
        source="test",
        supply=SupplySpec(target_v=target, max_v=max_v, loop_bandwidth_hz=bw, current_limit_a=limit,
                          dac_full_scale_v=1.1 * max_v),
        cable=CableSpec(resistance_ohm=r, inductance_h=l, temperature_end_c=temp_end),
        load_end=LoadEndSpec(capacitance_f=c, esr_ohm=esr, leakage_ohm=leak),
        load=load or LoadSpec("constant_current", 0.0, cutoff_v=1.0),
        sensing=SensingSpec(v_full_scale_v=1.25 * max_v, i_full_scale_a=5.0, sample_rate_hz=rate,
                            noise_lsb_rms=noise),
        run=RunSpec(duration_s=duration, seed=seed),
        faults=tuple(FaultSpec(*f) for f in faults),
    )
