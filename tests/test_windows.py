"""Window planning: pending spans widened by the margin, merged, and cut to a maximum."""

from service.windows import plan_windows


def test_disjoint_spans_stay_apart():
    windows = plan_windows("s", [(0, 10), (1000, 1010)], margin_ns=5, max_core_ns=10_000)
    assert [(w.core_start_ns, w.core_end_ns) for w in windows] == [(-5, 16), (995, 1016)]


def test_load_span_adds_margin_both_sides():
    (window,) = plan_windows("s", [(100, 200)], margin_ns=10, max_core_ns=10_000)
    assert (window.load_start_ns, window.load_end_ns) == (80, 221)


def test_long_span_cut_into_contiguous_cores():
    windows = plan_windows("s", [(0, 99)], margin_ns=0, max_core_ns=25)
    cores = [(w.core_start_ns, w.core_end_ns) for w in windows]
    assert cores == [(0, 25), (25, 50), (50, 75), (75, 100)]
    # contiguous and non-overlapping: every instant belongs to exactly one core
    assert all(a[1] == b[0] for a, b in zip(cores, cores[1:]))
