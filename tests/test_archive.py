"""Sample archive: partitioning by system, sensor and UTC day; idempotent parts; orphans."""

from __future__ import annotations

import numpy as np
import pandas as pd

from service.archive import SampleArchive, part_key

DAY_NS = 86_400 * 10**9


def _samples(sensor: str, start_ns: int, n: int, step_ns: int) -> pd.DataFrame:
    times = start_ns + step_ns * np.arange(n, dtype=np.int64)
    return pd.DataFrame({"time_ns": times, "sensor_id": sensor, "value": np.arange(n, dtype=float),
                         "clipped": np.zeros(n, bool)})


def test_parts_split_by_day_and_read_back(tmp_path):
    archive = SampleArchive(tmp_path)
    start = 20_000 * DAY_NS - 5 * 10**9  # 5 s before midnight UTC
    frame = _samples("A", start, 10, 10**9)
    parts = archive.write_file_samples("ab" * 32, frame, {"A": "sys"})
    assert sorted(p.parent.name for p in parts) == ["date=2024-10-03", "date=2024-10-04"]
    back = archive.load_sensor("sys", "A", start, start + 10 * 10**9)
    np.testing.assert_array_equal(back["time_ns"].to_numpy(), frame["time_ns"].to_numpy())
    np.testing.assert_array_equal(back["value"].to_numpy(), frame["value"].to_numpy())


def test_window_bounds_are_half_open(tmp_path):
    archive = SampleArchive(tmp_path)
    frame = _samples("A", 0, 10, 10)
    archive.write_file_samples("cd" * 32, frame, {"A": "sys"})
    back = archive.load_sensor("sys", "A", 20, 50)
    assert back["time_ns"].tolist() == [20, 30, 40]


def test_same_file_twice_overwrites_its_parts(tmp_path):
    archive = SampleArchive(tmp_path)
    frame = _samples("A", 0, 5, 10)
    archive.write_file_samples("ef" * 32, frame, {"A": "sys"})
    archive.write_file_samples("ef" * 32, frame, {"A": "sys"})
    assert len(archive.load_sensor("sys", "A", 0, 100)) == 5


def test_overlapping_files_deduplicate_instants(tmp_path):
    archive = SampleArchive(tmp_path)
    archive.write_file_samples("01" * 32, _samples("A", 0, 5, 10), {"A": "sys"})
    archive.write_file_samples("02" * 32, _samples("A", 30, 5, 10), {"A": "sys"})
    back = archive.load_sensor("sys", "A", 0, 1000)
    assert back["time_ns"].tolist() == [0, 10, 20, 30, 40, 50, 60, 70]


def test_orphan_parts_removed_committed_kept(tmp_path):
    archive = SampleArchive(tmp_path)
    archive.write_file_samples("aa" * 32, _samples("A", 0, 5, 10), {"A": "sys"})
    archive.write_file_samples("bb" * 32, _samples("A", 100, 5, 10), {"A": "sys"})
    assert archive.remove_orphan_parts(["aa" * 32]) == 1
    names = [p.name for p in tmp_path.rglob("*.parquet")]
    assert names == [part_key("aa" * 32) + ".parquet"]


def test_sensor_slices_on_arrow_backed_and_object_ids():
    from service.archive import sensor_slices

    for dtype in ("object", "string[pyarrow]"):
        frame = pd.DataFrame({"sensor_id": pd.array(["A", "A", "B", "B", "B"], dtype=dtype),
                              "time_ns": np.arange(5)})
        slices = [(name, (s.start, s.stop)) for name, s in sensor_slices(frame)]
        assert slices == [("A", (0, 2)), ("B", (2, 5))]
    chunked = pd.DataFrame({"sensor_id": pd.concat([pd.Series(["A"] * 3, dtype="string[pyarrow]"),
                                                    pd.Series(["B"] * 2, dtype="string[pyarrow]")],
                                                   ignore_index=True)})
    assert [name for name, _ in sensor_slices(chunked)] == ["A", "B"]


def test_clipped_column_stored_only_where_clipped_and_read_back_from_disk(tmp_path):
    import pyarrow.parquet as pq

    writer = SampleArchive(tmp_path)
    quiet = _samples("A", 0, 6, 10)
    clipped = _samples("B", 0, 6, 10)
    clipped.loc[[2, 3], "clipped"] = True
    (quiet_part,) = writer.write_file_samples("a1" * 32, quiet, {"A": "sys"})
    (clipped_part,) = writer.write_file_samples("b1" * 32, clipped, {"B": "sys"})
    assert pq.read_schema(quiet_part).names == ["value"]  # regular times: runs in the metadata
    assert "clipped" in pq.read_schema(clipped_part).names
    reader = SampleArchive(tmp_path)  # a later pass: nothing cached, parts read from disk
    assert reader.load_sensor("sys", "A", 0, 100)["clipped"].tolist() == [False] * 6
    assert reader.load_sensor("sys", "B", 0, 100)["clipped"].tolist() == [False, False, True, True, False, False]


