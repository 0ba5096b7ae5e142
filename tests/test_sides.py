"""Tests of detectors.sides and the side rules of detectors.classify.

The first fronts either side of an in-line valve or pump come from Joukowsky's relation,
:math:`\\Delta p = \\rho a \\Delta V` (Joukowsky, "Über den hydraulischen Stoss in
Wasserleitungsröhren", Mém. Acad. Imp. Sci. St.-Pétersbourg, 1900; Wylie & Streeter,
Fluid Transients in Systems, 1993, sec. 1.2; both from memory): the face that the flow
arrives at rises by it, the face that the flow leaves falls by it (to vapour pressure at
most). Arrival times are analytical: path length along the pipes over the wave speed.
"""

import dataclasses

import pytest

from detectors.classify import classify_event
from detectors.metrics import SensorObservation
from detectors.params import DetectionParams
from detectors.sides import PA_PER_METRE, inline_assets, read_sides
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

A = 1100.0  # wave speed [m/s]
RHO = 1000.0
T0_NS = 1_800_000_000 * 10**9


def _main():
    """Pumps at the head, an in-line valve V, a reservoir; a spur from junction J."""
    return SystemLayout(
        "inline",
        nodes=(NodeSite("PS", "pump_station", 5.0), NodeSite("J", "junction", 20.0),
               NodeSite("V", "valve", 28.0), NodeSite("R", "reservoir", 48.0),
               NodeSite("E", "dead_end", 24.0)),
        pipes=(PipeSite("P1", "PS", "J", 2800.0, 0.5, A), PipeSite("P2", "J", "V", 1500.0, 0.45, A),
               PipeSite("P3", "V", "R", 1700.0, 0.5, A), PipeSite("P4", "J", "E", 600.0, 0.2, A)),
        sensors=(SensorSite("S1", "P1", 25.0, 6.5), SensorSite("S2", "P2", 1300.0, 26.0),
                 SensorSite("S3", "P3", 150.0, 30.0), SensorSite("S4", "P4", 580.0, 22.0)),
    )


def _booster():
    """A reservoir feeding an in-line pump station B that lifts to a second reservoir."""
    return SystemLayout(
        "booster",
        nodes=(NodeSite("R1", "reservoir", 40.0), NodeSite("B", "pump_station", 10.0),
               NodeSite("R2", "reservoir", 90.0)),
        pipes=(PipeSite("P1", "R1", "B", 800.0, 0.4, A), PipeSite("P2", "B", "R2", 2500.0, 0.4, A)),
        sensors=(SensorSite("U", "P1", 760.0, 10.0), SensorSite("D", "P2", 40.0, 10.0)),
    )


def _obs(layout, sensor, front_pa, baseline_pa, source=None, t0=10.0, noise_pa=800.0):
    """A sensor's view: first front, steady level, arrival from ``source`` (pipe, offset)."""
    onset_s = t0
    if source is not None:
        s = layout.sensor(sensor)
        legs = layout.path_between_points(source[0], source[1], s.pipe_id, s.offset_m)
        onset_s = t0 + sum(leg.length_m for leg in legs) / A
    return SensorObservation(
        sensor_id=sensor, onset_time_ns=T0_NS + int(onset_s * 1e9), onset_uncertainty_s=0.003,
        baseline_pa=baseline_pa, max_pa=baseline_pa + max(front_pa, 0.0),
        min_pa=baseline_pa + min(front_pa, 0.0), max_rate_pa_s=abs(front_pa) / 0.5,
        first_front_pa=front_pa, settle_duration_s=None, dominant_period_s=None, damping_ratio=None,
        clipped=False, sample_interval_s=0.01, final_level_pa=baseline_pa + 0.3 * front_pa,
        noise_sigma_pa=noise_pa, rise_time_s=0.5)


#: Joukowsky rise of a 1 m/s stop at 1100 m/s: rho a dV = 1.1 MPa.
JOUKOWSKY_PA = RHO * A * 1.0
#: Steady levels: 400 kPa at S2 (head 40.8 + 26 = 66.8 m) above 260 kPa at S3 (26.5 + 30 = 56.5 m).
LEVELS = {"S1": 650e3, "S2": 400e3, "S3": 260e3, "S4": 420e3}


def _closure(layout, upstream_sign=1.0, downstream_sign=-1.0):
    v = ("P2", 1500.0)  # the valve, as a point on P2
    fronts = {"S1": upstream_sign * 0.8 * JOUKOWSKY_PA, "S2": upstream_sign * JOUKOWSKY_PA,
              "S4": upstream_sign * 0.9 * JOUKOWSKY_PA, "S3": downstream_sign * 0.25 * JOUKOWSKY_PA}
    return [_obs(layout, s, fronts[s], LEVELS[s], v) for s in ("S2", "S3", "S4", "S1")]


