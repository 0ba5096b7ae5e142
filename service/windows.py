"""Which time spans of a system must be screened, and in what pieces.

A file that adds data to a system marks a *pending span* (its first to last sample). Before
screening, the pending spans of a system are widened by the margin, merged where they touch,
and cut into pieces no longer than the configured maximum. Each piece has a *core*, the span
whose events it owns (events starting there are replaced by this piece's findings), and a
*load* span, the core plus the margin either side, which is the data the detector sees.
The margin is several pipe travel times, so an event whose front reaches one sensor in the
core and another just outside is still seen whole.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

__all__ = ["ScreeningWindow", "plan_windows"]


@dataclass(frozen=True)
class ScreeningWindow:
    """A piece of a system's time line to screen [UTC ns]."""

    system_id: str
    core_start_ns: int
    core_end_ns: int
    margin_ns: int

    @property
    def load_start_ns(self) -> int:
        return self.core_start_ns - self.margin_ns

    @property
    def load_end_ns(self) -> int:
        return self.core_end_ns + self.margin_ns


def plan_windows(
    system_id: str,
    spans_ns: Iterable[tuple[int, int]],
    margin_ns: int,
    max_core_ns: int,
) -> list[ScreeningWindow]:
    """Merge pending spans (widened by the margin) and cut them into windows.

    >>> [(w.core_start_ns, w.core_end_ns) for w in plan_windows("s", [(100, 200), (250, 300)], 30, 1000)]
    [(70, 331)]
    >>> [(w.core_start_ns, w.core_end_ns) for w in plan_windows("s", [(0, 100)], 0, 40)]
    [(0, 40), (40, 80), (80, 101)]
    """
    if max_core_ns <= 0:
        raise ValueError(f"max_core_ns = {max_core_ns} must be positive")
    widened = sorted((start - margin_ns, end + margin_ns + 1) for start, end in spans_ns)
    merged: list[list[int]] = []
    for start, end in widened:
        if merged and start <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], end)
        else:
            merged.append([start, end])
    windows = []
    for start, end in merged:
        piece_start = start
        while piece_start < end:
            piece_end = min(end, piece_start + max_core_ns)
            windows.append(ScreeningWindow(system_id, piece_start, piece_end, margin_ns))
            piece_start = piece_end
    return windows
