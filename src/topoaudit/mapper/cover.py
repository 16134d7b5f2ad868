"""Covers of the filter's image by overlapping intervals (and their products in 2-D).

For one filter dimension with range ``[lo, hi]``, ``n`` intervals and overlap fraction
``g`` (the share of an interval's length it shares with its neighbour), every interval
has length ``L = (hi - lo) / (n - (n - 1) g)`` and interval ``i`` is
``[lo + i L (1 - g), lo + i L (1 - g) + L]``; the first starts at ``lo`` and the last ends
exactly at ``hi``, so no row is lost at the range ends. A uniform cover applies this to the
filter values; a balanced cover applies it to their ranks (the empirical distribution
function), so each interval holds about the same number of rows. For two filter
dimensions the cover elements are the products of the intervals of each dimension.

Row memberships are computed from each row's interval range directly, never by testing
every row against every interval: O(n_rows * d * k) with ``k`` the most intervals that
one value can lie in.
"""

from __future__ import annotations

import itertools
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import rankdata

from topoaudit._validation import Interval, Kind, check_params
from topoaudit.errors import DataError, LimitError, LimitParameterError, ParameterError
from topoaudit.limits import MAX_GRAPH_NODES, MAX_INTERVALS, MAX_MEMBERSHIPS

__all__ = ["MAX_INTERVALS", "MAX_MEMBERSHIPS", "BalancedCover", "CoverElement", "UniformCover"]


def _is_count(v: Any) -> bool:
    return isinstance(v, numbers.Integral) and not isinstance(v, bool)


def _count_elements(lows: list[np.ndarray], spans: list[np.ndarray], shape: tuple[int, ...]) -> int:
    """How many elements hold a row, without forming the memberships.

    Row r lies in the box ``lows[r] .. lows[r] + spans[r]`` of the element grid: a difference
    array (+1 and -1 at the corners of every box, summed along each axis) counts the rows of
    every element in O(n_rows + the number of elements).
    """
    grid = tuple(n + 1 for n in shape)
    corners = np.zeros(int(np.prod(grid)), dtype=np.int64)
    for far in itertools.product((False, True), repeat=len(shape)):
        idx = tuple(
            lo + span + 1 if f else lo for lo, span, f in zip(lows, spans, far, strict=True)
        )
        sign = -1 if sum(far) % 2 else 1
        corners += sign * np.bincount(np.ravel_multi_index(idx, grid), minlength=corners.size)
    counts = corners.reshape(grid)
    for axis in range(len(shape)):
        counts = np.cumsum(counts, axis=axis)
    return int(np.count_nonzero(counts[tuple(slice(0, n) for n in shape)]))


@dataclass(frozen=True)
class CoverElement:
    """One element of the cover: its interval index per dimension and its rows (sorted)."""

    index: tuple[int, ...]
    rows: np.ndarray

    @property
    def size(self) -> int:
        return int(self.rows.size)


def _count_ok(v: Any) -> bool:
    ok = Interval(int, 1, MAX_INTERVALS).accepts
    return ok(v) or (isinstance(v, tuple | list) and len(v) == 2 and all(ok(c) for c in v))


def _overlap_ok(v: Any) -> bool:
    ok = Interval(float, 0.0, 1.0, closed="left").accepts
    return ok(v) or (isinstance(v, tuple | list) and len(v) == 2 and all(ok(c) for c in v))


