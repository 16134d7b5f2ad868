"""Filter functions: maps from the rows to one or two real numbers that the cover slices.

A filter function ``f : X -> R^d`` (``d`` is 1 or 2) is the lens of the Mapper
construction (Singh, Mémoli and Carlsson, 2007): rows close in filter value and close in
the data end up in the same node. Every filter here has ``fit_transform(X)`` returning an
``(n_rows, d)`` float array; :func:`make_filter` turns a name, a scikit-learn
transformer, a callable or an array of precomputed values into one.
"""

from __future__ import annotations

import numbers
from collections.abc import Callable
from typing import Any

import numpy as np
from sklearn.base import clone
from sklearn.decomposition import PCA

from topoaudit._validation import NONE, Interval, Kind, check_params, random_generator
from topoaudit.errors import FilterError, ParameterError, unknown_name
from topoaudit.limits import MAX_MAGNITUDE
from topoaudit.mapper._distances import iter_sq_distances, kth_distance
from topoaudit.mapper._input import as_matrix, within_magnitude

__all__ = [
    "FILTERS",
    "CallableFilter",
    "Coordinate",
    "Eccentricity",
    "GaussianDensity",
    "KNNDistance",
    "PrincipalComponents",
    "TransformerFilter",
    "Values",
    "make_filter",
]

_INT_OR_PAIR = Kind(
    lambda v: (
        (isinstance(v, numbers.Integral) and not isinstance(v, bool) and v >= 0)
        or (
            isinstance(v, tuple | list)
            and 1 <= len(v) <= 2
            and all(
                isinstance(c, numbers.Integral) and not isinstance(c, bool) and c >= 0 for c in v
            )
        )
    ),
    "a column index or a tuple of one or two column indices",
)


class Filter:
    """Base class: subclasses implement ``_compute(X) -> array`` and a constraint table."""

    _parameter_constraints: dict[str, list[Any]] = {}

    def fit_transform(self, X: Any) -> np.ndarray:
        """Compute the filter values of the rows of ``X``.

        Returns
        -------
        ndarray of shape (n_rows, d) with d in {1, 2}
        """
        check_params(type(self).__name__, self._parameter_constraints, vars(self))
        X = as_matrix(X)
        # an overflow (a huge exponent, a tiny bandwidth) shows as a non-finite value, which
        # check_filter_values names; numpy's own warning would say less
        with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
            values = self._compute(X)
        return check_filter_values(values, X.shape[0], type(self).__name__)

    def _compute(self, X: np.ndarray) -> Any:  # pragma: no cover - abstract
        raise NotImplementedError

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in vars(self).items() if not k.endswith("_"))
        return f"{type(self).__name__}({args})"


def check_filter_values(values: Any, n_rows: int, owner: str) -> np.ndarray:
    """Return ``values`` as an ``(n_rows, d)`` float array with d in {1, 2}, or raise."""
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        msg = f"Filter {owner} returned values that are not numbers ({exc})."
        raise FilterError(msg) from exc
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2 or arr.shape[0] != n_rows or arr.shape[1] not in (1, 2):
        msg = (
            f"Filter {owner} returned an array of shape {arr.shape}; expected ({n_rows},), "
            f"({n_rows}, 1) or ({n_rows}, 2): one value or two per row."
        )
        raise FilterError(msg)
    if within_magnitude(arr):
        return np.ascontiguousarray(arr)
    bad = ~np.isfinite(arr).all(axis=1)
    if bad.any():
        rows = np.flatnonzero(bad)
        msg = (
            f"Filter {owner} returned NaN or infinite values for {rows.size} "
            f"row{'s' if rows.size > 1 else ''} (first: row {int(rows[0])}); every row needs a "
            "finite filter value (check the filter's parameters and the scale of X)."
        )
        raise FilterError(msg)
    huge = (np.abs(arr) > MAX_MAGNITUDE).any(axis=1)
    if huge.any():
        rows = np.flatnonzero(huge)
        msg = (
            f"Filter {owner} returned values of magnitude above {MAX_MAGNITUDE:g} for "
            f"{rows.size} row{'s' if rows.size > 1 else ''} (first: row {int(rows[0])}); "
            "rescale the filter values."
        )
        raise FilterError(msg)
    return np.ascontiguousarray(arr)


class Coordinate(Filter):
    """Projection onto one or two columns of ``X``.

    Parameters
    ----------
    columns : int or tuple of int, default=0
        Column positions to keep.

    Examples
    --------
    >>> Coordinate(1).fit_transform(np.array([[0.0, 5.0], [1.0, 7.0]])).ravel().tolist()
    [5.0, 7.0]
    """

    _parameter_constraints = {"columns": [_INT_OR_PAIR]}

    def __init__(self, columns: int | tuple[int, ...] = 0) -> None:
        self.columns = columns

    def _compute(self, X: np.ndarray) -> np.ndarray:
        cols = [self.columns] if isinstance(self.columns, numbers.Integral) else self.columns
        if max(cols) >= X.shape[1]:
            msg = f"Coordinate column {max(cols)} does not exist; X has {X.shape[1]} columns."
            raise FilterError(msg)
        return X[:, list(cols)]


