"""Seeded, labelled evaluation corpus for the event detector, generated with the MOC model.

An invented system, the Ashcombe Vale rising main: Millbrook pumping station lifts water
through main M1 to a junction; M2a and M2b continue to Tarrow Hill reservoir (a burst can
open at the node between them); branch M3 feeds Linnet tank through an end valve. Four
100 Hz pressure loggers sit on the mains. Every number is invented.

Each *slot* of a night holds either one MOC-simulated event (pump trip, pump start, valve
closure, burst) or only distractors. On top come what real logs carry: white noise of a
per-logger level, slow drift, demand swings, single-sample spikes, noise bursts, NaN gaps,
flat lines (a stuck logger: labelled as a sensor fault) and clipping (a logger with a low
range on some events: the kind stays the event's kind). Between slots the level moves
smoothly from one slot's final state to the next slot's initial state (a tanh with a
40 s time constant, about 90 s from 10 % to 90 %): the slow operational changes of a real
night (a variable-speed pump ramped up or down, a reservoir level, a change of duty), at
a few kPa per second at most. They are not surges and must not be reported; they stay
in the corpus as the distractor they are. Nothing is written to disk: call
:func:`make_corpus` and screen its traces.

True onsets are the physical arrival of the front: the first time the noise-free MOC
pressure at the sensor leaves its steady value by more than ``ONSET_DEPARTURE_PA`` (10 Pa,
about 1 mm of head: far below any logger's noise, far above the model's round-off), with a
linear crossing between model steps. An earlier version used 1 % of the event's largest
excursion; that reference lags the arrival by a model step or two on sharp fronts and by
0.1 to 0.2 s on a gradual valve closure, so it measured the label's lag, not the
picker's error (common practice for a synthetic reference: the arrival is where the
wave first changes the pressure).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from detectors.traces import SensorTrace
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
from models.moc import MocModel, Probe
from models.network import (Burst, Fluid, Junction, Network, Pipe, PumpStation, Reservoir,
                            Valve, ValveMotion)
from models.pumps import PumpOperation, PumpUnit

__all__ = ["CorpusEvent", "Corpus", "make_corpus", "corpus_layout", "SENSORS"]

RHO, G = 999.7, 9.80665
EPOCH_NS = 1_767_225_600 * 10**9  # an invented night in UTC
MOC_STEP_S = 0.004
SIM_S = 150.0
EVENT_AT_S = 5.0
SLOT_S = 600.0
#: Departure from the steady pressure that marks the true arrival [Pa].
ONSET_DEPARTURE_PA = 10.0
#: sensor id -> (pipe, offset [m], elevation [m])
SENSORS = {
    "AV-PT1": ("M1", 20.0, 6.0),
    "AV-PT2": ("M1", 1600.0, 22.0),
    "AV-PT3": ("M2b", 500.0, 48.0),
    "AV-PT4": ("M3", 900.0, 40.0),
}
_PIPES = (  # id, from, to, length, diameter, wave speed
    ("M1", "MILLBROOK_PS", "AV_JCT", 2400.0, 0.45, 1125.0),
    ("M2a", "AV_JCT", "AV_BURST", 800.0, 0.40, 1100.0),
    ("M2b", "AV_BURST", "TARROW_SR", 1300.0, 0.40, 1100.0),
    ("M3", "AV_JCT", "LINNET_V", 950.0, 0.25, 1000.0),
)
_ELEVATIONS = {"MILLBROOK_PS": 5.0, "AV_JCT": 30.0, "AV_BURST": 40.0, "TARROW_SR": 62.0, "LINNET_V": 42.0}


@dataclass(frozen=True)
class CorpusEvent:
    """A labelled event: kind, true onset per sensor [ns], largest excursion per sensor [Pa]."""

    kind: str
    onsets_ns: dict
    excursions_pa: dict
    noise_pa: dict
    clipped_sensors: tuple = ()


@dataclass(frozen=True)
class Corpus:
    traces: dict
    layout: SystemLayout
    events: tuple
    sample_interval_s: float
    distractors: dict = field(default_factory=dict)


def corpus_layout(speed_error: float = 0.0, rng=None) -> SystemLayout:
    """The detector's view of the system; wave speeds with a relative prior error."""
    rng = rng or np.random.default_rng(0)
    nodes = (
        NodeSite("MILLBROOK_PS", "pump_station", 5.0), NodeSite("AV_JCT", "junction", 30.0),
        NodeSite("AV_BURST", "junction", 40.0), NodeSite("TARROW_SR", "reservoir", 62.0),
        NodeSite("LINNET_V", "valve", 42.0),
    )
    pipes = tuple(
        PipeSite(p, a, b, length, d, speed * (1.0 + speed_error * rng.standard_normal()), 1.6e6, -20e3)
        for p, a, b, length, d, speed in _PIPES
    )
    sensors = tuple(SensorSite(s, pipe, off, z, range_max_pa=2.5e6) for s, (pipe, off, z) in SENSORS.items())
    return SystemLayout("ashcombe-vale", nodes, pipes, sensors)


