"""Wave-speed estimates per sensor pair, plausibility and the period method
(detectors.wavespeed).

Traces are generated here: fronts travelling at known wave speeds along an invented two-pipe
main (tag: generated). The plausibility bound is the speed of sound in water from
models.properties (checked against IAPWS-95 in test_properties.py).
"""

from dataclasses import dataclass, replace

import numpy as np
import pytest
from numpy.testing import assert_allclose

from detectors.calibration import solve_pipe_wave_speeds
from detectors.traces import SensorTrace
from detectors.wavespeed import (
    estimate_event_wave_speeds,
    judge_pair,
    period_wave_speed,
    wave_speed_estimate,
)
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
from models.properties import speed_of_sound_m_s

SOUND_12C = speed_of_sound_m_s(12.0)
LIMITS = {"max_wave_speed_m_s": SOUND_12C, "min_wave_speed_m_s": 200.0}


@dataclass(frozen=True)
class Observation:
    sensor_id: str
    onset_time_ns: int


def _estimate(speed, sigma=5.0, method="gcc_plain"):
    return wave_speed_estimate(pipe_id="P1", sensor_a="A", sensor_b="B", distance_m=600.0,
                               delay_s=600.0 / speed, delay_uncertainty_s=600.0 / speed**2 * sigma,
                               method=method)


class TestEstimateAndPlausibility:
    def test_propagation(self):
        # Analytical: u(a)/a = sqrt((u_tau/tau)^2 + (u_L/L)^2).
        e = wave_speed_estimate(pipe_id="P1", sensor_a="A", sensor_b="B", distance_m=1000.0,
                                delay_s=0.8, delay_uncertainty_s=0.004, method="onset",
                                distance_uncertainty_m=3.0)
        assert_allclose(e.wave_speed_m_s, 1250.0)
        assert_allclose(e.uncertainty_m_s, 1250.0 * np.hypot(0.005, 0.003))

    def test_faster_than_sound_is_rejected_with_its_reason(self):
        (judged,) = judge_pair((_estimate(1600.0),), **LIMITS)
        assert not judged.accepted
        assert "faster than sound in water" in judged.reason
        assert judged.wave_speed_m_s == 1600.0  # kept, not dropped

    def test_floor_and_clock(self):
        (slow,) = judge_pair((_estimate(150.0),), **LIMITS)
        assert not slow.accepted and "below the floor of 200 m/s" in slow.reason
        (unsynced,) = judge_pair((_estimate(1100.0),), **LIMITS, clocks_synchronised=False)
        assert not unsynced.accepted and "clocks not synchronised" in unsynced.reason

    def test_negative_delay(self):
        e = wave_speed_estimate(pipe_id="P1", sensor_a="A", sensor_b="B", distance_m=600.0,
                                delay_s=-0.01, delay_uncertainty_s=0.001, method="onset")
        (judged,) = judge_pair((e,), **LIMITS)
        assert not judged.accepted and "not positive" in judged.reason

    def test_a_pair_without_a_clear_common_front_is_refused(self):
        # Both methods read the same two windows, so they can agree on a delay read from
        # noise (a trial main: 486 +- 5 m/s "accepted" on a 797 m/s path, front -19 dB
        # under the noise) or from two different fronts (correlation peak -0.31). The
        # quality rule refuses the pair; thresholds are the config defaults.
        def pair(snr_db, peak):
            return tuple(replace(_estimate(1100.0, method=m), snr_db=snr_db,
                                 correlation_peak=peak if m != "onset" else float("nan"))
                         for m in ("gcc_plain", "onset"))

        noisy = judge_pair(pair(-18.9, 0.25), **LIMITS)
        assert not any(e.accepted for e in noisy)
        assert all("no clear front" in e.reason for e in noisy)
        opposite = judge_pair(pair(18.1, -0.31), **LIMITS)
        assert not any(e.accepted for e in opposite)
        assert all("do not hold the same front" in e.reason for e in opposite)
        clear = judge_pair(pair(35.0, 0.95), **LIMITS)
        assert all(e.accepted for e in clear), [e.reason for e in clear]

    def test_methods_agree_or_both_go(self):
        agree = judge_pair((_estimate(1100.0), _estimate(1108.0, method="onset")), **LIMITS)
        assert all(e.accepted for e in agree)
        disagree = judge_pair((_estimate(1100.0), _estimate(1160.0, method="onset")), **LIMITS)
        assert not any(e.accepted for e in disagree)
        assert all("methods disagree" in e.reason for e in disagree)

    def test_a_refused_correlation_does_not_veto_the_onset(self):
        # common practice: an estimate refused for its own windows (a reflection inside the
        # correlated front) says why and takes no part in the agreement test
        why = "a reflection reaches B before its front's steepest slope"
        gcc, onset = judge_pair((_estimate(1370.0), _estimate(1180.0, method="onset")),
                                **LIMITS, refused={"gcc_plain": why})
        assert not gcc.accepted and gcc.reason == why
        assert onset.accepted and onset.reason == ""
        # without the refusal the two disagree and both go (as before)
        assert not any(e.accepted for e in judge_pair(
            (_estimate(1370.0), _estimate(1180.0, method="onset")), **LIMITS))


