"""Mapper settings chosen from the data: the clustering scale, the interval length, the gain.

The rule is the one of Carrière, Michel and Oudot, "Statistical analysis and parameter
selection for Mapper", JMLR 19(12), 2018 (their section on parameter selection), as the
first author's reference implementation computes it (the cover complex of the GUDHI
library, ``set_graph_from_automatic_rips`` and ``set_automatic_resolution``):

1. **Neighbourhood scale** ``δ``: draw ``m = n / (ln n)^(1 + β)`` rows without
   replacement (the paper's rate with the natural logarithm, ``β = 0.001`` as in the
   reference implementation) and take the Hausdorff distance from the data to that
   subsample, the largest distance from a row to its nearest subsampled row; ``δ`` is
   the mean over ``n_subsamples`` draws. Clustering inside a cover element is single
   linkage cut at ``δ`` (the connected components of the ``δ``-neighbourhood graph).
2. **Interval length** ``r``: the largest filter difference ``|f(x_i) - f(x_j)|`` over
   pairs of rows at distance at most ``δ``, divided by the gain ``g``. This is the
   shortest length at which no edge of the neighbourhood graph skips an interval, so the
   cover does not cut the graph into artefacts.
3. **Gain** ``g``: the overlap fraction of consecutive intervals, in ``(1/3, 1/2)``;
   ``0.4`` by default (the middle of that range; our choice, not theirs).

The number of intervals follows from ``r``: with the cover of :mod:`cover`, ``n``
intervals with overlap ``g`` have length ``span / (n - (n - 1) g)``, so the largest
``n`` whose intervals are at least ``r`` long is ``floor((span / r - g) / (1 - g))``.

On more than ``max_rows`` rows the rule is computed on a seeded sample of ``max_rows``
rows, and the clustering of each cover element uses the same share of its rows (every
other row joins the cluster of its nearest clustered row), so that the scale and the
rows it is applied to have the same density. The sample size is reported.

The reference implementation writes the rate as ``n / (log n / log C)^(1 + β)`` with a
constant ``C`` that defaults to 10 (``m ≈ n / log10 n``, larger subsamples, a smaller
``δ``). We keep the natural logarithm (``C = e``): with ``C = 10`` the graph of a noisy
circle of 1,000 rows kept its loop in only 80 to 93% of half-sample resamples (five
seeds, measured), since chance gaps between rows exceed the smaller scale, while with
``C = e`` it kept it in all of them.

**A second departure: the 99th percentile for the largest value.** The Hausdorff
distance and the filter's change are largest values, so the row farthest from all
others sets the scale of the whole graph: four meters with an impossible daily flow
(4,000 to 7,300 litres among 3,000 readings of about 400) made the demo's graph a few
coarse nodes. We take the 99th percentile (``quantile=0.99``) of the distances from the
rows to each subsample, the partial Hausdorff distance of Huttenlocher, Klanderman and
Rucklidge (IEEE PAMI 15(9), 1993), and of the filter changes within the scale. The 1% of
rows beyond it become small nodes of their own, spurs or one-node components, and the
confidence of the features they form says that they are not shape. ``quantile=1.0`` is
the paper's rule exactly; :data:`ROBUST_QUANTILE` (0.95) cuts deeper. Measured: at 0.95
the demo's island of 200 rows in 8,000 and the tips of its flares fell among the 5% and
broke into small nodes, so 0.95 is not the default.

**Where the rule resolves nothing: the histogram rule.** In a few hundred rows of ten
or more columns even the 99th percentile is as large as the data is wide, and the rule
gives one interval: measured on the UCI Wine copy bundled with scikit-learn (178 rows,
13 columns: a scale of 4.29 in standardised units against a median distance between
rows of 5.0). The rows are too sparse for the rule's estimate of the neighbourhood scale,
whose guarantee is asymptotic in the rows, and a one-node graph shows no shape at all.
Where the rule gives one interval for a filter dimension whose values spread, the
interval count is the Freedman and Diaconis (1981) bin count of that dimension's values
(bin width ``2 IQR n^(-1/3)``, numpy's ``histogram_bin_edges(..., bins="fd")``): the
finest resolution at which a histogram of that many values is stable, so consecutive
intervals start about one such bin width apart. The scale ``δ`` still cuts the clusters.
:attr:`AutoChoice.resolution` says per dimension which rule gave the count, and the page
says so; the confidence of the graph's features tells which of them the rows support.
On UCI Wine the histogram rule gives six intervals and nodes of mean cultivar purity
0.87 (measured; ``tests/test_reference_checks.py`` checks the count against numpy's).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from topoaudit._validation import random_generator
from topoaudit.mapper._distances import iter_sq_distances, kth_distance, one_blas_thread

__all__ = [
    "DEFAULT_GAIN",
    "ROBUST_QUANTILE",
    "AutoChoice",
    "choose_settings",
    "filter_spread",
    "histogram_intervals",
    "intervals_for_length",
    "neighbourhood_scale",
    "subsample_size",
]

DEFAULT_GAIN = 0.4
"""The gain used when the overlap is ``"auto"``: the middle of ``(1/3, 1/2)``."""

MAX_AUTO_INTERVALS = 60
"""The most intervals the rule may choose per filter dimension (a readable graph)."""

_RATE_CONSTANT = math.e

ROBUST_QUANTILE = 0.95
"""The quantile of distances and filter changes used for their largest (see the module
docstring): the 5% most isolated rows do not set the scale of the whole graph."""
_RATE_POWER = 0.001


@dataclass(frozen=True)
class AutoChoice:
    """What the rule chose and from what.

    Attributes
    ----------
    scale : float
        ``δ``, the neighbourhood scale and single-linkage cut.
    filter_spread : tuple of float
        Per filter dimension, the largest filter difference between rows within ``δ``.
    gain : tuple of float
        Per filter dimension, the overlap fraction of consecutive intervals.
    interval_length : tuple of float
        Per filter dimension, ``filter_spread / gain``.
    n_intervals : tuple of int
        Per filter dimension, the intervals that length gives.
    sample_rows : int
        Rows the rule was computed on (all rows, or a seeded sample).
    subsample_rows : int
        ``m``, the rows of each subsample drawn for the Hausdorff distance.
    n_subsamples : int
        Subsamples averaged for ``δ``.
    capped : bool
        Whether an interval count was capped at :data:`MAX_AUTO_INTERVALS`.
    quantile : float
        The quantile that stood for the largest distance and filter change (1.0: the
        paper's maxima).
    resolution : tuple of str
        Per filter dimension, the rule that gave the interval count: ``"scale"`` (the
        interval length above), ``"histogram"`` (the Freedman and Diaconis bin count,
        where the scale's length gave one interval; see the module docstring) or
        ``"given"`` (counts given by the caller).
    """

    scale: float
    filter_spread: tuple[float, ...]
    gain: tuple[float, ...]
    interval_length: tuple[float, ...]
    n_intervals: tuple[int, ...]
    sample_rows: int
    subsample_rows: int
    n_subsamples: int
    capped: bool = False
    quantile: float = 1.0
    resolution: tuple[str, ...] = ()

    def as_dict(self) -> dict[str, Any]:
        out = asdict(self)
        for key, value in out.items():
            if isinstance(value, tuple):
                out[key] = list(value)
        return out


def subsample_size(n: int, *, constant: float = _RATE_CONSTANT, power: float = _RATE_POWER) -> int:
    """``m = floor(n / (log n / log constant)^(1 + power))``, between 1 and ``n - 1``.

    Examples
    --------
    >>> subsample_size(1000), subsample_size(10_000)
    (144, 1083)
    """
    if n < 3:
        return 1
    ratio = math.log(n) / math.log(constant)
    m = math.floor(n / math.exp((1.0 + power) * math.log(ratio))) if ratio > 1 else n - 1
    return int(min(max(m, 1), n - 1))


def neighbourhood_scale(
    X: np.ndarray,
    *,
    n_subsamples: int = 10,
    quantile: float = 1.0,
    random_state: int | None = 0,
) -> tuple[float, int]:
    """``δ``: the mean Hausdorff distance from ``X`` to ``n_subsamples`` subsamples.

    With ``quantile < 1`` the partial Hausdorff distance (Huttenlocher, Klanderman and
    Rucklidge, IEEE PAMI 15(9), 1993): that quantile of the distances from each row to
    its nearest subsampled row instead of their largest. Returns ``(δ, m)``.

    Cost: ``n_subsamples`` blocked nearest-row searches of all rows against ``m`` rows,
    O(n m d) each at matrix-product speed.

    Examples
    --------
    >>> X = np.arange(10.0).reshape(-1, 1)
    >>> neighbourhood_scale(X, n_subsamples=5)[1]  # m = 10 / ln(10)^1.001
    4
    """
    X = np.asarray(X, dtype=np.float64)
    n = X.shape[0]
    if n < 3:
        return 0.0, 1
    m = subsample_size(n)
    rng = random_generator(random_state)
    total = 0.0
    for _ in range(n_subsamples):
        picked = np.sort(rng.choice(n, size=m, replace=False))
        nearest = kth_distance(X, X[picked], 1, self_included=False)
        total += float(nearest.max() if quantile >= 1 else np.quantile(nearest, quantile))
    return total / n_subsamples, m


def filter_spread(
    X: np.ndarray, values: np.ndarray, scale: float, *, quantile: float = 1.0
) -> np.ndarray:
    """Per filter dimension, the largest ``|f(x_i) - f(x_j)|`` over pairs of distinct rows
    within ``scale`` (with ``quantile < 1``, that quantile of those differences, read from a
    histogram of 4,096 bins up to the largest: within one bin of the order statistic).

    Cost: O(n² d) by blocks of distances (twice for a quantile), O(n) memory per block row.

    Examples
    --------
    >>> X = np.array([[0.0], [1.0], [5.0]])
    >>> filter_spread(X, X * 2, 1.5).tolist()
    [2.0]
    """
    X = np.asarray(X, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64).reshape(X.shape[0], -1)
    d = values.shape[1]
    best = np.zeros(d)
    if X.shape[0] < 2 or scale <= 0:
        return best
    for diff, j in _near_differences(X, values, scale):
        best[j] = max(best[j], float(diff.max(initial=0.0)))
    if quantile >= 1:
        return best
    bins = 4096
    counts = np.zeros((d, bins), dtype=np.int64)
    for diff, j in _near_differences(X, values, scale):
        if best[j] > 0:
            counts[j] += np.histogram(diff, bins=bins, range=(0.0, best[j]))[0]
    out = np.zeros(d)
    for j in range(d):
        total = counts[j].sum()
        if total and best[j] > 0:
            k = int(np.searchsorted(np.cumsum(counts[j]), quantile * total))
            out[j] = best[j] * min(k + 1, bins) / bins
    return out


def _near_differences(X: np.ndarray, values: np.ndarray, scale: float):
    """Yield ``(|f_i - f_j| for pairs i != j within scale, in one block, dimension j)``."""
    limit = scale * scale * (1 + 1e-12)
    with one_blas_thread():  # thin products: more threads only wait for each other
        for start, stop, d2 in iter_sq_distances(X, X, max_bytes=16 * 2**20):
            near = d2 <= limit
            rows = np.arange(start, stop)
            near[rows - start, rows] = False
            for j in range(values.shape[1]):
                yield np.abs(values[start:stop, j, None] - values[None, :, j])[near], j


def intervals_for_length(span: float, length: float, gain: float) -> int:
    """The most intervals of the cover whose length is at least ``length``.

    Examples
    --------
    >>> intervals_for_length(10.0, 2.0, 0.4)
    7
    >>> intervals_for_length(1.0, 0.0, 0.4)  # no spread: one interval
    1
    """
    if span <= 0 or length <= 0 or not math.isfinite(span / length):
        return 1
    return max(1, math.floor((span / length - gain) / (1.0 - gain) + 1e-9))


def choose_settings(
    X: Any,
    values: Any,
    *,
    gain: float | tuple[float, ...] | None = None,
    n_intervals: int | tuple[int, ...] | None = None,
    n_subsamples: int = 10,
    quantile: float = 0.99,
    max_rows: int = 5000,
    random_state: int | None = 0,
) -> AutoChoice:
    """The scale, the interval length and the gain for the rows ``X`` and filter ``values``.

    Parameters
    ----------
    X : array of shape (n_rows, n_features)
    values : array of shape (n_rows,) or (n_rows, d)
        The filter values.
    gain : float, tuple or None, default=None
        A given overlap (kept), or None for :data:`DEFAULT_GAIN`.
    n_intervals : int, tuple or None, default=None
        Given interval counts (kept), or None to choose them.
    n_subsamples : int, default=10
    quantile : float, default=0.99
        Which quantile of the distances to the subsample, and of the filter changes
        within the scale, stands for their largest; 1.0 is the paper's rule exactly
        (see the module docstring).
    max_rows : int, default=5000
        Above this many rows the rule runs on a seeded sample of this size.
    random_state : int or None, default=0

    Returns
    -------
    AutoChoice
    """
    X = np.asarray(X, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64).reshape(X.shape[0], -1)
    d = values.shape[1]
    gains = _per_dim(DEFAULT_GAIN if gain is None else gain, d)
    rng = random_generator(random_state)
    sample = np.arange(X.shape[0])
    if X.shape[0] > max_rows:
        sample = np.sort(rng.choice(X.shape[0], size=max_rows, replace=False))
    Xs, vs = X[sample], values[sample]
    scale, m = neighbourhood_scale(
        Xs, n_subsamples=n_subsamples, quantile=quantile, random_state=rng
    )
    spread = filter_spread(Xs, vs, scale, quantile=quantile)
    lengths = [float(s) / g if g > 0 else math.inf for s, g in zip(spread, gains, strict=True)]
    if n_intervals is None:
        spans = np.ptp(values, axis=0) if values.shape[0] else np.zeros(d)
        counts = [
            intervals_for_length(float(s), r, g)
            for s, r, g in zip(spans, lengths, gains, strict=True)
        ]
        resolution = ["scale"] * d
        for j in range(d):
            fd = histogram_intervals(vs[:, j]) if counts[j] == 1 else 1
            if fd > 1:
                counts[j], resolution[j] = fd, "histogram"
                lengths[j] = float(spans[j]) / (fd - (fd - 1) * gains[j])
        capped = any(c > MAX_AUTO_INTERVALS for c in counts)
        counts = [min(c, MAX_AUTO_INTERVALS) for c in counts]
    else:
        counts = [int(c) for c in _per_dim(n_intervals, d)]
        capped = False
        resolution = ["given"] * d
    return AutoChoice(
        scale=float(scale),
        filter_spread=tuple(float(s) for s in spread),
        gain=tuple(float(g) for g in gains),
        interval_length=tuple(float(r) for r in lengths),
        n_intervals=tuple(int(c) for c in counts),
        sample_rows=int(sample.size),
        subsample_rows=int(m),
        n_subsamples=int(n_subsamples),
        capped=capped,
        quantile=float(quantile),
        resolution=tuple(resolution),
    )


def histogram_intervals(values: np.ndarray) -> int:
    """The Freedman and Diaconis (1981) bin count of ``values``: bins of width
    ``2 IQR n^(-1/3)`` over their range, as numpy's ``bins="fd"`` counts them (1 when the
    values do not spread: numpy's rule gives one bin for a zero interquartile range).

    Examples
    --------
    >>> histogram_intervals(np.arange(1000.0))  # range 999, width 2 * 499.5 / 10 = 99.9
    10
    >>> histogram_intervals(np.r_[np.zeros(90), np.arange(10.0)])  # IQR 0
    1
    """
    values = np.asarray(values, dtype=np.float64)
    values = values[np.isfinite(values)]
    if values.size < 2:
        return 1
    return len(np.histogram_bin_edges(values, bins="fd")) - 1


def _per_dim(value: Any, d: int) -> list[Any]:
    if isinstance(value, tuple | list):
        return list(value) if len(value) == d else [value[0]] * d
    return [value] * d
