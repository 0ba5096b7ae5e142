"""Pair geometry, reflection-free windows and the shape-change term of the delay uncertainty.

Expected values are analytical (distances and travel times on a pipe graph; tagged in each
test) or generated from seeded synthetic fronts.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from detectors.delay_uncertainty import shape_misfit_s
from detectors.fronts import locate_front
from detectors.wavespeed import estimate_event_wave_speeds
from detectors.traces import SensorTrace
from detectors.wavespeed_pairs import (node_point, pair_order, reflection_free_time_s,
                                       resample_around)
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
from models.properties import speed_of_sound_m_s

from test_wavespeed import Observation, _traces, _two_pipe_main

T0_NS = 1_700_000_000 * 10**9

LIMITS = {"max_wave_speed_m_s": speed_of_sound_m_s(12.0), "min_wave_speed_m_s": 200.0}


def _branched():
    """PS -(P1, 2000 m, 1000 m/s)- J -(P2, 1000 m, 1000 m/s)- R, and J -(B1, 400 m, 400 m/s)- V."""
    nodes = (NodeSite("PS", "pump_station"), NodeSite("J", "junction"),
             NodeSite("R", "reservoir"), NodeSite("V", "valve"))
    pipes = (PipeSite("P1", "PS", "J", 2000.0, 0.4, wave_speed_m_s=1000.0),
             PipeSite("P2", "J", "R", 1000.0, 0.4, wave_speed_m_s=1000.0),
             PipeSite("B1", "J", "V", 400.0, 0.2, wave_speed_m_s=400.0))
    sensors = (SensorSite("S1", "P1", 500.0), SensorSite("S2", "P1", 1500.0),
               SensorSite("S3", "P2", 600.0), SensorSite("S4", "B1", 300.0))
    return SystemLayout("branched", nodes, pipes, sensors)


class TestPairOrder:
    def test_source_beyond_a_orders_the_pair(self):
        layout = _branched()  # analytical: PS, S1, S2 lie in that order on P1
        assert pair_order(layout, node_point(layout, "PS"), "S2", "S1") == ("S1", "S2")

    def test_source_between_the_sensors(self):
        layout = _branched()  # a burst at 1000 m on P1 lies between S1 (500) and S2 (1500)
        assert pair_order(layout, ("P1", 1000.0), "S1", "S2") is None

    def test_pair_across_a_junction_from_the_source(self):
        layout = _branched()  # S2 -> J -> S4: S2 is on the path from PS to S4
        assert pair_order(layout, node_point(layout, "PS"), "S4", "S2") == ("S2", "S4")
        # two branches beyond the junction: neither sensor on the other's path from PS
        assert pair_order(layout, node_point(layout, "PS"), "S3", "S4") is None


class TestReflectionFreeTime:
    def test_far_end_of_the_sensors_pipe(self):
        layout = _branched()
        # analytical: S4 is 100 m from V on a 400 m/s pipe; the wave from PS reflects at V
        # and returns 2 * 100 / 400 = 0.5 s after the direct front.
        assert reflection_free_time_s(layout, node_point(layout, "PS"), "S4") == pytest.approx(0.5)

    def test_junction_beyond_the_sensor(self):
        layout = _branched()
        # analytical: S2 is 500 m before J at 1000 m/s: 2 * 500 / 1000 = 1.0 s
        assert reflection_free_time_s(layout, node_point(layout, "PS"), "S2") == pytest.approx(1.0)

    def test_on_path_junction_needs_a_second_reflection(self):
        layout = _branched()
        # analytical: for S3 (600 m past J on P2) the earliest of: R beyond it, 2 * 400 / 1000
        # = 0.8 s; V off the path, 2 * 400 / 400 = 2.0 s; J back to PS and again, 4.0 s.
        assert reflection_free_time_s(layout, node_point(layout, "PS"), "S3") == pytest.approx(0.8)


class TestEventGeometry:
    def test_source_between_sensors_is_reported_without_a_speed(self):
        layout = _two_pipe_main()
        traces, observations = _traces(layout, np.random.default_rng(31))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               source=("P1", 700.0), n_bootstrap=0)
        between = [e for e in estimates if {e.sensor_a, e.sensor_b} == {"S1", "S2"}]
        assert len(between) == 1 and between[0].method == "none"
        assert not between[0].accepted and "source between the sensors" in between[0].reason
        assert math.isnan(between[0].wave_speed_m_s)

    def test_unsynchronised_clock_comes_first_and_computes_nothing(self):
        layout = _two_pipe_main(clock_b=False)
        traces, observations = _traces(layout, np.random.default_rng(32))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               source_node="PS", n_bootstrap=0)
        with_s2 = [e for e in estimates if "S2" in (e.sensor_a, e.sensor_b)]
        assert len(with_s2) == 2  # one row per pair, no GCC or onset estimate
        for e in with_s2:
            assert e.method == "none" and math.isnan(e.delay_s)
            assert e.reason.startswith("sensor clocks not synchronised (S2)")

    def test_bad_source_offset_names_the_limit(self):
        layout = _two_pipe_main()
        traces, observations = _traces(layout, np.random.default_rng(33))
        with pytest.raises(ValueError, match="outside pipe 'P1'"):
            estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                       source=("P1", 2500.0))


def _junction_main(junction_m, onward_diameter_m=0.3):
    """PS -(P1, 0.4 m)- J -(P2, 3 km)- R, 1000 m/s; S2 at 1900 m on P1."""
    return SystemLayout(
        "junction-main", (NodeSite("PS", "pump_station"), NodeSite("J", "junction"),
                          NodeSite("R", "reservoir")),
        (PipeSite("P1", "PS", "J", junction_m, 0.4, wave_speed_m_s=1000.0),
         PipeSite("P2", "J", "R", 3000.0, onward_diameter_m, wave_speed_m_s=1000.0)),
        (SensorSite("S1", "P1", 100.0), SensorSite("S2", "P1", 1900.0)))


def _series_reflection(d1_m, d2_m):
    """(A1 - A2) / (A1 + A2): a change of size between pipes of one wave speed (Wylie &
    Streeter 1993, sec. 3.6): 0.28 for 0.4 m into 0.3 m, 0.6 for 0.4 m into 0.2 m."""
    return (d1_m ** 2 - d2_m ** 2) / (d1_m ** 2 + d2_m ** 2)


def _reflected_fronts(junction_m, rng, rise_s=0.5, rate_hz=200.0, onward_diameter_m=0.3):
    """A falling front from PS at 1000 m/s and, at each sensor, its reflection from J
    (:func:`_series_reflection`); the picker's onset is at the foot of the front."""
    reflection = _series_reflection(0.4, onward_diameter_m)
    traces, observations = {}, []
    width = rise_s / (2 * np.arctanh(0.8))
    for sensor, x in (("S1", 100.0), ("S2", 1900.0)):
        times_ns = (np.arange(int(20 * rate_hz)) * (1e9 / rate_hz)).astype(np.int64) + T0_NS
        t = (times_ns - times_ns[0]) * 1e-9
        centre, lag = 5.0 + x / 1000.0, 2.0 * (junction_m - x) / 1000.0

        def front(c):
            return 0.5 * (1 + np.tanh((t - c) / width))

        clean = 5e5 - 80e3 * (front(centre) + reflection * front(centre + lag))
        traces[sensor] = SensorTrace(sensor, "pressure", times_ns,
                                     clean + rng.normal(0.0, 250.0, t.size))
        picked = centre - rise_s / 2 + rng.uniform(-0.02, 0.02)
        observations.append(Observation(sensor, int(times_ns[0] + picked * 1e9)))
    return traces, observations