def _two_pipe_main(clock_b=True):
    nodes = (NodeSite("PS", "pump_station", 5.0), NodeSite("J", "junction", 8.0),
             NodeSite("R", "reservoir", 40.0))
    pipes = (PipeSite("P1", "PS", "J", 2000.0, 0.4), PipeSite("P2", "J", "R", 1800.0, 0.3))
    sensors = (SensorSite("S1", "P1", 100.0), SensorSite("S2", "P1", 1300.0, clock_synchronised=clock_b),
               SensorSite("S3", "P2", 900.0))
    return SystemLayout("demo-main", nodes, pipes, sensors)


SPEEDS = {"P1": 1120.0, "P2": 980.0}


def _arrival_s(layout, sensor_id):
    legs = layout.path_between_points("P1", 0.0, layout.sensor(sensor_id).pipe_id,
                                      layout.sensor(sensor_id).offset_m)
    return 5.0 + sum(leg.length_m / SPEEDS[leg.pipe_id] for leg in legs)


def _traces(layout, rng, rate_hz=100.0, snr_db=30.0, rise_s=0.04, rates_hz=None):
    traces, observations = {}, []
    for sensor in layout.sensors:
        rate = (rates_hz or {}).get(sensor.id, rate_hz)
        times_ns = (np.arange(int(20 * rate)) * (1e9 / rate)).astype(np.int64) + 1_700_000_000 * 10**9
        t = (times_ns - times_ns[0]) * 1e-9
        arrival = _arrival_s(layout, sensor.id)
        width = rise_s / (2 * np.arctanh(0.8))
        clean = 5e5 - 80e3 * 0.5 * (1 + np.tanh((t - arrival) / width))
        values = clean + rng.normal(0, 80e3 / 10 ** (snr_db / 20), t.size)
        traces[sensor.id] = SensorTrace(sensor.id, "pressure", times_ns, values)
        picked = arrival + rng.uniform(-0.03, 0.03)  # a picker's onset, a few samples off
        observations.append(Observation(sensor.id, int(times_ns[0] + picked * 1e9)))
    return traces, observations


