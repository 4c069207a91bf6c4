"""Fixed-width histograms that store only their occupied bin range.

Per-block reductions (anchor histograms in pass 1, per-class histograms in pass 2) produce one of
these per block; merging two covers the union of their ranges. A block therefore costs memory in
proportion to the spread of its values, not to the full histogram range, which keeps the reduction
bounded however many blocks a scene has.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class RangeHistogram:
    """Rows of per-bin values over bins ``start .. start + values.shape[1] - 1``.

    Rows listed in ``min_rows`` merge by minimum (empty bins hold +inf); all others by sum.
    """

    start: int
    values: np.ndarray
    min_rows: tuple[int, ...] = ()

    @property
    def stop(self) -> int:
        return self.start + self.values.shape[1]

    def _padded(self, start: int, stop: int) -> np.ndarray:
        out = np.zeros((self.values.shape[0], stop - start), dtype=self.values.dtype)
        if self.min_rows:
            out[list(self.min_rows)] = np.inf
        out[:, self.start - start : self.stop - start] = self.values
        return out

    def merge(self, other: RangeHistogram | None) -> RangeHistogram:
        if other is None:
            return self
        start, stop = min(self.start, other.start), max(self.stop, other.stop)
        a, b = self._padded(start, stop), other._padded(start, stop)
        merged = a + b
        for row in self.min_rows:
            merged[row] = np.minimum(a[row], b[row])
        return RangeHistogram(start, merged, self.min_rows)

    def dense(self, n_bins: int) -> np.ndarray:
        """The full histogram over bins 0 .. n_bins - 1."""
        return self._padded(0, n_bins)


def merge_optional(a: RangeHistogram | None, b: RangeHistogram | None) -> RangeHistogram | None:
    """Merge where either side may be empty (None)."""
    if a is None:
        return b
    return a.merge(b)


def range_histogram(
    bins: np.ndarray, weights: list[np.ndarray], min_values: list[np.ndarray] | None = None
) -> RangeHistogram:
    """Histogram of integer bin indices: a count row, one sum row per weight, one min row each."""
    start = int(bins.min())
    local = bins - start
    n = int(local.max()) + 1
    rows = [np.bincount(local, minlength=n).astype(np.float64)]
    rows += [np.bincount(local, weights=w, minlength=n) for w in weights]
    min_rows: tuple[int, ...] = ()
    if min_values:
        for values in min_values:
            smallest = np.full(n, np.inf)
            np.minimum.at(smallest, local, values)
            rows.append(smallest)
        min_rows = tuple(range(len(rows) - len(min_values), len(rows)))
    return RangeHistogram(start, np.vstack(rows), min_rows)