class _IntervalCover:
    _parameter_constraints = {
        "n_intervals": [
            Kind(
                _count_ok,
                f"an int in [1, {MAX_INTERVALS}] or a pair of such ints (one per dimension)",
            )
        ],
        "overlap": [
            Kind(_overlap_ok, "a number in [0, 1) or a pair of such numbers (one per dimension)")
        ],
    }

    def __init__(
        self, n_intervals: int | tuple[int, int] = 10, *, overlap: float | tuple[float, float] = 0.3
    ) -> None:
        self.n_intervals = n_intervals
        self.overlap = overlap

    def __repr__(self) -> str:
        return f"{type(self).__name__}(n_intervals={self.n_intervals!r}, overlap={self.overlap!r})"

    def _per_dim(self, value: Any, d: int) -> list[Any]:
        if isinstance(value, tuple | list):
            if len(value) != d:
                msg = (
                    f"{type(self).__name__} got {len(value)} values {value!r} for a filter with "
                    f"{d} dimension{'s' if d > 1 else ''}; give one value or {d}."
                )
                raise ParameterError(msg)
            return list(value)
        return [value] * d

    def _unit_positions(self, column: np.ndarray) -> np.ndarray:  # pragma: no cover
        raise NotImplementedError

    def _interval_bounds(self, column: np.ndarray, starts: np.ndarray, ends: np.ndarray):
        raise NotImplementedError  # pragma: no cover

    def _check_limit(self) -> None:
        """Refuse interval counts above MAX_INTERVALS, as a limit and a parameter error."""
        v = self.n_intervals
        counts = list(v) if isinstance(v, tuple | list) else [v]
        if all(_is_count(c) and c >= 1 for c in counts) and max(counts) > MAX_INTERVALS:
            msg = (
                f"The 'n_intervals' parameter of {type(self).__name__} asks for {max(counts)} "
                f"intervals per filter dimension, more than the limit of {MAX_INTERVALS} "
                f"(MAX_INTERVALS): it must be {self._parameter_constraints['n_intervals'][0].label}"
                f"; got {v!r}."
            )
            raise LimitParameterError(msg)

    def fit(self, values: Any) -> _IntervalCover:
        """Learn the intervals of each filter dimension from ``values`` (n_rows, d)."""
        self._check_limit()
        check_params(type(self).__name__, self._parameter_constraints, vars(self))
        try:
            values = np.asarray(values, dtype=np.float64)
        except (TypeError, ValueError) as exc:
            msg = f"A cover needs numeric filter values; got values numpy cannot read ({exc})."
            raise DataError(msg) from exc
        if values.ndim == 1:
            values = values.reshape(-1, 1)
        if values.ndim != 2 or values.shape[1] not in (1, 2) or values.shape[0] == 0:
            msg = f"A cover needs filter values of shape (n_rows, 1 or 2); got {values.shape}."
            raise ParameterError(msg)
        if not np.isfinite(values).all():
            rows = np.flatnonzero(~np.isfinite(values).all(axis=1))
            msg = (
                f"A cover needs finite filter values; {rows.size} row"
                f"{'s are' if rows.size > 1 else ' is'} NaN or infinite (first: row {rows[0]})."
            )
            raise DataError(msg)
        d = values.shape[1]
        counts = [int(c) for c in self._per_dim(self.n_intervals, d)]
        overlaps = [float(g) for g in self._per_dim(self.overlap, d)]
        self.n_intervals_ = tuple(counts)
        self.overlaps_ = tuple(overlaps)
        self.intervals_ = []
        self.positions_ = []
        for j in range(d):
            n, g = counts[j], overlaps[j]
            length = 1.0 / (n - (n - 1) * g)
            starts = np.arange(n) * length * (1.0 - g)
            ends = np.minimum(starts + length, 1.0)
            ends[-1] = 1.0
            self.positions_.append(self._unit_positions(values[:, j]))
            self.intervals_.append(self._interval_bounds(values[:, j], starts, ends))
        return self

    def transform(self, values: Any) -> list[CoverElement]:
        """The non-empty cover elements of the rows fitted, in lexicographic index order."""
        positions = self.positions_
        n_rows = positions[0].shape[0]
        if np.asarray(values).shape[0] != n_rows:
            msg = "transform() takes the values fitted; call fit_transform for new values."
            raise ParameterError(msg)
        lows, spans = [], []
        for j, t in enumerate(positions):
            n, g = self.n_intervals_[j], self.overlaps_[j]
            length = 1.0 / (n - (n - 1) * g)
            stride = length * (1.0 - g)
            hi = np.minimum(np.floor(t / stride), n - 1).astype(np.int64)
            lo = np.maximum(np.ceil((t - length) / stride - 1e-9), 0).astype(np.int64)
            lo = np.minimum(lo, hi)
            lows.append(lo)
            spans.append(hi - lo)
        # memberships (row, element) to come, counted before any is formed
        per_row = np.ones(n_rows, dtype=np.int64)
        for span in spans:
            per_row *= span + 1
        n_members = int(per_row.sum())
        if n_members > MAX_MEMBERSHIPS:
            msg = (
                f"{self!r} would place the {n_rows} rows in {n_members} cover elements in all "
                f"({n_members / n_rows:.0f} per row); a cover holds at most {MAX_MEMBERSHIPS} "
                "memberships (MAX_MEMBERSHIPS): lower the overlap or the number of intervals."
            )
            raise LimitError(msg)
        shape = self.n_intervals_
        n_elements = _count_elements(lows, spans, shape)
        if n_elements > MAX_GRAPH_NODES:
            msg = (
                f"{self!r} has {n_elements} non-empty elements, so a graph of it would have at "
                f"least {n_elements} nodes; a graph has at most {MAX_GRAPH_NODES} "
                "(MAX_GRAPH_NODES): lower the number of intervals or the overlap."
            )
            raise LimitError(msg)
        # Row r lies in the elements lows[r] + (k_0, .., k_{d-1}) with 0 <= k_j <= spans[j][r].
        max_span = [int(sp.max()) + 1 for sp in spans]
        if int(np.prod(max_span)) <= 64:  # the usual overlaps: one masked pass per offset
            all_rows = np.arange(n_rows, dtype=np.int64)
            row_parts, elem_parts = [], []
            for offsets in itertools.product(*(range(m) for m in max_span)):
                mask = np.ones(n_rows, dtype=bool)
                for j, k in enumerate(offsets):
                    if k:
                        mask &= spans[j] >= k
                idx = tuple(lows[j][mask] + k for j, k in enumerate(offsets))
                row_parts.append(all_rows[mask])
                elem_parts.append(np.ravel_multi_index(idx, shape))
            rows, elems = np.concatenate(row_parts), np.concatenate(elem_parts)
        else:  # wide spans: enumerate every membership at once, the last dimension fastest
            rows = np.repeat(np.arange(n_rows, dtype=np.int64), per_row)
            offset = np.arange(n_members, dtype=np.int64)
            offset -= np.repeat(np.cumsum(per_row) - per_row, per_row)
            idx_parts: list[np.ndarray] = []
            for j in reversed(range(len(spans))):
                base = np.repeat(spans[j] + 1, per_row)
                idx_parts.insert(0, np.repeat(lows[j], per_row) + offset % base)
                offset //= base
            del offset, base
            elems = np.ravel_multi_index(tuple(idx_parts), shape)
            del idx_parts
        key = np.sort(elems * np.int64(n_rows) + rows)  # one sort orders by element, then row
        elems, rows = key // n_rows, key % n_rows
        cut = np.flatnonzero(np.diff(elems)) + 1
        out = []
        for chunk_rows, e in zip(np.split(rows, cut), elems[np.r_[0, cut]], strict=True):
            index = tuple(int(i) for i in np.unravel_index(int(e), shape))
            out.append(CoverElement(index=index, rows=chunk_rows))
        return out

    def fit_transform(self, values: Any) -> list[CoverElement]:
        """``fit(values)`` then ``transform(values)``."""
        return self.fit(values).transform(values)


