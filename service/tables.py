"""Plain-text tables and number formatting for the terminal."""

from __future__ import annotations

import datetime as dt
from typing import Any, Sequence

__all__ = ["format_table", "fmt_time", "fmt_num", "CAUTION"]

CAUTION = (
    "Screening aid only: findings need review. Pressure ratings and allowances follow local "
    "codes, manufacturers' data and the judgement of a licensed engineer."
)


def fmt_time(value: dt.datetime | None, with_ms: bool = True) -> str:
    if value is None:
        return "-"
    text = value.strftime("%Y-%m-%d %H:%M:%S")
    return f"{text}.{value.microsecond // 1000:03d}" if with_ms else text


def fmt_num(value: Any, digits: int = 0) -> str:
    if value is None:
        return "-"
    try:
        return f"{float(value):,.{digits}f}"
    except (TypeError, ValueError):
        return str(value)


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]], right: Sequence[int] = ()) -> str:
    """Left-aligned columns (right-aligned where listed), two spaces apart."""
    cells = [[str(h) for h in headers]] + [["-" if c is None else str(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = []
    for n, row in enumerate(cells):
        parts = [c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths))]
        lines.append("  ".join(parts).rstrip())
        if n == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)