def test_parts_that_follow_in_time_and_parts_out_of_order_both_read_sorted(tmp_path):
    archive = SampleArchive(tmp_path)
    # the part whose name sorts first holds the later samples: read back in time order
    archive.write_file_samples("01" * 32, _samples("A", 100, 5, 10), {"A": "sys"})
    archive.write_file_samples("02" * 32, _samples("A", 0, 5, 10), {"A": "sys"})
    for reader in (archive, SampleArchive(tmp_path)):
        back = reader.load_sensor("sys", "A", 0, 1000)
        assert back["time_ns"].tolist() == [0, 10, 20, 30, 40, 100, 110, 120, 130, 140]


def test_sensor_slices_on_the_ingest_categorical_ids():
    from service.archive import sensor_slices

    ids = pd.Categorical.from_codes(np.array([0, 0, 1, 1, 1], np.int8), categories=["A", "B"])
    frame = pd.DataFrame({"sensor_id": ids, "time_ns": np.arange(5)})
    assert [(name, (s.start, s.stop)) for name, s in sensor_slices(frame)] == [("A", (0, 2)), ("B", (2, 5))]
    recurring = pd.DataFrame({"sensor_id": pd.Categorical.from_codes(np.array([0, 1, 0], np.int8), ["A", "B"])})
    assert [(name, rows.tolist()) for name, rows in sensor_slices(recurring)] == [("A", [0, 2]), ("B", [1])]


def test_one_file_across_midnight_reads_back_as_one_view_in_memory_and_equal_from_disk(tmp_path):
    archive = SampleArchive(tmp_path)
    start = 20_000 * DAY_NS - 5 * 10**9
    frame = _samples("A", start, 10, 10**9)
    archive.write_file_samples("ac" * 32, frame, {"A": "sys"})
    times, values, _ = archive.load_sensor_arrays("sys", "A", start, start + 10 * 10**9)
    again, _, _ = archive.load_sensor_arrays("sys", "A", start, start + 10 * 10**9)
    assert np.shares_memory(times, again)  # both days joined as a view, not a fresh copy
    assert not values.flags.writeable
    disk_times, disk_values, _ = SampleArchive(tmp_path).load_sensor_arrays("sys", "A", start, start + 10 * 10**9)
    np.testing.assert_array_equal(disk_times, frame["time_ns"].to_numpy())
    np.testing.assert_array_equal(disk_values, values)


def test_written_parts_leave_the_memory_cache_beyond_its_cap_and_read_back_from_disk(tmp_path):
    archive = SampleArchive(tmp_path, max_cached_samples=15)
    first = _samples("A", 0, 10, 10)
    second = _samples("A", 100, 10, 10)
    archive.write_file_samples("c1" * 32, first, {"A": "sys"})
    archive.write_file_samples("c2" * 32, second, {"A": "sys"})
    assert len(archive._written) == 1  # the second part pushed the cache over 15 samples
    back = archive.load_sensor("sys", "A", 0, 1000)
    assert back["time_ns"].tolist() == first["time_ns"].tolist() + second["time_ns"].tolist()
    np.testing.assert_array_equal(back["value"].to_numpy(), np.concatenate([first["value"], second["value"]]))


def test_jittered_times_keep_a_column_and_every_part_reads_back_exactly_from_disk(tmp_path):
    import pyarrow.parquet as pq

    rng = np.random.default_rng(3)
    steps = 10**9 + rng.integers(-2_000_000, 2_000_000, 200)  # a SCADA clock: 1 s +- 2 ms
    times = np.cumsum(steps).astype(np.int64)
    frame = pd.DataFrame({"time_ns": times, "sensor_id": "A", "value": rng.normal(5e5, 1e3, 200),
                          "clipped": np.zeros(200, bool)})
    writer = SampleArchive(tmp_path)
    (part,) = writer.write_file_samples("d1" * 32, frame, {"A": "sys"})
    assert pq.read_schema(part).names == ["time_ns", "value"]
    in_memory = writer.load_sensor("sys", "A", 0, int(times[-1]) + 1)
    from_disk = SampleArchive(tmp_path).load_sensor("sys", "A", 0, int(times[-1]) + 1)
    np.testing.assert_array_equal(from_disk["time_ns"].to_numpy(), times)
    np.testing.assert_array_equal(from_disk["value"].to_numpy(), in_memory["value"].to_numpy())


