"""Where things sit in a monitored system: nodes, pipes, sensors and the paths between them.

A :class:`SystemLayout` is the pure, SI-unit description of a system's topology that the
detectors and the wave-speed estimator need: which pipe each sensor sits on and how far the
pressure wave travels, pipe by pipe, between two points. It is built from the validated
configuration by ``service.config``; nothing here reads files.

Distances are measured along the pipes (chainage), never straight-line. A path between two
points is the shortest route through the pipe graph, returned as *legs*: the length travelled
in each pipe, so that a travel time can be written as ``sum(length_i / a_i)``.

>>> layout = SystemLayout(
...     system_id="demo",
...     nodes=(NodeSite("R", "reservoir", 10.0), NodeSite("J", "junction", 5.0),
...            NodeSite("E", "dead_end", 3.0)),
...     pipes=(PipeSite("P1", "R", "J", 1000.0, 0.3),
...            PipeSite("P2", "J", "E", 500.0, 0.2)),
...     sensors=(SensorSite("S1", "P1", 100.0, 9.0), SensorSite("S2", "P2", 200.0, 4.0)),
... )
>>> [(leg.pipe_id, leg.length_m) for leg in layout.path_between_sensors("S1", "S2")]
[('P1', 900.0), ('P2', 200.0)]
>>> layout.distance_between_sensors_m("S1", "S2")
1100.0
"""

from __future__ import annotations

import heapq
import math
from dataclasses import dataclass, field
from typing import Iterable

__all__ = [
    "NodeSite",
    "PipeSite",
    "SensorSite",
    "PathLeg",
    "SystemLayout",
    "NODE_KINDS",
    "SENSOR_QUANTITIES",
]

NODE_KINDS = ("reservoir", "pump_station", "valve", "junction", "dead_end", "air_vessel",
              "air_valve")
SENSOR_QUANTITIES = ("pressure", "flow", "pump_status", "valve_position")


@dataclass(frozen=True)
class NodeSite:
    """A node of the pipe graph.

    Parameters
    ----------
    id : str
    kind : str
        One of :data:`NODE_KINDS`.
    elevation_m : float
        Elevation of the node [m].
    """

    id: str
    kind: str
    elevation_m: float = 0.0


@dataclass(frozen=True)
class PipeSite:
    """A pipe between two nodes, with what screening needs to know about it.

    Parameters
    ----------
    id, from_node, to_node : str
    length_m : float
        Length along the pipe [m].
    diameter_m : float
        Internal diameter [m].
    wave_speed_m_s : float or None
        Best current wave speed [m/s] (calibration, else prior, else theoretical).
    allowable_pressure_pa : float or None
        Allowable surge pressure, gauge [Pa].
    minimum_pressure_pa : float or None
        Minimum allowed pressure, gauge [Pa].
    """

    id: str
    from_node: str
    to_node: str
    length_m: float
    diameter_m: float
    wave_speed_m_s: float | None = None
    allowable_pressure_pa: float | None = None
    minimum_pressure_pa: float | None = None

    @property
    def area_m2(self) -> float:
        """Internal cross-section area [m^2]."""
        return math.pi * self.diameter_m**2 / 4.0


@dataclass(frozen=True)
class SensorSite:
    """A logger channel at a chainage on a pipe.

    Parameters
    ----------
    id : str
        Sensor id, unique across all systems.
    pipe_id : str
    offset_m : float
        Distance along the pipe from its ``from_node`` [m].
    elevation_m : float
        Elevation of the pressure tapping [m]; head = pressure/(rho g) + elevation.
    clock_synchronised : bool
        False: the channel's timestamps are not trusted for arrival-time delays.
    quantity : str
        One of :data:`SENSOR_QUANTITIES`; only ``pressure`` channels carry surge data.
    asset_id : str or None
        For SCADA context channels, the node (pump station, valve) the signal belongs to.
    range_max_pa : float or None
        Upper end of the transducer's range, gauge [Pa], where known.
    """

    id: str
    pipe_id: str
    offset_m: float
    elevation_m: float = 0.0
    clock_synchronised: bool = True
    quantity: str = "pressure"
    asset_id: str | None = None
    range_max_pa: float | None = None


@dataclass(frozen=True)
class PathLeg:
    """Part of a path that runs inside one pipe."""

    pipe_id: str
    length_m: float