class UniformCover(_IntervalCover):
    """Intervals of equal length over the range of each filter dimension.

    Parameters
    ----------
    n_intervals : int or (int, int), default=10
        Number of intervals (per dimension), between 1 and 1000.
    overlap : float or (float, float), default=0.3
        Share of an interval's length that it shares with its neighbour, in [0, 1).

    Examples
    --------
    >>> cover = UniformCover(2, overlap=0.5)
    >>> [(e.index, e.rows.tolist()) for e in cover.fit_transform([0.0, 0.4, 0.6, 1.0])]
    [((0,), [0, 1, 2]), ((1,), [1, 2, 3])]
    >>> cover.intervals_[0].tolist()
    [[0.0, 0.6666666666666666], [0.3333333333333333, 1.0]]
    """

    def _unit_positions(self, column: np.ndarray) -> np.ndarray:
        lo, hi = float(column.min()), float(column.max())
        if hi <= lo:
            return np.zeros_like(column)
        if np.isfinite(hi - lo):
            return np.clip((column - lo) / (hi - lo), 0.0, 1.0)
        # a range wider than the largest float: halve first, so nothing overflows
        return np.clip((column / 2 - lo / 2) / (hi / 2 - lo / 2), 0.0, 1.0)

    def _interval_bounds(self, column: np.ndarray, starts: np.ndarray, ends: np.ndarray):
        lo, hi = float(column.min()), float(column.max())
        if np.isfinite(hi - lo):
            return np.column_stack([lo + starts * (hi - lo), lo + ends * (hi - lo)])
        return np.column_stack([lo * (1 - starts) + hi * starts, lo * (1 - ends) + hi * ends])


class BalancedCover(_IntervalCover):
    """Intervals holding about equal numbers of rows (a uniform cover of the ranks).

    Each filter value is replaced by its rank position ``(r - 1) / (n - 1)`` (ties share
    their average rank, so equal values always share their intervals) and the uniform
    construction is applied to those positions. The reported intervals are the
    corresponding empirical quantiles of the filter values.

    Parameters
    ----------
    n_intervals : int or (int, int), default=10
    overlap : float or (float, float), default=0.3
        Share of an interval's rows that it shares with its neighbour, in [0, 1).

    Examples
    --------
    >>> values = np.r_[np.zeros(6), np.linspace(10, 100, 6)]
    >>> [e.size for e in BalancedCover(3, overlap=0.0).fit_transform(values)]
    [6, 2, 4]
    """

    def _unit_positions(self, column: np.ndarray) -> np.ndarray:
        n = column.shape[0]
        if n == 1 or column.min() == column.max():  # one value: one interval, as uniform
            return np.zeros(n)
        return (rankdata(column, method="average") - 1.0) / (n - 1.0)

    def _interval_bounds(self, column: np.ndarray, starts: np.ndarray, ends: np.ndarray):
        return np.column_stack([np.quantile(column, starts), np.quantile(column, ends)])


COVERS = {"uniform": UniformCover, "balanced": BalancedCover}
