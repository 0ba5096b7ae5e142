"""Transmission and reflection of a head step at junctions of two and three pipes.

Checked against the standard junction relation T = 2 (1/B1) / sum(1/Bi), R = T - 1 with
B = a / (g A) (Wylie & Streeter, Fluid Transients in Systems, 1993, ch. 3; from memory);
tolerance 1 % as in the issue (the scheme is exact at Courant 1 on frictionless pipes).
"""

import math

import numpy as np
import pytest

from models.moc import MocModel, Probe
from models.network import DeadEnd, Fluid, HeadSeries, Junction, Network, Pipe, Reservoir

G = 9.80665
FLUID = Fluid(1000.0, 1.0e-6, -10.0, G)
STEP_M = 10.0
H0 = 50.0
DT = 0.005


def step_source(start_s=0.1):
    return HeadSeries("S", np.array([0.0, start_s, start_s + DT]),
                      np.array([H0, H0, H0 + STEP_M]))


def impedance(pipe, model):
    """B = a'/(g A) with the wave speed the model uses after fitting whole reaches."""
    return model.discretisation.wave_speed_m_s[pipe.id] / (G * pipe.area_m2)


def measure(network, incoming, outgoing):
    """Head steps seen mid-way along the incoming pipe (after reflection) and 250 m past the
    junction in each outgoing pipe."""
    probes = [Probe("in", incoming.id, incoming.length_m / 2)] + [
        Probe(p.id, p.id, 250.0 if p.from_node == "J" else p.length_m - 250.0) for p in outgoing]
    model = MocModel(network, DT, cavitation=False)
    result = model.run(2.4, probes)
    t = result.times_s
    # incoming probe: incident step at 0.6 s, junction reflection at 1.6 s; outgoing probes
    # see the transmitted step from 1.35 s; nothing else arrives before 2.4 s
    when = np.argmin(np.abs(t - 2.0))
    reflected = (result.probe_head("in")[when] - H0) / STEP_M - 1.0
    transmitted = [(result.probe_head(p.id)[when] - H0) / STEP_M for p in outgoing]
    inverse = [1 / impedance(p, model) for p in (incoming, *outgoing)]
    return reflected, transmitted, 2 * inverse[0] / sum(inverse)


class TestJunctionOfTwoPipes:
    def test_area_change(self):
        p1 = Pipe("P1", "S", "J", 1000.0, 0.6, 1000.0, friction_factor=0.0)
        p2 = Pipe("P2", "J", "E", 3000.0, 0.3, 1200.0, friction_factor=0.0)
        net = Network(FLUID, (p1, p2), (step_source(), Junction("J"), DeadEnd("E")))
        reflected, (transmitted,), t_expected = measure(net, p1, [p2])
        assert transmitted == pytest.approx(t_expected, rel=0.01)
        assert reflected == pytest.approx(t_expected - 1.0, rel=0.01)

    def test_identical_pipes_in_series_transmit_everything(self):
        # identity T = 1, R = 0 for identical pipes (textbook standard)
        p1 = Pipe("P1", "S", "J", 1000.0, 0.4, 1000.0, friction_factor=0.0)
        p2 = Pipe("P2", "J", "E", 3000.0, 0.4, 1000.0, friction_factor=0.0)
        net = Network(FLUID, (p1, p2), (step_source(), Junction("J"), Reservoir("E", H0)))
        reflected, (transmitted,), _ = measure(net, p1, [p2])
        assert transmitted == pytest.approx(1.0, rel=0.01)
        assert abs(reflected) < 0.01


class TestJunctionOfThreePipes:
    def test_tee_of_different_pipes(self):
        p1 = Pipe("P1", "S", "J", 1000.0, 0.3, 1100.0, friction_factor=0.0)
        p2 = Pipe("P2", "J", "E2", 3000.0, 0.4, 1000.0, friction_factor=0.0)
        p3 = Pipe("P3", "E3", "J", 3000.0, 0.25, 900.0, friction_factor=0.0)
        nodes = (step_source(), Junction("J"), DeadEnd("E2"), Reservoir("E3", H0))
        net = Network(FLUID, (p1, p2, p3), nodes)
        reflected, transmitted, t_expected = measure(net, p1, [p2, p3])
        assert 0.4 < t_expected < 0.6
        assert transmitted == pytest.approx([t_expected, t_expected], rel=0.01)
        assert reflected == pytest.approx(t_expected - 1.0, rel=0.01)

    def test_tee_of_identical_pipes(self):
        # identity T = 2/3, R = -1/3 (textbook standard)
        pipes = (Pipe("P1", "S", "J", 1000.0, 0.4, 1000.0, friction_factor=0.0),
                 Pipe("P2", "J", "E2", 3000.0, 0.4, 1000.0, friction_factor=0.0),
                 Pipe("P3", "J", "E3", 3000.0, 0.4, 1000.0, friction_factor=0.0))
        nodes = (step_source(), Junction("J"), DeadEnd("E2"), DeadEnd("E3"))
        reflected, transmitted, _ = measure(Network(FLUID, pipes, nodes), pipes[0], pipes[1:])
        assert transmitted == pytest.approx([2 / 3, 2 / 3], rel=0.01)
        assert reflected == pytest.approx(-1 / 3, rel=0.01)


