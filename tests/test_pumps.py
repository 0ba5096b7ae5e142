"""Pumps: Suter characteristics, run-down on inertia, trip with check valve, start."""

from dataclasses import replace

import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.network import DeadEnd, Fluid, Network, Pipe, PumpStation, Reservoir
from models.pumps import (PumpOperation, PumpUnit, characteristics_with_head_curve,
                          typical_radial_characteristics)

G = 9.80665
FLUID = Fluid(999.7, 1.306e-6, -10.1, G)
UNIT = PumpUnit(0.12, 40.0, 1480.0, 0.82, 6.0, curve_flows_m3_s=(0.0, 0.08, 0.12, 0.16),
                curve_heads_m=(52.0, 46.0, 40.0, 31.0))


class TestSuterCharacteristics:
    def test_rated_point_is_one_per_unit(self):
        # homologous normalisation: h = beta = 1 at alpha = v = 1, i.e. WH = WB = 1/2 at
        # x = 5 pi / 4 (Wylie & Streeter 1993, sec. 4.4, from memory)
        chars = typical_radial_characteristics()
        assert float(chars.head_ratio(1.0, 1.0)) == pytest.approx(1.0, abs=1e-9)
        assert float(chars.torque_ratio(1.0, 1.0)) == pytest.approx(1.0, abs=1e-9)

    def test_typical_curve_is_periodic_and_marked_from_memory(self):
        chars = typical_radial_characteristics()
        assert chars.head[0] == pytest.approx(chars.head[-1])
        assert chars.torque[0] == pytest.approx(chars.torque[-1])
        assert "from memory" in chars.description
        # shut-off head 1.25 and torque 0.55 per unit (typical radial pump, common practice)
        assert float(chars.head_ratio(1.0, 0.0)) == pytest.approx(1.25, abs=1e-6)

    def test_homologous_scaling_with_speed(self):
        # affinity laws: at the same v/alpha the head scales with alpha^2 (common practice)
        chars = typical_radial_characteristics()
        assert float(chars.head_ratio(0.6, 0.6 * 0.8)) == pytest.approx(
            0.36 * float(chars.head_ratio(1.0, 0.8)), rel=1e-9)

    def test_head_curve_is_followed_in_the_pump_zone(self):
        flows = np.array([0.0, 0.6, 1.0, 1.3])
        heads = np.array([1.3, 1.15, 1.0, 0.78])
        chars = characteristics_with_head_curve(flows, heads)
        fitted = np.polyval(np.polyfit(flows, heads, 2), flows)
        got = [float(chars.head_ratio(1.0, v)) for v in flows]
        assert got == pytest.approx(list(fitted), abs=2e-3)  # 0.5 deg table, linear interpolation

    def test_too_few_curve_points_are_refused(self):
        with pytest.raises(ValueError, match="at least 3"):
            characteristics_with_head_curve([0.0, 1.0], [1.2, 1.0])


class TestRunDown:
    def test_run_down_without_flow_follows_inertia_solution(self):
        # analytical: with no flow the hydraulic torque is T = T_R WB(pi) alpha^2, so
        # I omega_R d(alpha)/dt = -T_R WB(pi) alpha^2 gives N(t) = N0 / (1 + t/tau) with
        # tau = I omega_R / (T_R WB(pi)) (common practice; the check)
        pipe = Pipe("P1", "PS", "E", 500.0, 0.3, 1000.0, roughness_m=1e-4)
        station = PumpStation("PS", UNIT, PumpOperation.trip(0.2), suction_head_m=0.0)
        net = Network(FLUID, (pipe,), (station, DeadEnd("E")))
        result = MocModel(net, 0.005).run(10.0)
        wb_shutoff = float(UNIT.characteristics().torque_ratio(1.0, 0.0))
        tau = UNIT.inertia_kg_m2 * UNIT.rated_angular_speed_rad_s / (
            UNIT.rated_torque_n_m(FLUID.density_kg_m3, G) * wb_shutoff)
        t = result.times_s
        after = t >= 0.2
        expected = 1.0 / (1.0 + (t[after] - 0.2) / tau)
        assert np.max(np.abs(result.pump_flow_m3_s[:, 0])) < 1e-12
        assert result.pump_speed_ratio[after, 0] == pytest.approx(expected, rel=2e-3)
        assert result.pump_speed_ratio[-1, 0] < 0.5


def rising_main(operation, units=1):
    pipe = Pipe("P1", "PS", "T", 2000.0, 0.35, 1050.0, roughness_m=1e-4)
    station = PumpStation("PS", UNIT, operation, units_running=units, suction_head_m=2.0)
    return Network(FLUID, (pipe,), (station, Reservoir("T", 35.0)))


class TestTrip:
    def test_trip_closes_the_check_valve_on_reversal(self):
        # qualitative (Wylie & Streeter 1993, sec. 4.4, from memory): after a trip the
        # speed falls, the flow falls to zero and the check valve shuts; the head at the pump
        # first drops (downsurge) and later rises above the static head
        net = rising_main(PumpOperation.trip(0.5))
        result = MocModel(net, 0.005).run(20.0, [Probe("pump", "P1", 0.0)])
        flow = result.pump_flow_m3_s[:, 0]
        speed = result.pump_speed_ratio[:, 0]
        closed = np.flatnonzero(flow == 0.0)
        assert closed.size > 0 and np.all(flow[closed[0]:] == 0.0)
        assert np.all(np.diff(speed) <= 1e-12)
        head = result.probe_head("pump")
        assert head.min() < result.steady.pipe_head_from_m["P1"] - 20.0
        assert head[closed[0]:].max() > 35.0

    def test_parallel_units_share_the_flow(self):
        one = MocModel(rising_main(PumpOperation.running(), 1), 0.005).steady_state()
        two = MocModel(rising_main(PumpOperation.running(), 2), 0.005).steady_state()
        assert one.pump_flow_m3_s["PS"] < two.pump_flow_m3_s["PS"] < 2 * one.pump_flow_m3_s["PS"]


class TestStart:
    def test_start_reaches_the_running_operating_point(self):
        # generated: a start ramps the speed from rest; once running the flow settles on the
        # steady operating point of the same network (solved independently)
        start = MocModel(rising_main(PumpOperation.start(0.5, 5.0)), 0.005)
        result = start.run(60.0, [Probe("pump", "P1", 0.0)])
        running = MocModel(rising_main(PumpOperation.running()), 0.005).steady_state()
        assert result.pump_flow_m3_s[0, 0] == 0.0
        assert result.steady.pump_flow_m3_s["PS"] == 0.0
        late = result.times_s > 55.0
        assert np.mean(result.pump_flow_m3_s[late, 0]) == pytest.approx(
            running.pump_flow_m3_s["PS"], rel=0.02)

    def test_bad_efficiency_is_refused_with_the_fix(self):
        with pytest.raises(ValueError, match="fraction"):
            replace(UNIT, rated_efficiency=82.0)
