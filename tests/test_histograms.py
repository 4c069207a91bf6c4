"""Range histograms merge to the same result as one histogram of all the values."""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from rasterbudget.methods.histograms import range_histogram


@given(st.lists(st.integers(0, 500), min_size=1, max_size=200), st.integers(1, 199))
def test_merged_parts_equal_the_whole(bins, cut):
    bins = np.array(bins)
    cut = min(cut, bins.size - 1) if bins.size > 1 else 1
    weights = bins * 0.5 + 1.0
    index = np.arange(bins.size, dtype=float)
    whole = range_histogram(bins, [weights], min_values=[index])
    if bins.size > 1:
        a = range_histogram(bins[:cut], [weights[:cut]], min_values=[index[:cut]])
        b = range_histogram(bins[cut:], [weights[cut:]], min_values=[index[cut:]])
        merged = b.merge(a)
    else:
        merged = whole
    np.testing.assert_allclose(merged.dense(501), whole.dense(501))
    dense = whole.dense(501)
    np.testing.assert_array_equal(dense[0], np.bincount(bins, minlength=501))
    assert dense[2][bins[0]] == min(index[bins == bins[0]])
