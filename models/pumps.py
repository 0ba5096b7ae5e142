"""Centrifugal pumps for the MOC engine: homologous (Suter) characteristics and pump units.

A pump's behaviour in all four quadrants (pumping, energy dissipation, turbining, reverse
rotation) is described by the Suter functions of the angle x = pi + atan2(v, alpha):

    WH(x) = h / (alpha^2 + v^2),      WB(x) = beta / (alpha^2 + v^2)

with per-unit head h = H/H_R, flow v = Q/Q_R, speed alpha = N/N_R and hydraulic torque
beta = T/T_R. The engine interpolates both linearly on a uniform table over [0, 2 pi].

>>> chars = typical_radial_characteristics()
>>> round(float(chars.head_ratio(1.0, 1.0)), 3), round(float(chars.torque_ratio(1.0, 1.0)), 3)
(1.0, 1.0)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicSpline

__all__ = [
    "SuterCharacteristics",
    "typical_radial_characteristics",
    "characteristics_with_head_curve",
    "PumpUnit",
    "PumpOperation",
    "suter_angle",
]

TABLE_POINTS = 721  # 0.5 degree steps over [0, 2 pi], both ends included

# Anchor points (degrees, WH, WB) of a typical radial-flow pump of low specific speed
# (Ns about 25, SI units). The shape is recalled from memory of the published four-quadrant
# curves (Wylie & Streeter 1993; Chaudhry 2014), not copied from a table: only the rated
# point (225 deg: WH = WB = 0.5) and the pump-zone head curve are exact by construction.
_TYPICAL_ANCHORS_DEG = (
    (0.0, 0.45, -0.50),
    (45.0, 0.55, 0.12),
    (90.0, 1.00, 0.75),
    (135.0, 1.15, 0.70),
    (180.0, 1.25, 0.55),
    (202.5, None, 0.52),
    (225.0, 0.50, 0.50),
    (247.5, None, 0.25),
    (270.0, -0.60, -0.35),
    (315.0, -0.60, -0.60),
    (360.0, 0.45, -0.50),
)
_TYPICAL_SHUTOFF_HEAD = 1.25  # per-unit shut-off head, typical radial pump (common practice)


def suter_angle(speed_ratio, flow_ratio):
    """Suter angle x = pi + atan2(v, alpha) in [0, 2 pi] [rad].

    References
    ----------
    .. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, 1993, sec. 4.4
       (from memory).
    """
    return math.pi + np.arctan2(flow_ratio, speed_ratio)


def _typical_pump_zone_head(v):
    """Per-unit head h(v) at rated speed of the typical pump: 1.25 - 0.25 v^2."""
    return _TYPICAL_SHUTOFF_HEAD - (_TYPICAL_SHUTOFF_HEAD - 1.0) * v**2


@dataclass(frozen=True, eq=False)
class SuterCharacteristics:
    """Tabulated Suter functions WH(x), WB(x) on a uniform grid over [0, 2 pi].

    Parameters
    ----------
    angles_rad : numpy.ndarray
        Uniform grid from 0 to 2 pi inclusive [rad].
    head : numpy.ndarray
        WH at the grid angles [-].
    torque : numpy.ndarray
        WB at the grid angles [-].
    description : str
        Where the data come from.
    """

    angles_rad: np.ndarray
    head: np.ndarray
    torque: np.ndarray
    description: str

    def __post_init__(self) -> None:
        n = len(self.angles_rad)
        if n < 3 or len(self.head) != n or len(self.torque) != n:
            raise ValueError("angles_rad, head and torque must have the same length >= 3")
        if not np.allclose(np.diff(self.angles_rad), 2 * math.pi / (n - 1)):
            raise ValueError("angles_rad must be a uniform grid from 0 to 2 pi inclusive")

    def head_ratio(self, speed_ratio, flow_ratio):
        """Per-unit head h = WH(x) (alpha^2 + v^2) [-]."""
        x = suter_angle(speed_ratio, flow_ratio)
        return np.interp(x, self.angles_rad, self.head) * (speed_ratio**2 + flow_ratio**2)

    def torque_ratio(self, speed_ratio, flow_ratio):
        """Per-unit hydraulic torque beta = WB(x) (alpha^2 + v^2) [-]."""
        x = suter_angle(speed_ratio, flow_ratio)
        return np.interp(x, self.angles_rad, self.torque) * (speed_ratio**2 + flow_ratio**2)


def _grid() -> np.ndarray:
    return np.linspace(0.0, 2.0 * math.pi, TABLE_POINTS)


def _pump_zone_values(x: np.ndarray, head_of_v) -> np.ndarray:
    v = np.tan(x - math.pi)
    return head_of_v(v) / (1.0 + v**2)


def typical_radial_characteristics() -> SuterCharacteristics:
    """Approximate four-quadrant characteristics of a typical radial-flow pump.

    Returns
    -------
    SuterCharacteristics
        Periodic cubic spline through anchor points of WH and WB; in the normal pump
        zone WH follows h = 1.25 - 0.25 v^2 at rated speed.

    Notes
    -----
    The anchor points are recalled from memory of the published curves for a pump of
    specific speed about 25 (SI) and are marked so; they satisfy WH = WB = 0.5 at the rated
    point (x = 5 pi / 4), a shut-off head of 1.25 and torque of 0.55 (common practice for
    radial pumps), runaway in the turbine zone near x = 38 deg. Use the manufacturer's
    four-quadrant data where the transient matters beyond the first check-valve closure.

    References
    ----------
    .. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, Prentice Hall, 1993,
       sec. 4.4 (from memory).
    .. [2] M. H. Chaudhry, *Applied Hydraulic Transients*, 3rd ed., Springer, 2014, ch. 5
       (from memory).
    """
    grid = _grid()
    pump_zone = lambda deg: float(_pump_zone_values(np.radians(deg), _typical_pump_zone_head))
    x_deg, wh, wb = [], [], []
    for deg, h, b in _TYPICAL_ANCHORS_DEG:
        x_deg.append(deg)
        wh.append(pump_zone(deg) if h is None else h)
        wb.append(b)
    xs = np.radians(x_deg)
    head = CubicSpline(xs, wh, bc_type="periodic")(grid)
    torque = CubicSpline(xs, wb, bc_type="periodic")(grid)
    zone = (grid >= math.pi) & (grid <= np.radians(240.0))
    head[zone] = _pump_zone_values(grid[zone], _typical_pump_zone_head)
    return SuterCharacteristics(grid, head, torque, "typical radial pump, Ns ~ 25 SI (from memory)")


def characteristics_with_head_curve(
    flows_pu: np.ndarray, heads_pu: np.ndarray, base: SuterCharacteristics | None = None
) -> SuterCharacteristics:
    """Suter characteristics whose pump zone follows a measured head–flow curve.

    Parameters
    ----------
    flows_pu, heads_pu : array_like
        Points of the head curve at rated speed, per unit of the rated flow and head [-];
        at least three points, flows >= 0.
    base : SuterCharacteristics, optional
        Characteristics for the other zones (default :func:`typical_radial_characteristics`).

    Notes
    -----
    A quadratic h(v) = c0 + c1 v + c2 v^2 is fitted by least squares; at rated speed the
    homologous laws make WH(x) = h(v) / (1 + v^2) with v = tan(x - pi) for the normal zone
    x in [pi, pi + atan(v_max)]. Over 15 deg on either side the base curve is shifted
    linearly onto the fitted one so that WH stays continuous.
    """
    flows = np.asarray(flows_pu, dtype=float)
    heads = np.asarray(heads_pu, dtype=float)
    if flows.shape != heads.shape or flows.size < 3:
        raise ValueError(
            f"a pump head curve needs at least 3 (flow, head) points, got {flows.size}; "
            "give shut-off, rated and a high-flow point"
        )
    if np.any(flows < 0) or np.any(heads <= 0):
        raise ValueError("head-curve flows must be >= 0 and heads > 0; check the pump curve units")
    base = base or typical_radial_characteristics()
    c2, c1, c0 = np.polyfit(flows, heads, 2)
    curve = lambda v: c0 + c1 * v + c2 * v**2
    grid = base.angles_rad
    head = base.head.copy()
    x_end = math.pi + math.atan(float(flows.max()))
    blend = np.radians(15.0)
    zone = (grid >= math.pi) & (grid <= x_end)
    head[zone] = _pump_zone_values(grid[zone], curve)
    start_offset = float(_pump_zone_values(np.array(math.pi), curve)) - np.interp(math.pi, grid, base.head)
    end_offset = float(_pump_zone_values(np.array(x_end), curve)) - np.interp(x_end, grid, base.head)
    before = (grid >= math.pi - blend) & (grid < math.pi)
    head[before] = base.head[before] + start_offset * (grid[before] - (math.pi - blend)) / blend
    after = (grid > x_end) & (grid <= x_end + blend)
    head[after] = base.head[after] + end_offset * (1.0 - (grid[after] - x_end) / blend)
    return SuterCharacteristics(grid, head, base.torque.copy(), "head curve fitted; " + base.description)


@dataclass(frozen=True)
class PumpUnit:
    """One pump with its motor: rated point, inertia and head curve.

    Parameters
    ----------
    rated_flow_m3_s : float
        Flow at the rated (best-efficiency) point [m^3/s].
    rated_head_m : float
        Head at the rated point [m].
    rated_speed_rpm : float
        Rated speed [1/min].
    rated_efficiency : float
        Efficiency at the rated point [-], gives the rated torque.
    inertia_kg_m2 : float
        Moment of inertia of pump, motor and entrained water [kg m^2].
    curve_flows_m3_s, curve_heads_m : tuple of float
        Head–flow curve at rated speed (at least three points), or empty to use the
        typical curve scaled to the rated point.
    """

    rated_flow_m3_s: float
    rated_head_m: float
    rated_speed_rpm: float
    rated_efficiency: float
    inertia_kg_m2: float
    curve_flows_m3_s: tuple[float, ...] = ()
    curve_heads_m: tuple[float, ...] = ()

    def __post_init__(self) -> None:
        for name in ("rated_flow_m3_s", "rated_head_m", "rated_speed_rpm", "inertia_kg_m2"):
            value = getattr(self, name)
            if not (value > 0 and math.isfinite(value)):
                raise ValueError(f"PumpUnit.{name} must be positive, got {value!r}")
        if not 0.0 < self.rated_efficiency <= 1.0:
            raise ValueError(
                f"PumpUnit.rated_efficiency must be in (0, 1], got {self.rated_efficiency!r} "
                "(give a fraction, not a percentage)"
            )

    @property
    def rated_angular_speed_rad_s(self) -> float:
        """Rated angular speed [rad/s]."""
        return self.rated_speed_rpm * 2.0 * math.pi / 60.0

    def rated_torque_n_m(self, density_kg_m3: float, gravity_m_s2: float) -> float:
        """Hydraulic torque at the rated point, T_R = rho g Q_R H_R / (eta_R omega_R) [N m]."""
        power_w = density_kg_m3 * gravity_m_s2 * self.rated_flow_m3_s * self.rated_head_m
        return power_w / (self.rated_efficiency * self.rated_angular_speed_rad_s)

    def characteristics(self) -> SuterCharacteristics:
        """Suter characteristics of this unit (head curve fitted where given)."""
        if not self.curve_flows_m3_s:
            return typical_radial_characteristics()
        return characteristics_with_head_curve(
            np.asarray(self.curve_flows_m3_s) / self.rated_flow_m3_s,
            np.asarray(self.curve_heads_m) / self.rated_head_m,
        )


@dataclass(frozen=True)
class PumpOperation:
    """What the motor does: a prescribed speed schedule, optionally a trip.

    Parameters
    ----------
    speed_times_s, speed_ratios : tuple of float
        Prescribed speed per unit of the rated speed, piecewise linear in time (held
        constant outside the table) [s], [-].
    trip_time_s : float or None
        From this time on the motor gives no torque and the set runs down on its inertia.
    """

    speed_times_s: tuple[float, ...] = (0.0,)
    speed_ratios: tuple[float, ...] = (1.0,)
    trip_time_s: float | None = None

    def __post_init__(self) -> None:
        if len(self.speed_times_s) != len(self.speed_ratios) or not self.speed_times_s:
            raise ValueError("speed_times_s and speed_ratios must be non-empty and of equal length")
        if np.any(np.diff(self.speed_times_s) < 0):
            raise ValueError("speed_times_s must be non-decreasing")
        if min(self.speed_ratios) < 0:
            raise ValueError("speed_ratios must be >= 0 (reverse drive is not supported)")

    @classmethod
    def running(cls, speed_ratio: float = 1.0) -> "PumpOperation":
        """Runs at constant speed throughout."""
        return cls((0.0,), (speed_ratio,))

    @classmethod
    def trip(cls, time_s: float, speed_ratio: float = 1.0) -> "PumpOperation":
        """Runs at constant speed, loses power at ``time_s`` and runs down."""
        return cls((0.0,), (speed_ratio,), trip_time_s=time_s)

    @classmethod
    def start(cls, time_s: float, ramp_s: float, speed_ratio: float = 1.0) -> "PumpOperation":
        """Stands still, then ramps linearly to ``speed_ratio`` over ``ramp_s`` seconds."""
        if ramp_s < 0:
            raise ValueError(f"ramp_s must be >= 0, got {ramp_s!r}")
        return cls((0.0, time_s, time_s + ramp_s), (0.0, 0.0, speed_ratio))

    def speed_command(self, times_s: np.ndarray) -> np.ndarray:
        """Prescribed speed per step; -1 marks steps of free run-down after a trip [-]."""
        command = np.interp(times_s, self.speed_times_s, self.speed_ratios)
        if self.trip_time_s is not None:
            command = np.where(times_s >= self.trip_time_s, -1.0, command)
        return command