def test_values_are_kept_to_float32_precision_in_memory_and_on_disk(tmp_path):
    values = 612_345.678 + np.arange(8) * 0.01  # Pa: finer than float32 resolves at this size
    frame = pd.DataFrame({"time_ns": np.arange(8, dtype=np.int64) * 10_000_000, "sensor_id": "A",
                          "value": values, "clipped": np.zeros(8, bool)})
    writer = SampleArchive(tmp_path)
    writer.write_file_samples("e1" * 32, frame, {"A": "sys"})
    in_memory = writer.load_sensor("sys", "A", 0, 10**9)["value"].to_numpy()
    from_disk = SampleArchive(tmp_path).load_sensor("sys", "A", 0, 10**9)["value"].to_numpy()
    np.testing.assert_array_equal(in_memory, from_disk)
    np.testing.assert_array_equal(in_memory, values.astype(np.float32).astype(np.float64))
    # float32 keeps 24 significant bits: a relative error below 2**-24 (IEEE 754)
    assert np.max(np.abs(in_memory - values) / values) <= 2.0**-24


def test_a_part_with_a_time_column_and_float64_values_reads_back(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    folder = tmp_path / "system=sys" / "sensor=A" / "date=1970-01-01"
    folder.mkdir(parents=True)
    times = np.array([0, 10, 25, 40], np.int64)
    pq.write_table(pa.table({"time_ns": times, "value": [1.5, 2.5, 3.5, 4.5]}), folder / f"{part_key('f1' * 32)}.parquet")
    back = SampleArchive(tmp_path).load_sensor("sys", "A", 0, 100)
    assert back["time_ns"].tolist() == times.tolist()
    assert back["value"].tolist() == [1.5, 2.5, 3.5, 4.5]
    assert back["clipped"].tolist() == [False] * 4


def test_steps_known_from_the_ingest_give_the_same_parts(tmp_path):
    """A regular sensor staged with its step range (as the ingest reports it) stores the same
    time runs as one whose times the archive scans itself; an irregular one is scanned."""
    from service.archive import part_table
    from service.archive_times import METADATA_KEY, runs_from_metadata, times_from_runs

    start = 20_000 * DAY_NS - 5 * 10**9
    regular = _samples("A", start, 10, 10**9)
    scanned = SampleArchive(tmp_path / "scanned").stage_file_samples("ab" * 32, regular, {"A": "sys"})
    told = SampleArchive(tmp_path / "told").stage_file_samples(
        "ab" * 32, regular, {"A": "sys"}, {"A": (10**9, 10**9)})
    assert [part.step_ns for _, part in told] == [10**9, 10**9]
    for (_, a), (_, b) in zip(scanned, told, strict=True):
        assert part_table(a).equals(part_table(b), check_metadata=True)
    jittered = regular.assign(time_ns=regular["time_ns"] + np.arange(10) % 3)
    steps = np.diff(jittered["time_ns"].to_numpy())
    (_, part), *_ = SampleArchive(tmp_path / "jitter").stage_file_samples(
        "cd" * 32, jittered, {"A": "sys"}, {"A": (int(steps.min()), int(steps.max()))})
    assert part.step_ns == 0  # not regular: the archive finds its runs itself
    metadata = part_table(part).schema.metadata[METADATA_KEY]
    np.testing.assert_array_equal(times_from_runs(*runs_from_metadata(metadata)), part.times_ns)


def test_rounded_values_are_shared_not_copied(tmp_path):
    """Values the caller says are at float32 precision (the ingest's) are staged as they
    are; others are rounded to float32 in a copy, as they are written."""
    frame = _samples("A", 20_000 * DAY_NS, 10, 10**9).assign(value=np.linspace(0.1, 0.9, 10))
    given = frame["value"].to_numpy()
    (_, shared), = SampleArchive(tmp_path / "a").stage_file_samples(
        "ab" * 32, frame, {"A": "sys"}, values_rounded=True)
    assert np.shares_memory(shared.values, given)
    (_, rounded), = SampleArchive(tmp_path / "b").stage_file_samples("ab" * 32, frame, {"A": "sys"})
    assert not np.shares_memory(rounded.values, given)
    np.testing.assert_array_equal(rounded.values, given.astype(np.float32).astype(np.float64))
