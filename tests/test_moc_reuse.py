"""Re-running a model: cached steady states and layouts give the same answers as a fresh
model (generated checks: the fresh model is the reference), and closed ends pass no flow."""

import numpy as np
import pytest
from test_moc_elementary import FLUID

from models.moc import MocModel, Probe
from models.network import DeadEnd, HeadSeries, Junction, Network, Pipe, Valve

PROBES = [Probe("a", "A", 700.0), Probe("b", "B", 300.0)]


def branched(head_times=None, heads=None):
    times = np.array([0.0, 0.5, 0.6, 20.0]) if head_times is None else head_times
    values = np.array([60.0, 60.0, 75.0, 75.0]) if heads is None else heads
    pipes = (Pipe("A", "S", "J", 1000.0, 0.4, 1000.0, roughness_m=1e-4),
             Pipe("B", "J", "V", 800.0, 0.3, 1100.0, roughness_m=1e-4),
             Pipe("C", "J", "E", 400.0, 0.2, 1000.0, roughness_m=1e-4))
    nodes = (HeadSeries("S", times, values), Junction("J", demand_m3_s=0.01),
             Valve("V", 0.01, outlet_head_m=30.0), DeadEnd("E"))
    return Network(FLUID, pipes, nodes)


def assert_same_run(a, b):
    np.testing.assert_array_equal(a.probe_heads_m, b.probe_heads_m)
    np.testing.assert_array_equal(a.node_outflow_m3_s, b.node_outflow_m3_s)
    for ea, eb in zip(a.envelopes, b.envelopes):
        np.testing.assert_array_equal(ea.max_head_m, eb.max_head_m)
        np.testing.assert_array_equal(ea.min_head_m, eb.min_head_m)


def test_repeated_runs_are_identical():
    model = MocModel(branched(), 0.001)
    assert_same_run(model.run(3.0, PROBES), model.run(3.0, PROBES))


@pytest.mark.parametrize("change", [dict(wave_speed_factor=0.95),
                                    dict(friction_factor={"A": 0.03}),
                                    dict(unsteady_coefficient=0.01)])
def test_with_parameters_matches_a_fresh_model(change):
    base = MocModel(branched(), 0.001)
    base.run(3.0, PROBES)  # fills the caches the copy shares
    copy = base.with_parameters(**change)
    fresh = MocModel(copy.network, copy.time_step_s, unsteady_friction=copy.unsteady_friction,
                     friction_override=copy.friction_override)
    assert_same_run(copy.run(3.0, PROBES), fresh.run(3.0, PROBES))


def test_new_head_series_matches_a_model_built_with_it():
    model = MocModel(branched(), 0.001)
    model.run(3.0, PROBES)
    times = np.array([0.0, 1.0, 1.05, 20.0])
    for heads in (np.array([60.0, 60.0, 50.0, 50.0]), np.array([62.0, 62.0, 70.0, 70.0])):
        replay = model.run(3.0, PROBES, head_series={"S": (times, heads)})
        fresh = MocModel(branched(times, heads), 0.001).run(3.0, PROBES)
        assert_same_run(replay, fresh)


def test_dead_end_passes_exactly_no_flow_with_unsteady_friction():
    # a closed end has Q = 0 by definition (common practice); the flow must be exactly zero
    # so that the sign(Q) of the unsteady friction term does not pick up rounding noise
    model = MocModel(branched(), 0.001, unsteady_friction="vardy")
    result = model.run(3.0, PROBES, record_every=1)
    end = np.flatnonzero((result.point_pipe_ids == "C") & (result.point_offsets_m == 400.0))
    # from the first step on (step 0 is the steady solution, zero to its tolerance)
    assert np.all(result.recorded_flows_m3_s[1:, end] == 0.0)
    assert np.all(result.node_outflow("E")[1:] == 0.0)