def _network(kind: str, rng) -> Network:
    unit = PumpUnit(0.09, 70.0, 1480.0, 0.8, float(rng.uniform(3.0, 9.0)))
    if kind == "pump_trip":
        operation = PumpOperation.trip(EVENT_AT_S)
    elif kind == "pump_start":
        operation = PumpOperation.start(EVENT_AT_S, float(rng.uniform(1.0, 4.0)))
    else:
        operation = PumpOperation.running()
    closure = ValveMotion.constant(1.0)
    if kind == "valve_closure":
        closure = ValveMotion.closure(EVENT_AT_S, float(rng.uniform(0.5, 5.0)), float(rng.uniform(1.0, 2.5)))
    burst_area = float(rng.uniform(0.002, 0.006)) if kind == "burst" else 1e-9
    nodes = (
        PumpStation("MILLBROOK_PS", unit, operation, units_running=2, suction_head_m=8.0, elevation_m=5.0),
        Junction("AV_JCT", 30.0),
        Burst("AV_BURST", burst_area, EVENT_AT_S if kind == "burst" else 1e6, float(rng.uniform(0.0, 0.3)), 40.0),
        Reservoir("TARROW_SR", 66.0),
        Valve("LINNET_V", 0.01, closure, outlet_head_m=45.0, elevation_m=42.0),
    )
    pipes = tuple(Pipe(p, a, b, length, d, speed, roughness_m=1e-4) for p, a, b, length, d, speed in _PIPES)
    return Network(Fluid(RHO, 1.3e-6, -10.0), pipes, nodes)


def simulate_event(kind: str, rng) -> tuple[np.ndarray, dict]:
    """MOC run of one event: model times [s] and gauge pressure per sensor [Pa]."""
    model = MocModel(_network(kind, rng), MOC_STEP_S, max_wave_speed_adjustment=0.02)
    probes = [Probe(s, pipe, off) for s, (pipe, off, _) in SENSORS.items()]
    result = model.run(SIM_S, probes)
    pressures = {s: RHO * G * (result.probe_head(s) - z) for s, (_, _, z) in SENSORS.items()}
    return result.times_s, pressures


def _true_onset_s(times, p) -> tuple[float, float]:
    steady = p[0]
    excursion = np.abs(p - steady)
    peak = float(excursion.max())
    level = min(ONSET_DEPARTURE_PA, 0.01 * peak)
    above = np.flatnonzero(excursion > level)
    i = int(above[0])
    if i == 0:
        return float(times[0]), peak
    # linear crossing between the last quiet and the first changed step
    e0, e1 = excursion[i - 1], excursion[i]
    frac = (level - e0) / max(e1 - e0, 1e-12)
    return float(times[i - 1] + frac * (times[i] - times[i - 1])), peak


def _smooth_step(t, t0, width):
    return 0.5 * (1.0 + np.tanh((t - t0) / max(width, 1e-9)))


def make_corpus(seed: int, n_slots: int = 24, fs_hz: float = 100.0, event_fraction: float = 0.7,
                noise_range_pa=(300.0, 2000.0)) -> Corpus:
    """Generate one seeded night: traces, the detector's layout and the labels."""
    rng = np.random.default_rng(seed)
    dt = 1.0 / fs_hz
    n = int(round(n_slots * SLOT_S * fs_hz))
    t = np.arange(n) * dt
    noise = {s: float(rng.uniform(*noise_range_pa)) for s in SENSORS}
    clean = {s: np.zeros(n) for s in SENSORS}
    levels: dict[str, list] = {s: [] for s in SENSORS}
    events: list[CorpusEvent] = []
    kinds = ("pump_trip", "pump_start", "valve_closure", "burst")
    pending_clip: list[tuple[int, str]] = []
    for slot in range(n_slots):
        s0 = int(slot * SLOT_S * fs_hz)
        s1 = int((slot + 1) * SLOT_S * fs_hz)
        has_event = rng.uniform() < event_fraction
        kind = kinds[int(rng.integers(len(kinds)))] if has_event else "running"
        times, pressures = simulate_event(kind if has_event else "none", rng)
        event_t = float(rng.uniform(180.0, 300.0)) + float(rng.uniform(0.0, dt))
        local = t[s0:s1] - (slot * SLOT_S + event_t - EVENT_AT_S)
        onsets, excursions = {}, {}
        for s, p in pressures.items():
            trace = np.interp(local, times, p, left=p[0], right=float(np.mean(p[-int(10 / MOC_STEP_S):])))
            clean[s][s0:s1] = trace
            levels[s].append((p[0], float(np.mean(p[-int(10 / MOC_STEP_S):]))))
            if has_event:
                onset_s, peak = _true_onset_s(times, p)
                onsets[s] = EPOCH_NS + int(round((slot * SLOT_S + event_t - EVENT_AT_S + onset_s) * 1e9))
                excursions[s] = peak
        if has_event:
            clipped = ()
            if rng.uniform() < 0.15:  # a logger with too low a range for this event
                s = list(SENSORS)[int(rng.integers(4))]
                clipped = (s,)
                pending_clip.append((slot, s))
            events.append(CorpusEvent("burst_suspected" if kind == "burst" else kind, onsets, excursions, noise, clipped))
    traces, distractors, fault_events = _add_field_effects(clean, t, noise, n_slots, fs_hz, rng, pending_clip, events)
    layout = corpus_layout(0.03, rng)
    all_events = tuple(sorted(events + fault_events, key=lambda e: min(e.onsets_ns.values())))
    return Corpus(traces, layout, all_events, dt, distractors)


