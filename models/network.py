"""Pipe networks for the MOC engine: fluid, pipes and boundary nodes (pure data, SI units).

A :class:`Network` holds pipes and nodes. Each node is one of the boundary kinds below or a
device of :mod:`models.network_devices` (valves, pump stations, bursts, surge vessels, air
valves; re-exported here); its kind decides how many pipes may meet there. Heads are piezometric [m] (elevation plus
pressure head); pressure follows as p = rho g (H - z).

>>> net = Network(
...     fluid=Fluid(density_kg_m3=999.7, kinematic_viscosity_m2_s=1.3e-6, vapour_head_m=-10.2),
...     pipes=(Pipe("P1", "R", "V", 1000.0, 0.5, 1000.0),),
...     nodes=(Reservoir("R", head_m=50.0), Valve("V", open_area_m2=0.05)),
... )
>>> [n.id for n in net.nodes_at_pipe("P1")]
['R', 'V']
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from models.network_devices import (AirValve, AirVessel, Burst, PumpStation, Valve, ValveMotion,
                                     require_positive)

__all__ = [
    "Fluid",
    "Pipe",
    "Reservoir",
    "HeadSeries",
    "Junction",
    "DeadEnd",
    "AirVessel",
    "AirValve",
    "Burst",
    "ValveMotion",
    "Valve",
    "PumpStation",
    "Network",
    "Node",
]


@dataclass(frozen=True)
class Fluid:
    """The liquid in the pipes.

    Parameters
    ----------
    density_kg_m3 : float
        Density [kg/m^3].
    kinematic_viscosity_m2_s : float
        Kinematic viscosity [m^2/s], for Reynolds numbers.
    vapour_head_m : float
        Vapour pressure as gauge pressure head, (p_v - p_atm)/(rho g) [m]; about -10.2 m
        for cold water at sea level. Cavities form where H - z falls below it.
    gravity_m_s2 : float
        Acceleration of gravity [m/s^2] (standard gravity by default, NIST SP 811).
    """

    density_kg_m3: float
    kinematic_viscosity_m2_s: float
    vapour_head_m: float
    gravity_m_s2: float = 9.80665

    def __post_init__(self) -> None:
        require_positive("Fluid", "density_kg_m3", self.density_kg_m3)
        require_positive("Fluid", "kinematic_viscosity_m2_s", self.kinematic_viscosity_m2_s)
        require_positive("Fluid", "gravity_m_s2", self.gravity_m_s2)
        if not -12.0 < self.vapour_head_m < 0.0:
            raise ValueError(
                f"Fluid.vapour_head_m is the gauge vapour head, between -12 and 0 m; got "
                f"{self.vapour_head_m!r} (give (p_v - p_atm)/(rho g), not an absolute value)"
            )


@dataclass(frozen=True)
class Pipe:
    """A pipe between two nodes.

    Parameters
    ----------
    id, from_node, to_node : str
        Offsets and positive flow run from ``from_node`` to ``to_node``.
    length_m, diameter_m : float
        Length [m] and internal diameter [m].
    wave_speed_m_s : float
        Pressure wave speed [m/s].
    roughness_m : float
        Equivalent sand roughness for Colebrook–White [m].
    friction_factor : float or None
        Darcy factor [-] that overrides Colebrook–White (calibration).
    profile_offsets_m, profile_elevations_m : tuple of float
        Optional elevation profile (offset from ``from_node``, elevation) [m]; without it the
        elevation runs linearly between the two nodes.
    """

    id: str
    from_node: str
    to_node: str
    length_m: float
    diameter_m: float
    wave_speed_m_s: float
    roughness_m: float = 0.0
    friction_factor: float | None = None
    profile_offsets_m: tuple[float, ...] = ()
    profile_elevations_m: tuple[float, ...] = ()

    def __post_init__(self) -> None:
        for name in ("length_m", "diameter_m", "wave_speed_m_s"):
            require_positive(f"Pipe {self.id!r}", name, getattr(self, name))
        if self.roughness_m < 0:
            raise ValueError(f"Pipe {self.id!r}.roughness_m must be >= 0, got {self.roughness_m!r}")
        if self.friction_factor is not None and not 0.0 <= self.friction_factor < 1.0:
            raise ValueError(
                f"Pipe {self.id!r}.friction_factor is a Darcy factor in [0, 1), "
                f"got {self.friction_factor!r}"
            )
        if len(self.profile_offsets_m) != len(self.profile_elevations_m):
            raise ValueError(f"Pipe {self.id!r}: profile offsets and elevations differ in length")
        if self.from_node == self.to_node:
            raise ValueError(f"Pipe {self.id!r} starts and ends at node {self.from_node!r}")

    @property
    def area_m2(self) -> float:
        """Internal cross-section area [m^2]."""
        return math.pi * self.diameter_m**2 / 4.0

    def elevations_at(self, offsets_m: np.ndarray, from_z_m: float, to_z_m: float) -> np.ndarray:
        """Elevation along the pipe at given offsets [m]."""
        xs = [0.0, *self.profile_offsets_m, self.length_m]
        zs = [from_z_m, *self.profile_elevations_m, to_z_m]
        return np.interp(offsets_m, xs, zs)


@dataclass(frozen=True)
class Reservoir:
    """Fixed-head boundary (reservoir, tank, large sump). Any number of pipes."""

    id: str
    head_m: float
    elevation_m: float = 0.0


@dataclass(frozen=True, eq=False)
class HeadSeries:
    """Boundary whose head follows a time series (a measured head at a sensor).

    Heads between samples are interpolated linearly onto the model step and held at the
    first/last sample outside the series. Any number of pipes.
    """

    id: str
    times_s: np.ndarray
    heads_m: np.ndarray
    elevation_m: float = 0.0

    def __post_init__(self) -> None:
        t = np.asarray(self.times_s, dtype=float)
        h = np.asarray(self.heads_m, dtype=float)
        if t.ndim != 1 or t.shape != h.shape or t.size < 1:
            raise ValueError(f"HeadSeries {self.id!r}: times and heads must be 1-D of equal length")
        if np.any(np.diff(t) <= 0) or not np.all(np.isfinite(h)):
            raise ValueError(
                f"HeadSeries {self.id!r}: times must increase strictly and heads be finite; "
                "fill gaps before driving the model"
            )
        object.__setattr__(self, "times_s", t)
        object.__setattr__(self, "heads_m", h)


@dataclass(frozen=True)
class Junction:
    """Common head and continuity of flow where pipes meet; optional constant demand.

    ``loss_coefficient`` K [-]: a local loss K v^2/(2g) between the common head and each
    pipe's end, on that pipe's velocity v (the minor loss of a fitting; common practice).
    """

    id: str
    elevation_m: float = 0.0
    demand_m3_s: float = 0.0
    loss_coefficient: float = 0.0

    def __post_init__(self) -> None:
        if not (self.loss_coefficient >= 0.0 and math.isfinite(self.loss_coefficient)):
            raise ValueError(f"Junction {self.id!r}.loss_coefficient must be >= 0 and finite, "
                             f"got {self.loss_coefficient!r}")

    def connection_resistance(self, pipe: "Pipe", gravity_m_s2: float) -> float:
        """k = K / (2 g A^2) of the pipe's connection: head loss k Q|Q| [s^2/m^5]."""
        return self.loss_coefficient / (2.0 * gravity_m_s2 * pipe.area_m2**2)


