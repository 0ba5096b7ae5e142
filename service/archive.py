"""The normalised sample archive: a Parquet dataset partitioned by system, sensor and day.

Layout::

    <archive>/system=<system id>/sensor=<sensor id>/date=<YYYY-MM-DD>/part-<sha16>.parquet

Each part holds the samples one source file contributed to that sensor and UTC day: columns
``time_ns`` (int64, UTC ns), ``value`` (float64, SI) and ``clipped`` (bool). The part name
carries the first 16 hex digits of the source file's SHA-256, so writing the same file twice
overwrites the same parts (idempotent), and a part whose file has no committed
``source_files`` row (a crash between the two steps) is recognised as an orphan and removed
by :func:`remove_orphan_parts` before the next pass.

Writes are atomic per part: written to a temporary name in the same folder, then renamed.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterable, Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

__all__ = ["SampleArchive", "part_key"]

NS_PER_DAY = 86_400 * 10**9
SCHEMA = pa.schema([("time_ns", pa.int64()), ("value", pa.float64()), ("clipped", pa.bool_())])


def part_key(sha256: str) -> str:
    """The part-file stem for a source file."""
    return f"part-{sha256[:16]}"


class SampleArchive:
    """Append and read normalised samples (see module docstring)."""

    def __init__(self, root: Path):
        self.root = Path(root)

    def _sensor_dir(self, system_id: str, sensor_id: str) -> Path:
        return self.root / f"system={system_id}" / f"sensor={sensor_id}"

    def write_file_samples(
        self, sha256: str, samples: pd.DataFrame, sensor_system: Mapping[str, str]
    ) -> list[Path]:
        """Write one source file's samples, split by sensor and UTC day; returns the parts.

        ``samples`` has columns time_ns, sensor_id, value, clipped (the ingest result).
        """
        written: list[Path] = []
        stem = part_key(sha256)
        for sensor_id, group in samples.groupby("sensor_id", sort=True):
            system_id = sensor_system[sensor_id]
            times = group["time_ns"].to_numpy(np.int64)
            days = times // NS_PER_DAY
            values = group["value"].to_numpy(np.float64)
            clipped = group["clipped"].to_numpy(bool)
            boundaries = np.flatnonzero(np.diff(days)) + 1
            for chunk in np.split(np.arange(len(times)), boundaries):
                if len(chunk) == 0:
                    continue
                day = pd.Timestamp(int(days[chunk[0]]) * NS_PER_DAY, unit="ns").strftime("%Y-%m-%d")
                folder = self._sensor_dir(system_id, str(sensor_id)) / f"date={day}"
                folder.mkdir(parents=True, exist_ok=True)
                table = pa.table(
                    {"time_ns": times[chunk], "value": values[chunk], "clipped": clipped[chunk]},
                    schema=SCHEMA,
                )
                target = folder / f"{stem}.parquet"
                tmp = folder / f".{stem}.parquet.tmp"
                pq.write_table(table, tmp, compression="zstd")
                os.replace(tmp, target)
                written.append(target)
        return written

    def remove_parts(self, sha256: str) -> int:
        """Delete every part of one source file (used to undo a failed ingest)."""
        removed = 0
        for path in self.root.glob(f"system=*/sensor=*/date=*/{part_key(sha256)}.parquet"):
            path.unlink(missing_ok=True)
            removed += 1
        return removed

    def remove_orphan_parts(self, committed_sha256: Iterable[str]) -> int:
        """Delete parts (and temp files) whose source file has no committed row."""
        keep = {part_key(s) for s in committed_sha256}
        removed = 0
        if not self.root.exists():
            return 0
        for path in self.root.glob("system=*/sensor=*/date=*/*"):
            if path.name.endswith(".tmp") or (path.suffix == ".parquet" and path.stem not in keep):
                path.unlink(missing_ok=True)
                removed += 1
        return removed

    def sensors_of_system(self, system_id: str) -> list[str]:
        base = self.root / f"system={system_id}"
        if not base.exists():
            return []
        return sorted(p.name.split("=", 1)[1] for p in base.glob("sensor=*") if p.is_dir())

    def load_sensor(self, system_id: str, sensor_id: str, start_ns: int, end_ns: int) -> pd.DataFrame:
        """Samples of one sensor in ``[start_ns, end_ns)``, sorted, duplicates dropped.

        Where two files carry the same instant, the one read first (the older part by name
        order is not meaningful, so the first occurrence after sorting) is kept: loggers repeat
        samples at file boundaries with identical values.
        """
        folder = self._sensor_dir(system_id, sensor_id)
        first_day, last_day = start_ns // NS_PER_DAY, (end_ns - 1) // NS_PER_DAY
        tables = []
        for day in range(int(first_day), int(last_day) + 1):
            day_dir = folder / f"date={pd.Timestamp(day * NS_PER_DAY, unit='ns').strftime('%Y-%m-%d')}"
            if not day_dir.exists():
                continue
            for part in sorted(day_dir.glob("part-*.parquet")):
                table = pq.read_table(
                    part, filters=[("time_ns", ">=", start_ns), ("time_ns", "<", end_ns)]
                )
                if table.num_rows:
                    tables.append(table)
        if not tables:
            return pd.DataFrame({"time_ns": np.array([], np.int64), "value": np.array([], float),
                                 "clipped": np.array([], bool)})
        frame = pa.concat_tables(tables).to_pandas()
        frame = frame.sort_values("time_ns", kind="stable")
        frame = frame.drop_duplicates("time_ns", keep="first").reset_index(drop=True)
        return frame