class TestReflectionBeforeTheSteepestSlope:
    def test_a_strong_reflection_refuses_the_correlation_and_the_onset_stands(self):
        # J 100 m beyond S2: its reflection is back 0.2 s after the arrival (analytical:
        # 2 x 100 m / 1000 m/s), before the steepest slope of the 0.5 s front (0.25 s);
        # 0.4 m into 0.2 m reflects 0.6, above the 0.3 that refuses
        layout = _junction_main(2000.0, onward_diameter_m=0.2)
        traces, observations = _reflected_fronts(2000.0, np.random.default_rng(41),
                                                 onward_diameter_m=0.2)
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               source_node="PS", n_bootstrap=40)
        by_method = {e.method: e for e in estimates}
        gcc, onset = by_method["gcc_plain"], by_method["onset"]
        assert not gcc.accepted
        assert "reflection" in gcc.reason and "reaches S2" in gcc.reason
        assert "from J, beyond or beside the direct path, coefficient +0.60" in gcc.reason
        assert "before its front's steepest slope" in gcc.reason
        assert onset.accepted, onset.reason
        assert abs(onset.wave_speed_m_s - 1000.0) <= 2.0 * onset.uncertainty_m_s  # generated

    def test_a_weak_reflection_leaves_the_correlation(self):
        # the same timing, 0.4 m into 0.3 m: 0.28, below 0.3; the correlation stands and
        # its widened uncertainty covers the true speed (generated)
        layout = _junction_main(2000.0)
        traces, observations = _reflected_fronts(2000.0, np.random.default_rng(41))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               source_node="PS", n_bootstrap=40)
        gcc = {e.method: e for e in estimates}["gcc_plain"]
        assert gcc.accepted, gcc.reason
        assert abs(gcc.wave_speed_m_s - 1000.0) <= 2.0 * gcc.uncertainty_m_s
        # with a lower fraction the same reflection refuses it
        strict = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                            source_node="PS", n_bootstrap=40,
                                            reflection_min_fraction=0.25)
        gcc = {e.method: e for e in strict}["gcc_plain"]
        assert not gcc.accepted and "coefficient +0.28" in gcc.reason

    def test_a_distant_junction_leaves_both_methods(self):
        layout = _junction_main(4000.0)
        traces, observations = _reflected_fronts(4000.0, np.random.default_rng(42))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               source_node="PS", n_bootstrap=40)
        assert {e.method for e in estimates if e.accepted} == {"gcc_plain", "onset"}
        for e in estimates:
            assert abs(e.wave_speed_m_s - 1000.0) <= 2.0 * e.uncertainty_m_s  # generated


