"""Every input form the inbox accepts (service.ingest), each in a small file written here.

Expected values are analytical: unit factors from NIST SP 811 (2008) (1 bar = 100 kPa
exactly, 1 psi = 6.894757 kPa, 1 m of water = 9.80665 kPa; from memory, see test_units.py),
UTC instants from the UK daylight-saving rule (last Sundays of March and October at 01:00 UTC;
common practice).
"""

import gzip
import re

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from service.ingest import ChannelSpec, read_logger_file


def utc(text: str) -> int:
    return pd.Timestamp(text).value


@pytest.fixture
def channels():
    return {
        "PT01": ChannelSpec("PT01", "pressure", "kPa", "UTC", range_max=2500.0),
        "PT02": ChannelSpec("PT02", "pressure", "bar", "Europe/London", range_max=16.0,
                            range_min=-1.0),
        "PT03": ChannelSpec("PT03", "pressure", "psi", "UTC"),
        "PT04": ChannelSpec("PT04", "pressure", "m", "UTC"),
        "FT01": ChannelSpec("FT01", "flow", "l/s", "UTC"),
        "VP01": ChannelSpec("VP01", "valve_position", "%", "UTC"),
    }


def write(tmp_path, name, text, encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def series(result, sensor):
    frame = result.samples[result.samples["sensor_id"] == sensor]
    return frame["time_ns"].tolist(), frame["value"].tolist(), frame["clipped"].tolist()


class TestWideCsv:
    def test_comma_iso_utc(self, tmp_path, channels):
        path = write(tmp_path, "a.csv", "time,PT01,PT03\n"
                     "2024-06-01T10:00:00Z,500.5,70\n2024-06-01T10:00:01Z,501,71\n")
        result = read_logger_file(path, channels)
        assert result.layout == "wide" and result.sensors == ("PT01", "PT03")
        times, values, clipped = series(result, "PT01")
        assert times == [utc("2024-06-01T10:00Z"), utc("2024-06-01T10:00:01Z")]
        assert values == [500_500.0, 501_000.0] and clipped == [False, False]
        psi_pa = 6894.757293168  # NIST SP 811 (2008): 6.894757 kPa (from memory)
        assert series(result, "PT03")[1] == pytest.approx([70 * psi_pa, 71 * psi_pa])
        assert list(result.samples.columns) == ["time_ns", "sensor_id", "value", "clipped"]
        assert result.samples["time_ns"].dtype == np.int64
        assert result.samples["value"].dtype == np.float64
        assert result.n_rows == 4 and result.notes == ()
        assert (result.first_time_ns, result.last_time_ns) == (utc("2024-06-01T10:00Z"),
                                                               utc("2024-06-01T10:00:01Z"))

    def test_semicolon_decimal_comma_bom_preamble(self, tmp_path, channels):
        text = ("\ufeff# logger 4471 export\n# site: north reservoir\n"
                "Zeit;PT02 [bar]\n2024-06-01 11:00:00,5;1,25\n2024-06-01 11:00:01;1,5\n")
        text = text.replace("Zeit", "Timestamp")
        result = read_logger_file(write(tmp_path, "b.csv", text), channels)
        times, values, _ = series(result, "PT02")
        # local 11:00:00.5 BST (Europe/London, UTC+1) is 10:00:00.5Z; 1.25 bar = 125 kPa
        assert times == [utc("2024-06-01T10:00:00.5Z"), utc("2024-06-01T10:00:01Z")]
        assert values == [125_000.0, 150_000.0]

    def test_gzip(self, tmp_path, channels):
        path = tmp_path / "c.csv.gz"
        with gzip.open(path, "wt") as handle:
            handle.write("time,PT04 [m]\n2024-06-01T10:00:00Z,10\n")
        result = read_logger_file(path, channels)
        assert series(result, "PT04")[1] == [pytest.approx(98_066.5)]  # 10 m of water

    def test_tab_and_cp1252(self, tmp_path, channels):
        text = "time\tPT01 (kPa)\tcomment °\n2024-06-01T10:00:00Z\t5\tµ\n"
        result = read_logger_file(write(tmp_path, "d.txt", text, "cp1252"), channels)
        assert series(result, "PT01")[1] == [5000.0]

    @pytest.mark.parametrize("header", ["PT02 [bar]", "PT02 (bar)", "PT02_bar", "PT02 barg",
                                        "pt02", "PT02 [ BAR ]"])
    def test_header_unit_forms(self, tmp_path, channels, header):
        path = write(tmp_path, "e.csv", f"time,{header}\n2024-01-10T10:00:00Z,2\n")
        assert series(read_logger_file(path, channels), "PT02")[1] == [200_000.0]

    def test_time_column_named_utc_overrides_zone(self, tmp_path, channels):
        path = write(tmp_path, "f.csv", "Time (UTC),PT02\n2024-06-01 10:00:00,1\n")
        assert series(read_logger_file(path, channels), "PT02")[0] == [utc("2024-06-01T10:00Z")]

    def test_separate_date_and_time(self, tmp_path, channels):
        path = write(tmp_path, "g.csv", "Date,Time,PT01\n2024-06-01,10:00:00,1\n")
        assert series(read_logger_file(path, channels), "PT01")[0] == [utc("2024-06-01T10:00Z")]

    def test_epoch_seconds_and_milliseconds(self, tmp_path, channels):
        path = write(tmp_path, "h.csv", "epoch,PT01\n1717236000,1\n1717236000.5,2\n")
        assert series(read_logger_file(path, channels), "PT01")[0] == [
            utc("2024-06-01T10:00Z"), utc("2024-06-01T10:00:00.5Z")]
        path = write(tmp_path, "i.csv", "time_ms,PT01\n1717236000000,1\n")
        result = read_logger_file(path, channels)
        assert result.time_form == "epoch_ms" and result.first_time_ns == utc("2024-06-01T10:00Z")

    def test_flow_and_valve_position(self, tmp_path, channels):
        path = write(tmp_path, "j.csv", "time,FT01,VP01\n2024-06-01T10:00:00Z,125,40\n")
        result = read_logger_file(path, channels)
        assert series(result, "FT01")[1] == [pytest.approx(0.125)]
        assert series(result, "VP01")[1] == [pytest.approx(0.40)]

    def test_unknown_columns_skipped_with_note(self, tmp_path, channels):
        path = write(tmp_path, "k.csv", "time,PT01,XX77,battery_v\n2024-06-01T10:00:00Z,1,2,3\n")
        result = read_logger_file(path, channels)
        assert result.sensors == ("PT01",)
        assert "2 columns of sensors the configuration does not know were skipped: 'XX77', " \
               "'battery_v'" in result.notes[0]


class TestLocalTimeFiles:
    def test_spring_forward_file(self, tmp_path, channels):
        # Europe/London 2024-03-31: 00:59:59 GMT = 00:59:59Z, 02:00:00 BST = 01:00:00Z
        path = write(tmp_path, "l.csv", "time,PT02\n2024-03-31 00:59:58,1\n"
                     "2024-03-31 00:59:59,1\n2024-03-31 02:00:00,1\n")
        result = read_logger_file(path, channels)
        assert np.diff(series(result, "PT02")[0]).tolist() == [10**9, 10**9]
        assert any("UTC+00:00 to UTC+01:00" in n for n in result.notes)

    def test_fall_back_file(self, tmp_path, channels):
        # Europe/London 2024-10-27: 01:30 BST = 00:30Z; after the step back 01:30 GMT = 01:30Z
        path = write(tmp_path, "m.csv", "time,PT02\n2024-10-27 00:30:00,1\n"
                     "2024-10-27 01:30:00,2\n2024-10-27 01:00:00,3\n2024-10-27 01:30:00,4\n")
        result = read_logger_file(path, channels)
        assert series(result, "PT02")[0] == [utc("2024-10-26T23:30Z"), utc("2024-10-27T00:30Z"),
                                              utc("2024-10-27T01:00Z"), utc("2024-10-27T01:30Z")]
        assert any("repeated hour" in n and "second pass from line 4" in n for n in result.notes)


class TestCellsAndOrder:
    def test_markers_gaps_and_clipping(self, tmp_path, channels):
        text = ("time,PT01,PT02,PT03\n"
                "2024-06-01T10:00:00Z,1,OVR,HI\n"
                "2024-06-01T10:00:01Z,ERR,-over,2\n"
                "2024-06-01T10:00:02Z,,2,3\n"
                "2024-06-01T10:00:03Z,2600,3,4\n"
                "2024-06-01T10:00:04Z,---,4,5\n")
        result = read_logger_file(write(tmp_path, "n.csv", text), channels)
        _, pt01, pt01_clipped = series(result, "PT01")
        assert np.isnan(pt01[1]) and np.isnan(pt01[2]) and np.isnan(pt01[4])
        assert pt01[3] == 2_600_000.0 and pt01_clipped == [False, False, False, True, False]
        _, pt02, pt02_clipped = series(result, "PT02")
        # over range: at least range_max 16 bar; under range: at most range_min -1 bar
        assert pt02[:2] == [1_600_000.0, -100_000.0] and pt02_clipped[:2] == [True, True]
        _, pt03, pt03_clipped = series(result, "PT03")
        assert np.isnan(pt03[0]) and not pt03_clipped[0]  # no range configured: a gap
        notes = "\n".join(result.notes)
        assert "PT01: 2 error markers read as gaps (first at line 3)" in notes
        assert "PT02: 1 over-range markers (first at line 2)" in notes
        assert "PT03: 1 over- or under-range samples read as gaps because the sensor's range " \
               "is not configured" in notes
        assert ("PT01: 1 recorded values at or beyond the transducer's range marked clipped"
                in notes)

    def test_few_unknown_cells_become_gaps(self, tmp_path, channels):
        rows = "".join(f"2024-06-01T10:00:{s:02d}Z,{'#?' if s == 3 else s}\n" for s in range(10))
        result = read_logger_file(write(tmp_path, "o.csv", "time,PT01\n" + rows), channels)
        assert np.isnan(series(result, "PT01")[1][3])
        assert "PT01: 1 cells of unrecognised text read as gaps (first at line 5)" in result.notes

    def test_duplicates_and_unsorted(self, tmp_path, channels):
        text = ("time,PT01\n2024-06-01T10:00:02Z,3\n2024-06-01T10:00:00Z,1\n"
                "2024-06-01T10:00:01Z,2\n2024-06-01T10:00:01Z,9\n2024-06-01T10:00:02Z,3\n")
        result = read_logger_file(write(tmp_path, "p.csv", text), channels)
        times, values, _ = series(result, "PT01")
        assert values == [1000.0, 2000.0, 3000.0]  # the first row of each time kept
        assert times == [utc("2024-06-01T10:00Z"), utc("2024-06-01T10:00:01Z"),
                         utc("2024-06-01T10:00:02Z")]
        assert result.sensor_spans == {"PT01": (utc("2024-06-01T10:00Z"), utc("2024-06-01T10:00:02Z"))}
        assert (result.first_time_ns, result.last_time_ns) == result.sensor_spans["PT01"]
        assert result.sensor_steps == {"PT01": (10**9, 10**9)}  # of the sorted, kept times
        notes = "\n".join(result.notes)
        assert ("rows were not in time order (1 steps back in time, first at line 3); sorted"
                in notes)
        assert "2 duplicated timestamps dropped" in notes
        assert "PT01: 1 duplicated timestamps had a value different from the first row's " \
               "(first at line 5)" in notes

    def test_gaps_kept_never_interpolated(self, tmp_path, channels):
        rows = [f"2024-06-01T10:00:{s:02d}Z,{s}" for s in range(6)]
        rows[2] = "2024-06-01T10:00:02Z,"
        rows += ["2024-06-01T10:01:00Z,60", "", "2024-06-01T10:01:01Z,61"]
        result = read_logger_file(write(tmp_path, "q.csv", "time,PT01\n" + "\n".join(rows) + "\n"),
                                  channels)
        times, values, _ = series(result, "PT01")
        assert len(values) == 8 and np.isnan(values[2])
        assert times[6] - times[5] == 55 * 10**9  # no rows invented inside the gap
        notes = "\n".join(result.notes)
        assert "1 blank lines skipped" in notes
        assert "PT01: 1 of 8 samples are gaps (no value)" in notes
        assert "PT01: 1 gaps in time longer than 5 sampling intervals (1 s), the longest 55 s " \
               "after 2024-06-01T10:00:05Z" in notes

    def test_quality_column_per_sensor(self, tmp_path, channels):
        text = ("time,PT02,PT02_quality\n2024-06-01T10:00:00Z,1,good\n"
                "2024-06-01T10:00:01Z,2,BAD\n2024-06-01T10:00:02Z,3,over-range\n")
        _, values, clipped = series(read_logger_file(write(tmp_path, "r.csv", text), channels),
                                    "PT02")
        assert values[0] == 100_000.0 and np.isnan(values[1]) and values[2] == 1_600_000.0
        assert clipped == [False, False, True]


class TestLongLayout:
    def test_long_csv_with_flags_and_units(self, tmp_path, channels):
        text = ("timestamp,sensor_id,value,quality,unit\n"
                "2024-06-01T10:00:00Z,PT01,500,good,kPa\n"
                "2024-06-01T10:00:00Z,PT02,5,ok,bar\n"
                "2024-06-01T10:00:01Z,PT01,510,suspect,kPa\n"
                "2024-06-01T10:00:01Z,ZZ01,1,good,kPa\n"
                "2024-06-01T10:00:01Z,PT02,17,over,bar\n"
                "2024-06-01T10:00:02Z,PT01,,bad,kPa\n")
        result = read_logger_file(write(tmp_path, "s.csv", text), channels)
        assert result.layout == "long" and result.sensors == ("PT01", "PT02")
        assert series(result, "PT01")[1][:2] == [500_000.0, 510_000.0]
        assert series(result, "PT02")[1] == [500_000.0, 1_700_000.0]
        assert series(result, "PT02")[2] == [False, True]
        notes = "\n".join(result.notes)
        assert ("1 rows of 1 sensors the configuration does not know were skipped: ['ZZ01']"
                in notes)
        assert "PT01: 1 samples flagged suspect kept as recorded (first at line 4)" in notes

    def test_long_with_sensors_in_different_zones(self, tmp_path, channels):
        # PT01 in UTC, PT02 in Europe/London (BST in June): same wall time, instants 1 h apart
        text = ("time;sensor;reading\n2024-06-01 10:00:00;PT01;1\n2024-06-01 10:00:00;PT02;1\n")
        result = read_logger_file(write(tmp_path, "t.csv", text), channels)
        assert series(result, "PT01")[0] == [utc("2024-06-01T10:00Z")]
        assert series(result, "PT02")[0] == [utc("2024-06-01T09:00Z")]


class TestParquet:
    def test_wide_parquet_utc_timestamps(self, tmp_path, channels):
        times = pd.date_range("2024-06-01T10:00Z", periods=5, freq="10ms")
        frame = pd.DataFrame({"time": times, "PT01 [kPa]": np.arange(5.0),
                              "PT03": np.arange(5, dtype=np.int32)})
        frame.to_parquet(tmp_path / "u.parquet")
        result = read_logger_file(tmp_path / "u.parquet", channels)
        assert result.time_form == "timestamp_utc"
        assert series(result, "PT01")[0][-1] == utc("2024-06-01T10:00:00.04Z")
        assert series(result, "PT03")[1][1] == pytest.approx(6894.757293168)

    def test_parquet_naive_index_local_time(self, tmp_path, channels):
        index = pd.DatetimeIndex(["2024-06-01 11:00:00", "2024-06-01 11:00:01"], name="t")
        pd.DataFrame({"PT02": [1.0, np.nan]}, index=index).to_parquet(tmp_path / "v.parquet")
        times, values, _ = series(read_logger_file(tmp_path / "v.parquet", channels), "PT02")
        assert times[0] == utc("2024-06-01T10:00Z") and np.isnan(values[1])

    def test_typed_columns_give_what_the_same_cells_as_text_give(self, tmp_path, channels):
        """A float32 column with a null, a NaN, values at and beyond the range, an infinity and
        an impossible value: read typed (census taken while copying) and as text (census
        taken by the checks), the samples, clipped flags and notes agree."""
        pt01 = [500.0, None, float("nan"), 2500.0, 2600.0, float("inf"), -200.0, 501.0]
        pt02 = [1.0, 2.0, 16.0, -1.5, 3.0, 4.0, 5.0, 6.0]
        times = pd.date_range("2024-06-01T10:00Z", periods=len(pt01), freq="1s")
        pq.write_table(pa.table({"time": pa.array(times),
                                 "PT01": pa.array(pt01, pa.float32()),
                                 "PT02": pa.array(pt02, pa.float64())}), tmp_path / "t.parquet")
        cell = lambda x: "" if x is None else ("NaN" if x != x else repr(float(x)).replace("inf", "Inf"))
        text = "time,PT01,PT02\n" + "".join(
            f"{t.isoformat()},{cell(a)},{cell(b)}\n" for t, a, b in zip(times, pt01, pt02))
        typed = read_logger_file(tmp_path / "t.parquet", {k: channels[k] for k in ("PT01", "PT02")})
        texts = read_logger_file(write(tmp_path, "t.csv", text), {k: channels[k] for k in ("PT01", "PT02")})
        for sensor in ("PT01", "PT02"):
            got, want = series(typed, sensor), series(texts, sensor)
            assert got[0] == want[0] and got[2] == want[2]
            np.testing.assert_array_equal(got[1], want[1])
        assert series(typed, "PT01")[2] == [False, False, False, True, True, True, False, False]
        where = lambda n: re.sub(r"(row|line) \d+", "<where>", n)  # Parquet rows, CSV lines
        assert [where(n) for n in typed.notes if n.startswith("PT0")] == \
            [where(n) for n in texts.notes if n.startswith("PT0")]
        assert any("values outside the physically possible range" in n for n in typed.notes)
        for result in (typed, texts):  # at the archive's precision, clipped or not
            values = result.samples["value"].to_numpy()
            np.testing.assert_array_equal(values, values.astype(np.float32).astype(np.float64))

    def test_long_parquet_dictionary_and_text_values(self, tmp_path, channels):
        table = pa.table({
            "time": pa.array([1717236000.0, 1717236000.0, 1717236001.0]),
            "channel": pa.array(["PT01", "PT02", "PT01"]).dictionary_encode(),
            "value": pa.array(["1.5", "OVR", "2"]),
        })
        pq.write_table(table, tmp_path / "w.parquet")
        result = read_logger_file(tmp_path / "w.parquet", channels)
        assert series(result, "PT01")[1] == [1500.0, 2000.0]
        assert series(result, "PT02")[1:] == ([1_600_000.0], [True])
        assert "PT02: 1 over-range markers (first at row 2)" in result.notes