@dataclass(frozen=True)
class DeadEnd:
    """Closed pipe end (exactly one pipe)."""

    id: str
    elevation_m: float = 0.0


Node = (Reservoir | HeadSeries | Junction | DeadEnd | AirVessel | AirValve | Burst | Valve
        | PumpStation)

_ALLOWED_PIPE_COUNT = {
    Reservoir: (1, None),
    HeadSeries: (1, None),
    Junction: (1, None),
    DeadEnd: (1, 1),
    AirVessel: (1, None),
    AirValve: (1, None),
    Burst: (1, None),
    Valve: (1, 2),
    PumpStation: (1, 2),
}


@dataclass(frozen=True, eq=False)
class Network:
    """Pipes and nodes of one hydraulic system, with the fluid they carry."""

    fluid: Fluid
    pipes: tuple[Pipe, ...]
    nodes: tuple[Node, ...]
    _pipe_index: dict = field(init=False, repr=False)
    _node_index: dict = field(init=False, repr=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "pipes", tuple(self.pipes))
        object.__setattr__(self, "nodes", tuple(self.nodes))
        pipes = {p.id: p for p in self.pipes}
        nodes = {n.id: n for n in self.nodes}
        if len(pipes) != len(self.pipes) or len(nodes) != len(self.nodes):
            raise ValueError("pipe ids and node ids must each be unique")
        object.__setattr__(self, "_pipe_index", pipes)
        object.__setattr__(self, "_node_index", nodes)
        for pipe in self.pipes:
            for end in (pipe.from_node, pipe.to_node):
                if end not in nodes:
                    raise ValueError(f"pipe {pipe.id!r} refers to unknown node {end!r}")
        for node in self.nodes:
            self._check_node(node)

    def _check_node(self, node: Node) -> None:
        incoming = self.pipes_ending_at(node.id)
        outgoing = self.pipes_starting_at(node.id)
        count = len(incoming) + len(outgoing)
        low, high = _ALLOWED_PIPE_COUNT[type(node)]
        if count < low or (high is not None and count > high):
            allowed = f"{low}" if low == high else f"{low} to {high or 'any number of'}"
            raise ValueError(
                f"{type(node).__name__} {node.id!r} has {count} pipes; it takes {allowed}"
            )
        if isinstance(node, (Valve, PumpStation)) and count == 2 and len(incoming) != 1:
            raise ValueError(
                f"in-line {type(node).__name__} {node.id!r} needs one pipe ending and one "
                "starting there (orient the pipes in the direction of flow)"
            )
        if isinstance(node, PumpStation) and count == 1:
            if not outgoing:
                raise ValueError(
                    f"pump station {node.id!r} must be the from_node of its discharge pipe"
                )
            if node.suction_head_m is None:
                raise ValueError(f"pump station {node.id!r} with one pipe needs suction_head_m")
        if isinstance(node, PumpStation) and node.units_running < 1:
            raise ValueError(f"pump station {node.id!r}: units_running must be >= 1")

    def pipe(self, pipe_id: str) -> Pipe:
        """The pipe with this id."""
        try:
            return self._pipe_index[pipe_id]
        except KeyError:
            raise KeyError(f"unknown pipe {pipe_id!r}; known: {sorted(self._pipe_index)}") from None

    def node(self, node_id: str) -> Node:
        """The node with this id."""
        try:
            return self._node_index[node_id]
        except KeyError:
            raise KeyError(f"unknown node {node_id!r}; known: {sorted(self._node_index)}") from None

    def pipes_ending_at(self, node_id: str) -> tuple[Pipe, ...]:
        """Pipes whose ``to_node`` is this node."""
        return tuple(p for p in self.pipes if p.to_node == node_id)

    def pipes_starting_at(self, node_id: str) -> tuple[Pipe, ...]:
        """Pipes whose ``from_node`` is this node."""
        return tuple(p for p in self.pipes if p.from_node == node_id)

    def nodes_at_pipe(self, pipe_id: str) -> tuple[Node, Node]:
        """(from node, to node) of a pipe."""
        pipe = self.pipe(pipe_id)
        return self.node(pipe.from_node), self.node(pipe.to_node)

    def pipe_elevations(self, pipe_id: str, offsets_m: np.ndarray) -> np.ndarray:
        """Elevation along a pipe at the given offsets [m]."""
        pipe = self.pipe(pipe_id)
        start, end = self.nodes_at_pipe(pipe_id)
        return pipe.elevations_at(offsets_m, start.elevation_m, end.elevation_m)

    def replace(self, pipes=None, nodes=None, fluid=None) -> "Network":
        """A copy with some parts replaced."""
        return Network(
            fluid=fluid or self.fluid,
            pipes=self.pipes if pipes is None else tuple(pipes),
            nodes=self.nodes if nodes is None else tuple(nodes),
        )
