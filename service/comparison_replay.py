"""Setting up the replay of one event: the loggers' series, the cut, the initial flow.

Helpers of :func:`service.comparison.compare_event`: where the model is cut (at the
driving logger, keeping the fitted loggers), why a source inside the replayed part stops
the comparison, and the initial flow on the cut pipe.
"""

from __future__ import annotations

import numpy as np

from detectors.traces import SensorTrace
from models.layout import SystemLayout
from models.network import Network
from models.replay import InitialFlow, cut_network_at
from models.replay_flow import balancing_nodes

__all__ = ["window_series", "own_samples", "filled", "initial_flow", "cut_at", "in_line_valve",
           "inside_reason"]

NS = 1e-9


def window_series(trace: SensorTrace, start_ns: int, stop_ns: int):
    take = (trace.times_ns >= start_ns) & (trace.times_ns <= stop_ns)
    return (trace.times_ns[take] - start_ns) * NS, trace.values[take]


def own_samples(trace: SensorTrace, start_ns: int, stop_ns: int, last_s: float,
                 rho_g: float, elevation_m: float) -> tuple[np.ndarray, np.ndarray]:
    """A logger's own sample times [s from the window start] and heads [m] up to ``last_s``."""
    times_s, values = window_series(trace, start_ns, stop_ns)
    keep = times_s <= last_s
    return times_s[keep], values[keep] / rho_g + elevation_m


def filled(values: np.ndarray) -> np.ndarray:
    good = np.isfinite(values)
    index = np.arange(values.size)
    return np.interp(index, index[good], values[good])


def initial_flow(layout, cut, drive: str, traces, start_ns, pre_ns, heads0: dict):
    """Measured flow on the cut pipe, else the head drop along one run of pipe, else config.

    A replayed part without a reservoir or valve outlet level (one side of a line valve,
    towards the pumps) cannot take a flow: its steady flow follows from the measured head at
    the cut and the configured pumps."""
    if not balancing_nodes(cut):
        return InitialFlow("config"), ("configured boundaries (the replayed part holds no "
                                       "reservoir level to balance a measured flow against)")
    site = layout.sensor(drive)
    for s in layout.sensors:
        trace = traces.get(s.id)
        if s.quantity != "flow" or s.pipe_id != site.pipe_id or trace is None:
            continue
        _, values = window_series(trace, start_ns - pre_ns, start_ns)
        if np.isfinite(values).sum() >= 1:
            kept_beyond = any(piece_start >= cut.offset_m - 1e-9 for _, piece_start, _ in cut.pieces)
            q = float(np.nanmedian(values))
            return InitialFlow("measured", inflow_m3_s=q if kept_beyond else -q), f"flow column {s.id}"
    degree: dict[str, int] = {}
    for p in layout.pipes:
        degree[p.from_node] = degree.get(p.from_node, 0) + 1
        degree[p.to_node] = degree.get(p.to_node, 0) + 1
    best = None
    for sensor_id, head in heads0.items():
        legs = layout.path_between_sensors(drive, sensor_id) or ()
        pipes = [leg.pipe_id for leg in legs]
        inner = [n for a, b in zip(pipes, pipes[1:]) for n in
                 {layout.pipe(a).from_node, layout.pipe(a).to_node}
                 & {layout.pipe(b).from_node, layout.pipe(b).to_node}]
        if legs and all(degree.get(n, 0) == 2 for n in inner):
            length = sum(leg.length_m for leg in legs)
            if best is None or length > best[0]:
                best = (length, sensor_id, tuple((leg.pipe_id, leg.length_m) for leg in legs))
    if best is not None:
        drop = heads0[drive] - heads0[best[1]]
        return (InitialFlow("gradient", head_drop_m=drop, legs=best[2]),
                f"pre-event head drop {drive} to {best[1]}")
    return InitialFlow("config"), "configured boundaries"


def cut_at(network: Network, layout: SystemLayout, drive: str, targets: list[str],
            head0_m: float):
    site = layout.sensor(drive)
    return cut_network_at(network, site.pipe_id, site.offset_m, head0_m,
                          keep_points=[(layout.sensor(s).pipe_id, layout.sensor(s).offset_m)
                                       for s in targets])


def in_line_valve(layout: SystemLayout, node_id: str) -> bool:
    """A valve node with pipes on both sides (a line valve, not an end valve)."""
    try:
        kind = layout.node(node_id).kind
    except KeyError:
        return False
    ends = sum((p.from_node == node_id) + (p.to_node == node_id) for p in layout.pipes)
    return kind == "valve" and ends >= 2


def inside_reason(layout: SystemLayout, source: str | None, drive: str) -> str:
    """Why a source inside the replayed part stops the comparison, for the flag."""
    if source is None:
        return ("the event's source was not located, so the replay cannot be driven from a "
                "logger beyond it")
    if in_line_valve(layout, source):
        return (f"its source {source} is a line valve with loggers on both sides, and no "
                "usable logger has another usable logger beyond it (away from the valve), so "
                "neither side can be replayed from a measured head")
    return (f"its source {source} lies inside the part of the model that {drive} drives, and "
            "the replay imposes only the head measured at the cut")