class TestEventWaveSpeeds:
    def test_pairs_recover_the_speeds_and_solve_per_pipe(self):
        layout = _two_pipe_main()
        traces, observations = _traces(layout, np.random.default_rng(21))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               n_bootstrap=40)
        assert len(estimates) == 6  # 3 pairs x (gcc, onset)
        by_pair = {(e.sensor_a, e.sensor_b, e.method): e for e in estimates}
        single = by_pair[("S1", "S2", "gcc_plain")]
        assert single.accepted and single.pipe_id == "P1"
        assert_allclose(single.wave_speed_m_s, SPEEDS["P1"], rtol=0.01)
        assert abs(single.wave_speed_m_s - SPEEDS["P1"]) < 3 * single.uncertainty_m_s + 1.0
        multi = by_pair[("S1", "S3", "gcc_plain")]
        assert multi.pipe_id == "P1+P2" and multi.distance_m == pytest.approx(2800.0)
        harmonic = 2800.0 / (1900.0 / SPEEDS["P1"] + 900.0 / SPEEDS["P2"])
        assert_allclose(multi.wave_speed_m_s, harmonic, rtol=0.01)
        solved = {p.pipe_id: p for p in solve_pipe_wave_speeds(
            [e for e in estimates if e.method == "gcc_plain"])}
        for pipe_id, speed in SPEEDS.items():
            assert solved[pipe_id].identifiable
            assert_allclose(solved[pipe_id].wave_speed_m_s, speed, rtol=0.02)

    def test_unsynchronised_clock_rejects_its_pairs(self):
        layout = _two_pipe_main(clock_b=False)
        traces, observations = _traces(layout, np.random.default_rng(22))
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               n_bootstrap=0)
        for e in estimates:
            if "S2" in (e.sensor_a, e.sensor_b):
                assert not e.accepted and "clocks not synchronised" in e.reason
            else:
                assert e.accepted, e.reason

    def test_gap_in_the_window_is_reported(self):
        layout = _two_pipe_main()
        traces, observations = _traces(layout, np.random.default_rng(23))
        s3 = traces["S3"]
        values = s3.values.copy()
        values[int(_arrival_s(layout, "S3") * 100)] = np.nan
        traces["S3"] = SensorTrace("S3", "pressure", s3.times_ns, values)
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               n_bootstrap=0)
        with_s3 = [e for e in estimates if "S3" in (e.sensor_a, e.sensor_b)]
        assert with_s3 and all(not e.accepted and "gap" in e.reason for e in with_s3)

    def test_a_sensor_that_missed_the_front_gives_no_accepted_speed(self):
        # S3's record holds only noise where the front should be (its onset is a guess):
        # every pair with S3 must be refused, the S1-S2 pair still accepted.
        layout = _two_pipe_main()
        traces, observations = _traces(layout, np.random.default_rng(25))
        s3 = traces["S3"]
        quiet = 5e5 + np.random.default_rng(26).normal(0.0, 2.5e3, len(s3))
        traces["S3"] = SensorTrace("S3", "pressure", s3.times_ns, quiet)
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               n_bootstrap=20)
        with_s3 = [e for e in estimates if "S3" in (e.sensor_a, e.sensor_b)]
        assert with_s3 and not [e for e in with_s3 if e.accepted]
        assert [e for e in estimates if {e.sensor_a, e.sensor_b} == {"S1", "S2"} and e.accepted]

    def test_loggers_at_different_rates_still_measure(self):
        # A 250 Hz, a 50 Hz and a 100 Hz logger on one main: each pair is brought to the
        # slower rate and measured (before, every such pair was refused with "sample
        # intervals differ", so a main with mixed loggers had no wave speed at all).
        layout = _two_pipe_main()
        rates = {"S1": 250.0, "S2": 50.0, "S3": 100.0}
        traces, observations = _traces(layout, np.random.default_rng(24), rates_hz=rates)
        estimates = estimate_event_wave_speeds(observations, traces, layout, **LIMITS,
                                               n_bootstrap=40)
        assert not [e for e in estimates if "intervals differ" in e.reason]
        by_pair = {(e.sensor_a, e.sensor_b, e.method): e for e in estimates}
        for pair, speed in ((("S1", "S2"), SPEEDS["P1"]),
                            (("S1", "S3"), 2800.0 / (1900.0 / SPEEDS["P1"] + 900.0 / SPEEDS["P2"]))):
            gcc = by_pair[pair + ("gcc_plain",)]
            assert gcc.accepted, gcc.reason
            assert_allclose(gcc.wave_speed_m_s, speed, rtol=0.01)
            assert abs(gcc.wave_speed_m_s - speed) < 3 * gcc.uncertainty_m_s + 1.0


class TestPeriodMethod:
    @pytest.mark.parametrize("boundary, lengths", [("reservoir_closed", 4.0), ("open_open", 2.0)])
    def test_speed_from_a_damped_oscillation(self, boundary, lengths):
        # Wylie & Streeter 1993 ch. 1 (from memory): period 4L/a reservoir to closed end,
        # 2L/a with like ends. Generated damped cosine with noise.
        length_m, speed = 1500.0, 1050.0
        period = lengths * length_m / speed
        t = np.arange(0, 6 * period, 0.01)
        rng = np.random.default_rng(31)
        x = 3e5 + 6e4 * np.exp(-0.1 * t) * np.cos(2 * np.pi * t / period + 0.4) \
            + rng.normal(0, 2e3, t.size)
        result = period_wave_speed(x, 0.01, length_m=length_m, boundary=boundary)
        assert_allclose(result.wave_speed_m_s, speed, rtol=0.005)
        assert abs(result.wave_speed_m_s - speed) < 4 * result.uncertainty_m_s + 0.5
        assert result.n_cycles > 5

    def test_unknown_boundary(self):
        with pytest.raises(ValueError, match="unknown boundary 'half_open'"):
            period_wave_speed(np.zeros(100), 0.01, length_m=100.0, boundary="half_open")

    def test_too_short_a_record(self):
        t = np.arange(0, 1.0, 0.01)
        with pytest.raises(ValueError, match="period"):
            period_wave_speed(np.cos(2 * np.pi * t / 1.5), 0.01, length_m=100.0,
                              boundary="open_open")
