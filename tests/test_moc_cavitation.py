"""Column separation with the discrete vapour cavity model (qualitative checks).

Bergant, Simpson & Tijsseling, "Water hammer with column separation: a historical review",
J. Fluids and Structures 22, 2006: pressure is held at vapour pressure while a cavity is
open, and the collapse of the cavity at the valve produces a pressure rise above the
Joukowsky value.
"""

import numpy as np
import pytest
from test_moc_elementary import G, reservoir_pipe_valve

from models.moc import MocModel, Probe
from models.network import ValveMotion


@pytest.fixture(scope="module")
def low_pressure_closure():
    net = reservoir_pipe_valve(ValveMotion.closure(0.1, 0.0), reservoir_head_m=20.0,
                               friction_factor=0.015)
    with_cavities = MocModel(net, 0.005).run(13.0, [Probe("valve", "P1", 1000.0)])
    without = MocModel(net, 0.005, cavitation=False).run(13.0, [Probe("valve", "P1", 1000.0)])
    return net, with_cavities, without


def test_pressure_is_clamped_at_vapour_pressure(low_pressure_closure):
    net, result, without = low_pressure_closure
    vapour = net.fluid.vapour_head_m  # valve at elevation 0
    assert result.probe_head("valve").min() == pytest.approx(vapour, abs=1e-9)
    assert min(env.min_head_m.min() for env in result.envelopes) >= vapour - 1e-9
    # without the cavity model the linear equations go far below vapour pressure
    assert without.probe_head("valve").min() < vapour - 50.0


def test_collapse_rises_above_joukowsky(low_pressure_closure):
    net, result, _ = low_pressure_closure
    joukowsky_head = 20.0 + 1000.0 * 1.0 / G
    assert result.probe_head("valve").max() > joukowsky_head + 10.0


def test_cavity_at_the_valve_is_reported_with_times(low_pressure_closure):
    net, result, _ = low_pressure_closure
    at_valve = [c for c in result.cavities if c.pipe_id == "P1" and c.offset_m == 1000.0]
    assert len(at_valve) == 1
    cavity = at_valve[0]
    # the cavity opens when the reflected low-pressure wave reaches the valve, 2L/a after
    # the closure plus the time the pressure takes to fall
    assert 2.0 < cavity.first_formed_s < 3.2
    assert cavity.openings >= 1 and cavity.max_volume_m3 > 0.0
    # the spike above Joukowsky comes from the collapse, after the cavity opened
    spike = result.times_s[np.argmax(result.probe_head("valve"))]
    assert spike > cavity.first_formed_s
    # the cavity must stay small against the reach volume for the model to hold (BST 2006)
    reach_volume = np.pi * 0.25**2 * 5.0
    assert cavity.max_volume_m3 < 2 * reach_volume


def test_envelope_is_the_extreme_of_every_step_where_cavities_open():
    # generated check: the envelope the kernel keeps step by step (fast march, then the
    # cavity pass) equals the max and min over the heads recorded at every step, at every
    # computing point, also where cavities open and collapse
    net = reservoir_pipe_valve(ValveMotion.closure(0.1, 0.0), reservoir_head_m=20.0,
                               friction_factor=0.015)
    result = MocModel(net, 0.005, unsteady_friction=0.02).run(6.0, record_every=1)
    assert result.cavities
    envelope = result.envelope("P1")
    np.testing.assert_array_equal(envelope.max_head_m, result.recorded_heads_m.max(axis=0))
    np.testing.assert_array_equal(envelope.min_head_m, result.recorded_heads_m.min(axis=0))
