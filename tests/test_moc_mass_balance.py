"""Mass balance: the volume through the boundaries equals the change of stored volume.

Storage of an elastic pipe: dV = (g A / a^2) dH dx, from the continuity equation
dH/dt + (a^2 / (g A)) dQ/dx = 0 (Wylie & Streeter 1993, ch. 2, from memory).
"""

from dataclasses import replace

import numpy as np
import pytest

from models.moc import MocModel
from models.network import (DeadEnd, Fluid, Junction, Network, Pipe, Reservoir, Valve,
                            ValveMotion)

G = 9.80665
FLUID = Fluid(999.7, 1.306e-6, -10.1, G)


def stored_volume_change(network, model, result):
    heads = result.recorded_heads_m
    change = 0.0
    for pipe in network.pipes:
        columns = result.point_pipe_ids == pipe.id
        offsets = result.point_offsets_m[columns]
        dh = heads[-1, columns] - heads[0, columns]
        a = model.discretisation.wave_speed_m_s[pipe.id]
        change += G * pipe.area_m2 / a**2 * np.trapezoid(dh, offsets)
    return change


def branched_network(roughness_m):
    pipes = (Pipe("P1", "R", "J", 1200.0, 0.4, 1100.0, roughness_m=roughness_m),
             Pipe("P2", "J", "V", 900.0, 0.3, 1000.0, roughness_m=roughness_m),
             Pipe("P3", "J", "E", 600.0, 0.2, 950.0, roughness_m=roughness_m))
    if roughness_m == 0.0:
        pipes = tuple(replace(p, friction_factor=0.0) for p in pipes)
    nodes = (Reservoir("R", 30.0), Junction("J", demand_m3_s=0.01),
             Valve("V", 0.004, ValveMotion.closure(0.2, 0.3)), DeadEnd("E"))
    return Network(FLUID, pipes, nodes)


def check_balance(network, model, n_steps, tolerance):
    result = model.run(n_steps * model.time_step_s, record_every=n_steps)
    outflow = np.trapezoid(result.node_outflow_m3_s.sum(axis=1), result.times_s)
    gross = np.trapezoid(np.abs(result.node_outflow_m3_s).sum(axis=1), result.times_s)
    storage = stored_volume_change(network, model, result)
    # liquid in = elastic storage gained - vapour volume opened (a cavity displaces liquid)
    assert -outflow == pytest.approx(storage - result.open_cavity_volume_m3, abs=tolerance * gross)
    return result


def test_balance_without_cavities():
    # the scheme's mass error is O(dt) (friction enters the discrete continuity through
    # R Q|Q| differences that telescope along each pipe): 1e-4 of the gross volume
    network = branched_network(1e-4)
    check_balance(network, MocModel(network, 0.002, cavitation=False), 3000, 1e-4)


def test_balance_with_an_open_cavity_is_exact():
    # a vapour cavity that is still open: bookkeeping exact to rounding (frictionless)
    area = np.pi * 0.25**2
    network = Network(FLUID, (Pipe("P1", "R", "V", 1000.0, 0.5, 1000.0, friction_factor=0.0),),
                      (Reservoir("R", 20.0), Valve("V", area / np.sqrt(2 * G * 20.0),
                                                   ValveMotion.closure(0.1, 0.0))))
    result = check_balance(network, MocModel(network, 0.005), 1000, 1e-9)
    assert result.open_cavity_volume_m3 > 0.0


def test_balance_with_collapsing_cavities():
    # every collapse of a discrete vapour cavity drops the volume overshoot of its last
    # step (V < 0 is set to 0): a known mass defect of the model that does not vanish with
    # the step where cavities spread over a region (Bergant, Simpson & Tijsseling 2006,
    # caveats). Measured about 2 % of the gross boundary volume here: 3 %.
    network = branched_network(1e-4)
    result = check_balance(network, MocModel(network, 0.002), 3000, 0.03)
    assert result.cavities
