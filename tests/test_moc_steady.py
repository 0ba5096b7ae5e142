"""Steady state of networks: Darcy-Weisbach with Colebrook-White (from `fluids`), continuity,
pump operating points."""

import math

import fluids.friction
import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.network import (Burst, Fluid, Junction, Network, Pipe, PumpStation, Reservoir,
                            Valve, ValveMotion)
from models.pumps import PumpOperation, PumpUnit
from models.steady import solve_steady_state

G = 9.80665
FLUID = Fluid(999.7, 1.306e-6, -10.1, G)


def test_head_loss_matches_darcy_weisbach_with_colebrook_from_fluids():
    # Darcy-Weisbach hf = f L V^2/(2 g D), f from fluids.friction.Colebrook [R]; 0.5 %
    pipe = Pipe("P", "A", "B", 2500.0, 0.4, 1100.0, roughness_m=1e-4)
    net = Network(FLUID, (pipe,), (Reservoir("A", 75.0), Reservoir("B", 60.0)))
    steady = solve_steady_state(net)
    v = steady.pipe_flow_m3_s["P"] / pipe.area_m2
    re = v * pipe.diameter_m / FLUID.kinematic_viscosity_m2_s
    f = fluids.friction.Colebrook(re, pipe.roughness_m / pipe.diameter_m)
    loss = f * pipe.length_m / pipe.diameter_m * v**2 / (2 * G)
    assert loss == pytest.approx(15.0, rel=0.005)
    assert steady.friction_factor["P"] == pytest.approx(f, rel=1e-6)


def test_branched_network_balances_flow():
    pipes = (Pipe("P1", "A", "J", 1500.0, 0.5, 1000.0, roughness_m=1e-4),
             Pipe("P2", "J", "B", 800.0, 0.3, 1000.0, roughness_m=1e-4),
             Pipe("P3", "J", "C", 1200.0, 0.25, 1000.0, roughness_m=1e-4))
    nodes = (Reservoir("A", 90.0), Junction("J", demand_m3_s=0.02), Reservoir("B", 60.0),
             Reservoir("C", 70.0))
    steady = solve_steady_state(Network(FLUID, pipes, nodes))
    q = steady.pipe_flow_m3_s
    assert q["P1"] - q["P2"] - q["P3"] == pytest.approx(0.02, abs=1e-9)
    heads = {steady.pipe_head_to_m["P1"], steady.pipe_head_from_m["P2"], steady.pipe_head_from_m["P3"]}
    assert max(heads) - min(heads) < 1e-9


def rising_main(units=1, check_valve=True, curve=True):
    unit = PumpUnit(0.12, 40.0, 1480.0, 0.82, 6.0,
                    curve_flows_m3_s=(0.0, 0.08, 0.12, 0.16) if curve else (),
                    curve_heads_m=(52.0, 46.0, 40.0, 31.0) if curve else ())
    pipe = Pipe("P1", "PS", "T", 2000.0, 0.35, 1050.0, roughness_m=1e-4)
    station = PumpStation("PS", unit, PumpOperation.running(), units_running=units,
                          suction_head_m=2.0, check_valve=check_valve)
    return Network(FLUID, (pipe,), (station, Reservoir("T", 35.0))), unit


def test_pump_operating_point_lies_on_curve_and_system():
    net, unit = rising_main()
    steady = solve_steady_state(net)
    q = steady.pump_flow_m3_s["PS"]
    # the fitted quadratic of the head curve (least squares, numpy.polyfit) at the flow
    coefficients = np.polyfit(unit.curve_flows_m3_s, unit.curve_heads_m, 2)
    pump_head = np.polyval(coefficients, q)
    loss = steady.pipe_head_from_m["P1"] - steady.pipe_head_to_m["P1"]
    # the pump characteristics are tabulated every 0.5 deg and interpolated linearly:
    # 1e-4 m covers that table error
    assert 2.0 + pump_head == pytest.approx(steady.pipe_head_from_m["P1"], abs=1e-4)
    assert steady.pipe_head_to_m["P1"] == pytest.approx(35.0)
    assert 0.08 < q < 0.16 and loss > 0


def test_pump_that_cannot_lift_keeps_its_check_valve_shut():
    net, _ = rising_main()
    tank = Reservoir("T", 80.0)
    net = net.replace(nodes=(net.node("PS"), tank))
    steady = solve_steady_state(net)
    assert steady.pump_flow_m3_s["PS"] == 0.0
    assert steady.pipe_flow_m3_s["P1"] == pytest.approx(0.0, abs=1e-9)


def test_leak_and_end_valve_in_steady_state():
    pipes = (Pipe("P1", "A", "L", 1000.0, 0.3, 1000.0, friction_factor=0.02),
             Pipe("P2", "L", "V", 1000.0, 0.3, 1000.0, friction_factor=0.02))
    nodes = (Reservoir("A", 50.0), Burst("L", 0.001, start_time_s=-1.0, elevation_m=5.0),
             Valve("V", 0.01, ValveMotion.constant(0.5), elevation_m=0.0))
    steady = solve_steady_state(Network(FLUID, pipes, nodes))
    h_leak = steady.pipe_head_to_m["P1"]
    leak = 0.001 * math.sqrt(2 * G * (h_leak - 5.0))
    valve = 0.005 * math.sqrt(2 * G * steady.pipe_head_to_m["P2"])
    assert steady.pipe_flow_m3_s["P1"] - steady.pipe_flow_m3_s["P2"] == pytest.approx(leak, rel=1e-8)
    assert steady.pipe_flow_m3_s["P2"] == pytest.approx(valve, rel=1e-8)


def test_network_without_fixed_head_is_refused():
    pipe = Pipe("P", "J", "V", 100.0, 0.2, 1000.0)
    net = Network(FLUID, (pipe,), (Junction("J"), Valve("V", 0.01)))
    with pytest.raises(ValueError, match="fixed-head"):
        solve_steady_state(net)


def test_transient_run_of_a_pumped_main_stays_steady():
    net, _ = rising_main()
    result = MocModel(net, 0.005).run(2.0, [Probe("mid", "P1", 1000.0)])
    assert np.ptp(result.probe_head("mid")) < 1e-6
    assert np.ptp(result.pump_flow_m3_s[:, 0]) < 1e-8
