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
    assert pq.read_schema(quiet_part).names == ["time_ns", "value"]
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