def _front(n, arrival, rise, step=-50e3):
    t = np.arange(n, dtype=float)
    return 4e5 + step * 0.5 * (1 + np.tanh((t - arrival) / (rise / 2.197)))


class TestShapeMisfit:
    def test_same_front_shifted_has_no_shape_term(self):
        rng = np.random.default_rng(4)
        a = _front(200, 90.0, 6.0) + rng.normal(0, 150.0, 200)
        b = _front(200, 93.4, 6.0) * 0.8 + rng.normal(0, 150.0, 200)  # gain change only
        shapes = (locate_front(a), locate_front(b))
        # generated: a gain change is no shape change; the term stays within noise level
        assert shape_misfit_s(a, b, 3.4, 0.01, *shapes) < 0.01 * 0.3

    def test_a_slower_front_at_b_raises_the_term(self):
        rng = np.random.default_rng(5)
        a = _front(200, 90.0, 4.0) + rng.normal(0, 150.0, 200)
        b = _front(200, 93.0, 16.0) + rng.normal(0, 150.0, 200)  # dispersed on the way
        shapes = (locate_front(a), locate_front(b))
        same = shape_misfit_s(a, _front(200, 93.0, 4.0), 3.0, 0.01, *shapes)
        assert shape_misfit_s(a, b, 3.0, 0.01, *shapes) > max(5 * same, 0.005)


class TestResampleAround:
    """Bringing a faster logger to a slower one's interval (detectors.wavespeed_pairs)."""

    def _front(self, rate_hz, centre_s=10.0, width_s=0.03):
        t = np.arange(0.0, 20.0, 1.0 / rate_hz)
        times_ns = 1_700_000_000 * 10**9 + np.round(t * 1e9).astype(np.int64)
        return t, SensorTrace("A", "pressure", times_ns, 4e5 + 6e4 * np.tanh((t - centre_s) / width_s))

    def test_front_keeps_its_time(self):
        # zero-phase filtering: the half-height crossing of a tanh front stays put (to well
        # under a millisecond here), only the sampling changes
        _, trace = self._front(500.0)
        out = resample_around(trace, 0.02, int(trace.times_ns[0] + 10e9), 3.0)
        assert out.sample_interval_s == pytest.approx(0.02)
        t = (out.times_ns - trace.times_ns[0]) * 1e-9
        crossing = np.interp(4e5, out.values, t)
        assert crossing == pytest.approx(10.0, abs=5e-4)

    def test_gap_in_time_is_not_bridged(self):
        _, trace = self._front(200.0)
        keep = ~((trace.times_ns >= trace.times_ns[0] + 9_000_000_000)
                 & (trace.times_ns < trace.times_ns[0] + 9_500_000_000))
        holed = SensorTrace("A", "pressure", trace.times_ns[keep], trace.values[keep])
        out = resample_around(holed, 0.05, int(trace.times_ns[0] + 9.2e9), 2.0)
        t = (out.times_ns - trace.times_ns[0]) * 1e-9
        inside = (t > 8.996) & (t < 9.499)  # between the last sample before and the first after
        assert inside.any() and np.isnan(out.values[inside]).all()
        assert np.isfinite(out.values[~inside]).all()