class TestDeadEndAndReservoir:
    def test_dead_end_doubles_and_reservoir_cancels(self):
        # identities: dead end R = +1, reservoir R = -1 (textbook standard)
        for far, expected in ((DeadEnd("E"), 1.0), (Reservoir("E", H0), -1.0)):
            pipe = Pipe("P1", "S", "E", 1000.0, 0.4, 1000.0, friction_factor=0.0)
            net = Network(FLUID, (pipe,), (step_source(), far))
            result = MocModel(net, DT, cavitation=False).run(2.0, [Probe("m", "P1", 500.0)])
            when = np.argmin(np.abs(result.times_s - 1.85))
            reflected = (result.probe_head("m")[when] - H0) / STEP_M - 1.0
            assert reflected == pytest.approx(expected, abs=0.01)


class TestJunctionWithLocalLoss:
    """A junction loss K v^2/2g on each pipe connection (common practice for fittings)."""

    K = 50.0

    def network(self, k=None, step_m=0.5):
        k = self.K if k is None else k
        p1 = Pipe("P1", "S", "J", 1000.0, 0.3, 1000.0, friction_factor=0.0)
        p2 = Pipe("P2", "J", "R", 3000.0, 0.3, 1000.0, friction_factor=0.0)
        source = HeadSeries("S", np.array([0.0, 0.1, 0.1 + DT]), np.array([60.0, 60.0, 60.0 + step_m]))
        return Network(FLUID, (p1, p2), (source, Junction("J", loss_coefficient=k), Reservoir("R", 50.0))), p1, p2

    def test_steady_flow_and_end_heads_follow_darcy_weisbach_with_the_minor_loss(self):
        # hand calculation: frictionless pipes, so 60 - 50 = (k1 + k2) Q^2 with k = K/(2 g A^2)
        net, p1, p2 = self.network()
        k = self.K / (2 * G * p1.area_m2**2)
        steady = MocModel(net, DT, cavitation=False).steady_state()
        q = steady.pipe_flow_m3_s["P1"]
        assert q == pytest.approx(math.sqrt(10.0 / (2 * k)), rel=1e-9)
        assert steady.pipe_flow_m3_s["P2"] == pytest.approx(q, rel=1e-12)
        assert steady.pipe_head_to_m["P1"] - steady.pipe_head_from_m["P2"] == pytest.approx(2 * k * q * q, rel=1e-9)

    def test_the_steady_state_holds_in_the_transient(self):
        net, p1, p2 = self.network(step_m=0.0)
        model = MocModel(net, DT, cavitation=False)
        result = model.run(5.0, [Probe("a", "P1", 999.0), Probe("b", "P2", 1.0)])
        for name in ("a", "b"):
            trace = result.probe_head(name)
            assert np.max(np.abs(trace - trace[0])) < 1e-8

    def test_transmission_past_the_loss_matches_the_linearised_series_resistance(self):
        # Derived from the characteristic relations at the junction (Wylie & Streeter 1993,
        # ch. 3) with the loss linearised about the initial flow: a series resistance
        # rho = 2 (k1 + k2) |Q0| between identical pipes transmits T = 2B / (2B + rho).
        net, p1, p2 = self.network()
        model = MocModel(net, DT, cavitation=False)
        q0 = model.steady_state().pipe_flow_m3_s["P1"]
        result = model.run(2.4, [Probe("t", "P2", 250.0)])
        b = impedance(p1, model)
        rho = 2 * 2 * self.K / (2 * G * p1.area_m2**2) * abs(q0)
        expected = 2 * b / (2 * b + rho)
        when = np.argmin(np.abs(result.times_s - 2.0))
        transmitted = (result.probe_head("t")[when] - result.probe_head("t")[0]) / 0.5
        assert expected < 0.95  # the loss is large enough to matter
        assert transmitted == pytest.approx(expected, rel=0.005)

    def test_a_vanishing_loss_gives_the_plain_junction(self):
        def run(k):
            p1 = Pipe("P1", "S", "J", 1000.0, 0.3, 1000.0, friction_factor=0.02)
            p2 = Pipe("P2", "J", "R", 3000.0, 0.4, 1100.0, friction_factor=0.02)
            source = HeadSeries("S", np.array([0.0, 0.1, 0.1 + DT]), np.array([60.0, 60.0, 65.0]))
            net = Network(FLUID, (p1, p2), (source, Junction("J", loss_coefficient=k), Reservoir("R", 50.0)))
            return MocModel(net, DT, cavitation=False).run(8.0, [Probe("a", "P1", 500.0), Probe("b", "P2", 250.0)])

        lossy, plain = run(1e-12), run(0.0)  # the loss kernel, and the plain junction's
        np.testing.assert_allclose(lossy.probe_heads_m, plain.probe_heads_m, rtol=0, atol=1e-8)
