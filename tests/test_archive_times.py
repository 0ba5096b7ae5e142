"""Regular sample times as runs (service.archive_times): lossless, bounded, refused when not."""

from __future__ import annotations

import numpy as np
import pytest

from service.archive_times import (MAX_RUNS, runs_from_metadata, runs_to_metadata, time_runs,
                                   times_from_runs)


class TestTimeRuns:
    def test_empty_and_single_sample(self):
        for times in (np.array([], np.int64), np.array([123], np.int64)):
            runs = time_runs(times)
            assert runs is not None
            np.testing.assert_array_equal(times_from_runs(*runs), times)

    def test_regular_series_is_one_run(self):
        times = 1_700_000_000_000_000_000 + 10_000_000 * np.arange(500_000, dtype=np.int64)
        starts, steps, counts = time_runs(times)
        assert (starts.tolist(), steps.tolist(), counts.tolist()) == ([int(times[0])], [10_000_000], [500_000])
        np.testing.assert_array_equal(times_from_runs(starts, steps, counts), times)

    def test_gaps_and_a_rate_change_give_runs_that_round_trip(self):
        times = np.concatenate([np.arange(0, 100, 10), np.arange(1_000, 1_050, 10), np.arange(2_000, 2_010, 2),
                                [5_000]]).astype(np.int64)
        runs = time_runs(times)
        assert runs is not None and len(runs[0]) == 4
        np.testing.assert_array_equal(times_from_runs(*runs), times)

    def test_too_many_runs_or_a_step_that_is_not_positive_are_refused(self):
        jitter = np.cumsum(np.tile([999, 1001], 2 * MAX_RUNS)).astype(np.int64)
        assert time_runs(jitter) is None
        assert time_runs(np.array([0, 10, 10, 20], np.int64)) is None
        assert time_runs(np.array([0, 10, 5, 15], np.int64)) is None

    def test_metadata_round_trip(self):
        times = np.array([0, 5, 10, 100, 105], np.int64)
        runs = runs_from_metadata(runs_to_metadata(time_runs(times)))
        np.testing.assert_array_equal(times_from_runs(*runs), times)

    @pytest.mark.parametrize("seed", [1, 2, 3])
    def test_random_piecewise_regular_series_round_trip(self, seed):
        rng = np.random.default_rng(seed)
        pieces, start = [], 0
        for _ in range(rng.integers(1, 20)):
            step = int(rng.choice([1_000_000, 10_000_000, 500_000]))
            count = int(rng.integers(1, 1000))
            pieces.append(start + step * np.arange(count, dtype=np.int64))
            start = int(pieces[-1][-1]) + int(rng.integers(1, 10**9))
        times = np.concatenate(pieces)
        np.testing.assert_array_equal(times_from_runs(*time_runs(times)), times)
