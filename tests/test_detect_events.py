"""Tests of detectors.events on small synthetic signals with known answers.

Signals are analytical: a front leaves a source at a known time and reaches each sensor
after distance / wave speed (Joukowsky step travelling along the pipes, damped reflections
at period 4L/a; Wylie & Streeter 1993 ch. 1, from memory), plus seeded white noise.
"""

import numpy as np
import pytest

from detectors.events import detect_events
from detectors.params import DetectionParams
from detectors.traces import SensorTrace
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

A = 1000.0
T0_NS = 1_700_000_000 * 10**9


def _layout():
    return SystemLayout(
        "synthetic",
        nodes=(NodeSite("PS", "pump_station", 5.0), NodeSite("J", "junction", 20.0),
               NodeSite("R", "reservoir", 60.0), NodeSite("V", "valve", 30.0)),
        pipes=(PipeSite("P1", "PS", "J", 3000.0, 0.4, A, 1.6e6, -20e3),
               PipeSite("P2", "J", "R", 2000.0, 0.4, A, 1.6e6, -20e3),
               PipeSite("P3", "J", "V", 900.0, 0.25, A, 1.0e6, -20e3)),
        sensors=(SensorSite("S1", "P1", 20.0), SensorSite("S2", "P1", 1650.0),
                 SensorSite("S3", "P2", 1300.0), SensorSite("S4", "P3", 850.0),
                 SensorSite("RUN", "P1", 0.0, clock_synchronised=False, quantity="pump_status", asset_id="PS")),
    )


def _traces(events, duration_s=400.0, fs=100.0, noise_pa=800.0, seed=0):
    """events: (pipe, offset, time [s], amplitude [Pa], settled fraction [-], rise [s])."""
    layout = _layout()
    rng = np.random.default_rng(seed)
    t = np.arange(int(duration_s * fs)) / fs
    out = {}
    for s in layout.pressure_sensors():
        x = 500e3 + rng.normal(0, noise_pa, t.size)
        for pipe, offset, t_ev, amp, settled, rise in events:
            legs = layout.path_between_points(pipe, offset, s.pipe_id, s.offset_m)
            arrival = t_ev + sum(leg.length_m for leg in legs) / A
            ramp = np.clip((t - arrival) / rise, 0, 1)
            osc = np.where(t > arrival, np.exp(-(t - arrival) / 20) * np.cos(2 * np.pi * (t - arrival) / 20), 0)
            x += amp * ramp * (settled + (1 - settled) * osc)
        out[s.id] = SensorTrace(s.id, "pressure", T0_NS + (t * 1e9).astype(np.int64), x)
    return layout, out, t


def _detect(traces, layout, **kw):
    return detect_events(traces, layout, DetectionParams(**kw))


def _arrival_s(layout, pipe, offset, sensor):
    s = layout.sensor(sensor)
    return sum(leg.length_m for leg in layout.path_between_points(pipe, offset, s.pipe_id, s.offset_m)) / A


class TestKinds:
    def test_pump_trip(self):
        layout, traces, _ = _traces([("P1", 0.0, 100.0, -200e3, 0.6, 0.5)])
        (event,) = _detect(traces, layout)
        assert event.kind == "pump_trip" and event.origin_sensor == "S1"
        assert "PS" in event.reason
        assert len(event.observations) == 4
        for obs in event.observations:  # onsets against analytical travel times, within 2 samples
            expected = 100.0 + _arrival_s(layout, "P1", 0.0, obs.sensor_id)
            assert abs((obs.onset_time_ns - T0_NS) * 1e-9 - expected) < 0.02

    def test_pump_start(self):
        layout, traces, _ = _traces([("P1", 0.0, 100.0, 150e3, 1.0, 1.0)])
        (event,) = _detect(traces, layout)
        assert event.kind == "pump_start" and event.origin_sensor == "S1"

    def test_valve_closure(self):
        layout, traces, _ = _traces([("P3", 900.0, 100.0, 150e3, 0.1, 2.0)])
        (event,) = _detect(traces, layout)
        assert event.kind == "valve_closure" and event.origin_sensor == "S4"
        assert event.observations[0].dominant_period_s == pytest.approx(20.0, rel=0.1)

    def test_burst_between_sensors(self):
        layout, traces, _ = _traces([("P2", 400.0, 100.0, -80e3, 0.5, 0.05)])
        (event,) = _detect(traces, layout)
        assert event.kind == "burst_suspected"
        assert "not at a pump station or valve" in event.reason

    def test_step_on_one_sensor_is_a_fault(self):
        layout, traces, t = _traces([])
        x = traces["S3"].values.copy()
        x[t > 150] += 60e3
        traces["S3"] = SensorTrace("S3", "pressure", traces["S3"].times_ns, x)
        (event,) = _detect(traces, layout)
        assert event.kind == "sensor_fault" and "S3 only" in event.reason

    def test_run_signal_confirms_a_trip(self):
        layout, traces, t = _traces([("P1", 0.0, 100.0, -200e3, 0.6, 0.5)])
        ts = np.arange(0, 400, 1.0)
        traces["RUN"] = SensorTrace("RUN", "pump_status", T0_NS + (ts * 1e9).astype(np.int64), (ts < 101).astype(float))
        (event,) = _detect(traces, layout)
        assert event.kind == "pump_trip" and event.confirmed_by_scada
        assert "run signal" in event.reason


