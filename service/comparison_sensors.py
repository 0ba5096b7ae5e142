"""Which loggers a model comparison may use: the driving sensor and the fitted targets.

A replay imposes one logger's measured head on the model and fits the model's pipe
parameters to the others, so both roles need trustworthy timing:

* a channel whose clock is not synchronised (``SensorSite.clock_synchronised`` False, e.g. a
  SCADA export stamped by a station computer) can be seconds off; it never drives and is
  never fitted;
* a channel must resolve the event: its sample interval may be at most the shortest wave
  travel time between the usable loggers divided by ``min_samples_per_travel`` (a 1 s
  SCADA channel cannot show a front that crosses the main in 1.5 s); the slowest channel
  is dropped first and the limit taken again over the loggers left;
* it must have data over the whole window with few gaps.

The driving sensor is the usable logger nearest the event's source (a pump station, valve
or reservoir), else nearest any such boundary; among loggers about equally near (within
``NEAR_BAND_M`` or 2 % of the distance) the highest rate wins.

A source inside the main (an in-line valve closing between two loggers) cannot be replayed
from one cut: the model would have to reproduce the valve's own stroke. One side of it can:
:func:`one_side_of_source` picks a logger with loggers beyond it, away from the source; its
measured head then carries everything the source did to that side (the replay cuts there and
drops the source's side), and the loggers on the source's side are not compared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from detectors.traces import SensorTrace
from models.layout import SystemLayout

__all__ = ["SensorChoice", "SideChoice", "choose_sensors", "one_side_of_source",
           "separable_pipes", "NEAR_BAND_M"]

NS = 1e-9
#: Loggers within this distance of the nearest one count as equally near a boundary [m].
NEAR_BAND_M = 50.0
BOUNDARY_KINDS = ("pump_station", "valve", "reservoir")


@dataclass(frozen=True)
class SensorChoice:
    """Outcome of :func:`choose_sensors`.

    ``drive`` is None when no logger can drive; ``targets`` are the fitted loggers;
    ``excluded`` maps a pressure sensor left out to the reason; ``max_interval_s`` is the
    coarsest sample interval that resolves the event [s].
    """

    drive: str | None
    targets: tuple
    excluded: dict
    max_interval_s: float


@dataclass(frozen=True)
class SideChoice:
    """Outcome of :func:`one_side_of_source`: the driving logger, the loggers beyond it
    (away from the source) and those left on the source's side."""

    drive: str
    targets: tuple
    source_side: tuple


def _covers(trace: SensorTrace, start_ns: int, stop_ns: int, max_gap_fraction: float) -> bool:
    if len(trace) < 8 or trace.times_ns[0] > start_ns or trace.times_ns[-1] < stop_ns:
        return False
    take = (trace.times_ns >= start_ns) & (trace.times_ns <= stop_ns)
    values = trace.values[take]
    return values.size > 8 and float(np.mean(~np.isfinite(values))) <= max_gap_fraction


def _shortest_travel_s(layout: SystemLayout, sensors: list[str]) -> float:
    shortest = math.inf
    for i, a in enumerate(sensors):
        for b in sensors[i + 1:]:
            legs = layout.path_between_sensors(a, b)
            if legs:
                shortest = min(shortest, layout.travel_time_s(legs, 1000.0))
    return shortest


def _boundary_distance_m(layout: SystemLayout, sensor_id: str, event: Any) -> float:
    source = getattr(event, "source_node", None)
    if source:
        try:
            if layout.node(source).kind in BOUNDARY_KINDS:
                return layout.distance_from_node_m(sensor_id, source)
        except KeyError:
            pass
    targets = [n.id for n in layout.nodes if n.kind in BOUNDARY_KINDS]
    return min((layout.distance_from_node_m(sensor_id, n) for n in targets), default=math.inf)


