"""The normalised sample archive: a Parquet dataset partitioned by system, sensor and day.

Layout::

    <archive>/system=<system id>/sensor=<sensor id>/date=<YYYY-MM-DD>/part-<sha16>.parquet

Each part holds the samples one source file contributed to that sensor and UTC day: columns
``value`` (float32, SI), ``clipped`` (bool; left out of a part in which no sample is clipped,
and read back as all false) and ``time_ns`` (int64, UTC ns), except that a part whose times
are regular (at most :data:`service.archive_times.MAX_RUNS` runs of one step, the usual case
for a logger) stores those runs in its metadata instead of the column
(:mod:`service.archive_times`). The part name
carries the first 16 hex digits of the source file's SHA-256, so writing the same file twice
overwrites the same parts (idempotent), and a part whose file has no committed
``source_files`` row (a crash between the two steps) is recognised as an orphan and removed
by :func:`remove_orphan_parts` before the next pass.

Values are kept to float32 precision (a relative 6e-8: 0.06 Pa at 1 MPa, far below any
pressure transducer's resolution), in the parts in memory as well as on disk, so a window
screened again from disk sees exactly the values the first screening saw. Writes are atomic
per part: written to a temporary name in the same folder, then renamed. Parts are encoded for
fast writing and reading: byte stream split and LZ4 for the values (on logger data about a
third of the plain size), delta encoding where a time column is stored, no dictionaries.
Parts written by this archive object are also kept in memory (write-through, up to
``MAX_CACHED_SAMPLES``), so the screening pass that ingested a night of data does not read it
back from disk. ``SampleArchive.load_sensor`` reads any part back as a frame of time_ns,
value and clipped.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Mapping

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from .archive_times import METADATA_KEY, runs_from_metadata, runs_to_metadata, time_runs, times_from_runs
from .array_scan import rounded_to_float32, time_step_range

__all__ = ["SampleArchive", "ArchiveOwnerError", "part_key", "sensor_slices"]


class ArchiveOwnerError(RuntimeError):
    """The archive folder belongs to another findings database."""

NS_PER_DAY = 86_400 * 10**9
#: Samples the archive keeps in memory for the pass that wrote them (about 2 GB); beyond
#: it, written parts are read back from disk.
MAX_CACHED_SAMPLES = 120_000_000
ENCODINGS = {"time_ns": "DELTA_BINARY_PACKED", "value": "BYTE_STREAM_SPLIT", "clipped": "PLAIN"}


def part_table(part: "PartSamples") -> pa.Table:
    """The table a part stores: float32 values, ``clipped`` only where some sample is
    clipped, and the times as a column or, when regular, as runs in the metadata."""
    runs = regular_runs(part) if part.step_ns > 0 else time_runs(part.times_ns)
    columns = {} if runs is not None else {"time_ns": part.times_ns}
    columns["value"] = part.values.astype(np.float32)
    if part.clipped.any():
        columns["clipped"] = part.clipped
    table = pa.table(columns)
    if runs is not None:
        table = table.replace_schema_metadata({METADATA_KEY: runs_to_metadata(runs)})
    return table


def regular_runs(part: "PartSamples"):
    """The runs of a part whose times all rise by its ``step_ns`` (known from the ingest):
    one run, as :func:`service.archive_times.time_runs` would find it, without the scan."""
    n = part.times_ns.size
    if n == 0:
        return time_runs(part.times_ns)
    start = np.array([part.times_ns[0]], np.int64)
    step = np.array([part.step_ns if n > 1 else 0], np.int64)
    return start, step, np.array([n], np.int64)


def write_part(table: pa.Table, path: Path) -> None:
    """Write a part's table to ``path`` with the archive's encodings; column statistics
    (min/max for row-group filters) only for a time column, the one a reader filters on."""
    pq.write_table(table, path, compression="lz4", use_dictionary=False,
                   column_encoding={name: ENCODINGS[name] for name in table.column_names},
                   write_statistics=[name for name in table.column_names if name == "time_ns"])


def read_part_arrays(path: Path) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A part on disk as (time_ns int64, value float64, clipped bool) arrays."""
    table = pq.read_table(path)
    metadata = table.schema.metadata or {}
    if "time_ns" in table.column_names:
        times = table.column("time_ns").to_numpy()
    elif METADATA_KEY in metadata:
        times = times_from_runs(*runs_from_metadata(metadata[METADATA_KEY]))
    else:
        raise ValueError(f"archive part {path} has neither a time_ns column nor time runs")
    values = table.column("value").to_numpy().astype(np.float64)
    if "clipped" in table.column_names:
        clipped = table.column("clipped").to_numpy(zero_copy_only=False)
    else:
        clipped = np.zeros(times.size, bool)
    return times, values, clipped


