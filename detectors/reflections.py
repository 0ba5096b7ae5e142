"""How strongly the nodes of a layout reflect a pressure wave, and when and how strongly each
reflection reaches a sensor after the direct front.

A wave of head ``F`` arriving along pipe ``i`` at a node sends back ``r F`` along pipe ``i``
and passes ``s F`` into each other pipe. :func:`junction_reflection_coefficient` gives ``r``
and ``s`` at a junction of pipes; :func:`node_reflection_coefficient` gives ``r`` for each
kind of node of a :class:`models.layout.SystemLayout`; :func:`sensor_reflections` lists the
reflections that reach a sensor, with their delay after the direct front and their
coefficient, so that a reflection too weak to reshape a front need not refuse an estimate.

Points on the network are ``(pipe_id, offset_m)``: chainage from the pipe's ``from_node``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from models.layout import SystemLayout

from .wavespeed_pairs import Point, node_point, sensor_point, travel_time_between_points_s

__all__ = [
    "Reflection",
    "junction_reflection_coefficient",
    "node_reflection_coefficient",
    "sensor_reflections",
]

#: Node kinds whose reflection the layout cannot tell (it depends on a pump's or a valve's
#: state, or an air vessel's or air valve's size and contents): taken as a full reflection.
UNKNOWN_FULL_REFLECTION = ("pump_station", "valve", "air_vessel", "air_valve")


@dataclass(frozen=True)
class Reflection:
    """A reflected wave reaching a sensor.

    Parameters
    ----------
    delay_s : float
        Time after the direct front at which it arrives [s].
    node_id : str
        The node that reflects it (for a wave reflected twice, the farther one).
    coefficient : float
        Its head relative to the incident front [-] (a product of two coefficients for a
        wave reflected twice); its magnitude is at most 1.
    via : str
        How it travels, for a reason a person reads.
    """

    delay_s: float
    node_id: str
    coefficient: float
    via: str


def junction_reflection_coefficient(arriving_admittance: float,
                                    other_admittances: tuple[float, ...] | list[float]
                                    ) -> tuple[float, float]:
    """Reflection and transmission coefficients at a junction for a wave along one pipe.

    Parameters
    ----------
    arriving_admittance : float
        ``A / a`` of the pipe the wave arrives along [m s] (area [m^2] over wave speed [m/s]).
    other_admittances : sequence of float
        ``A / a`` of every other pipe meeting at the junction [m s].

    Returns
    -------
    (float, float)
        ``(r, s)``: the reflected head ``r F`` goes back along the arriving pipe, the
        transmitted head ``s F`` into each other pipe [-].

    Notes
    -----
    With the characteristic impedance ``B = a / (g A)`` of each pipe, a common head at the
    junction and continuity of flow give the transmission coefficient

    ``s = (2 / B_i) / sum_j (1 / B_j)``  and  ``r = s - 1``,

    so that, ``g`` cancelling, ``r = (A_i/a_i - sum_{j != i} A_j/a_j) / sum_j A_j/a_j``
    (Wylie, E. B. & Streeter, V. L. (1993) Fluid Transients in Systems, Prentice Hall,
    sec. 3.6, series and branching junctions). A junction with no other pipe is a closed
    end (``r = 1``); two equal pipes in series pass the wave whole (``r = 0``, ``s = 1``).

    Examples
    --------
    Three equal pipes (a T): a third of the wave comes back inverted.

    >>> r, s = junction_reflection_coefficient(1.0, (1.0, 1.0))
    >>> round(r, 4), round(s, 4)
    (-0.3333, 0.6667)
    """
    others = [float(y) for y in other_admittances]
    if not arriving_admittance > 0 or any(not y > 0 for y in others):
        raise ValueError(f"admittances must be positive (A / a [m s]); got arriving "
                         f"{arriving_admittance!r} and others {others!r}")
    total = arriving_admittance + sum(others)
    transmission = 2.0 * arriving_admittance / total
    return transmission - 1.0, transmission


def _admittance_m_s(layout: SystemLayout, pipe_id: str, default_wave_speed_m_s: float) -> float:
    pipe = layout.pipe(pipe_id)
    speed = pipe.wave_speed_m_s or default_wave_speed_m_s
    return math.pi * pipe.diameter_m ** 2 / 4.0 / speed


def node_reflection_coefficient(layout: SystemLayout, node_id: str, arriving_pipe_id: str,
                                default_wave_speed_m_s: float = 1000.0) -> float:
    """Reflection coefficient of a node for a wave arriving along one of its pipes [-].

    Notes
    -----
    A reservoir holds its head: ``r = -1``. A dead end (and any node with only the
    arriving pipe, such as a closed valve at a pipe's end) stops the flow: ``r = +1``. A
    junction reflects by the impedances of its pipes
    (:func:`junction_reflection_coefficient`; Wylie & Streeter 1993, sec. 3.6). A pump
    station, a valve, an air vessel and an air valve reflect according to their state and
    size, which the layout does not hold (a tripped pump's check valve closes, a running
    pump holds its suction head; an in-line valve may be shut; a vessel's gas holds the
    head); they are taken as a full reflection, ``|r| = 1`` (conservative: such a node
    always counts as strong), with the sign of a closed end where it has one pipe and of a
    reservoir otherwise.
    """
    pipes = [p for p in layout.pipes if node_id in (p.from_node, p.to_node)]
    if arriving_pipe_id not in {p.id for p in pipes}:
        raise ValueError(f"pipe {arriving_pipe_id!r} does not end at node {node_id!r}")
    kind = next((n.kind for n in layout.nodes if n.id == node_id), "junction")
    if kind == "reservoir":
        return -1.0
    others = [p.id for p in pipes if p.id != arriving_pipe_id]
    if kind == "dead_end" or not others:
        return 1.0
    if kind in UNKNOWN_FULL_REFLECTION:
        return -1.0
    r, _ = junction_reflection_coefficient(
        _admittance_m_s(layout, arriving_pipe_id, default_wave_speed_m_s),
        [_admittance_m_s(layout, p, default_wave_speed_m_s) for p in others])
    return r


def _node_ids(layout: SystemLayout) -> list[str]:
    return list(dict.fromkeys([p.from_node for p in layout.pipes] + [p.to_node for p in layout.pipes]))


def _arriving_pipe(layout: SystemLayout, start: Point, node_id: str) -> str | None:
    """The pipe along which a wave from ``start`` reaches ``node_id`` (shortest path)."""
    end = node_point(layout, node_id)
    legs = layout.path_between_points(start[0], start[1], end[0], end[1])
    if legs is None:
        return None
    touching = {p.id for p in layout.pipes if node_id in (p.from_node, p.to_node)}
    for leg in reversed(list(legs)):
        if leg.length_m > 0 and leg.pipe_id in touching:
            return leg.pipe_id
    return None


def _coefficient(layout, node_id, arriving, default_speed) -> float:
    if arriving is None:  # the wave starts at the node itself: unknown, take it as full
        return 1.0
    return node_reflection_coefficient(layout, node_id, arriving, default_speed)


def sensor_reflections(layout: SystemLayout, source: Point, sensor_id: str,
                       default_wave_speed_m_s: float = 1000.0) -> tuple[Reflection, ...]:
    """The reflections that reach a sensor after the direct front from ``source``, earliest first.

    Notes
    -----
    A node N off the direct path S -> X sends its reflection ``T(S, N) + T(N, X) - T(S, X)``
    after the direct front, with N's coefficient for the pipe the front arrives along. A
    node N on the direct path reflects back toward the source; that wave must be reflected
    again at a node M between the source and N (or at the source point itself), so it
    arrives ``2 T(M, N)`` late, with the product of the two coefficients (M's for a wave
    coming from N). The transmissions through nodes passed on the way are taken as whole
    (``|s|`` may exceed 1 at a constriction, but the direct front passes most of them too),
    and a source inside a pipe (a burst) as a full reflector: both err towards a stronger
    reflection. Travel times use the layout's prior wave speeds (Wylie & Streeter 1993,
    sec. 3.6).
    """
    target = sensor_point(layout, sensor_id)
    direct = travel_time_between_points_s(layout, source, target, default_wave_speed_m_s)
    if not math.isfinite(direct):
        return ()
    node_at_source = next((n for n in _node_ids(layout)
                           if travel_time_between_points_s(layout, source, node_point(layout, n),
                                                           default_wave_speed_m_s) <= 1e-9), None)
    on_path: list[tuple[float, str | None, Point]] = [(0.0, node_at_source, source)]
    found: list[Reflection] = []
    for node in _node_ids(layout):
        point = node_point(layout, node)
        to_node = travel_time_between_points_s(layout, source, point, default_wave_speed_m_s)
        onward = travel_time_between_points_s(layout, point, target, default_wave_speed_m_s)
        extra = to_node + onward - direct
        if extra > 1e-6 * max(direct, 1e-3):
            r = _coefficient(layout, node, _arriving_pipe(layout, source, node),
                             default_wave_speed_m_s)
            found.append(Reflection(extra, node, r, "beyond or beside the direct path"))
        elif to_node > 1e-9:
            on_path.append((to_node, node, point))
    on_path.sort(key=lambda item: item[0])
    for k, (t_node, node, point) in enumerate(on_path):
        if k == 0 or node is None:
            continue
        r_node = _coefficient(layout, node, _arriving_pipe(layout, source, node),
                              default_wave_speed_m_s)
        for t_back, back_node, _ in on_path[:k]:
            if t_node - t_back <= 1e-9:
                continue
            if back_node is None:
                r_back = 1.0
            else:
                r_back = _coefficient(layout, back_node, _arriving_pipe(layout, point, back_node),
                                      default_wave_speed_m_s)
            where = back_node or "the source"
            found.append(Reflection(2.0 * (t_node - t_back), node, r_node * r_back,
                                    f"{r_node:+.2f} there, back toward the source and "
                                    f"{r_back:+.2f} again at {where}"))
    return tuple(sorted(found, key=lambda item: item.delay_s))
