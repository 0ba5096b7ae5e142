"""Devices at network nodes for the MOC engine: valves, pump stations, bursts and surge
protection (surge vessels, air valves); pure data, SI units. :mod:`models.network` holds the
fluid, the pipes, the plain nodes and the network, and re-exports these.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from models.pumps import PumpOperation, PumpUnit

if TYPE_CHECKING:
    from models.network import Fluid

__all__ = ["AirVessel", "AirValve", "Burst", "ValveMotion", "Valve", "PumpStation", "require_positive"]


def require_positive(owner: str, name: str, value: float) -> None:
    """Refuse a value that is not a positive finite number, naming ``owner.name``."""
    if not (isinstance(value, (int, float)) and value > 0 and math.isfinite(value)):
        raise ValueError(f"{owner}.{name} must be a positive finite number, got {value!r}")


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
            require_positive(f"AirVessel {self.id!r}", name, getattr(self, name))
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
            require_positive(f"AirValve {self.id!r}", name, getattr(self, name))


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