class TestDistractors:
    def test_quiet_noise_gives_nothing(self):
        layout, traces, _ = _traces([], noise_pa=2000.0)
        assert _detect(traces, layout) == []

    def test_single_sample_spikes_give_nothing(self):
        layout, traces, _ = _traces([])
        x = traces["S2"].values.copy()
        x[[5000, 15000, 25000]] += [120e3, -90e3, 60e3]
        traces["S2"] = SensorTrace("S2", "pressure", traces["S2"].times_ns, x)
        assert _detect(traces, layout) == []

    def test_noise_burst_gives_nothing(self):
        layout, traces, _ = _traces([])
        x = traces["S1"].values.copy()
        x[10000:12000] += np.random.default_rng(2).normal(0, 3000.0, 2000)
        traces["S1"] = SensorTrace("S1", "pressure", traces["S1"].times_ns, x)
        assert _detect(traces, layout) == []

    def test_slow_demand_swing_gives_nothing(self):
        layout, traces, t = _traces([])
        for sid, tr in list(traces.items()):
            x = tr.values + 40e3 * np.tanh((t - 200) / 60.0) + 5e3 * np.sin(t / 300)
            traces[sid] = SensorTrace(sid, "pressure", tr.times_ns, x)
        assert _detect(traces, layout) == []

    def test_gap_does_not_trigger_and_event_after_it_is_found(self):
        layout, traces, t = _traces([("P1", 0.0, 300.0, -200e3, 0.6, 0.5)])
        for sid, tr in list(traces.items()):
            x = tr.values.copy()
            x[(t > 100) & (t < 130)] = np.nan
            traces[sid] = SensorTrace(sid, "pressure", tr.times_ns, x)
        (event,) = _detect(traces, layout)
        assert event.kind == "pump_trip"

    def test_flat_line_is_a_sensor_fault(self):
        layout, traces, t = _traces([])
        x = traces["S2"].values.copy()
        x[(t > 100) & (t < 200)] = 500e3
        traces["S2"] = SensorTrace("S2", "pressure", traces["S2"].times_ns, x)
        (event,) = _detect(traces, layout)
        assert event.kind == "sensor_fault" and "flat line" in event.reason

    def test_clipped_peak_is_reported(self):
        layout, traces, t = _traces([("P3", 900.0, 100.0, 150e3, 0.1, 2.0)])
        x = traces["S4"].values.copy()
        clipped = x >= 600e3
        x[clipped] = 600e3
        traces["S4"] = SensorTrace("S4", "pressure", traces["S4"].times_ns, x, clipped)
        (event,) = _detect(traces, layout)
        obs = {o.sensor_id: o for o in event.observations}
        assert event.kind == "valve_closure" and obs["S4"].clipped


class TestSlowData:
    def test_one_second_data_is_screened_and_says_what_it_cannot_resolve(self):
        layout, traces, _ = _traces([("P1", 0.0, 100.0, -200e3, 0.6, 0.5)], fs=1.0, duration_s=1200.0)
        (event,) = _detect(traces, layout)
        assert event.kind in ("pump_trip", "burst_suspected")
        notes = " ".join(event.observations[0].notes)
        assert "sampled every 1 s" in notes
        assert all(o.onset_uncertainty_s >= 1.0 for o in event.observations)


class TestValidation:
    def test_unknown_sensor_raises(self):
        layout, traces, _ = _traces([])
        tr = traces["S1"]
        with pytest.raises(ValueError, match="not in system"):
            detect_events({"X9": SensorTrace("X9", "pressure", tr.times_ns, tr.values)}, layout, DetectionParams())


def test_contiguous_segments_split_exactly_where_a_step_exceeds_the_gap_limit():
    from detectors.traces import GAP_FACTOR, contiguous_segments

    rng = np.random.default_rng(5)
    steps = np.full(5000, 10_000_000, np.int64)  # 100 Hz
    gaps = rng.choice(np.arange(1, 5000), 12, replace=False)
    steps[gaps] = rng.integers(3, 400, gaps.size) * 10_000_000
    times = np.concatenate(([0], np.cumsum(steps)))
    limit_ns = GAP_FACTOR * 0.01 * 1e9
    breaks = np.flatnonzero(np.diff(times) > limit_ns) + 1  # plain numpy statement of the rule
    edges = np.concatenate(([0], breaks, [times.size]))
    assert contiguous_segments(times, 0.01) == [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]
    assert contiguous_segments(times[:1], 0.01) == [(0, 1)]
    assert contiguous_segments(times[:0], 0.01) == []


def test_sensors_screened_side_by_side_in_threads_give_the_same_events():
    from concurrent.futures import ThreadPoolExecutor

    layout, traces, _ = _traces([("P1", 0.0, 100.0, -200e3, 0.6, 0.5), ("P1", 0.0, 260.0, 150e3, 0.6, 0.5)])
    serial = detect_events(traces, layout, DetectionParams())
    with ThreadPoolExecutor(max_workers=2) as pool:
        threaded = detect_events(traces, layout, DetectionParams(), pool.map)
    assert len(serial) == 2
    assert threaded == serial  # frozen dataclasses: every onset, metric and reason equal
