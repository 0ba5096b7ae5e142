"""Pipe networks for the MOC engine: fluid, pipes and boundary nodes (pure data, SI units).

A :class:`Network` holds pipes and nodes. Each node is one of the boundary kinds below; its
kind decides how many pipes may meet there. Heads are piezometric [m] (elevation plus
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

from models.pumps import PumpOperation, PumpUnit

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


def _require_positive(owner: str, name: str, value: float) -> None:
    if not (isinstance(value, (int, float)) and value > 0 and math.isfinite(value)):
        raise ValueError(f"{owner}.{name} must be a positive finite number, got {value!r}")


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
        _require_positive("Fluid", "density_kg_m3", self.density_kg_m3)
        _require_positive("Fluid", "kinematic_viscosity_m2_s", self.kinematic_viscosity_m2_s)
        _require_positive("Fluid", "gravity_m_s2", self.gravity_m_s2)
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
            _require_positive(f"Pipe {self.id!r}", name, getattr(self, name))
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
class AirVessel:
    """Surge vessel (air chamber): a closed tank on the line whose trapped gas cushions surges.

    At the node the pipes share one head, as at a junction; the net inflow fills the vessel
    through its connection and compresses the gas polytropically, p_abs V^m = constant.
    In the steady state the vessel carries no flow.

    Parameters
    ----------
    id : str
    gas_volume_m3 : float
        Gas volume in the steady state [m^3].
    vessel_volume_m3 : float
        Whole vessel volume [m^3]; gas that would fill it means the vessel drained and
        gas entered the main (the result reports it; the model does not carry on past it).
    elevation_m : float
        Elevation of the pipe connection [m].
    liquid_level_m : float or None
        Elevation of the liquid surface, held constant [m] (default the connection's): the
        level swing is small next to the heads at a pressurised vessel (common simplification).
    polytropic_exponent : float
        m in p V^m = const: 1.0 isothermal, 1.4 adiabatic; 1.2 by default (common practice
        for surge vessels).
    inflow_loss_s2_m5, outflow_loss_s2_m5 : float
        Head loss R Q|Q| of the connection for flow into and out of the vessel [s^2/m^5] (a
        larger inflow loss, e.g. a differential orifice, damps the up-surge).
    atmospheric_pressure_pa : float
        Ambient pressure [Pa] for the gas's absolute pressure; 101325 Pa, the standard
        atmosphere at sea level (ISO 2533).
    """

    id: str
    gas_volume_m3: float
    vessel_volume_m3: float
    elevation_m: float = 0.0
    liquid_level_m: float | None = None
    polytropic_exponent: float = 1.2
    inflow_loss_s2_m5: float = 0.0
    outflow_loss_s2_m5: float = 0.0
    atmospheric_pressure_pa: float = 101325.0

    def __post_init__(self) -> None:
        for name in ("gas_volume_m3", "vessel_volume_m3", "atmospheric_pressure_pa"):
            _require_positive(f"AirVessel {self.id!r}", name, getattr(self, name))
        if self.gas_volume_m3 >= self.vessel_volume_m3:
            raise ValueError(f"AirVessel {self.id!r}: gas_volume_m3 {self.gas_volume_m3} must be "
                             f"below vessel_volume_m3 {self.vessel_volume_m3} (some liquid in it)")
        if not 1.0 <= self.polytropic_exponent <= 1.4:
            raise ValueError(f"AirVessel {self.id!r}.polytropic_exponent must lie between 1.0 "
                             f"(isothermal) and 1.4 (adiabatic), got {self.polytropic_exponent!r}")
        for name in ("inflow_loss_s2_m5", "outflow_loss_s2_m5"):
            if not getattr(self, name) >= 0.0:
                raise ValueError(f"AirVessel {self.id!r}.{name} must be >= 0")

    @property
    def surface_elevation_m(self) -> float:
        """Elevation of the liquid surface [m]."""
        return self.elevation_m if self.liquid_level_m is None else self.liquid_level_m

    def gas_head_offset_m(self, fluid: "Fluid") -> float:
        """Absolute gas head minus the liquid surface's piezometric head [m]:
        p_atm/(rho g) - z_surface."""
        return self.atmospheric_pressure_pa / (fluid.density_kg_m3 * fluid.gravity_m_s2) - self.surface_elevation_m


@dataclass(frozen=True)
class AirValve:
    """Air inlet and release valve at a node (usually a high point of a main).

    Shut while the pressure there is above atmospheric; below it, air enters through the
    inlet and forms a pocket at the node, which leaves again through the outlet as the
    pressure rises (the valve shuts when the last air is out). Any number of pipes.

    Parameters
    ----------
    id : str
    elevation_m : float
        Elevation of the valve [m]; the pipe's pressure there is gauge zero when H = z.
    inlet_area_m2, outlet_area_m2 : float
        Effective areas (discharge coefficient times orifice area) for air in and out
        [m^2]; a small outlet cushions the closure.
    atmospheric_pressure_pa : float
        101325 Pa, the standard atmosphere at sea level (ISO 2533).
    air_temperature_k : float
        Temperature of the air inside and outside [K] (isothermal pocket; 288.15 K, ISO 2533).
    """

    id: str
    elevation_m: float
    inlet_area_m2: float
    outlet_area_m2: float
    atmospheric_pressure_pa: float = 101325.0
    air_temperature_k: float = 288.15

    def __post_init__(self) -> None:
        for name in ("inlet_area_m2", "outlet_area_m2", "atmospheric_pressure_pa", "air_temperature_k"):
            _require_positive(f"AirValve {self.id!r}", name, getattr(self, name))


@dataclass(frozen=True)
class DeadEnd:
    """Closed pipe end (exactly one pipe)."""

    id: str
    elevation_m: float = 0.0


@dataclass(frozen=True)
class Burst:
    """Junction with an orifice to atmosphere that opens (a burst or a leak).

    Parameters
    ----------
    effective_area_m2 : float
        Discharge coefficient times orifice area, fully open [m^2].
    start_time_s : float
        When the opening starts [s]; <= 0 for a leak present in the steady state.
    opening_time_s : float
        Time to open fully, linearly in area [s]; 0 for a sudden burst.
    """

    id: str
    effective_area_m2: float
    start_time_s: float = 0.0
    opening_time_s: float = 0.0
    elevation_m: float = 0.0

    def opening(self, times_s: np.ndarray) -> np.ndarray:
        """Open fraction of the orifice area per time [-]."""
        if self.opening_time_s <= 0:
            return (times_s >= self.start_time_s).astype(float)
        return np.clip((times_s - self.start_time_s) / self.opening_time_s, 0.0, 1.0)


@dataclass(frozen=True)
class ValveMotion:
    """Relative valve opening tau(t) (1 = fully open, 0 = closed), piecewise linear.

    tau scales the flow of the fully open valve: Q = tau Cd A0 sqrt(2 g dH).
    """

    times_s: tuple[float, ...] = (0.0,)
    openings: tuple[float, ...] = (1.0,)

    def __post_init__(self) -> None:
        if len(self.times_s) != len(self.openings) or not self.times_s:
            raise ValueError("ValveMotion times and openings must be non-empty, equal length")
        if np.any(np.diff(self.times_s) < 0):
            raise ValueError("ValveMotion times must be non-decreasing")
        if min(self.openings) < 0 or max(self.openings) > 1:
            raise ValueError(f"ValveMotion openings must lie in [0, 1], got {self.openings}")

    @classmethod
    def constant(cls, opening: float = 1.0) -> "ValveMotion":
        """Valve held at one opening."""
        return cls((0.0,), (opening,))

    @classmethod
    def closure(
        cls,
        start_time_s: float,
        stroke_time_s: float,
        exponent: float = 1.0,
        initial_opening: float = 1.0,
        points: int = 41,
    ) -> "ValveMotion":
        """Closure law tau = tau0 (1 - t/Tc)^Em over the stroke.

        Notes
        -----
        Power-law closure curve (Wylie & Streeter 1993, sec. 3.5, from memory). Em = 1 is a
        linear closure in tau; Em > 1 closes most of the flow late in the stroke.
        """
        if stroke_time_s <= 0:
            return cls((start_time_s, start_time_s), (initial_opening, 0.0))
        fraction = np.linspace(0.0, 1.0, points)
        taus = initial_opening * (1.0 - fraction) ** exponent
        return cls(tuple(start_time_s + fraction * stroke_time_s), tuple(taus))

    @classmethod
    def from_curve(
        cls,
        start_time_s: float,
        stroke_time_s: float,
        stroke_fractions: tuple[float, ...],
        openings: tuple[float, ...],
    ) -> "ValveMotion":
        """Closure (or opening) curve given as opening against fraction of the stroke."""
        fractions = np.asarray(stroke_fractions, dtype=float)
        if fractions[0] != 0.0 or fractions[-1] != 1.0 or np.any(np.diff(fractions) < 0):
            raise ValueError("stroke_fractions must rise from 0 to 1")
        return cls(tuple(start_time_s + fractions * stroke_time_s), tuple(openings))

    def opening(self, times_s: np.ndarray) -> np.ndarray:
        """tau per time [-]; a step where two table times coincide."""
        times = np.asarray(self.times_s)
        taus = np.asarray(self.openings)
        index = np.searchsorted(times, times_s, side="right") - 1
        index = np.clip(index, 0, len(times) - 1)
        nxt = np.clip(index + 1, 0, len(times) - 1)
        span = times[nxt] - times[index]
        weight = np.where(span > 0, (times_s - times[index]) / np.where(span > 0, span, 1.0), 0.0)
        weight = np.clip(weight, 0.0, 1.0)
        return taus[index] + weight * (taus[nxt] - taus[index])


@dataclass(frozen=True)
class Valve:
    """A valve at a pipe end (one pipe) or in line (two pipes).

    Parameters
    ----------
    open_area_m2 : float
        Discharge coefficient times area of the fully open valve, Cd A0 [m^2].
    motion : ValveMotion
        Opening over time.
    outlet_head_m : float or None
        End valve only: head of the receiving reservoir [m]; ``None`` discharges to
        atmosphere at the valve's elevation (no reverse flow: a closed end then).
    """

    id: str
    open_area_m2: float
    motion: ValveMotion = field(default_factory=ValveMotion)
    outlet_head_m: float | None = None
    elevation_m: float = 0.0


@dataclass(frozen=True)
class PumpStation:
    """Identical pumps in parallel with a check valve each.

    One pipe: the pumps lift from a sump at ``suction_head_m`` into the pipe that starts here.
    Two pipes: an in-line booster from the pipe ending here to the pipe starting here.

    Parameters
    ----------
    unit : PumpUnit
    operation : PumpOperation
        Speed schedule and trip (applies to every running unit).
    units_running : int
        Number of identical units in parallel [-].
    suction_head_m : float or None
        Sump head [m] (one-pipe stations).
    check_valve : bool
        A check valve closes on flow reversal (ideal, instantaneous) and opens when the
        pump head exceeds the head across it.
    """

    id: str
    unit: PumpUnit
    operation: PumpOperation = field(default_factory=PumpOperation)
    units_running: int = 1
    suction_head_m: float | None = None
    check_valve: bool = True
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
