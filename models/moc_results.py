"""Results of an MOC run: probe traces, node flows, pump histories, envelopes, cavities."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from models.steady import SteadyState

__all__ = ["Probe", "Discretisation", "PipeEnvelope", "CavityEvent", "SimulationResult"]


@dataclass(frozen=True)
class Probe:
    """A point where the head is recorded every step: (pipe id, offset from its from_node)."""

    name: str
    pipe_id: str
    offset_m: float


@dataclass(frozen=True)
class Discretisation:
    """How the pipes were cut into reaches for one time step.

    Attributes
    ----------
    time_step_s : float
        Global time step [s].
    reaches : dict
        Number of reaches per pipe [-].
    wave_speed_m_s : dict
        Wave speed used per pipe after fitting whole reaches [m/s].
    largest_adjustment : float
        Largest relative change of a wave speed |a' - a| / a [-].
    largest_adjustment_pipe : str
        The pipe where it occurs.
    """

    time_step_s: float
    reaches: dict
    wave_speed_m_s: dict
    largest_adjustment: float
    largest_adjustment_pipe: str


@dataclass(frozen=True, eq=False)
class PipeEnvelope:
    """Extreme heads and pressures along one pipe over a run (at every computing point)."""

    pipe_id: str
    offsets_m: np.ndarray
    elevation_m: np.ndarray
    max_head_m: np.ndarray
    min_head_m: np.ndarray
    max_pressure_pa: np.ndarray
    min_pressure_pa: np.ndarray


@dataclass(frozen=True)
class CavityEvent:
    """Vapour cavities at one computing point during a run.

    ``last_collapsed_s`` is NaN when the cavity was still open at the end of the run.
    """

    pipe_id: str
    offset_m: float
    first_formed_s: float
    last_collapsed_s: float
    max_volume_m3: float
    openings: int


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """Everything one run produced (SI units, times from the start of the run).

    Attributes
    ----------
    times_s : numpy.ndarray
        Model times, one per step [s].
    probe_names : tuple of str
    probe_heads_m : numpy.ndarray
        Head at each probe, shape (steps + 1, probes) [m].
    node_ids : tuple of str
    node_outflow_m3_s : numpy.ndarray
        Flow leaving the network at each node (into a reservoir, through an end valve or
        an orifice, demand; negative where a sump feeds the network), (steps + 1, nodes).
    pump_ids : tuple of str
    pump_speed_ratio, pump_flow_m3_s : numpy.ndarray
        Speed per unit [-] and station flow [m^3/s] per step, (steps + 1, pumps).
    envelopes : tuple of PipeEnvelope
    cavities : tuple of CavityEvent
    steady : SteadyState
    discretisation : Discretisation
    point_pipe_ids, point_offsets_m : numpy.ndarray
        Pipe and offset of every computing point (columns of the recorded arrays).
    open_cavity_volume_m3 : float
        Vapour volume still open at the end of the run [m^3].
    recorded_times_s, recorded_heads_m, recorded_flows_m3_s : numpy.ndarray or None
        Heads and flows at every computing point every ``record_every`` steps.
    vessel_gas_volume_m3, vessel_capacity_m3 : dict
        Surge vessel id -> gas volume per step [m^3] (its inflow is its node outflow), and
        the vessel's whole volume [m^3].
    air_volume_m3 : dict
        Air valve id -> volume of the air pocket at it per step [m^3] (0 while shut).
    """

    times_s: np.ndarray
    probe_names: tuple
    probe_heads_m: np.ndarray
    node_ids: tuple
    node_outflow_m3_s: np.ndarray
    pump_ids: tuple
    pump_speed_ratio: np.ndarray
    pump_flow_m3_s: np.ndarray
    envelopes: tuple
    cavities: tuple
    steady: SteadyState
    discretisation: Discretisation
    point_pipe_ids: np.ndarray
    point_offsets_m: np.ndarray
    open_cavity_volume_m3: float = 0.0
    recorded_times_s: np.ndarray | None = None
    recorded_heads_m: np.ndarray | None = None
    recorded_flows_m3_s: np.ndarray | None = None
    vessel_gas_volume_m3: dict = field(default_factory=dict)
    vessel_capacity_m3: dict = field(default_factory=dict)
    air_volume_m3: dict = field(default_factory=dict)

    def drained_vessels(self) -> list[tuple[str, float]]:
        """Surge vessels whose gas filled them, with the first such time [s]: gas entered
        the main, which the model does not follow (its results after that time are not
        valid near the vessel; a larger vessel or more water in it is needed)."""
        drained = []
        for vessel_id, volume in self.vessel_gas_volume_m3.items():
            full = np.flatnonzero(volume >= self.vessel_capacity_m3[vessel_id])
            if full.size:
                drained.append((vessel_id, float(self.times_s[full[0]])))
        return drained

    def probe_head(self, name: str) -> np.ndarray:
        """Head trace at one probe [m]."""
        try:
            return self.probe_heads_m[:, self.probe_names.index(name)]
        except ValueError:
            raise KeyError(f"unknown probe {name!r}; probes: {list(self.probe_names)}") from None

    def probe_heads_at(self, times_s: np.ndarray) -> np.ndarray:
        """Probe heads resampled onto given times by linear interpolation, (times, probes)."""
        times = np.asarray(times_s, dtype=float)
        return np.column_stack(
            [np.interp(times, self.times_s, self.probe_heads_m[:, j])
             for j in range(len(self.probe_names))]
        ) if self.probe_names else np.zeros((times.size, 0))

    def envelope(self, pipe_id: str) -> PipeEnvelope:
        """Envelope of one pipe."""
        for env in self.envelopes:
            if env.pipe_id == pipe_id:
                return env
        raise KeyError(f"unknown pipe {pipe_id!r}")

    def node_outflow(self, node_id: str) -> np.ndarray:
        """Outflow history at one node [m^3/s]."""
        return self.node_outflow_m3_s[:, self.node_ids.index(node_id)]
