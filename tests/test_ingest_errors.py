"""Files that must be quarantined, and the message each must give (service.ingest)."""

import gzip

import pytest

from service.ingest import ChannelSpec, IngestError, read_logger_file


@pytest.fixture
def channels():
    return {
        "PT01": ChannelSpec("PT01", "pressure", "kPa", "UTC", range_max=2500.0),
        "PT02": ChannelSpec("PT02", "pressure", "bar", "Europe/London"),
        "PT05": ChannelSpec("PT05", "pressure", "kPa", "Europe/Lisbon"),
    }


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def refused(path, channels, pattern):
    with pytest.raises(IngestError, match=pattern):
        read_logger_file(path, channels)


def test_header_unit_contradicts_configuration(tmp_path, channels):
    path = write(tmp_path, "u1.csv", "time,PT01 [bar]\n2024-06-01T10:00:00Z,1\n")
    refused(path, channels, r"^u1\.csv: column 'PT01 \[bar\]' is in bar but sensor PT01 is "
                            r"configured in kPa; correct the sensor's unit")


def test_long_unit_column_contradicts_configuration(tmp_path, channels):
    path = write(tmp_path, "u2.csv", "time,sensor,value,unit\n2024-06-01T10:00:00Z,PT01,1,kPa\n"
                                     "2024-06-01T10:00:01Z,PT01,1,psi\n")
    refused(path, channels, r"u2\.csv: line 3, column 'unit' is in psi but sensor PT01 is "
                            r"configured in kPa")


def test_unknown_unit_in_brackets(tmp_path, channels):
    path = write(tmp_path, "u3.csv", "time,PT01 [kgf/cm2]\n2024-06-01T10:00:00Z,1\n")
    refused(path, channels, r"column 'PT01 \[kgf/cm2\]': 'kgf/cm2' is not a known pressure "
                            r"unit; expected one of Pa, kPa")


def test_absolute_unit_in_header(tmp_path, channels):
    path = write(tmp_path, "u4.csv", "time,PT02 (bara)\n2024-06-01T10:00:00Z,1\n")
    refused(path, channels, r"column 'PT02 \(bara\)': unit 'bara' is an absolute pressure")


def test_mostly_non_numeric_column(tmp_path, channels):
    rows = "".join(f"2024-06-01T10:00:0{s}Z,{'open' if s % 2 else s}\n" for s in range(10))
    path = write(tmp_path, "v1.csv", "time,PT01\n" + rows)
    refused(path, channels, r"v1\.csv: sensor PT01: 5 of 10 cells \(50 %\) are not numbers "
                            r"\(first at line 3\); at most 20 % may be")


def test_unparseable_timestamp(tmp_path, channels):
    path = write(tmp_path, "t1.csv", "time,PT01\n2024-06-01T10:00:00Z,1\n"
                                     "2024-06-01T10:00:01Z,2\n01.06.2024 10:00,3\n")
    refused(path, channels, r"t1\.csv: unparseable timestamp '01\.06\.2024 10:00' at line 4; "
                            r"expected ISO 8601")


def test_empty_timestamp_with_values(tmp_path, channels):
    path = write(tmp_path, "t2.csv", "time,PT01\n2024-06-01T10:00:00Z,1\n,2\n")
    refused(path, channels, r"t2\.csv: empty timestamp at line 3")


def test_mixed_offsets_and_naive(tmp_path, channels):
    path = write(tmp_path, "t3.csv", "time,PT01\n2024-06-01T10:00:00+01:00,1\n"
                                     "2024-06-01T10:00:01,2\n")
    refused(path, channels, r"'2024-06-01T10:00:01' at line 3 has no UTC offset unlike the rows")


def test_repeated_hour_cannot_be_resolved(tmp_path, channels):
    path = write(tmp_path, "t4.csv", "time,PT02\n2024-10-27 01:10:00,1\n2024-10-27 01:40:00,2\n")
    refused(path, channels, r"t4\.csv: timestamp at line 2 falls in the hour repeated when "
                            r"clocks went back .* export the file with UTC offsets")


def test_clock_reset(tmp_path, channels):
    path = write(tmp_path, "t5.csv", "time,PT01\n2000-01-01T00:00:00Z,1\n1970-01-01T00:00:09Z,1\n")
    refused(path, channels, r"1970-01-01T00:00:09Z at line 3 lies outside 1980\.\.2100")


def test_naive_times_sensors_in_different_zones(tmp_path, channels):
    path = write(tmp_path, "t6.csv", "time,PT02,PT05\n2024-06-01 10:00:00,1,2\n")
    refused(path, channels, r"no UTC offset but the file's sensors are configured in different "
                            r"time zones \(Europe/Lisbon, Europe/London\)")


def test_ragged_row(tmp_path, channels):
    path = write(tmp_path, "r1.csv", "time,PT01,PT02\n2024-06-01T10:00:00Z,1,2\n"
                                     "2024-06-01T10:00:01Z,1\n2024-06-01T10:00:02Z,1,2\n")
    refused(path, channels, r"r1\.csv: line 3 has 2 fields but the header has 3")