def part_key(sha256: str) -> str:
    """The part-file stem for a source file."""
    return f"part-{sha256[:16]}"


def sensor_slices(samples: pd.DataFrame):
    """(sensor id, slice) runs of a frame sorted by sensor id; falls back to a group-by."""
    if len(samples) == 0:
        return []
    column = samples["sensor_id"]
    if isinstance(column.dtype, pd.CategoricalDtype):  # the ingest's frame: codes at hand
        codes = column.cat.codes.to_numpy()
        if codes.min() >= 0:  # no missing id
            return _runs_of_codes(codes, [str(c) for c in column.cat.categories])
    ids = pa.array(column)
    if isinstance(ids, pa.ChunkedArray):
        ids = ids.combine_chunks()
    encoded = pc.dictionary_encode(ids)
    codes = encoded.indices.to_numpy(zero_copy_only=False)
    names = encoded.dictionary.to_pylist()
    return _runs_of_codes(codes, names)


def _runs_of_codes(codes: np.ndarray, names: list[str]):
    """(name, slice) per run of equal codes, or (name, indices) where a code recurs."""
    change = np.flatnonzero(codes[1:] != codes[:-1]) + 1
    starts = np.concatenate(([0], change))
    stops = np.concatenate((change, [len(codes)]))
    if len(set(codes[starts].tolist())) == len(starts):
        return [(names[codes[a]], slice(int(a), int(b))) for a, b in zip(starts, stops)]
    return [(names[c], np.flatnonzero(codes == c)) for c in dict.fromkeys(codes[starts].tolist())]