def choose_sensors(layout: SystemLayout, event: Any, traces: Mapping[str, SensorTrace],
                   start_ns: int, stop_ns: int, min_samples_per_travel: float = 10.0,
                   max_gap_fraction: float = 0.05) -> SensorChoice:
    """Driving sensor and fitted targets for one event window (see the module docstring)."""
    excluded: dict[str, str] = {}
    timed = []
    for site in layout.pressure_sensors():
        trace = traces.get(site.id)
        if trace is None or not _covers(trace, start_ns, stop_ns, max_gap_fraction):
            excluded[site.id] = "no data over the whole event window"
        elif not site.clock_synchronised:
            excluded[site.id] = "its clock is not synchronised"
        else:
            timed.append(site.id)
    # Drop the slowest channel while it cannot resolve the travel between the loggers
    # left (a slow channel next to a fast one would otherwise set a needlessly fine limit).
    usable = sorted(timed, key=lambda s: traces[s].sample_interval_s)
    limit = math.inf
    while usable:
        shortest = _shortest_travel_s(layout, usable)
        limit = shortest / min_samples_per_travel if math.isfinite(shortest) else math.inf
        slowest = usable[-1]
        interval = traces[slowest].sample_interval_s
        if interval <= limit:
            break
        excluded[slowest] = (f"its {interval:.3g} s sampling cannot resolve the event (at most "
                             f"{limit:.3g} s: {min_samples_per_travel:g} samples over the "
                             f"{shortest:.3g} s travel time between loggers)")
        usable.pop()
    if not usable:
        return SensorChoice(None, (), excluded, limit)
    distance = {s: _boundary_distance_m(layout, s, event) for s in usable}
    nearest = min(distance.values())
    band = max(NEAR_BAND_M, 0.02 * nearest) if math.isfinite(nearest) else math.inf
    near = [s for s in usable if distance[s] <= nearest + band]
    drive = min(near, key=lambda s: (traces[s].sample_interval_s, distance[s], s))
    return SensorChoice(drive, tuple(s for s in usable if s != drive), excluded, limit)


def separable_pipes(layout: SystemLayout, drive: str, targets: list[str]) -> tuple[str, ...]:
    """Pipes whose wave speeds the targets can tell apart, or () when they cannot.

    The pipes on the paths from the driving sensor to the targets are separable when the
    matrix of path lengths (targets x pipes) has full column rank: each pipe's travel time
    then shows in a combination of arrivals that no other pipe explains (common practice
    of arrival-time inversion). Otherwise one factor on all speeds is all the data carry.
    """
    paths = {s: layout.path_between_sensors(drive, s) or () for s in targets}
    pipes = sorted({leg.pipe_id for legs in paths.values() for leg in legs})
    if len(pipes) < 2:
        return ()
    matrix = np.zeros((len(targets), len(pipes)))
    for i, s in enumerate(targets):
        for leg in paths[s]:
            matrix[i, pipes.index(leg.pipe_id)] += leg.length_m
    return tuple(pipes) if np.linalg.matrix_rank(matrix) == len(pipes) else ()


def one_side_of_source(layout: SystemLayout, source_node: str, usable: list[str],
                       traces: Mapping[str, SensorTrace],
                       tolerance_m: float = 10.0) -> SideChoice | None:
    """The logger to replay one side of an in-line source from, or None when none can.

    A logger D can drive the loggers X for which D lies on the path from the source to X
    (``d(S, D) + d(D, X) <= d(S, X) + tolerance``, as in
    :func:`detectors.wavespeed_pairs.pair_order`): every wave from the source reaches X
    through D, so D's measured head is a complete boundary for that side (method of
    characteristics: Wylie & Streeter 1993, ch. 3). The logger with the most such loggers
    wins; then the nearer one to the source, then the higher rate.
    """
    from detectors.wavespeed_pairs import node_point, pair_order

    source = node_point(layout, source_node)
    best, best_key = None, None
    for drive in usable:
        beyond = tuple(x for x in usable if x != drive and
                       pair_order(layout, source, drive, x, tolerance_m) == (drive, x))
        if not beyond:
            continue
        key = (-len(beyond), layout.distance_from_node_m(drive, source_node),
               traces[drive].sample_interval_s, drive)
        if best_key is None or key < best_key:
            rest = tuple(x for x in usable if x != drive and x not in beyond)
            best, best_key = SideChoice(drive, beyond, rest), key
    return best
