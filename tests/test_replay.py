"""models.replay: cutting a network, initial flow, decimation and whole-reach blending.

Checks are analytical (geometry of the cut, Darcy–Weisbach h_f = f L V^2 / (2 g D), the
weights of a Kuhn simplex) or generated (replaying a model with its own head reproduces it).
"""

import math

import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.network import Fluid, Junction, Network, Pipe, Reservoir, Valve, ValveMotion
from models.replay import (InitialFlow, ReplayModel, balancing_nodes, block_mean,
                           cut_network_at, flow_from_head_drop, match_inflow,
                           steady_inflow_m3_s)

G = 9.80665
FLUID = Fluid(1000.0, 1e-6, -10.0, G)


def main_network():
    return Network(FLUID, (
        Pipe("P1", "A", "J", 1000.0, 0.3, 1000.0, friction_factor=0.02,
             profile_offsets_m=(400.0,), profile_elevations_m=(20.0,)),
        Pipe("P2", "J", "B", 600.0, 0.25, 1200.0, friction_factor=0.02)),
        (Reservoir("A", 80.0, 0.0), Junction("J", 10.0), Reservoir("B", 60.0, 5.0)))


class TestCutNetworkAt:
    def test_drops_the_side_without_sensors(self):
        cut = cut_network_at(main_network(), "P1", 100.0, 79.0, keep_points=[("P2", 300.0)])
        assert cut.dropped_nodes == ("A",)
        piece = cut.network.pipe("P1")
        assert piece.length_m == 900.0 and piece.from_node == cut.boundary_id
        assert piece.profile_offsets_m == (300.0,)          # 400 m on the original pipe
        # elevation at the cut: linear 0 -> 20 m over the first 400 m (analytical)
        assert cut.network.node(cut.boundary_id).elevation_m == pytest.approx(5.0)
        assert cut.probe("x", "P1", 500.0).offset_m == 400.0
        with pytest.raises(ValueError, match="not modelled"):
            cut.probe("y", "P1", 50.0)

    def test_keeps_both_sides_when_sensors_on_both(self):
        cut = cut_network_at(main_network(), "P1", 100.0, 79.0,
                             keep_points=[("P1", 50.0), ("P2", 300.0)])
        assert cut.dropped_nodes == ()
        assert {p.id for p in cut.network.pipes} == {"P1", "P1#beyond", "P2"}
        assert cut.probe("x", "P1", 500.0) == Probe("x", "P1#beyond", 400.0)

    def test_offset_outside_pipe(self):
        with pytest.raises(ValueError, match="outside pipe 'P1'"):
            cut_network_at(main_network(), "P1", 1200.0, 79.0)


class TestFlowFromHeadDrop:
    def test_darcy_weisbach_inverse(self):
        # h_f = f L V^2 / (2 g D): f = 0.02, L = 1000 m, D = 0.3 m, V = 1.5 m/s (analytical)
        head_drop = 0.02 * 1000.0 * 1.5**2 / (2 * G * 0.3)
        q = flow_from_head_drop(head_drop, [(1000.0, 0.3, 0.02)], G)
        assert q == pytest.approx(1.5 * math.pi * 0.3**2 / 4, rel=1e-12)
        assert flow_from_head_drop(-head_drop, [(1000.0, 0.3, 0.02)], G) == pytest.approx(-q)

    def test_colebrook_fixed_point_is_consistent(self):
        from models.friction import darcy_friction_factor, reynolds_number
        q = flow_from_head_drop(5.0, [(1000.0, 0.3, None)], G, roughness_m=[1e-4],
                                kinematic_viscosity_m2_s=1e-6)
        v = q / (math.pi * 0.09 / 4)
        f = darcy_friction_factor(reynolds_number(v, 0.3, 1e-6), 1e-4 / 0.3)
        assert f * 1000.0 * v**2 / (2 * G * 0.3) == pytest.approx(5.0, rel=1e-6)


class TestMatchInflow:
    def test_shifts_downstream_heads_to_the_target_flow(self):
        cut = cut_network_at(main_network(), "P1", 100.0, 79.0, keep_points=[("P2", 300.0)])
        network, steady, shift = match_inflow(cut, 0.05, {"P1": 0.02, "P2": 0.02})
        assert steady_inflow_m3_s(cut, steady) == pytest.approx(0.05, abs=1e-7)
        assert network.node("B").head_m == pytest.approx(60.0 + shift)
        assert balancing_nodes(cut) == ("B",)

    def test_no_head_to_shift(self):
        net = Network(FLUID, (Pipe("P1", "A", "V", 1000.0, 0.3, 1000.0, friction_factor=0.02),),
                      (Reservoir("A", 80.0), Valve("V", 0.01, ValveMotion.constant(1.0))))
        cut = cut_network_at(net, "P1", 100.0, 79.0, keep_points=[("P1", 500.0)])
        assert balancing_nodes(cut) == ()          # the comparison then takes the config flow
        with pytest.raises(ValueError, match="no reservoir or valve outlet head"):
            match_inflow(cut, 0.05, {"P1": 0.02})


