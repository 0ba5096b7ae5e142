"""Which arrivals on different sensors are one event, and which are later phases of one.

:func:`associate_arrivals` groups arrivals whose onset differences travel along the pipes
could explain: at most the path length over the slowest plausible wave speed, plus the
onsets' uncertainties, a slack, and a clock tolerance for unsynchronised channels.
:func:`absorb_later_phases` then folds one-sensor transients that start inside another
event's span (its ringing, or data resuming after a gap) or at a flat line's ends into
that event, so they are not reported as events of their own.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from models.layout import SystemLayout

from .params import DetectionParams

if TYPE_CHECKING:  # pragma: no cover
    from .events import Arrival

__all__ = ["associate_arrivals", "absorb_later_phases"]


def _compatible(a: Arrival, b: Arrival, layout: SystemLayout, params: DetectionParams) -> bool:
    distance = layout.distance_between_sensors_m(a.sensor_id, b.sensor_id)
    if not math.isfinite(distance):
        return False
    allowed = distance / params.wave_speed_min_m_s + params.association_slack_s
    allowed += 2.0 * (a.uncertainty_s + b.uncertainty_s)
    if not (a.clock_synchronised and b.clock_synchronised):
        allowed += params.unsynchronised_clock_s
    return abs(a.onset_time_ns - b.onset_time_ns) * 1e-9 <= allowed


def associate_arrivals(arrivals: list[Arrival], layout: SystemLayout, params: DetectionParams) -> list[list[Arrival]]:
    """Group arrivals on different sensors that travel along the pipes could connect.

    An arrival joins the earliest open group in which it is compatible with every member
    (one arrival per sensor and group); otherwise it opens a new group.
    """
    groups: list[list[Arrival]] = []
    for arrival in sorted(arrivals, key=lambda a: a.onset_time_ns):
        if arrival.flat_line:
            groups.append([arrival])
            continue
        for group in groups:
            if group[0].flat_line or any(m.sensor_id == arrival.sensor_id for m in group):
                continue
            if all(_compatible(arrival, m, layout, params) for m in group):
                group.append(arrival)
                break
        else:
            groups.append([arrival])
    return groups


def _group_span_ns(group: list[Arrival]) -> tuple[int, int]:
    return min(a.onset_time_ns for a in group), max(a.end_time_ns for a in group)


def absorb_later_phases(
    groups: list[list[Arrival]], params: DetectionParams
) -> tuple[list[list[Arrival]], dict[int, list[Arrival]]]:
    """Fold one-sensor groups that lie inside another event's span into that event.

    A transient on a single sensor that starts while an event seen by several sensors is
    still ringing (between its first onset and the end of its analysis spans) is a later
    phase of that event, or the same event seen after the sensor's data resumed from a
    gap; one that starts within ``merge_gap_s`` after a flat line on the same sensor is
    the logger coming back from being stuck. Neither is an event of its own.

    Returns the remaining groups and, per remaining group index, the absorbed arrivals of
    sensors the group did not already hold (their onsets are not arrival times).
    """
    merge_ns = int(params.merge_gap_s * 1e9)
    hosts = [i for i, g in enumerate(groups) if len(g) >= 2 or g[0].flat_line]
    keep: list[int] = []
    absorbed: dict[int, list[Arrival]] = {}
    for i, g in enumerate(groups):
        if len(g) != 1 or g[0].flat_line:
            keep.append(i)
            continue
        a = g[0]
        host = None
        for j in hosts:
            h = groups[j]
            start, stop = _group_span_ns(h)
            if h[0].flat_line:
                if h[0].sensor_id == a.sensor_id and start - merge_ns <= a.onset_time_ns <= stop + merge_ns:
                    host = j
                    break
            elif start < a.onset_time_ns <= stop:
                host = j
                break
        if host is None:
            keep.append(i)
        elif all(m.sensor_id != a.sensor_id for m in groups[host]) and not groups[host][0].flat_line:
            absorbed.setdefault(host, []).append(a)
    index = {old: new for new, old in enumerate(keep)}
    return [groups[i] for i in keep], {index[k]: v for k, v in absorbed.items()}
