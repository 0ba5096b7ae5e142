"""The two sides of an in-line valve or pump station, and what the first motions on them say.

A valve or pump station in the middle of a main (a node joined to exactly two pipes) splits
the sensors in two: those reached through one of its pipes and those reached through the
other. Stopping or starting the flow through it has a signature that no other cause has:
the pressure moves one way on one side and the other way on the other side.

- A valve closing stops the column arriving from upstream, which raises the pressure there,
  while the column leaving downstream is pulled to rest, which lowers it (Joukowsky's
  relation :math:`\\Delta H = \\mp a \\Delta V / g` on the two faces of the valve; Wylie &
  Streeter, *Fluid Transients in Systems*, 1993, sec. 1.2, from memory). An opening does
  the reverse.
- A pump stopping raises the pressure on its suction side and lowers it on its delivery
  side; a start does the reverse (the same relation on its two faces; common practice).
- A burst, a trip of the pumps at the head of the main or the closure of a valve at its end
  moves both sides the same way.

Upstream is read from the steady heads before the event: flow runs from the higher head to
the lower through a valve, and from the lower to the higher through a pump. When the heads
of the nearest sensors on the two sides differ by no more than the tolerance, the side that
holds a pump station is taken as upstream of a valve (a pumped main delivers away from its
pumps); otherwise the direction stays unknown and no kind is given.

Heads use the conventional metre of water (1000 kg/m^3 under standard gravity,
9.80665 kPa a metre); against a tolerance of half a metre the density of real water
(a few tenths of a per cent less) does not matter.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

from models.layout import SystemLayout

from .metrics import SensorObservation

__all__ = ["InlineAsset", "SideReading", "inline_assets", "read_sides", "PA_PER_METRE"]

#: Pressure of one conventional metre of water [Pa/m] (1000 kg/m^3 times 9.80665 m/s^2).
PA_PER_METRE = 1000.0 * 9.80665

#: What the first motions on the two sides make of an operation of the asset, by
#: (asset kind, motion upstream, motion downstream).
_SIGNATURES = {
    ("valve", 1, -1): "valve_closure",
    ("valve", -1, 1): "valve_opening",
    ("pump_station", 1, -1): "pump_trip",
    ("pump_station", -1, 1): "pump_start",
}


@dataclass(frozen=True)
class InlineAsset:
    """A valve or pump station joined to exactly two pipes.

    Attributes
    ----------
    node_id : str
    kind : str
        ``"valve"`` or ``"pump_station"``.
    sides : tuple of two tuples of str
        Pressure sensors on each side, nearest to the asset first.
    pump_on_side : tuple of two bool
        Whether a (further) pump station sits on each side.
    """

    node_id: str
    kind: str
    sides: tuple[tuple[str, ...], tuple[str, ...]]
    pump_on_side: tuple[bool, bool]


@dataclass(frozen=True)
class SideReading:
    """What the first motions either side of an in-line asset say about an event.

    Attributes
    ----------
    node_id, asset_kind : str
        The asset and its kind.
    kind : str or None
        ``valve_closure``, ``valve_opening``, ``pump_trip`` or ``pump_start`` when the two
        sides moved apart in a known direction; None otherwise.
    motions : tuple of two int
        +1 (rose), -1 (fell) of the deciding sensor on each side (the asset's own order).
    sensors : tuple of two str
        The deciding sensor on each side.
    upstream_side : int or None
        0 or 1; None when the direction of flow could not be told.
    reason : str
        A short readable statement.
    """

    node_id: str
    asset_kind: str
    kind: str | None
    motions: tuple[int, int]
    sensors: tuple[str, str]
    upstream_side: int | None
    reason: str

    @property
    def opposite(self) -> bool:
        """True when the two sides moved in opposite directions."""
        return self.motions[0] == -self.motions[1]


def inline_assets(layout: SystemLayout) -> tuple[InlineAsset, ...]:
    """Every valve and pump station joined to exactly two pipes, with the sensors either side."""
    found = []
    for node in layout.nodes:
        if node.kind not in ("valve", "pump_station"):
            continue
        pipes = [p for p in layout.pipes if node.id in (p.from_node, p.to_node)]
        if len(pipes) != 2 or pipes[0].id == pipes[1].id:
            continue
        sides, pumps = [], []
        for pipe in pipes:
            reached = _pipes_beyond(layout, node.id, pipe.id)
            sensors = [s for s in layout.pressure_sensors() if s.pipe_id in reached]
            sensors.sort(key=lambda s: layout.distance_from_node_m(s.id, node.id))
            sides.append(tuple(s.id for s in sensors))
            pumps.append(any(n.kind == "pump_station" and n.id != node.id
                             for n in layout.nodes if _node_on(layout, n.id, reached)))
        found.append(InlineAsset(node.id, node.kind, (sides[0], sides[1]), (pumps[0], pumps[1])))
    return tuple(found)


def _pipes_beyond(layout: SystemLayout, node_id: str, pipe_id: str) -> set[str]:
    """Pipes reached from ``node_id`` through ``pipe_id`` without passing ``node_id`` again."""
    reached = {pipe_id}
    first = layout.pipe(pipe_id)
    frontier = [first.to_node if first.from_node == node_id else first.from_node]
    seen = {node_id}
    while frontier:
        here = frontier.pop()
        if here in seen:
            continue
        seen.add(here)
        for p in layout.pipes:
            if here in (p.from_node, p.to_node) and p.id not in reached:
                reached.add(p.id)
                frontier.append(p.to_node if p.from_node == here else p.from_node)
    return reached


def _node_on(layout: SystemLayout, node_id: str, pipes: set[str]) -> bool:
    return any(node_id in (layout.pipe(p).from_node, layout.pipe(p).to_node) for p in pipes)


def _deciding(side: Sequence[str], seen: dict[str, SensorObservation], threshold_pa) -> SensorObservation | None:
    """The nearest sensor of a side whose first front stands clear of its threshold."""
    for sensor_id in side:
        o = seen.get(sensor_id)
        if o is not None and math.isfinite(o.first_front_pa) and abs(o.first_front_pa) > threshold_pa(o):
            return o
    return None


def _head_m(o: SensorObservation, layout: SystemLayout) -> float:
    return o.baseline_pa / PA_PER_METRE + layout.sensor(o.sensor_id).elevation_m


def _upstream_side(asset: InlineAsset, heads: tuple[float, float], tolerance_m: float) -> int | None:
    """0 or 1 from the steady heads (and, for a valve, the side with the pumps); None if unknown."""
    higher = 0 if heads[0] > heads[1] else 1
    if abs(heads[0] - heads[1]) > tolerance_m:
        return higher if asset.kind == "valve" else 1 - higher
    if asset.kind == "valve" and asset.pump_on_side[0] != asset.pump_on_side[1]:
        return 0 if asset.pump_on_side[0] else 1
    return None


def read_sides(observations: Sequence[SensorObservation], layout: SystemLayout, *,
               head_tolerance_m: float, noise_multiple: float) -> tuple[SideReading, ...]:
    """What the first motions either side of each in-line asset say.

    Parameters
    ----------
    observations : sequence of SensorObservation
        Every sensor that saw the event.
    layout : SystemLayout
    head_tolerance_m : float
        A first front, and a difference of steady heads, counts only beyond this [m].
    noise_multiple : float
        A first front counts only beyond this many of its sensor's noise deviations [-].

    Returns
    -------
    tuple of SideReading
        One per in-line asset with a clear first motion on both sides; empty otherwise.
    """
    if not head_tolerance_m >= 0:
        raise ValueError(f"head_tolerance_m = {head_tolerance_m!r} must be at least 0")
    seen = {o.sensor_id: o for o in observations}
    floor_pa = head_tolerance_m * PA_PER_METRE

    def threshold_pa(o: SensorObservation) -> float:
        noise = o.noise_sigma_pa if math.isfinite(o.noise_sigma_pa) else 0.0
        return max(floor_pa, noise_multiple * noise)

    readings = []
    for asset in inline_assets(layout):
        pair = [_deciding(side, seen, threshold_pa) for side in asset.sides]
        if pair[0] is None or pair[1] is None:
            continue
        motions = tuple(1 if o.first_front_pa > 0 else -1 for o in pair)
        upstream = _upstream_side(asset, (_head_m(pair[0], layout), _head_m(pair[1], layout)),
                                  head_tolerance_m)
        kind = None
        if upstream is not None:
            kind = _SIGNATURES.get((asset.kind, motions[upstream], motions[1 - upstream]))
        readings.append(SideReading(asset.node_id, asset.kind, kind, (motions[0], motions[1]),
                                    (pair[0].sensor_id, pair[1].sensor_id), upstream,
                                    _reason(asset, pair, upstream, kind)))
    return tuple(readings)


def _reason(asset: InlineAsset, pair, upstream: int | None, kind: str | None) -> str:
    def said(o: SensorObservation) -> str:
        return f"{o.sensor_id} {'rose' if o.first_front_pa > 0 else 'fell'} {abs(o.first_front_pa) / 1e3:.0f} kPa"

    what = "valve" if asset.kind == "valve" else "pump station"
    if upstream is None:
        return (f"either side of in-line {what} {asset.node_id}: {said(pair[0])}, {said(pair[1])}; "
                "which side is upstream is not known (steady heads within tolerance)")
    up, down = pair[upstream], pair[1 - upstream]
    names = ("suction", "delivery") if asset.kind == "pump_station" else ("upstream", "downstream")
    text = f"at in-line {what} {asset.node_id}: {names[0]} {said(up)}, {names[1]} {said(down)}"
    if kind is not None:
        return text + f" ({kind.replace('_', ' ')} signature)"
    return text + " (both sides the same way: not an operation of it)"
