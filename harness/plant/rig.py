"""The rig: B scenarios' plant with its ADC, command DAC and fault schedule, ready for the closed loop."""

from dataclasses import dataclass

from harness.plant.plant import Plant
from harness.plant.sensing import Adc, Dac


@dataclass
class Rig:
    """Everything the closed loop needs for B scenarios sharing one sample rate."""

    scenarios: list
    plant: Plant
    adc: Adc
    dac: Dac

    def reset(self):
        """Reset the plant per each scenario's ``run.start`` (steady at target_v, or cold).

        Scenarios of one batch are reset together, so they must agree on ``run.start``.
        Returns the Observation at t = 0.
        """
        starts = {s.run.start for s in self.scenarios}
        if len(starts) != 1:
            raise ValueError(f"scenarios in one batch must share run.start, got {sorted(starts)}")
        return self.plant.reset_steady() if starts.pop() == "steady" else self.plant.reset_cold()

    def sample(self, obs, v_at_load=False):
        """ADC codes (v_code, i_code), int64 arrays (B,), for Observation ``obs``, with stuck-ADC faults.

        ``v_at_load``: the voltage channel reads the load end (sense wires) instead of the
        supply terminals; same converter, same noise.
        """
        stuck_v, stuck_i = self.plant.faults.stuck_codes(obs.t_s)
        v = obs.v_load_v if v_at_load else obs.v_supply_v
        return self.adc.convert(v, obs.i_supply_a, stuck_v, stuck_i)


def build_rig(scenarios):
    """Build a Rig from a list of harness.scenario.specs.Scenario (same sample rate)."""
    scenarios = list(scenarios)
    return Rig(scenarios=scenarios, plant=Plant(scenarios),
                 adc=Adc([s.sensing for s in scenarios], [s.run.seed for s in scenarios]),
                 dac=Dac([s.supply for s in scenarios]))
