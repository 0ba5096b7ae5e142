"""Air valve: isentropic air flow through its orifices, air admission, expulsion, shut-off."""

import math

import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.moc_air_valve import CRITICAL_RATIO, GAS_CONSTANT_AIR, VALVE_COLUMNS, air_mass_flow
from models.network import AirValve, Fluid, HeadSeries, Junction, Network, Pipe, Reservoir

G = 9.80665
FLUID = Fluid(1000.0, 1.0e-6, -10.0, G)
P_ATM, T_AIR = 101325.0, 288.15
RT = GAS_CONSTANT_AIR * T_AIR


def valve_table(inlet=1e-3, outlet=1e-4):
    table = np.zeros(VALVE_COLUMNS)
    table[:] = (0.0, inlet, outlet, P_ATM, RT, 1000.0 * G)
    return table


class TestAirFlow:
    def test_critical_pressure_ratio_of_air(self):
        # (2/(k+1))^(k/(k-1)) = 0.5283 for k = 1.4 (Anderson, Modern Compressible Flow, 2003,
        # isentropic flow tables; from memory)
        assert CRITICAL_RATIO == pytest.approx(0.5283, abs=1e-4)

    def test_choked_inflow_equals_the_published_constant(self):
        # choked mass flow m = 0.6847 A p0 / sqrt(R T0) for k = 1.4 (same source; Wylie &
        # Streeter 1993 round it to 0.686, from memory)
        area = 1e-3
        flow = air_mass_flow(0.3 * P_ATM, valve_table(inlet=area))
        assert flow * math.sqrt(RT) / (area * P_ATM) == pytest.approx(0.6847, abs=2e-4)
        # and it no longer depends on the pressure inside once choked
        assert air_mass_flow(0.1 * P_ATM, valve_table(inlet=area)) == pytest.approx(flow, rel=1e-12)

    def test_subsonic_inflow_matches_the_energy_equation(self):
        # independent form: v = sqrt(2 cp T0 (1 - r^((k-1)/k))), rho = rho0 r^(1/k), m = A rho v
        # (steady adiabatic flow of a perfect gas; common practice)
        k, area, r = 1.4, 1e-3, 0.9
        cp = k / (k - 1.0) * GAS_CONSTANT_AIR
        velocity = math.sqrt(2 * cp * T_AIR * (1 - r ** ((k - 1) / k)))
        expected = area * P_ATM / RT * r ** (1 / k) * velocity
        assert air_mass_flow(r * P_ATM, valve_table(inlet=area)) == pytest.approx(expected, rel=1e-9)

    def test_flow_is_continuous_at_choking_and_reverses_above_atmospheric(self):
        table = valve_table()
        below, above = air_mass_flow(CRITICAL_RATIO * P_ATM * (1 - 1e-9), table), air_mass_flow(
            CRITICAL_RATIO * P_ATM * (1 + 1e-9), table)
        assert above == pytest.approx(below, rel=1e-6)
        assert air_mass_flow(P_ATM, table) == 0.0
        assert air_mass_flow(1.5 * P_ATM, table) < 0.0 < air_mass_flow(0.9 * P_ATM, table)


def high_point_line(node):
    """Reservoir S - rising pipe - high point A (30 m up) - pipe - reservoir R; the head at S
    dips below A's elevation for a few seconds, then recovers."""
    up = Pipe("P1", "S", "A", 600.0, 0.3, 1000.0, friction_factor=0.02,
              profile_offsets_m=(300.0,), profile_elevations_m=(15.0,))
    down = Pipe("P2", "A", "R", 600.0, 0.3, 1000.0, friction_factor=0.02)
    source = HeadSeries("S", np.array([0.0, 1.0, 1.5, 6.0, 6.5]), np.array([42.0, 42.0, 5.0, 5.0, 42.0]))
    return Network(FLUID, (up, down), (source, node, Reservoir("R", 40.0, 0.0)))


class TestAtAHighPoint:
    PROBES = [Probe("A", "P1", 600.0)]

    def run(self, node, seconds=60.0):
        model = MocModel(high_point_line(node), 0.01)
        return model.run(seconds, self.PROBES)

    def test_air_is_admitted_then_expelled_and_the_valve_shuts(self):
        result = self.run(AirValve("A", 30.0, inlet_area_m2=5e-3, outlet_area_m2=5e-4), 120.0)
        air = result.air_volume_m3["A"]
        assert air.max() > 0.01  # air came in while the head at the valve was below it
        opened = np.flatnonzero(air > 0)
        assert result.times_s[opened[0]] > 1.0
        shut_again = np.flatnonzero(air[opened[0]:] == 0.0)
        assert shut_again.size > 0  # it left through the small outlet and the valve shut
        # each slam of the shutting valve rebounds below atmospheric and lets a little air
        # in again; friction makes those cycles die away
        assert air[-2000:].max() < 0.05 * air.max()

    def test_admitted_air_keeps_the_pressure_near_atmospheric_where_a_cavity_would_form(self):
        guarded = self.run(AirValve("A", 30.0, inlet_area_m2=5e-3, outlet_area_m2=5e-4))
        bare = self.run(Junction("A", 30.0))
        gauge_guarded = 1000.0 * G * (guarded.probe_head("A") - 30.0)
        gauge_bare = 1000.0 * G * (bare.probe_head("A") - 30.0)
        assert gauge_bare.min() < -90e3  # without the valve: vapour pressure, a cavity
        assert any(c.pipe_id in ("P1", "P2") for c in bare.cavities)
        assert gauge_guarded.min() > -15e3  # with it: a few kPa below atmospheric at most

    def test_shut_valve_changes_nothing_in_the_steady_state(self):
        steady_line = high_point_line(AirValve("A", 30.0, 5e-3, 5e-4))
        nodes = [HeadSeries("S", np.array([0.0, 1.0]), np.array([42.0, 42.0])) if n.id == "S" else n
                 for n in steady_line.nodes]
        result = MocModel(steady_line.replace(nodes=nodes), 0.01).run(10.0, self.PROBES)
        assert np.all(result.air_volume_m3["A"] == 0.0)
        assert np.ptp(result.probe_head("A")) < 1e-9

    def test_a_valve_open_in_the_steady_state_is_refused(self):
        with pytest.raises(ValueError, match="below atmospheric"):
            MocModel(high_point_line(AirValve("A", 45.0, 5e-3, 5e-4)), 0.01).run(1.0, self.PROBES)