@dataclass(frozen=True)
class SystemLayout:
    """Topology of one monitored system (pure data, SI units)."""

    system_id: str
    nodes: tuple[NodeSite, ...]
    pipes: tuple[PipeSite, ...]
    sensors: tuple[SensorSite, ...]
    _pipe_index: dict = field(init=False, repr=False, compare=False)
    _node_index: dict = field(init=False, repr=False, compare=False)
    _sensor_index: dict = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_pipe_index", {p.id: p for p in self.pipes})
        object.__setattr__(self, "_node_index", {n.id: n for n in self.nodes})
        object.__setattr__(self, "_sensor_index", {s.id: s for s in self.sensors})

    # -- look-ups -------------------------------------------------------------------------
    def pipe(self, pipe_id: str) -> PipeSite:
        """The pipe with this id; ``KeyError`` naming the known ids otherwise."""
        try:
            return self._pipe_index[pipe_id]
        except KeyError:
            raise KeyError(f"unknown pipe {pipe_id!r}; known: {sorted(self._pipe_index)}") from None

    def node(self, node_id: str) -> NodeSite:
        """The node with this id."""
        try:
            return self._node_index[node_id]
        except KeyError:
            raise KeyError(f"unknown node {node_id!r}; known: {sorted(self._node_index)}") from None

    def sensor(self, sensor_id: str) -> SensorSite:
        """The sensor with this id."""
        try:
            return self._sensor_index[sensor_id]
        except KeyError:
            raise KeyError(
                f"unknown sensor {sensor_id!r}; known: {sorted(self._sensor_index)}"
            ) from None

    def pressure_sensors(self) -> tuple[SensorSite, ...]:
        """Sensors that measure pressure (not SCADA context channels)."""
        return tuple(s for s in self.sensors if s.quantity == "pressure")

    def nodes_of_kind(self, kind: str) -> tuple[NodeSite, ...]:
        """All nodes of one kind, e.g. ``"pump_station"``."""
        return tuple(n for n in self.nodes if n.kind == kind)

    def pipe_for_sensor(self, sensor_id: str) -> PipeSite:
        """The pipe a sensor sits on."""
        return self.pipe(self.sensor(sensor_id).pipe_id)

    # -- paths ----------------------------------------------------------------------------
    def path_between_points(
        self, pipe_a: str, offset_a_m: float, pipe_b: str, offset_b_m: float
    ) -> tuple[PathLeg, ...] | None:
        """Shortest path along the pipes between two chainage points.

        Returns the legs (pipe id, length in that pipe) in travel order, an empty tuple for
        coincident points, or ``None`` when the points are not connected.
        """
        a, b = self.pipe(pipe_a), self.pipe(pipe_b)
        if pipe_a == pipe_b:
            length = abs(offset_b_m - offset_a_m)
            return (PathLeg(pipe_a, length),) if length > 0 else ()
        # Start from both ends of pipe A; finish at both ends of pipe B.
        starts = {a.from_node: offset_a_m, a.to_node: a.length_m - offset_a_m}
        distances, previous = self._dijkstra(starts)
        best: tuple[float, str] | None = None
        for end_node, tail in ((b.from_node, offset_b_m), (b.to_node, b.length_m - offset_b_m)):
            if end_node in distances:
                total = distances[end_node] + tail
                if best is None or total < best[0]:
                    best = (total, end_node)
        if best is None:
            return None
        legs: list[PathLeg] = []
        node = best[1]
        while node in previous:
            pipe_id, node_before = previous[node]
            legs.append(PathLeg(pipe_id, self.pipe(pipe_id).length_m))
            node = node_before
        legs.append(PathLeg(pipe_a, starts[node]))
        legs.reverse()
        tail = offset_b_m if best[1] == b.from_node else b.length_m - offset_b_m
        legs.append(PathLeg(pipe_b, tail))
        return tuple(leg for leg in legs if leg.length_m > 0)

    def path_between_sensors(self, sensor_a: str, sensor_b: str) -> tuple[PathLeg, ...] | None:
        """Shortest path along the pipes from sensor A to sensor B (see above)."""
        sa, sb = self.sensor(sensor_a), self.sensor(sensor_b)
        return self.path_between_points(sa.pipe_id, sa.offset_m, sb.pipe_id, sb.offset_m)

    def distance_between_sensors_m(self, sensor_a: str, sensor_b: str) -> float:
        """Distance along the pipes between two sensors [m]; ``inf`` if not connected."""
        legs = self.path_between_sensors(sensor_a, sensor_b)
        return math.inf if legs is None else sum(leg.length_m for leg in legs)

    def distance_from_node_m(self, sensor_id: str, node_id: str) -> float:
        """Distance along the pipes from a node to a sensor [m]; ``inf`` if not connected."""
        sensor = self.sensor(sensor_id)
        distances, _ = self._dijkstra({node_id: 0.0})
        pipe = self.pipe(sensor.pipe_id)
        candidates = [
            distances[pipe.from_node] + sensor.offset_m if pipe.from_node in distances else math.inf,
            distances[pipe.to_node] + pipe.length_m - sensor.offset_m
            if pipe.to_node in distances
            else math.inf,
        ]
        return min(candidates)

    def travel_time_s(self, legs: Iterable[PathLeg], default_wave_speed_m_s: float) -> float:
        """Travel time along legs with each pipe's wave speed [s] (default where unknown)."""
        total = 0.0
        for leg in legs:
            speed = self.pipe(leg.pipe_id).wave_speed_m_s or default_wave_speed_m_s
            total += leg.length_m / speed
        return total

    def _adjacency(self) -> dict[str, list[tuple[str, str, float]]]:
        adjacency: dict[str, list[tuple[str, str, float]]] = {}
        for p in self.pipes:
            adjacency.setdefault(p.from_node, []).append((p.to_node, p.id, p.length_m))
            adjacency.setdefault(p.to_node, []).append((p.from_node, p.id, p.length_m))
        return adjacency

    def _dijkstra(
        self, starts: dict[str, float]
    ) -> tuple[dict[str, float], dict[str, tuple[str, str]]]:
        """Shortest distances from several start nodes with initial offsets."""
        adjacency = self._adjacency()
        distances: dict[str, float] = {}
        previous: dict[str, tuple[str, str]] = {}
        heap = [(d, n) for n, d in starts.items()]
        heapq.heapify(heap)
        best = dict(starts)
        while heap:
            d, node = heapq.heappop(heap)
            if node in distances:
                continue
            distances[node] = d
            for neighbour, pipe_id, length in adjacency.get(node, []):
                nd = d + length
                if neighbour not in distances and nd < best.get(neighbour, math.inf):
                    best[neighbour] = nd
                    previous[neighbour] = (pipe_id, node)
                    heapq.heappush(heap, (nd, neighbour))
        return distances, previous
