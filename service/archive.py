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
Parts are encoded for fast writing and reading: delta encoding for the (regular) times, byte
stream split for the values, light zstd compression, no dictionaries. Parts written by this
archive object are also kept in memory (write-through), so the screening pass that ingested
a night of data does not read it back from disk.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterable, Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

__all__ = ["SampleArchive", "ArchiveOwnerError", "part_key", "sensor_slices"]


class ArchiveOwnerError(RuntimeError):
    """The archive folder belongs to another findings database."""

NS_PER_DAY = 86_400 * 10**9
SCHEMA = pa.schema([("time_ns", pa.int64()), ("value", pa.float64()), ("clipped", pa.bool_())])
WRITE_OPTIONS = dict(
    compression="zstd", compression_level=1, use_dictionary=False,
    column_encoding={"time_ns": "DELTA_BINARY_PACKED", "value": "BYTE_STREAM_SPLIT", "clipped": "PLAIN"},
)


def part_key(sha256: str) -> str:
    """The part-file stem for a source file."""
    return f"part-{sha256[:16]}"


def sensor_slices(samples: pd.DataFrame):
    """(sensor id, slice) runs of a frame sorted by sensor id; falls back to a group-by."""
    if len(samples) == 0:
        return []
    ids = pa.array(samples["sensor_id"])
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    encoded = pc.dictionary_encode(ids)
    codes = encoded.indices.to_numpy(zero_copy_only=False)
    names = encoded.dictionary.to_pylist()
    change = np.flatnonzero(codes[1:] != codes[:-1]) + 1
    starts = np.concatenate(([0], change))
    stops = np.concatenate((change, [len(codes)]))
    if len(set(codes[starts].tolist())) == len(starts):
        return [(names[codes[a]], slice(int(a), int(b))) for a, b in zip(starts, stops)]
    return [(names[c], np.flatnonzero(codes == c)) for c in dict.fromkeys(codes[starts].tolist())]


class SampleArchive:
    """Append and read normalised samples (see module docstring)."""

    def __init__(self, root: Path, cache_written: bool = True):
        self.root = Path(root)
        self.cache_written = cache_written
        self._written: dict[Path, pa.Table] = {}

    def claim(self, database_id: str) -> None:
        """Tie this archive folder to one findings database, or refuse if it has another.

        The archive and the database describe the same files: parts without a row are
        removed as orphans, so an archive must never be shared by two databases.

        Raises
        ------
        ArchiveOwnerError
            When the folder already belongs to another database.
        """
        marker = self.root / ".database-id"
        if marker.exists():
            owner = marker.read_text().strip()
            if owner != database_id:
                raise ArchiveOwnerError(
                    f"the sample archive {self.root} belongs to another findings database "
                    f"(id {owner}); give this database an archive of its own ([archive] path in "
                    "service.toml, or a --config whose archive differs) so neither loses data"
                )
            return
        self.root.mkdir(parents=True, exist_ok=True)
        if any(self.root.glob("system=*")):
            raise ArchiveOwnerError(
                f"the sample archive {self.root} holds data but no owner mark; it was written for "
                "another findings database. Point [archive] path at an empty folder for this one."
            )
        marker.write_text(database_id + "\n")

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
        for sensor_id, rows in sensor_slices(samples):
            system_id = sensor_system[sensor_id]
            times = samples["time_ns"].to_numpy(np.int64)[rows]
            values = samples["value"].to_numpy(np.float64)[rows]
            clipped = samples["clipped"].to_numpy(bool)[rows]
            if np.any(np.diff(times) < 0):
                order = np.argsort(times, kind="stable")
                times, values, clipped = times[order], values[order], clipped[order]
            days = times // NS_PER_DAY
            boundaries = np.concatenate(([0], np.flatnonzero(np.diff(days)) + 1, [len(times)]))
            for lo, hi in zip(boundaries[:-1], boundaries[1:]):
                if hi <= lo:
                    continue
                day = pd.Timestamp(int(days[lo]) * NS_PER_DAY, unit="ns").strftime("%Y-%m-%d")
                folder = self._sensor_dir(system_id, str(sensor_id)) / f"date={day}"
                folder.mkdir(parents=True, exist_ok=True)
                table = pa.table({"time_ns": times[lo:hi], "value": values[lo:hi], "clipped": clipped[lo:hi]},
                                 schema=SCHEMA)
                target = folder / f"{stem}.parquet"
                tmp = folder / f".{stem}.parquet.tmp"
                pq.write_table(table, tmp, **WRITE_OPTIONS)
                os.replace(tmp, target)
                if self.cache_written:
                    self._written[target] = table
                written.append(target)
        return written

    def remove_parts(self, sha256: str) -> int:
        """Delete every part of one source file (used to undo a failed ingest)."""
        removed = 0
        for path in self.root.glob(f"system=*/sensor=*/date=*/{part_key(sha256)}.parquet"):
            path.unlink(missing_ok=True)
            self._written.pop(path, None)
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

    def _read_part(self, part: Path, start_ns: int, end_ns: int) -> pa.Table:
        cached = self._written.get(part)
        if cached is None:
            return pq.read_table(part, filters=[("time_ns", ">=", start_ns), ("time_ns", "<", end_ns)])
        times = cached.column("time_ns").to_numpy()
        lo, hi = np.searchsorted(times, [start_ns, end_ns])
        return cached.slice(int(lo), int(hi - lo))

    def load_sensor(self, system_id: str, sensor_id: str, start_ns: int, end_ns: int) -> pd.DataFrame:
        """Samples of one sensor in ``[start_ns, end_ns)``, sorted, duplicates dropped.

        Where two files carry the same instant (loggers repeat samples at file boundaries), the
        sample of the part whose name sorts first is kept.
        """
        folder = self._sensor_dir(system_id, sensor_id)
        first_day, last_day = start_ns // NS_PER_DAY, (end_ns - 1) // NS_PER_DAY
        tables = []
        for day in range(int(first_day), int(last_day) + 1):
            day_dir = folder / f"date={pd.Timestamp(day * NS_PER_DAY, unit='ns').strftime('%Y-%m-%d')}"
            if not day_dir.exists():
                continue
            for part in sorted(day_dir.glob("part-*.parquet")):
                table = self._read_part(part, start_ns, end_ns)
                if table.num_rows:
                    tables.append(table)
        if not tables:
            return pd.DataFrame({"time_ns": np.array([], np.int64), "value": np.array([], float),
                                 "clipped": np.array([], bool)})
        table = pa.concat_tables(tables) if len(tables) > 1 else tables[0]
        times = table.column("time_ns").to_numpy()
        values = table.column("value").to_numpy()
        clipped = table.column("clipped").to_numpy(zero_copy_only=False)
        if len(tables) > 1 or np.any(np.diff(times) <= 0):
            order = np.argsort(times, kind="stable")
            times, values, clipped = times[order], values[order], clipped[order]
            keep = np.concatenate(([True], np.diff(times) > 0))
            times, values, clipped = times[keep], values[keep], clipped[keep]
        return pd.DataFrame({"time_ns": times, "value": values, "clipped": clipped}, copy=False)
