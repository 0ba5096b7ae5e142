"""Surge vessel (air chamber): mass oscillation, the polytropic gas law, and its duty.

The period check is the rigid-column analysis of a vessel on a line from a reservoir
(derived here from Newton's second law on the column and the polytropic gas law; the
classical air-chamber mass oscillation, Wylie & Streeter, Fluid Transients in Systems,
1993, from memory): with the column's inertance L/(gA) and the gas's compliance
V0/(m H_g0), a small disturbance swings with omega^2 = m H_g0 g A / (V0 L).
"""

import math

import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.network import (AirVessel, Fluid, HeadSeries, Junction, Network, Pipe, PumpStation,
                            Reservoir)
from models.pumps import PumpOperation, PumpUnit

G = 9.80665
FLUID = Fluid(1000.0, 1.0e-6, -10.0, G)
DT = 0.05


def line_with_vessel(step_m=0.5, **vessel):
    pipe = Pipe("P", "S", "AV", 500.0, 0.3, 1000.0, friction_factor=0.0)
    source = HeadSeries("S", np.array([0.0, 0.1, 0.1 + DT]), np.array([50.0, 50.0, 50.0 + step_m]))
    settings = dict(gas_volume_m3=3.0, vessel_volume_m3=6.0) | vessel
    return Network(FLUID, (pipe,), (source, AirVessel("AV", **settings))), pipe


def upward_crossings(t, x):
    below = np.flatnonzero((x[:-1] < 0) & (x[1:] >= 0))
    return t[below] - x[below] * (t[below + 1] - t[below]) / (x[below + 1] - x[below])


class TestMassOscillation:
    def test_period_matches_the_rigid_column_gas_spring(self):
        net, pipe = line_with_vessel()
        vessel = net.node("AV")
        model = MocModel(net, DT, cavitation=False)
        result = model.run(120.0, [Probe("v", "P", pipe.length_m)])
        head = result.probe_head("v")
        # linearised about the new equilibrium: head 50.5 m, the gas compressed to match
        m = vessel.polytropic_exponent
        gas_head_0 = 50.0 + vessel.gas_head_offset_m(FLUID)
        gas_head = 50.5 + vessel.gas_head_offset_m(FLUID)
        volume = vessel.gas_volume_m3 * (gas_head_0 / gas_head) ** (1.0 / m)
        omega = math.sqrt(m * gas_head * G * pipe.area_m2 / (volume * pipe.length_m))
        crossings = upward_crossings(result.times_s, head - 50.5)
        periods = np.diff(crossings)
        assert periods.size >= 2
        # tolerance: the pipe's own elasticity lengthens the period by about eps/6, eps the
        # ratio of the pipe's compliance gAL/a^2 to the gas's, here under 0.2 %
        assert np.median(periods) == pytest.approx(2 * math.pi / omega, rel=0.003)
        # undamped (frictionless, no connection loss): the swing keeps its size, twice the step
        assert head.max() - 50.0 == pytest.approx(2 * 0.5, rel=0.03)

    def test_gas_obeys_the_polytropic_law_at_every_step(self):
        net, pipe = line_with_vessel(step_m=8.0, inflow_loss_s2_m5=0.0, outflow_loss_s2_m5=0.0)
        vessel = net.node("AV")
        result = MocModel(net, DT, cavitation=False).run(40.0, [Probe("v", "P", pipe.length_m)])
        gas_head = result.probe_head("v") + vessel.gas_head_offset_m(FLUID)
        volume = result.vessel_gas_volume_m3["AV"]
        invariant = gas_head * volume ** vessel.polytropic_exponent
        assert np.max(np.abs(invariant / invariant[0] - 1.0)) < 1e-9
        assert volume.min() < vessel.gas_volume_m3 * 0.95  # the step compressed the gas

    def test_connection_losses_damp_the_swing(self):
        free, pipe = line_with_vessel()
        damped, _ = line_with_vessel(inflow_loss_s2_m5=2000.0, outflow_loss_s2_m5=2000.0)
        probes = [Probe("v", "P", pipe.length_m)]
        swing = [np.ptp(MocModel(net, DT, cavitation=False).run(120.0, probes).probe_head("v")[1500:])
                 for net in (free, damped)]
        assert swing[1] < 0.8 * swing[0]

    def test_steady_state_carries_no_flow_into_the_vessel(self):
        net, pipe = line_with_vessel(step_m=0.0)
        result = MocModel(net, DT, cavitation=False).run(10.0, [Probe("v", "P", pipe.length_m)])
        assert np.max(np.abs(result.node_outflow("AV"))) < 1e-12
        assert np.max(np.abs(result.probe_head("v") - 50.0)) < 1e-9


class TestPumpTripProtection:
    UNIT = PumpUnit(0.12, 40.0, 1480.0, 0.82, 6.0, curve_flows_m3_s=(0.0, 0.08, 0.12, 0.16),
                    curve_heads_m=(52.0, 46.0, 40.0, 31.0))

    def rising_main(self, with_vessel: bool):
        station = PumpStation("PS", self.UNIT, PumpOperation.trip(0.5), suction_head_m=2.0)
        pipes = (Pipe("P0", "PS", "N", 21.0, 0.35, 1050.0, roughness_m=1e-4),
                 Pipe("P1", "N", "T", 2000.0, 0.35, 1050.0, roughness_m=1e-4))
        node = (AirVessel("N", gas_volume_m3=1.5, vessel_volume_m3=4.0) if with_vessel
                else Junction("N"))
        return Network(FLUID, pipes, (station, node, Reservoir("T", 35.0)))

    def test_a_vessel_at_the_pump_keeps_the_downsurge_small(self):
        # qualitative, the purpose of a surge vessel (Wylie & Streeter 1993, from memory):
        # after a trip the vessel feeds the main, so the head at the pump falls far less
        probes = [Probe("mid", "P1", 1000.0)]
        bare = MocModel(self.rising_main(False), 0.005).run(30.0, probes)
        guarded = MocModel(self.rising_main(True), 0.005).run(30.0, probes)
        steady_mid = bare.probe_head("mid")[0]
        drop_bare = steady_mid - bare.probe_head("mid").min()
        drop_guarded = steady_mid - guarded.probe_head("mid").min()
        assert drop_bare > 15.0
        assert drop_guarded < 0.5 * drop_bare
        assert guarded.vessel_gas_volume_m3["N"].max() > 1.5  # it gave water: the gas expanded
        assert guarded.vessel_gas_volume_m3["N"].max() < 4.0  # and it did not drain
        assert guarded.drained_vessels() == []

    def test_a_vessel_too_small_for_the_trip_is_reported_drained(self):
        net = self.rising_main(True)
        small = AirVessel("N", gas_volume_m3=0.2, vessel_volume_m3=0.3)
        net = net.replace(nodes=[small if n.id == "N" else n for n in net.nodes])
        result = MocModel(net, 0.005).run(30.0, [Probe("mid", "P1", 1000.0)])
        ((vessel_id, when),) = result.drained_vessels()
        assert vessel_id == "N" and 0.5 < when < 30.0


def test_a_vessel_without_liquid_is_refused():
    with pytest.raises(ValueError, match="must be below vessel_volume_m3"):
        AirVessel("AV", gas_volume_m3=2.0, vessel_volume_m3=2.0)
    with pytest.raises(ValueError, match="between 1.0"):
        AirVessel("AV", gas_volume_m3=1.0, vessel_volume_m3=2.0, polytropic_exponent=1.6)
