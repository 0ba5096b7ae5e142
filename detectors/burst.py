"""How large a suspected burst is, from the first pressure drop it sends along the main.

A sudden opening of an orifice in the run of a pipe draws a flow Q_b from the water column,
half from each side, so each side sees a flow change Q_b / 2 and, by Joukowsky's relation, a
head drop

    dH = B Q_b / 2,    B = a / (g A)

(the tee of a pipe and an orifice in Wylie & Streeter, Fluid Transients in Systems, 1993,
ch. 3; from memory). The orifice then passes Q_b = C_d A_o sqrt(2 g h) at the pressure head h
left after the drop, so the effective area C_d A_o follows as well. Measured at a sensor near
the source before reflections return, this sizes the opening at least: an opening slower than
the travel time to the sensor, or friction on the way, gives a smaller first drop (the
estimate is then low). Whether a main has burst is for a person to confirm on site.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["BurstSize", "burst_size_from_drop"]


@dataclass(frozen=True)
class BurstSize:
    """A burst sized from its first head drop.

    Attributes
    ----------
    flow_m3_s : float
        Flow out of the opening [m^3/s].
    effective_area_m2 : float
        Discharge coefficient times opening area [m^2] (NaN where no pressure is left).
    """

    flow_m3_s: float
    effective_area_m2: float


def burst_size_from_drop(drop_pa: float, pressure_after_pa: float, wave_speed_m_s: float,
                         pipe_area_m2: float, density_kg_m3: float, gravity_m_s2: float = 9.80665) -> BurstSize:
    """Flow and effective area of a sudden opening in a pipe's run from the drop it sends.

    Parameters
    ----------
    drop_pa : float
        Size of the first pressure drop at a sensor near the opening [Pa] (positive).
    pressure_after_pa : float
        Gauge pressure over the opening just after the drop [Pa] (NaN if unknown: the area
        is then NaN too).
    wave_speed_m_s, pipe_area_m2 : float
        The pipe's wave speed [m/s] and internal cross-section [m^2].
    density_kg_m3, gravity_m_s2 : float
        Of the water.

    Raises
    ------
    ValueError
        A drop that is not positive, or a wave speed, area or density that is not.
    """
    for name, value in (("drop_pa", drop_pa), ("wave_speed_m_s", wave_speed_m_s),
                        ("pipe_area_m2", pipe_area_m2), ("density_kg_m3", density_kg_m3)):
        if not (math.isfinite(value) and value > 0):
            raise ValueError(f"{name} = {value!r} must be a positive number")
    rho_g = density_kg_m3 * gravity_m_s2
    impedance = wave_speed_m_s / (gravity_m_s2 * pipe_area_m2)
    flow = 2.0 * (drop_pa / rho_g) / impedance
    head = pressure_after_pa / rho_g
    area = flow / math.sqrt(2.0 * gravity_m_s2 * head) if head > 0 else float("nan")  # NaN: unknown
    return BurstSize(flow, area)
