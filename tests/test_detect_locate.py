"""Tests of detectors.locate: arrival-time location of a transient source on the pipes.

Expected onsets are analytical: a front leaves a point at t0 and reaches each sensor after
the path length along the pipes over the wave speed (Wylie & Streeter, Fluid Transients in
Systems, 1993, ch. 1, from memory).
"""

import numpy as np
import pytest

from detectors.locate import fit_emission, locate_source, sensor_travel_times_s
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

A = 1000.0


def _layout(speed=A):
    return SystemLayout(
        "locate",
        nodes=(NodeSite("PS", "pump_station"), NodeSite("J", "junction"),
               NodeSite("R", "reservoir"), NodeSite("V", "valve")),
        pipes=(PipeSite("P1", "PS", "J", 3000.0, 0.4, speed),
               PipeSite("P2", "J", "R", 2000.0, 0.4, speed),
               PipeSite("P3", "J", "V", 900.0, 0.25, speed)),
        sensors=(SensorSite("S1", "P1", 20.0), SensorSite("S2", "P1", 1650.0),
                 SensorSite("S3", "P2", 1300.0), SensorSite("S4", "P3", 850.0)),
    )


def _onsets(layout, pipe, offset, t0=10.0, speed=A, sensors=("S1", "S2", "S3", "S4")):
    out = {}
    for sid in sensors:
        s = layout.sensor(sid)
        legs = layout.path_between_points(pipe, offset, s.pipe_id, s.offset_m)
        out[sid] = t0 + sum(leg.length_m for leg in legs) / speed
    return out


UNC = {s: 0.003 for s in ("S1", "S2", "S3", "S4")}


class TestTravelTimes:
    def test_node_times_equal_path_length_over_speed(self):
        # analytical: S3 sits 1300 m down P2, which starts 3000 m from PS
        times = sensor_travel_times_s(_layout(), "S3", A)
        assert times["PS"] == pytest.approx(4.3)
        assert times["V"] == pytest.approx((900.0 + 1300.0) / A)


class TestFitEmission:
    def test_recovers_emission_time_and_slowness(self):
        # analytical: t_i = t0 + k tau_i with t0 = 2 s, k = 1.05
        tau = np.array([[0.1, 1.0, 2.5, 3.0]])
        t = 2.0 + 1.05 * tau[0]
        t0, k, residual = fit_emission(t, tau, np.ones(4), (0.9, 1.1))
        assert t0[0] == pytest.approx(2.0) and k[0] == pytest.approx(1.05)
        np.testing.assert_allclose(residual, 0.0, atol=1e-12)

    def test_slowness_is_held_inside_its_band(self):
        tau = np.array([[0.0, 1.0, 2.0]])
        _, k, _ = fit_emission(2.0 * tau[0], tau, np.ones(3), (0.9, 1.1))
        assert k[0] == pytest.approx(1.1)


class TestLocateSource:
    def test_pump_station(self):
        layout = _layout()
        fit = locate_source(layout, _onsets(layout, "P1", 0.0), UNC)
        assert fit.node_id == "PS" and fit.misfit <= 1.0

    def test_valve(self):
        layout = _layout()
        fit = locate_source(layout, _onsets(layout, "P3", 900.0), UNC)
        assert fit.node_id == "V"

    def test_point_between_sensors_is_named_on_its_pipe(self):
        # analytical: a source 400 m down P2 lies between S2 and S3, far from every asset
        layout = _layout()
        fit = locate_source(layout, _onsets(layout, "P2", 400.0), UNC)
        assert fit.node_id is None and fit.pipe_id == "P2"
        assert fit.offset_m == pytest.approx(400.0, abs=15.0)
        assert "not at a pump station or valve" in fit.describe(layout)

    def test_prior_wave_speed_off_by_eight_percent(self):
        # the true speed is 8 % below the layout's prior: the common slowness absorbs it
        layout = _layout()
        fit = locate_source(layout, _onsets(layout, "P1", 0.0, speed=0.92 * A), UNC)
        assert fit.node_id == "PS"
        assert fit.slowness_factor == pytest.approx(1 / 0.92, rel=0.02)

    def test_one_outlier_pick_is_tolerated_and_named(self):
        layout = _layout()
        onsets = _onsets(layout, "P3", 900.0)
        onsets["S1"] += 0.8  # a pick that locked on a later part of the wave
        fit = locate_source(layout, onsets, UNC)
        assert fit.node_id == "V" and fit.excluded_sensor == "S1"
        assert "S1 disregarded" in fit.describe(layout)

    def test_late_pick_on_a_gradual_front_is_allowed_but_an_early_one_is_not(self):
        layout = _layout()
        late = _onsets(layout, "P1", 0.0, sensors=("S1", "S2"))
        late["S2"] += 0.3
        assert locate_source(layout, late, UNC).node_id is None
        allowance = {"S1": 0.0, "S2": 0.5}
        assert locate_source(layout, late, UNC, late_allowance_s=allowance).node_id == "PS"
        early = _onsets(layout, "P1", 0.0, sensors=("S1", "S2"))
        early["S1"] += 0.3  # S2 early against S1: no late allowance helps
        assert locate_source(layout, early, UNC, late_allowance_s={"S1": 0.0, "S2": 0.5}).node_id != "PS"

    def test_one_sensor_raises(self):
        with pytest.raises(ValueError, match="at least 2 timed sensors"):
            locate_source(_layout(), {"S1": 0.0}, UNC)
