"""Timestamps to UTC (service.timeparse).

Daylight-saving rules used for the expected instants (IANA tz database; common practice,
quoted from memory): the United Kingdom (Europe/London) changes at 01:00 UTC on the last
Sunday of March (GMT -> BST, UTC+1: local 01:00 jumps to 02:00) and of October (BST -> GMT:
local 02:00 falls back to 01:00); in 2024 those Sundays are 31 March and 27 October. The
United States (America/New_York) falls back at 02:00 EDT on the first Sunday of November
(3 November 2024): local 01:00-02:00 occurs first as EDT (UTC-4), then as EST (UTC-5).
"""

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from service.timeparse import (
    TimeParseError,
    check_timezone,
    epoch_to_ns,
    localize_wall_times,
    parse_times,
)


def utc(text: str) -> int:
    return pd.Timestamp(text).value


def wall(*texts: str) -> np.ndarray:
    return np.array([pd.Timestamp(t).value for t in texts], dtype=np.int64)


class TestOffsetsAndEpoch:
    def test_iso_with_offsets_changing_in_file(self):
        # 01:30+01:00 is 00:30Z; 01:30+00:00 is 01:30Z; "Z" and "+0100" spellings too
        parsed = parse_times(["2024-10-27T01:30:00+01:00", "2024-10-27T01:30:00+00:00",
                              "2024-10-27T02:00:00Z", "2024-10-27T03:00:00.5+0100"], "UTC")
        assert parsed.form == "iso_offset"
        assert parsed.time_ns.tolist() == [utc("2024-10-27T00:30Z"), utc("2024-10-27T01:30Z"),
                                           utc("2024-10-27T02:00Z"), utc("2024-10-27T02:00:00.5Z")]

    def test_offset_times_ignore_the_zone(self):
        parsed = parse_times(["2024-06-01T12:00:00+02:00"], "America/New_York")
        assert parsed.time_ns[0] == utc("2024-06-01T10:00Z")

    def test_epoch_seconds_fractional(self):
        # 1711846800 s after 1970-01-01Z is 2024-03-31T01:00:00Z (analytical)
        parsed = parse_times(pa.array([1711846800.25, 1711846801.0]), "Europe/London")
        assert parsed.form == "epoch_s"
        assert parsed.time_ns.tolist() == [utc("2024-03-31T01:00:00.25Z"),
                                           utc("2024-03-31T01:00:01Z")]

    def test_epoch_as_text(self):
        parsed = parse_times(["1711846800", "1711846801"], "UTC")
        assert parsed.time_ns[1] - parsed.time_ns[0] == 1_000_000_000

    def test_epoch_milliseconds_by_magnitude(self):
        ns, form, notes = epoch_to_ns(np.array([1711846800123, 1711846800124]))
        assert form == "epoch_ms" and ns[0] == utc("2024-03-31T01:00:00.123Z")
        assert "read as ms" in notes[0]

    def test_epoch_unit_given(self):
        ns, form, _ = epoch_to_ns(np.array([1711846800.0]), "s")
        assert form == "epoch_s" and ns[0] == utc("2024-03-31T01:00Z")

    def test_decimal_comma_fraction(self):
        # ISO 8601 allows "," before the fraction of a second
        parsed = parse_times(["2024-06-01T10:00:00,25Z"], "UTC")
        assert parsed.time_ns[0] == utc("2024-06-01T10:00:00.25Z")

    def test_arrow_timestamps(self):
        aware = pa.array([utc("2024-06-01T10:00Z")], pa.timestamp("ns", tz="UTC"))
        assert parse_times(aware, "Europe/London").time_ns[0] == utc("2024-06-01T10:00Z")
        naive = pa.array(wall("2024-06-01T11:00"), pa.int64()).cast(pa.timestamp("ns"))
        # 11:00 BST (UTC+1) is 10:00Z
        parsed = parse_times(naive, "Europe/London")
        assert parsed.form == "timestamp_local" and parsed.time_ns[0] == utc("2024-06-01T10:00Z")


