"""Display reductions: at most MAX_POINTS per mark, every column's extremes kept.

The min/max-per-pixel-column decimation is common practice for drawing long traces (it is
what oscilloscopes' "peak detect" mode does); the checks below compare with a brute-force
min/max over the same columns.
"""

import numpy as np
import pytest

from specbench.widgets._reduce import COLUMNS, MAX_POINTS, overview, reduce_sorted


def _columns(x, columns, log=False):
    u = np.log10(x) if log else x
    width = (u[-1] - u[0]) / columns
    return np.minimum(((u - u[0]) / width).astype(int), columns - 1)


class TestReduceSorted:
    def test_short_traces_pass_whole(self):
        x = np.linspace(0, 10, 1000)
        red = reduce_sorted(x, np.sin(x))
        np.testing.assert_array_equal(red.index, np.arange(1000))
        np.testing.assert_array_equal(red.envelope(np.cos(x), "min"), np.cos(x))

    def test_long_trace_keeps_every_column_extreme(self):
        rng = np.random.default_rng(1)
        n = 1_000_003
        x = np.linspace(0.0, 5000.0, n)
        y = rng.standard_normal(n)
        y[123_456] = 50.0  # a narrow peak between pixels
        y[777_777] = -60.0
        red = reduce_sorted(x, y)
        assert red.size <= 2 * COLUMNS + 2
        kept = y[red.index]
        assert kept.max() == 50.0 and kept.min() == -60.0
        col = _columns(x, COLUMNS)
        for c in (0, 17, 600, COLUMNS - 1):
            sel = col == c
            assert y[sel].max() in kept and y[sel].min() in kept
        assert np.all(np.diff(red.index) > 0)
        assert red.index[0] == 0 and red.index[-1] == n - 1

    def test_envelope_is_the_column_min_and_max(self):
        rng = np.random.default_rng(2)
        n = 200_000
        x = np.arange(n, dtype=float)
        y = rng.standard_normal(n)
        lo = y - rng.random(n)
        hi = y + rng.random(n)
        red = reduce_sorted(x, y)
        col = _columns(x, COLUMNS)
        env_lo, env_hi = red.envelope(lo, "min"), red.envelope(hi, "max")
        for k, i in enumerate(red.index[::97]):
            sel = col == col[i]
            j = k * 97
            assert env_lo[j] == lo[sel].min()
            assert env_hi[j] == hi[sel].max()

    def test_log_columns_leave_out_nonpositive_x(self):
        x = np.linspace(0.0, 50_000.0, 400_001)
        y = 1.0 / (1.0 + x)
        red = reduce_sorted(x, y, log=True)
        assert red.size <= 2 * COLUMNS + 2
        assert x[red.index].min() > 0
        # log-spaced columns: the first decade (up to 1 Hz, 8 bins) is kept whole
        assert np.count_nonzero(x[red.index] <= 1.0) == 8

    def test_visible_range_only(self):
        x = np.linspace(0, 1000, 1_000_000)
        y = np.sin(x)
        red = reduce_sorted(x, y, lo=100.0, hi=200.0)
        xs = x[red.index]
        assert xs[0] < 100.0 <= xs[1] and xs[-2] <= 200.0 < xs[-1]
        assert red.size <= 2 * COLUMNS + 2

    def test_a_short_trace_ignores_the_visible_range(self):
        x = np.linspace(0, 10, 500)
        np.testing.assert_array_equal(reduce_sorted(x, x, lo=2.0, hi=3.0).index, np.arange(500))

    def test_nan_columns_are_dropped(self):
        x = np.arange(100_000, dtype=float)
        y = np.ones_like(x)
        y[:50_000] = np.nan
        red = reduce_sorted(x, y)
        assert np.all(np.isfinite(y[red.index]) | (red.index == 0))


class TestOverview:
    @pytest.mark.parametrize("n", [10, 4_800, 1_000_000, 10_000_019])
    def test_bounded_and_peaks_kept(self, n):
        rng = np.random.default_rng(n)
        y = rng.standard_normal(n).astype(np.float32)
        y[n // 3] = 40
        y[n // 2] = -40
        t, v = overview(y, 1000.0)
        assert t.size == v.size <= MAX_POINTS
        assert v.max() == 40 and v.min() == -40
        assert np.all(np.diff(t) >= 0)
        assert t[0] >= 0 and t[-1] <= (n - 1) / 1000.0