def _add_field_effects(clean, t, noise, n_slots, fs_hz, rng, pending_clip, events):
    n = t.size
    out = {}
    distractors = {"spikes": 0, "noise_bursts": 0, "gaps": 0, "demand_swings": 0, "flat_lines": 0}
    fault_events = []
    # transitions between slots: slow ramps from one slot's end level to the next start level
    for s, x in clean.items():
        for slot in range(1, n_slots):
            b = int(slot * SLOT_S * fs_hz)
            ramp = int(120 * fs_hz)
            lo, hi = max(0, b - ramp), min(n, b + ramp)
            prev_end, next_start = x[lo], x[hi - 1]
            w = _smooth_step(t[lo:hi], t[b], 40.0)
            x[lo:hi] = prev_end + (next_start - prev_end) * w
    # common demand swings and drift (seen by every sensor alike: hydraulic, slow)
    common = np.zeros(n)
    for _ in range(int(rng.integers(n_slots // 2, n_slots))):
        t0 = float(rng.uniform(0, t[-1]))
        common += float(rng.uniform(-25e3, 25e3)) * (_smooth_step(t, t0, float(rng.uniform(30, 150))) - 0.5)
        distractors["demand_swings"] += 1
    for s, x in clean.items():
        sigma = noise[s]
        drift = float(rng.uniform(-8e3, 8e3)) * np.sin(2 * np.pi * t / float(rng.uniform(3000, 9000)) + rng.uniform(0, 6))
        y = x + common + drift + rng.normal(0.0, sigma, n)
        clipped = np.zeros(n, dtype=bool)
        for slot in range(n_slots):
            a, b = int(slot * SLOT_S * fs_hz), int((slot + 1) * SLOT_S * fs_hz)
            quiet = slice(a + int(20 * fs_hz), a + int(150 * fs_hz))  # before any event of the slot
            for _ in range(int(rng.integers(0, 4))):  # single-sample spikes
                i = int(rng.integers(a, b))
                y[i] += float(rng.choice([-1, 1]) * rng.uniform(30e3, 150e3))
                distractors["spikes"] += 1
            if rng.uniform() < 0.3:  # noise burst
                i = int(rng.integers(quiet.start, quiet.stop - int(30 * fs_hz)))
                m = int(rng.uniform(5, 30) * fs_hz)
                y[i : i + m] += rng.normal(0.0, 3.0 * sigma, m)
                distractors["noise_bursts"] += 1
            if rng.uniform() < 0.3:  # gap
                i = int(rng.integers(a, b - int(70 * fs_hz)))
                y[i : i + int(rng.uniform(1, 60) * fs_hz)] = np.nan
                distractors["gaps"] += 1
            if rng.uniform() < 0.04:  # stuck logger in the quiet part of the slot
                i = int(rng.integers(quiet.start, quiet.start + int(30 * fs_hz)))
                m = int(rng.uniform(60, 90) * fs_hz)
                y[i : i + m] = np.round(y[i], 1)
                distractors["flat_lines"] += 1
                fault_events.append(CorpusEvent("sensor_fault", {s: EPOCH_NS + int(t[i] * 1e9)}, {s: 0.0}, noise))
        for slot, sensor in pending_clip:
            if sensor != s:
                continue
            a, b = int(slot * SLOT_S * fs_hz), int((slot + 1) * SLOT_S * fs_hz)
            base = float(np.nanmedian(y[a + int(150 * fs_hz) : a + int(170 * fs_hz)]))
            limit = base + 0.5 * (float(np.nanmax(y[a:b])) - base)
            over = np.flatnonzero(y[a:b] >= limit) + a
            if over.size:
                y[over] = limit
                clipped[over] = True
        out[s] = SensorTrace(s, "pressure", EPOCH_NS + np.round(t * 1e9).astype(np.int64), y, clipped)
    return out, distractors, fault_events