class SampleArchive:
    """Append and read normalised samples (see module docstring)."""

    def __init__(self, root: Path, cache_written: bool = True,
                 max_cached_samples: int = MAX_CACHED_SAMPLES):
        self.root = Path(root)
        self.cache_written = cache_written
        self.max_cached_samples = int(max_cached_samples)
        self._written: dict[Path, PartSamples] = {}  # parts staged or written by this object
        self._cached_samples = 0  # samples held in ``_written``
        self._lock = threading.Lock()

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
        staged = self.stage_file_samples(sha256, samples, sensor_system)
        self.write_staged(staged)
        if not self.cache_written:
            self._forget([target for target, _ in staged])
        return [target for target, _ in staged]

    def stage_file_samples(
        self, sha256: str, samples: pd.DataFrame, sensor_system: Mapping[str, str],
        sensor_steps: Mapping[str, tuple[int, int]] | None = None, values_rounded: bool = False,
    ) -> list[tuple[Path, "PartSamples"]]:
        """Split one source file's samples into its parts, readable at once from memory.

        :meth:`load_sensor` sees a staged part as if written, so screening can start while
        :meth:`write_staged` writes the parts to disk (in another thread). A caller that
        does not write them must drop them with :meth:`remove_parts`. ``sensor_steps``: the
        smallest and largest time step [ns] of each sensor's samples where the caller knows
        them (the ingest's :attr:`IngestResult.sensor_steps`); they spare a scan of the times.
        ``values_rounded``: the values are at float32 precision already (the ingest's are), so
        the parts share the frame's values instead of a rounded copy.
        """
        sensor_steps = sensor_steps or {}
        staged: list[tuple[Path, PartSamples]] = []
        stem = part_key(sha256)
        for sensor_id, rows in sensor_slices(samples):
            system_id = sensor_system[sensor_id]
            times = samples["time_ns"].to_numpy(np.int64)[rows]
            values = samples["value"].to_numpy(np.float64)[rows]
            if not values_rounded:
                values = rounded_to_float32(values)
            clipped = samples["clipped"].to_numpy(bool)[rows]
            lowest_step, highest_step = sensor_steps.get(sensor_id) or time_step_range(times)
            if lowest_step < 0:
                order = np.argsort(times, kind="stable")
                times, values, clipped = times[order], values[order], clipped[order]
                lowest_step, highest_step = time_step_range(times)
            strict = times.size < 2 or lowest_step > 0
            regular = lowest_step if strict and lowest_step == highest_step else 0
            whole = PartSamples.of(times, values, clipped, strict, regular)
            for day, lo, hi in _day_runs(times):
                folder = self._sensor_dir(system_id, str(sensor_id)) / f"date={day}"
                staged.append((folder / f"{stem}.parquet", whole.slice(lo, hi)))
        with self._lock:
            for target, part in staged:
                self._cached_samples += part.times_ns.size - self._cached_size(target)
                self._written[target] = part
        return staged

    def write_staged(self, staged: Iterable[tuple[Path, "PartSamples"]]) -> None:
        """Write staged parts to disk, each atomically (temporary name, then rename). Once
        written, a part leaves the memory cache when the cache holds more than
        ``max_cached_samples`` (a long backlog in one pass), and is read from disk again."""
        for target, part in staged:
            table = part_table(part)
            target.parent.mkdir(parents=True, exist_ok=True)
            tmp = target.with_name(f".{target.name}.tmp")
            write_part(table, tmp)
            os.replace(tmp, target)
            if self._cached_samples > self.max_cached_samples:
                self._forget([target])

    def remove_parts(self, sha256: str) -> int:
        """Delete every part of one source file (used to undo a failed ingest)."""
        removed = 0
        for path in self.root.glob(f"system=*/sensor=*/date=*/{part_key(sha256)}.parquet"):
            path.unlink(missing_ok=True)
            removed += 1
        with self._lock:
            mine = [p for p in self._written if p.stem == part_key(sha256)]
        self._forget(mine)
        return removed

    def _cached_size(self, part: Path) -> int:
        cached = self._written.get(part)
        return 0 if cached is None else cached.times_ns.size

    def _forget(self, parts: Iterable[Path]) -> None:
        """Drop parts from the memory cache (they are read from disk from then on)."""
        with self._lock:
            for part in parts:
                self._cached_samples -= self._cached_size(part)
                self._written.pop(part, None)

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

    def _read_part(self, part: Path, start_ns: int, end_ns: int) -> "PartSamples":
        with self._lock:
            cached = self._written.get(part)
        if cached is not None:
            lo, hi = np.searchsorted(cached.times_ns, [start_ns, end_ns])
            return cached.slice(int(lo), int(hi))
        try:
            times, values, clipped = read_part_arrays(part)
        except FileNotFoundError:  # removed since listed: a failed store undid its file
            return PartSamples.of(np.array([], np.int64), np.array([]), np.array([], bool), True)
        if _sorted(times):  # as the archive writes them
            lo, hi = (int(k) for k in np.searchsorted(times, [start_ns, end_ns]))
            times, values, clipped = times[lo:hi], values[lo:hi], clipped[lo:hi]
        else:
            keep = (times >= start_ns) & (times < end_ns)
            times, values, clipped = times[keep], values[keep], clipped[keep]
        return PartSamples.of(times, values, clipped, _strictly_increasing(times))

    def _parts_of_day(self, day_dir: Path) -> list[Path]:
        """The day's parts on disk and those staged in memory, sorted by name."""
        with self._lock:
            staged = {p for p in self._written if p.parent == day_dir}
        on_disk = set(day_dir.glob("part-*.parquet")) if day_dir.exists() else set()
        return sorted(on_disk | staged)

    def load_sensor(self, system_id: str, sensor_id: str, start_ns: int, end_ns: int) -> pd.DataFrame:
        """Samples of one sensor in ``[start_ns, end_ns)``, sorted, duplicates dropped.

        Where two files carry the same instant (loggers repeat samples at file boundaries), the
        sample of the part whose name sorts first is kept.
        """
        times, values, clipped = self.load_sensor_arrays(system_id, sensor_id, start_ns, end_ns)
        return pd.DataFrame({"time_ns": times, "value": values, "clipped": clipped}, copy=False)

    def load_sensor_arrays(self, system_id: str, sensor_id: str, start_ns: int, end_ns: int):
        """:meth:`load_sensor` as three arrays (time_ns, value, clipped); read-only views of
        the parts in memory where one part covers the span."""
        folder = self._sensor_dir(system_id, sensor_id)
        first_day, last_day = start_ns // NS_PER_DAY, (end_ns - 1) // NS_PER_DAY
        pieces = []
        for day in range(int(first_day), int(last_day) + 1):
            day_dir = folder / f"date={pd.Timestamp(day * NS_PER_DAY, unit='ns').strftime('%Y-%m-%d')}"
            for part in self._parts_of_day(day_dir):
                piece = self._read_part(part, start_ns, end_ns)
                if piece.times_ns.size:
                    pieces.append(piece)
        if not pieces:
            return np.array([], np.int64), np.array([], float), np.array([], bool)
        if len(pieces) == 1 and pieces[0].strict:
            return pieces[0].times_ns, pieces[0].values, pieces[0].clipped
        joined = joined_without_copy(pieces)  # the days of one file
        if joined is not None:
            return joined
        times = np.concatenate([p.times_ns for p in pieces])
        values = np.concatenate([p.values for p in pieces])
        clipped = np.concatenate([p.clipped for p in pieces])
        follow = all(p.strict for p in pieces) and all(
            b.times_ns[0] > a.times_ns[-1] for a, b in zip(pieces[:-1], pieces[1:]))
        if not follow:  # parts overlap (or repeat an instant)
            order = np.argsort(times, kind="stable")
            times, values, clipped = times[order], values[order], clipped[order]
            keep = np.concatenate(([True], np.diff(times) > 0))
            times, values, clipped = times[keep], values[keep], clipped[keep]
        return times, values, clipped


