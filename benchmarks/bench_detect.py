"""Throughput of the event detector on a night of 100 Hz data, beside a plain Parquet read.

Usage::

    python -m benchmarks.bench_detect --hours 10 --repeat 3

Generates in memory a night of four 100 Hz pressure loggers on an invented main (the
Quarry Lane rising main: a pumping station, a junction, a reservoir and a valve), with
white noise, slow drift, demand swings, single-sample spikes, a gap and a surge every
half hour that travels along the pipes. Writes one Parquet file per logger to a
temporary folder, then times, side by side in one run and alternating:

* reading those files with pyarrow alone (``pyarrow.parquet.read_table`` and the columns
  to numpy), and
* :func:`detectors.events.detect_events` on the same samples.

Prints samples per second of the detector and the ratio of detection time to read time.
A benchmark, not a test: it prints figures and never fails on a time.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from detectors.events import detect_events
from detectors.params import DetectionParams
from detectors.traces import SensorTrace
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

EPOCH_NS = 1_767_225_600 * 10**9  # an invented night in UTC
WAVE_SPEED_M_S = 1100.0


def bench_layout() -> SystemLayout:
    """The invented main the benchmark screens."""
    return SystemLayout(
        "quarry-lane",
        nodes=(NodeSite("QL_PS", "pump_station", 4.0), NodeSite("QL_J", "junction", 25.0),
               NodeSite("QL_SR", "reservoir", 70.0), NodeSite("QL_V", "valve", 30.0)),
        pipes=(PipeSite("QL1", "QL_PS", "QL_J", 2600.0, 0.45, WAVE_SPEED_M_S, 1.6e6, -20e3),
               PipeSite("QL2", "QL_J", "QL_SR", 1800.0, 0.40, WAVE_SPEED_M_S, 1.6e6, -20e3),
               PipeSite("QL3", "QL_J", "QL_V", 800.0, 0.25, WAVE_SPEED_M_S, 1.0e6, -20e3)),
        sensors=(SensorSite("QL-P1", "QL1", 30.0), SensorSite("QL-P2", "QL1", 1700.0),
                 SensorSite("QL-P3", "QL2", 900.0), SensorSite("QL-P4", "QL3", 760.0)),
    )


def make_night(hours: float, fs_hz: float = 100.0, seed: int = 0) -> dict[str, SensorTrace]:
    """Four loggers' samples with field effects and a travelling surge every half hour."""
    layout = bench_layout()
    rng = np.random.default_rng(seed)
    n = int(hours * 3600 * fs_hz)
    t = np.arange(n) / fs_hz
    demand = 15e3 * np.sin(2 * np.pi * t / 5400.0) + 8e3 * np.tanh((t - 0.4 * t[-1]) / 90.0)
    events = [(float(t0), float(rng.choice([-1.0, 1.0])) * float(rng.uniform(80e3, 250e3)))
              for t0 in np.arange(900.0, t[-1] - 600.0, 1800.0)]
    traces = {}
    for site in layout.pressure_sensors():
        x = 450e3 + demand + rng.normal(0.0, float(rng.uniform(300.0, 1500.0)), n)
        for t0, amplitude in events:
            legs = layout.path_between_points("QL1", 0.0, site.pipe_id, site.offset_m)
            arrival = t0 + sum(leg.length_m for leg in legs) / WAVE_SPEED_M_S
            i0 = int(arrival * fs_hz)
            i1 = min(n, i0 + int(400 * fs_hz))
            tau = t[i0:i1] - arrival
            ringing = 0.5 * np.exp(-tau / 40.0) * np.cos(2 * np.pi * tau / 16.0)
            x[i0:i1] += amplitude * np.clip(tau / 0.3, 0, 1) * (0.5 + ringing)
            x[i1:] += 0.5 * amplitude  # the new level holds
        spikes = rng.integers(0, n, int(hours * 20))
        x[spikes] += rng.choice([-1.0, 1.0], spikes.size) * rng.uniform(30e3, 120e3, spikes.size)
        gap = int(rng.integers(0, n - int(120 * fs_hz)))
        x[gap : gap + int(60 * fs_hz)] = np.nan
        times = EPOCH_NS + np.round(t * 1e9).astype(np.int64)
        traces[site.id] = SensorTrace(site.id, "pressure", times, x)
    return traces


def write_parquet(traces: dict[str, SensorTrace], folder: Path) -> list[Path]:
    """One Parquet file per logger: UTC time [ns] and gauge pressure [Pa]."""
    paths = []
    for sid, trace in traces.items():
        table = pa.table({"time": pa.array(trace.times_ns, type=pa.timestamp("ns", tz="UTC")),
                          "pressure_pa": pa.array(trace.values)})
        path = folder / f"{sid}.parquet"
        pq.write_table(table, path)
        paths.append(path)
    return paths


def read_with_pyarrow(paths: list[Path]) -> int:
    """Read every file and hand its columns to numpy; returns the samples read."""
    total = 0
    for path in paths:
        table = pq.read_table(path)
        times = table.column("time").to_numpy()
        values = table.column("pressure_pa").to_numpy()
        total += min(times.size, values.size)
    return total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--hours", type=float, default=10.0)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    layout, params = bench_layout(), DetectionParams()
    traces = make_night(args.hours)
    n_samples = sum(len(tr) for tr in traces.values())
    detect_events(dict(list(traces.items())[:1]), layout, params)  # compile and warm caches
    read_s, detect_s, n_events = [], [], 0
    with tempfile.TemporaryDirectory() as folder:
        paths = write_parquet(traces, Path(folder))
        read_with_pyarrow(paths)
        for _ in range(args.repeat):
            started = time.perf_counter()
            read_with_pyarrow(paths)
            read_s.append(time.perf_counter() - started)
            started = time.perf_counter()
            n_events = len(detect_events(traces, layout, params))
            detect_s.append(time.perf_counter() - started)
    read_med, detect_med = statistics.median(read_s), statistics.median(detect_s)
    print(f"{len(traces)} loggers x {args.hours:g} h at 100 Hz: {n_samples / 1e6:.1f} M samples, "
          f"{n_events} events found")
    print(f"detector: {n_samples / detect_med / 1e6:.2f} M samples/s; "
          f"pyarrow read: {n_samples / read_med / 1e6:.1f} M samples/s")
    print(f"detection time / pyarrow read time: {detect_med / read_med:.1f} "
          f"(medians of {args.repeat} alternating runs)")


if __name__ == "__main__":
    main()