class TestLocalTime:
    def test_summer_and_winter_offsets(self):
        # 2024-01-15 12:00 GMT = 12:00Z; 2024-07-15 12:00 BST = 11:00Z
        parsed = parse_times(["2024-01-15 12:00:00", "2024-07-15 12:00:00"], "Europe/London")
        assert parsed.form == "iso_local"
        assert parsed.time_ns.tolist() == [utc("2024-01-15T12:00Z"), utc("2024-07-15T11:00Z")]

    def test_spring_forward_continuous(self):
        # 00:59:59 GMT = 00:59:59Z; the next local second is 02:00:00 BST = 01:00:00Z
        utc_ns, notes = localize_wall_times(
            wall("2024-03-31T00:59:58", "2024-03-31T00:59:59", "2024-03-31T02:00:00"),
            "Europe/London")
        assert np.diff(utc_ns).tolist() == [10**9, 10**9]
        assert utc_ns[2] == utc("2024-03-31T01:00:00Z")
        assert any("UTC+00:00 to UTC+01:00" in n for n in notes)

    def test_time_in_gap_read_with_offset_before(self):
        # local 01:30 does not exist on 2024-03-31; with GMT (the offset before) it is 01:30Z
        utc_ns, notes = localize_wall_times(wall("2024-03-31T00:30", "2024-03-31T01:30"),
                                            "Europe/London")
        assert utc_ns.tolist() == [utc("2024-03-31T00:30Z"), utc("2024-03-31T01:30Z")]
        assert any("daylight-saving gap" in n and "UTC+00:00" in n for n in notes)

    def test_repeated_hour_split_at_step_back(self):
        # file order 00:30, 01:00, 01:30 (BST: 23:30Z, 00:00Z, 00:30Z), then the clock falls
        # back: 01:00, 01:30 (GMT: 01:00Z, 01:30Z), 02:00 GMT = 02:00Z
        utc_ns, notes = localize_wall_times(
            wall("2024-10-27T00:30", "2024-10-27T01:00", "2024-10-27T01:30", "2024-10-27T01:00",
                 "2024-10-27T01:30", "2024-10-27T02:00"),
            "Europe/London", describe_row=lambda i: f"line {i + 2}")
        assert utc_ns.tolist() == [utc("2024-10-26T23:30Z"), utc("2024-10-27T00:00Z"),
                                   utc("2024-10-27T00:30Z"), utc("2024-10-27T01:00Z"),
                                   utc("2024-10-27T01:30Z"), utc("2024-10-27T02:00Z")]
        repeat = [n for n in notes if "repeated hour" in n]
        assert repeat and "2 read as the first pass (UTC+01:00)" in repeat[0]
        assert "second pass from line 5" in repeat[0]

    def test_repeated_hour_first_pass_from_rows_before(self):
        # an hourly file ending inside the repeated hour: 00:30 BST then 01:10, 01:50 BST
        utc_ns, _ = localize_wall_times(
            wall("2024-10-27T00:30", "2024-10-27T01:10", "2024-10-27T01:50"), "Europe/London")
        assert utc_ns[-1] == utc("2024-10-27T00:50Z")

    def test_repeated_hour_second_pass_from_rows_after(self):
        # 01:10, 01:50 then 02:10 GMT: second pass, 01:10Z and 01:50Z
        utc_ns, _ = localize_wall_times(
            wall("2024-10-27T01:10", "2024-10-27T01:50", "2024-10-27T02:10"), "Europe/London")
        assert utc_ns.tolist() == [utc("2024-10-27T01:10Z"), utc("2024-10-27T01:50Z"),
                                   utc("2024-10-27T02:10Z")]

    def test_new_york_fall_back(self):
        # 01:30 EDT (UTC-4) = 05:30Z, then 01:30 EST (UTC-5) = 06:30Z
        utc_ns, _ = localize_wall_times(
            wall("2024-11-03T00:30", "2024-11-03T01:30", "2024-11-03T01:00",
                 "2024-11-03T01:30"), "America/New_York")
        assert utc_ns.tolist() == [utc("2024-11-03T04:30Z"), utc("2024-11-03T05:30Z"),
                                   utc("2024-11-03T06:00Z"), utc("2024-11-03T06:30Z")]

    def test_large_constant_offset_fast_path(self):
        walls = wall("2024-06-01T00:00") + np.arange(100_000, dtype=np.int64) * 10_000_000
        utc_ns, notes = localize_wall_times(walls, "Europe/Lisbon")  # WEST, UTC+1 in June
        assert utc_ns[0] == utc("2024-05-31T23:00Z") and notes == ()


class TestRefused:
    def test_repeated_hour_unresolvable(self):
        with pytest.raises(TimeParseError, match="wholly inside it.*UTC offsets") as info:
            localize_wall_times(wall("2024-10-27T01:10", "2024-10-27T01:20"), "Europe/London")
        assert info.value.row == 0

    def test_repeated_hour_shuffled(self):
        with pytest.raises(TimeParseError, match="out of order"):
            localize_wall_times(wall("2024-10-27T00:50", "2024-10-27T01:30", "2024-10-27T01:10",
                                     "2024-10-27T01:40", "2024-10-27T01:20",
                                     "2024-10-27T02:30"), "Europe/London")

    def test_unparseable(self):
        with pytest.raises(TimeParseError, match=r"'27/10/2024 01:00' at row 2; expected ISO"):
            parse_times(["2024-10-27T00:00:00", "27/10/2024 01:00"], "UTC")

    def test_mixed_offset_and_naive(self):
        with pytest.raises(TimeParseError, match="has no UTC offset unlike the rows before"):
            parse_times(["2024-10-27T00:00:00Z", "2024-10-27T00:00:01"], "UTC")

    def test_empty(self):
        with pytest.raises(TimeParseError, match="empty timestamp at row 2"):
            parse_times(["2024-10-27T00:00:00", " "], "UTC")

    def test_clock_reset(self):
        with pytest.raises(TimeParseError, match="1970-01-01.*outside 1980..2100.*clock"):
            parse_times(["1970-01-01T00:00:05"], "UTC")

    def test_unknown_zone(self):
        with pytest.raises(ValueError, match="unknown time zone 'CEST'.*IANA"):
            check_timezone("CEST")