class PrincipalComponents(Filter):
    """Projection onto the first ``n_components`` principal components.

    Parameters
    ----------
    n_components : {1, 2}, default=1
    standardize : bool, default=False
        Scale columns to unit variance first (use when units differ).

    Notes
    -----
    Computed from the d x d covariance matrix: O(n d² + d³) time, so a million rows in
    ten dimensions take well under a second. Component signs follow scikit-learn's
    deterministic convention.
    """

    _parameter_constraints = {
        "n_components": [Interval(int, 1, 2)],
        "standardize": [Kind(lambda v: isinstance(v, bool), "a bool")],
    }

    def __init__(self, n_components: int = 1, *, standardize: bool = False) -> None:
        self.n_components = n_components
        self.standardize = standardize

    def _compute(self, X: np.ndarray) -> np.ndarray:
        if X.shape[1] < self.n_components:
            msg = (
                f"PrincipalComponents needs at least {self.n_components} columns; "
                f"X has {X.shape[1]}."
            )
            raise FilterError(msg)
        span = float((X.max(axis=0) - X.min(axis=0)).max())  # two passes, no copy of X
        if span == 0.0:  # every column constant: every row projects to 0
            return np.zeros((X.shape[0], self.n_components))
        scale = 1.0
        if not 1e-100 <= span <= 1e100:
            # the covariance of deviations near 1e-300 (or 1e150) would under- (or over-)
            # flow; the projection scales with the data, so project X / scale and scale back
            centred = X - X.mean(axis=0)
            scale = float(np.abs(centred).max())
            X = centred / scale
        if self.standardize:
            sd = X.std(axis=0)
            X = (X - X.mean(axis=0)) / np.where(sd > 0, sd, 1.0)
            scale = 1.0
        solver = "covariance_eigh" if X.shape[0] >= X.shape[1] else "full"
        values = PCA(n_components=self.n_components, svd_solver=solver).fit_transform(X)
        return values * scale if scale != 1.0 else values


class _Sampled(Filter):
    """Shared logic of filters averaged over reference rows (all rows, or a seeded sample)."""

    def _references(self, X: np.ndarray) -> np.ndarray:
        n = X.shape[0]
        if n <= self.max_reference:
            return X
        rng = random_generator(self.random_state)
        return X[np.sort(rng.choice(n, size=self.max_reference, replace=False))]


class Eccentricity(_Sampled):
    """Mean distance from each row to the other rows.

    ``E_p(x) = ((1 / N) * sum_y ||x - y||^p)^(1/p)``; with ``p=1`` (the default) this is
    the mean Euclidean distance. Central rows get low values, the tips of flares high
    ones, which makes it the usual filter for branching shapes.

    Parameters
    ----------
    p : float, default=1
    max_reference : int, default=10_000
        Above this many rows the mean is taken over a seeded random sample of that many
        reference rows instead of all rows.
    random_state : int or None, default=0

    Notes
    -----
    O(n * min(n, max_reference) * d) time; memory is bounded by blocks of 64 MiB.
    """

    _parameter_constraints = {
        "p": [Interval(float, 0, None, closed="neither")],
        "max_reference": [Interval(int, 1, None)],
    }

    def __init__(
        self, p: float = 1.0, *, max_reference: int = 10_000, random_state: int | None = 0
    ) -> None:
        self.p = p
        self.max_reference = max_reference
        self.random_state = random_state

    def _compute(self, X: np.ndarray) -> np.ndarray:
        ref = self._references(X)
        out = np.empty(X.shape[0])
        for start, stop, d2 in iter_sq_distances(X, ref):
            out[start:stop] = np.mean(d2 ** (self.p / 2.0), axis=1)
        # The mean over the others: the self-distance is zero, so rescale by N / (N - 1)
        # when every row is a reference.
        if ref.shape[0] == X.shape[0] and X.shape[0] > 1:
            out *= X.shape[0] / (X.shape[0] - 1)
        return out ** (1.0 / self.p)


