"""Tests of detectors.reflections: reflection coefficients of nodes and the reflections
that reach a sensor."""

import math

import pytest
from numpy.testing import assert_allclose

from detectors.reflections import (junction_reflection_coefficient, node_reflection_coefficient,
                                   sensor_reflections)
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

G = 9.81


def _area(d):
    return math.pi * d ** 2 / 4


class TestJunctionReflectionCoefficient:
    def test_equal_pipes_tee(self):
        # Wylie & Streeter 1993, Fluid Transients in Systems, sec. 3.6 (branching pipes):
        # three equal pipes, s = 2 / 3 and r = s - 1 = -1 / 3 for each arriving pipe
        r, s = junction_reflection_coefficient(1.0, (1.0, 1.0))
        assert_allclose((r, s), (-1 / 3, 2 / 3), rtol=1e-12)

    def test_series_change_of_size(self):
        # Wylie & Streeter 1993, sec. 3.6 (series pipes), one wave speed: r = (A1 - A2) /
        # (A1 + A2); 0.4 m into 0.3 m: 0.28 and s = 1.28; the other way -0.28 and 0.72
        a = 1100.0
        big, small = _area(0.4) / a, _area(0.3) / a
        assert_allclose(junction_reflection_coefficient(big, (small,)), (0.28, 1.28), rtol=1e-12)
        assert_allclose(junction_reflection_coefficient(small, (big,)), (-0.28, 0.72), rtol=1e-12)

    def test_equal_pipes_in_series_pass_the_wave_whole(self):
        assert_allclose(junction_reflection_coefficient(2.0, (2.0,)), (0.0, 1.0), atol=1e-15)

    def test_first_principles_common_head_and_continuity(self):
        # analytical: with B = a / (g A) the head just after the junction is (1 + r) F on
        # every pipe, and the flow F (1 - r) / B_i arriving equals s F sum_j 1 / B_j leaving
        pipes = [(0.5, 1200.0), (0.3, 900.0), (0.25, 400.0)]  # (diameter m, wave speed m/s)
        impedance = [a / (G * _area(d)) for d, a in pipes]
        admittance = [_area(d) / a for d, a in pipes]
        for i in range(3):
            r, s = junction_reflection_coefficient(admittance[i], admittance[:i] + admittance[i + 1:])
            assert_allclose(s, 1 + r, rtol=1e-12)
            inflow = (1 - r) / impedance[i]
            outflow = s * sum(1 / b for j, b in enumerate(impedance) if j != i)
            assert_allclose(inflow, outflow, rtol=1e-12)
            assert -1.0 <= r <= 1.0

    def test_no_other_pipe_is_a_closed_end(self):
        assert junction_reflection_coefficient(1.0, ()) == (1.0, 2.0)

    def test_bad_admittance(self):
        with pytest.raises(ValueError, match="must be positive"):
            junction_reflection_coefficient(0.0, (1.0,))


def _spur_layout():
    """R -(P1)- J -(P2)- D (dead end), J -(P3)- PS; three equal 0.3 m pipes at 1000 m/s."""
    nodes = (NodeSite("R", "reservoir"), NodeSite("J", "junction"),
             NodeSite("D", "dead_end"), NodeSite("PS", "pump_station"))
    pipes = (PipeSite("P1", "R", "J", 2000.0, 0.3, wave_speed_m_s=1000.0),
             PipeSite("P2", "J", "D", 500.0, 0.3, wave_speed_m_s=1000.0),
             PipeSite("P3", "PS", "J", 1500.0, 0.3, wave_speed_m_s=1000.0))
    sensors = (SensorSite("S1", "P3", 300.0), SensorSite("S2", "P2", 480.0))
    return SystemLayout("spur", nodes, pipes, sensors)


class TestNodeReflectionCoefficient:
    def test_reservoir_and_dead_end(self):
        # common practice (Wylie & Streeter 1993, sec. 3.6): a reservoir holds its head,
        # r = -1; a closed (dead) end stops the flow, r = +1
        layout = _spur_layout()
        assert node_reflection_coefficient(layout, "R", "P1") == -1.0
        assert node_reflection_coefficient(layout, "D", "P2") == 1.0

    def test_tee_of_equal_pipes(self):
        layout = _spur_layout()
        for pipe in ("P1", "P2", "P3"):
            assert_allclose(node_reflection_coefficient(layout, "J", pipe), -1 / 3, rtol=1e-12)

    def test_pump_station_is_taken_as_full(self):
        # conservative: its state is not in the layout, so |r| = 1
        assert abs(node_reflection_coefficient(_spur_layout(), "PS", "P3")) == 1.0

    def test_pipe_not_at_node(self):
        with pytest.raises(ValueError, match="does not end at node"):
            node_reflection_coefficient(_spur_layout(), "D", "P1")


class TestSensorReflections:
    def test_dead_end_beyond_a_spur_sensor(self):
        # S2 20 m from the dead end: back 40 m / 1000 m/s = 0.04 s after the front,
        # coefficient +1 (analytical); the tee's reflection back from PS comes later
        found = sensor_reflections(_spur_layout(), ("P3", 0.0), "S2")
        first = found[0]
        assert first.node_id == "D"
        assert_allclose(first.delay_s, 0.04, rtol=1e-9)
        assert first.coefficient == 1.0
        assert [r.delay_s for r in found] == sorted(r.delay_s for r in found)

    def test_tee_on_the_path_reflects_back_via_the_source(self):
        # S2's front passes J; J's -1/3 goes back to PS (+1 for a one-pipe pump station,
        # conservative) and returns 2 x 1500 m / 1000 m/s = 3 s late: product -1/3
        found = sensor_reflections(_spur_layout(), ("P3", 0.0), "S2")
        via_source = [r for r in found if r.node_id == "J"]
        assert via_source
        assert_allclose(via_source[0].delay_s, 3.0, rtol=1e-9)
        assert_allclose(via_source[0].coefficient, -1 / 3, rtol=1e-12)

    @pytest.mark.parametrize("source", [("P3", 0.0), ("P1", 700.0), ("P2", 100.0)])
    def test_the_earliest_is_the_reflection_free_time(self, source):
        # the windows end at reflection_free_time_s; the weighted rule must see the same
        # reflections (analytical: both from the layout's travel times)
        from detectors.wavespeed_pairs import reflection_free_time_s

        layout = _spur_layout()
        for sensor in ("S1", "S2"):
            found = sensor_reflections(layout, source, sensor)
            assert_allclose(found[0].delay_s, reflection_free_time_s(layout, source, sensor),
                            rtol=1e-12)
            assert all(abs(r.coefficient) <= 1.0 for r in found)