class TestInlineAssets:
    def test_sides_of_an_in_line_valve(self):
        (asset,) = inline_assets(_main())  # PS has one pipe: not in line
        assert asset.node_id == "V" and asset.kind == "valve"
        assert asset.sides == (("S2", "S4", "S1"), ("S3",))  # nearest first: 200, 1400, 4275 m
        assert asset.pump_on_side == (True, False)

    def test_junctions_and_end_assets_are_not_in_line(self):
        layout = SystemLayout(
            "end", nodes=(NodeSite("PS", "pump_station"), NodeSite("V", "valve")),
            pipes=(PipeSite("P1", "PS", "V", 1000.0, 0.3, A),), sensors=(SensorSite("S", "P1", 10.0),))
        assert inline_assets(layout) == ()


class TestReadSides:
    def test_valve_closure_signature(self):
        layout = _main()
        (r,) = read_sides(_closure(layout), layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.kind == "valve_closure" and r.upstream_side == 0
        assert r.sensors == ("S2", "S3") and r.motions == (1, -1)
        assert "upstream S2 rose 1100 kPa" in r.reason and "downstream S3 fell 275 kPa" in r.reason

    def test_valve_opening_signature(self):
        layout = _main()
        (r,) = read_sides(_closure(layout, -1.0, 1.0), layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.kind == "valve_opening"

    def test_same_sign_on_both_sides_is_no_operation_of_the_valve(self):
        layout = _main()
        (r,) = read_sides(_closure(layout, -1.0, -1.0), layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.kind is None and not r.opposite and "same way" in r.reason

    def test_heads_within_tolerance_take_the_pump_side_as_upstream(self):
        # S3's level raised so that both heads read 66.8 m: the steady heads cannot tell
        layout = _main()
        obs = _closure(layout)
        level = LEVELS["S2"] + (26.0 - 30.0) * PA_PER_METRE
        obs[1] = _obs(layout, "S3", -0.25 * JOUKOWSKY_PA, level, ("P2", 1500.0))
        (r,) = read_sides(obs, layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.upstream_side == 0 and r.kind == "valve_closure"

    def test_front_within_the_tolerance_does_not_count(self):
        # common practice: a first motion below half a metre (4.9 kPa) is no motion
        layout = _main()
        obs = _closure(layout)
        obs[1] = _obs(layout, "S3", -0.4 * PA_PER_METRE, LEVELS["S3"], ("P2", 1500.0), noise_pa=100.0)
        assert read_sides(obs, layout, head_tolerance_m=0.5, noise_multiple=4.0) == ()

    def test_in_line_pump_trip_and_start(self):
        # a booster's suction face is at the lower head; a trip raises it and lowers delivery
        layout = _booster()
        up, down = 290e3, 780e3  # heads 39.6 m and 89.5 m
        trip = [_obs(layout, "U", 0.5 * JOUKOWSKY_PA, up), _obs(layout, "D", -0.5 * JOUKOWSKY_PA, down)]
        (r,) = read_sides(trip, layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.kind == "pump_trip" and r.upstream_side == 0 and "suction U rose" in r.reason
        start = [_obs(layout, "U", -0.3 * JOUKOWSKY_PA, up), _obs(layout, "D", 0.3 * JOUKOWSKY_PA, down)]
        (r,) = read_sides(start, layout, head_tolerance_m=0.5, noise_multiple=4.0)
        assert r.kind == "pump_start"

    def test_negative_tolerance_raises(self):
        with pytest.raises(ValueError, match="head_tolerance_m"):
            read_sides([], _main(), head_tolerance_m=-1.0, noise_multiple=4.0)


class TestClassifyWithSides:
    def test_mid_line_closure_seen_first_downstream_is_a_closure_not_a_burst(self):
        # the downstream sensor is nearest the valve, sees a fall first and settles lower:
        # the old rules called that a burst
        layout = _main()
        obs = _closure(layout)
        cls = classify_event(obs, layout, DetectionParams())
        assert cls.origin_sensor == "S3"
        assert cls.kind == "valve_closure" and cls.source_node == "V"
        assert "valve closure signature" in cls.reason

    def test_fall_on_both_sides_of_a_located_valve_is_a_burst(self):
        layout = _main()
        fronts = {"S1": -50e3, "S2": -60e3, "S3": -90e3, "S4": -100e3}
        # a sudden outflow at the valve: every sensor falls, and settles back
        obs = [_obs(layout, s, fronts[s], LEVELS[s], ("P2", 1500.0)) for s in fronts]
        obs = [dataclasses.replace(o, final_level_pa=o.baseline_pa - 1e3) for o in obs]
        cls = classify_event(obs, layout, DetectionParams())
        assert cls.kind == "burst_suspected"
        assert "both sides the same way" in cls.reason

    def test_pump_trip_at_the_head_of_the_main_is_still_a_trip(self):
        layout = _main()
        fronts = {"S1": -600e3, "S2": -420e3, "S3": -250e3, "S4": -500e3}
        obs = [_obs(layout, s, fronts[s], LEVELS[s], ("P1", 0.0)) for s in fronts]
        cls = classify_event(obs, layout, DetectionParams())
        assert cls.kind == "pump_trip" and cls.source_node == "PS"

    def test_valve_opening_is_unclassified_and_says_so(self):
        layout = _main()
        cls = classify_event(_closure(layout, -1.0, 1.0), layout, DetectionParams())
        assert cls.kind == "unclassified" and "valve opening" in cls.reason