@dataclass(frozen=True)
class PartSamples:
    """The samples of one part (or a slice of it), read-only; ``strict`` when its times rise
    strictly (no repeated instant); ``step_ns`` when each time is the one before plus that
    step [ns] (a regular logger; 0 when not known to be). ``base`` and ``start``: the arrays this one is a slice of
    and where it starts in them, so parts that were cut from one file's samples (its days)
    join again without a copy."""

    times_ns: np.ndarray
    values: np.ndarray
    clipped: np.ndarray
    strict: bool
    step_ns: int = 0
    base: "PartSamples | None" = None
    start: int = 0

    @classmethod
    def of(cls, times_ns, values, clipped, strict: bool, step_ns: int = 0) -> "PartSamples":
        arrays = [np.asarray(times_ns, np.int64), np.asarray(values, np.float64), np.asarray(clipped, bool)]
        for array in arrays:
            array.flags.writeable = False
        return cls(*arrays, strict, int(step_ns))

    def slice(self, lo: int, hi: int) -> "PartSamples":
        base = self.base if self.base is not None else self
        return PartSamples(self.times_ns[lo:hi], self.values[lo:hi], self.clipped[lo:hi], self.strict,
                           self.step_ns, base, self.start + lo)

    def follows_in_base(self, earlier: "PartSamples") -> bool:
        """Whether this slice starts where ``earlier`` ends, in the same arrays."""
        return (self.base is not None and self.base is earlier.base
                and self.start == earlier.start + earlier.times_ns.size)


def joined_without_copy(pieces: list[PartSamples]):
    """The arrays of consecutive slices of one base as one view, or None if they are not."""
    if not all(p.strict and b.follows_in_base(p) for p, b in zip(pieces[:-1], pieces[1:])):
        return None
    base, lo = pieces[0].base, pieces[0].start
    hi = pieces[-1].start + pieces[-1].times_ns.size
    return base.times_ns[lo:hi], base.values[lo:hi], base.clipped[lo:hi]


def _sorted(times: np.ndarray) -> bool:
    return times.size < 2 or time_step_range(times)[0] >= 0


def _strictly_increasing(times: np.ndarray) -> bool:
    """Whether ``times`` rise strictly (parts of one sensor that follow each other in time)."""
    return times.size < 2 or time_step_range(times)[0] > 0


def _day_runs(times: np.ndarray):
    """(``YYYY-MM-DD``, lo, hi) runs of sorted UTC ns times, one per day that has samples."""
    if times.size == 0:
        return []
    first, last = int(times[0]) // NS_PER_DAY, int(times[-1]) // NS_PER_DAY
    edges = np.searchsorted(times, np.arange(first + 1, last + 1, dtype=np.int64) * NS_PER_DAY)
    bounds = np.concatenate(([0], edges, [times.size]))
    return [(pd.Timestamp((first + k) * NS_PER_DAY, unit="ns").strftime("%Y-%m-%d"), int(lo), int(hi))
            for k, (lo, hi) in enumerate(zip(bounds[:-1], bounds[1:])) if hi > lo]