def test_ragged_row_in_gzip(tmp_path, channels):
    path = tmp_path / "r2.csv.gz"
    with gzip.open(path, "wt") as handle:
        handle.write("time;PT01\n2024-06-01T10:00:00Z;1\n2024-06-01T10:00:01Z;1;7\n")
    refused(path, channels, r"r2\.csv\.gz: line 3 has 3 fields but the header has 2")


def test_no_time_column(tmp_path, channels):
    path = write(tmp_path, "c1.csv", "when,PT01\n2024-06-01T10:00:00Z,1\n")
    refused(path, channels, r"c1\.csv: no time column among \['when', 'PT01'\]; expected a "
                            r"column named time, timestamp, datetime or utc")


def test_two_time_columns(tmp_path, channels):
    path = write(tmp_path, "c2.csv", "time,utc,PT01\n2024-06-01 10:00:00,2024-06-01 10:00:00,1\n")
    refused(path, channels, r"several time columns \('time', 'utc'\); expected exactly one")


def test_no_configured_sensor(tmp_path, channels):
    path = write(tmp_path, "c3.csv", "time,XX01,XX02\n2024-06-01T10:00:00Z,1,2\n")
    refused(path, channels, r"c3\.csv: no column of a configured sensor among \['time', 'XX01', "
                            r"'XX02'\]")


def test_long_no_configured_sensor(tmp_path, channels):
    path = write(tmp_path, "c4.csv", "time,sensor,value\n2024-06-01T10:00:00Z,XX01,1\n")
    refused(path, channels, r"no row of a configured sensor; sensor ids found: \['XX01'\]")


def test_sensor_in_two_columns(tmp_path, channels):
    path = write(tmp_path, "c5.csv", "time,PT01,PT01 [kPa]\n2024-06-01T10:00:00Z,1,1\n")
    refused(path, channels, r"sensor PT01 appears in two columns \('PT01' and 'PT01 \[kPa\]'\)")


def test_unknown_quality_flag(tmp_path, channels):
    path = write(tmp_path, "q1.csv", "time,sensor,value,flag\n2024-06-01T10:00:00Z,PT01,1,good\n"
                                     "2024-06-01T10:00:01Z,PT01,1,C0\n")
    refused(path, channels, r"q1\.csv: unknown quality flag 'c0' at line 3; expected good/ok")


def test_empty_file(tmp_path, channels):
    refused(write(tmp_path, "e1.csv", ""), channels, r"e1\.csv: the file is empty")


def test_header_only(tmp_path, channels):
    refused(write(tmp_path, "e2.csv", "time,PT01\n"), channels,
            r"e2\.csv: the file has a header but no data rows")


def test_single_column(tmp_path, channels):
    refused(write(tmp_path, "e3.csv", "time\n2024-06-01T10:00:00Z\n"), channels,
            r"no header line with a time column and at least one value column")


def test_unsupported_suffix(tmp_path, channels):
    refused(write(tmp_path, "x.xlsx", "PK"), channels,
            r"x\.xlsx: unsupported file type; expected one of \.csv, \.csv\.gz")


def test_broken_parquet(tmp_path, channels):
    path = tmp_path / "b.parquet"
    path.write_bytes(b"PAR1 not really")
    refused(path, channels, r"b\.parquet: not a readable Parquet file")


def test_truncated_gzip(tmp_path, channels):
    path = tmp_path / "g.csv.gz"
    path.write_bytes(gzip.compress(b"time,PT01\n" + b"2024-06-01T10:00:00Z,1\n" * 50)[:40])
    with pytest.raises(IngestError, match=r"g\.csv\.gz: "):
        read_logger_file(path, channels)


def test_invalid_channels_is_a_configuration_error(tmp_path):
    path = write(tmp_path, "ok.csv", "time,PT01\n2024-06-01T10:00:00Z,1\n")
    bad = {"PT01": ChannelSpec("PT01", "pressure", "kPa", "Central European Time")}
    with pytest.raises(ValueError, match="unknown time zone") as info:
        read_logger_file(path, bad)
    assert not isinstance(info.value, IngestError)


def _long_file(tmp_path, name, rows, replace):
    start = 1717236000  # 2024-06-01T10:00:00Z
    lines = [f"{start + k * 0.01:.2f},{500 + k % 7}" for k in range(rows)]
    for index, text in replace.items():
        lines[index] = text
    path = tmp_path / name
    path.write_text("epoch_s,PT01\n" + "\n".join(lines) + "\n")
    return path


def test_ragged_row_deep_in_a_large_file(tmp_path, channels):
    # beyond pyarrow's first block, where the threaded reader cannot number lines
    path = _long_file(tmp_path, "big_ragged.csv", 1_200_000, {1_100_000: "1728236000.00,1,2"})
    refused(path, channels, r"line 1100002 has 3 fields but the header has 2")


def test_marker_deep_in_a_large_file_is_clipped(tmp_path, channels):
    path = _long_file(tmp_path, "big_marker.csv", 300_000, {250_000: "1717238500.00,OVR"})
    result = read_logger_file(path, channels)
    values = result.samples["value"].to_numpy()
    assert result.samples["clipped"].to_numpy().nonzero()[0].tolist() == [250_000]
    assert values[250_000] == 2_500_000.0  # range_max 2500 kPa: "at least the range"
    assert "PT01: 1 over-range markers (first at line 250002)" in result.notes