class TestBlockMean:
    def test_means_and_nan(self):
        t, v = block_mean(np.arange(7.0), np.array([1, 3, np.nan, 5, 2, 2, 9.0]), 2)
        np.testing.assert_allclose(t, [0.5, 2.5, 4.5])
        np.testing.assert_allclose(v, [2.0, 5.0, 2.0])

    def test_factor_must_be_positive(self):
        with pytest.raises(ValueError, match="decimation factor"):
            block_mean(np.arange(3.0), np.arange(3.0), 0)


def replay_of(network, speeds):
    """A closure at B seen from a head logger at 100 m on P1, replayed on the cut."""
    closing = network.replace(nodes=[
        network.node("A"), network.node("J"),
        Valve("B", 0.02, ValveMotion.closure(0.5, 0.2), outlet_head_m=60.0, elevation_m=5.0)])
    model = MocModel(closing, 0.005, cavitation=False)
    run = model.run(4.0, [Probe("D", "P1", 100.0), Probe("T", "P2", 300.0)])
    cut = cut_network_at(closing, "P1", 100.0, run.probe_head("D")[0],
                         keep_points=[("P2", 300.0)])
    replay = ReplayModel(cut, run.times_s, run.probe_head("D"), (cut.probe("T", "P2", 300.0),),
                         run.times_s[:700], speeds, {"P1": 0.02, "P2": 0.02},
                         InitialFlow("config"), 0.005)
    return replay, run


class TestReplayModel:
    def test_replay_with_own_parameters_reproduces_the_model(self):
        # generated: the head at D carries everything upstream of it (method of characteristics)
        replay, run = replay_of(main_network(), {"P1": 1000.0, "P2": 1200.0})
        predicted = replay.predict({"P1": 1000.0, "P2": 1200.0}, {"P1": 0.02, "P2": 0.02}, 0.0)
        measured = run.probe_head("T")[:700]
        assert np.max(np.abs(predicted[:, 0] - measured)) < 0.01 * np.ptp(measured)

    def test_reach_vertices_weights_and_speeds(self):
        replay, _ = replay_of(main_network(), {"P1": 1000.0, "P2": 1200.0})
        vertices = replay.reach_vertices({"P1": 1010.0, "P2": 1190.0}, 0.005)
        assert sum(w for w, _ in vertices) == pytest.approx(1.0)
        for piece, length in (("P1", 900.0), ("P2", 600.0)):
            travel = sum(w * length / speeds[piece] for w, speeds in vertices)
            target = length / (1010.0 if piece == "P1" else 1190.0)
            assert travel == pytest.approx(target, rel=1e-12)   # blended travel time exact

    def test_predict_at_reads_each_probe_at_its_own_times(self):
        # generated: one run read on the common target times and on a probe's own times
        speeds, friction = {"P1": 1000.0, "P2": 1200.0}, {"P1": 0.02, "P2": 0.02}
        replay, _ = replay_of(main_network(), speeds)
        grid = replay.predict(speeds, friction, 0.0)
        own_times = replay.target_times_s[::3] + 0.0007   # a slower logger, its own clock
        (own,) = replay.predict_at([own_times], speeds, friction, 0.0)
        expected = np.interp(own_times, replay.target_times_s, grid[:, 0])
        inside = own_times <= replay.target_times_s[-1]
        # the run's own step (5 ms) is finer than the target grid's, so the two readings
        # differ by at most the head change within one model step (analytical bound)
        step_change = np.max(np.abs(np.diff(grid[:, 0])))
        assert np.max(np.abs(own[inside] - expected[inside])) <= step_change
        assert np.isnan(replay.predict_at([np.array([1e3])], speeds, friction, 0.0)[0][0])
        with pytest.raises(ValueError, match="one array of times per probe"):
            replay.predict_at([], speeds, friction, 0.0)

    def test_cavity_pipes_name_where_a_run_separated(self):
        # the field's trace at T falls far below the vapour head (a closure of ~1.5 m/s:
        # Joukowsky a V0 / g ~ 150 m; Wylie & Streeter 1993, ch. 1, from memory), so a
        # replay with cavitation forms vapour cavities; without it, none are reported
        speeds, friction = {"P1": 1000.0, "P2": 1200.0}, {"P1": 0.02, "P2": 0.02}
        replay, run = replay_of(main_network(), speeds)
        assert run.probe_head("T").min() < -100.0 and replay.cavity_pipes == set()
        replay.predict(speeds, friction, 0.0)
        assert replay.cavity_pipes and replay.cavity_pipes <= {"P1", "P2"}
        plain, _ = replay_of(main_network(), speeds)
        plain.cavitation = False
        plain.predict(speeds, friction, 0.0)
        assert plain.cavity_pipes == set()