class GaussianDensity(_Sampled):
    """Gaussian kernel density estimate at each row.

    ``f(x) = (1 / N) * sum_y exp(-||x - y||² / (2 h²))``, the kernel density estimate up to
    its normalising constant (which does not change the cover). The row itself is one of
    the references, so every value is positive. The default bandwidth is Scott's rule
    ``h = N^(-1 / (d + 4)) * mean column standard deviation`` (Scott, 1992).

    Parameters
    ----------
    bandwidth : float or None, default=None
    max_reference : int, default=10_000
    random_state : int or None, default=0
    """

    _parameter_constraints = {
        "bandwidth": [
            Interval(float, 0, None, closed="neither"),
            NONE,
        ],
        "max_reference": [Interval(int, 1, None)],
    }

    def __init__(
        self,
        bandwidth: float | None = None,
        *,
        max_reference: int = 10_000,
        random_state: int | None = 0,
    ) -> None:
        self.bandwidth = bandwidth
        self.max_reference = max_reference
        self.random_state = random_state

    def _compute(self, X: np.ndarray) -> np.ndarray:
        n, d = X.shape
        h = self.bandwidth
        if h is None:
            sd = float(np.mean(X.std(axis=0)))
            h = (sd if sd > 0 else 1.0) * n ** (-1.0 / (d + 4))
        ref = self._references(X)
        out = np.empty(n)
        two_h2 = -2.0 * h * h
        for start, stop, d2 in iter_sq_distances(X, ref):
            if two_h2 != 0.0:
                out[start:stop] = np.mean(np.exp(d2 / two_h2), axis=1)
            else:  # h² underflows to 0 for a tiny bandwidth: divide by h twice instead
                out[start:stop] = np.mean(np.exp(-0.5 * ((d2 / h) / h)), axis=1)
        if ref.shape[0] < n:  # the row itself may not be a reference; keep values positive
            np.maximum(out, 1.0 / ref.shape[0], out=out)
        return out


class KNNDistance(Filter):
    """Distance from each row to its ``k``-th nearest other row (low in dense places).

    Parameters
    ----------
    k : int, default=10

    Notes
    -----
    Exact, by blocked brute force: O(n² d) time, bounded memory. In ten or more dimensions
    this beats tree indexes; for very large n prefer a PCA or column filter.
    """

    _parameter_constraints = {"k": [Interval(int, 1, None)]}

    def __init__(self, k: int = 10) -> None:
        self.k = k

    def _compute(self, X: np.ndarray) -> np.ndarray:
        if X.shape[0] <= self.k:
            msg = f"KNNDistance with k={self.k} needs more than {self.k} rows; X has {X.shape[0]}."
            raise FilterError(msg)
        return kth_distance(X, X, self.k, self_included=True)


class Values(Filter):
    """Precomputed filter values, one or two per row (for example a model's score).

    Examples
    --------
    >>> Values([0.2, 0.9]).fit_transform(np.zeros((2, 3))).ravel().tolist()
    [0.2, 0.9]
    """

    def __init__(self, values: Any) -> None:
        self.values = values

    def _compute(self, X: np.ndarray) -> Any:
        return self.values

    def __repr__(self) -> str:
        return f"Values(<{np.shape(self.values)}>)"


class TransformerFilter(Filter):
    """Any scikit-learn transformer; a fresh clone is fitted on each call."""

    def __init__(self, transformer: Any) -> None:
        self.transformer = transformer

    def _compute(self, X: np.ndarray) -> Any:
        return clone(self.transformer).fit_transform(X)


class CallableFilter(Filter):
    """Any callable ``f(X) -> values``."""

    def __init__(self, function: Callable[[np.ndarray], Any]) -> None:
        self.function = function

    def _compute(self, X: np.ndarray) -> Any:
        return self.function(X)

    def __repr__(self) -> str:
        return f"CallableFilter({getattr(self.function, '__name__', 'function')})"


FILTERS: dict[str, type[Filter]] = {
    "coordinate": Coordinate,
    "pca": PrincipalComponents,
    "density": GaussianDensity,
    "eccentricity": Eccentricity,
    "knn_distance": KNNDistance,
}


def make_filter(spec: Any, **params: Any) -> Filter:
    """Resolve ``spec`` into a :class:`Filter`.

    ``spec`` may be a name from :data:`FILTERS` (``params`` go to its constructor), a
    :class:`Filter`, a scikit-learn transformer (anything with ``fit_transform``), an
    array of precomputed values, or a callable ``f(X) -> values``.

    Examples
    --------
    >>> make_filter("pca", n_components=2)
    PrincipalComponents(n_components=2, standardize=False)
    >>> make_filter("pcaa")
    Traceback (most recent call last):
    ...
    topoaudit.errors.UnknownNameError: Unknown filter 'pcaa'; the known filters are \
'coordinate', 'density', 'eccentricity', 'knn_distance', 'pca'. Did you mean 'pca'?
    """
    if isinstance(spec, str):
        if spec not in FILTERS:
            raise unknown_name("filter", spec, FILTERS)
        try:
            return FILTERS[spec](**params)
        except TypeError as exc:
            msg = f"Filter {spec!r} does not take these parameters: {sorted(params)} ({exc})."
            raise ParameterError(msg) from exc
    if isinstance(spec, Filter):
        return spec
    if hasattr(spec, "fit_transform"):
        return TransformerFilter(spec)
    if isinstance(spec, np.ndarray | list | tuple) or hasattr(spec, "to_numpy"):
        return Values(np.asarray(spec))
    if callable(spec):
        return CallableFilter(spec)
    msg = (
        f"A filter must be a name ({', '.join(map(repr, sorted(FILTERS)))}), a transformer "
        f"with fit_transform, an array of values or a callable; got {type(spec).__name__}."
    )
    raise ParameterError(msg)
