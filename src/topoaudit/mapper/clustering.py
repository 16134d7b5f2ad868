"""Clustering inside one cover element.

Each clusterer has ``fit_predict(X) -> labels`` (``-1`` marks noise) and ``min_rows``,
the fewest rows it can cluster. The builder treats them all alike:

* an element with fewer than ``min_rows`` rows becomes a single node;
* noise rows (label ``-1``) are handled by the builder's ``noise`` policy (by default
  each becomes a node of its own, so no row ever falls out of the graph);
* labels are renumbered ``0, 1, ...`` in the order of each cluster's first row, so the
  same partition always gives the same nodes whatever numbers the algorithm used.

Clusterers that would need an n x n distance matrix (single linkage, k-medoids) work on
a seeded sample of at most ``max_sample`` rows of a large element and give every other
row the label of its nearest sampled row (or medoid); below that size they are exact.
"""

from __future__ import annotations

import math
import numbers
import time
import warnings
from typing import Any

import numpy as np
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import pdist
from sklearn.base import clone
from sklearn.cluster import DBSCAN, HDBSCAN
from sklearn.metrics import silhouette_score
from threadpoolctl import threadpool_limits

from topoaudit._validation import NONE, Choice, Interval, check_params
from topoaudit.errors import ParameterError, unknown_name
from topoaudit.mapper._distances import iter_sq_distances, kth_distance, nearest_index

__all__ = [
    "CLUSTERERS",
    "AutoDBSCAN",
    "Clusterer",
    "EstimatorClusterer",
    "HDBSCANClusterer",
    "KMeansMesh",
    "SilhouetteKMedoids",
    "SingleLinkage",
    "make_clusterer",
    "relabel",
]

_SEED = [Interval(int, 0, None), NONE]  # numpy takes any seed
_SKLEARN_SEED = [Interval(int, 0, 2**32 - 1), NONE]  # the seeds scikit-learn takes


def relabel(labels: np.ndarray) -> np.ndarray:
    """Renumber cluster labels 0, 1, ... by first appearance; ``-1`` (noise) stays.

    Examples
    --------
    >>> relabel(np.array([7, 7, -1, 3, 7, 3])).tolist()
    [0, 0, -1, 1, 0, 1]
    """
    labels = np.asarray(labels).astype(np.int64, copy=False)
    out = np.full(labels.shape, -1, dtype=np.int64)
    keep = labels >= 0
    if keep.any():
        uniq, first = np.unique(labels[keep], return_index=True)
        rank = np.empty(uniq.size, dtype=np.int64)
        rank[np.argsort(first, kind="stable")] = np.arange(uniq.size)
        out[keep] = rank[np.searchsorted(uniq, labels[keep])]
    return out


def _sample(n: int, max_sample: int, random_state: int | None) -> np.ndarray | None:
    """Sorted positions of a seeded sample, or None when all rows are used."""
    if n <= max_sample:
        return None
    rng = np.random.default_rng([0 if random_state is None else random_state, n])
    return np.sort(rng.choice(n, size=max_sample, replace=False))


class Clusterer:
    """Base class: ``fit_predict`` checks parameters, clusters and times the algorithm."""

    _parameter_constraints: dict[str, list[Any]] = {}
    min_rows: int = 2

    def fit_predict(self, X: np.ndarray) -> np.ndarray:
        """Cluster the rows of ``X``; returns labels with ``-1`` for noise."""
        self.check()
        start = time.perf_counter()
        labels = self._labels(np.asarray(X, dtype=np.float64))
        self.fit_seconds_ = time.perf_counter() - start
        return labels

    def check(self) -> None:
        """Raise :class:`ParameterError` if a parameter is outside its constraint table."""
        check_params(type(self).__name__, self._parameter_constraints, vars(self))

    def _labels(self, X: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in vars(self).items() if not k.endswith("_"))
        return f"{type(self).__name__}({args})"


class SingleLinkage(Clusterer):
    """Single-linkage clustering with one of two rules for where to cut the dendrogram.

    ``cut="scale"`` (the default) cuts at ``factor`` times the ``quantile`` quantile of
    the distances from each row to its ``k``-th nearest neighbour in the element: two
    groups stay apart when no chain of rows bridges them with steps shorter than a few
    typical neighbour distances. This is single linkage at a data-driven radius (DBSCAN
    with ``min_samples=1`` at that radius gives the same partition) and it never labels
    noise.

    ``cut="gap"`` is the heuristic of the Mapper paper (Singh, Mémoli and Carlsson, 2007,
    section 3.2): histogram the ``n - 1`` merge distances into ``n_bins`` equal bins
    between the smallest and the largest, and cut at the lower edge of the first empty
    bin; with no empty bin the element is one cluster. It is sensitive to sampling gaps
    along a continuous shape, which is why it is not the default.

    ``cut=<a positive number>`` cuts at that distance: the clusters are the connected
    components of the graph joining rows at most that far apart. The Mapper settings
    chosen from the data (:mod:`topoaudit.mapper.auto`) cut at their scale ``δ``.

    Clusters with fewer than ``min_cluster_size`` rows (default 1: none) are labelled
    noise, for the builder's ``noise`` policy.

    Parameters
    ----------
    cut : {"scale", "gap"} or float, default="scale"
    k : int, default=5
    quantile : float, default=0.9
    factor : float, default=2.0
    n_bins : int, default=10
        Between 2 and 10 000.
    min_cluster_size : int, default=1
    max_sample : int, default=1000
        Larger elements are clustered on a seeded sample of this many rows; every other
        row takes the label of its nearest sampled row.
    sample_share : float or None, default=None
        If given, elements are clustered on a seeded sample of this share of their rows
        (at least 2) instead, so that a cut at a fixed distance meets rows of the density
        it was chosen for; ``max_sample`` is then not used.
    random_state : int or None, default=0

    Notes
    -----
    O(m²) time and memory for m = min(n, max_sample) plus O(n m d) for the assignment, so
    cost grows linearly in the rows of large elements.

    Examples
    --------
    >>> X = np.r_[np.linspace(0, 1, 20), np.linspace(5, 6, 20)].reshape(-1, 1)
    >>> np.bincount(SingleLinkage().fit_predict(X)).tolist()
    [20, 20]
    >>> np.bincount(SingleLinkage(cut="gap").fit_predict(X)).tolist()
    [20, 20]
    """

    _parameter_constraints = {
        "cut": [Choice(("scale", "gap")), Interval(float, 0, None, closed="neither")],
        "k": [Interval(int, 1, None)],
        "quantile": [Interval(float, 0, 1, closed="right")],
        "factor": [Interval(float, 0, None, closed="neither")],
        "n_bins": [Interval(int, 2, 10_000)],
        "min_cluster_size": [Interval(int, 1, None)],
        "max_sample": [Interval(int, 2, None)],
        "sample_share": [Interval(float, 0, 1, closed="right"), NONE],
        "random_state": _SEED,
    }

    def __init__(
        self,
        cut: str | float = "scale",
        *,
        k: int = 5,
        quantile: float = 0.9,
        factor: float = 2.0,
        n_bins: int = 10,
        min_cluster_size: int = 1,
        max_sample: int = 1000,
        sample_share: float | None = None,
        random_state: int | None = 0,
    ) -> None:
        self.cut = cut
        self.k = k
        self.quantile = quantile
        self.factor = factor
        self.n_bins = n_bins
        self.min_cluster_size = min_cluster_size
        self.max_sample = max_sample
        self.sample_share = sample_share
        self.random_state = random_state

    def _threshold(self, S: np.ndarray, heights: np.ndarray) -> float | None:
        """The cut height, or None for a single cluster."""
        if not isinstance(self.cut, str):
            return float(self.cut)
        if self.cut == "scale":
            kd = kth_distance(S, S, min(self.k, S.shape[0] - 1), self_included=True)
            return self.factor * float(np.quantile(kd, self.quantile))
        lo, hi = float(heights.min()), float(heights.max())
        if hi - lo <= 1e-9 * max(hi, 1e-300):  # equal merge distances: no gap
            return None
        counts, edges = np.histogram(heights, bins=self.n_bins, range=(lo, hi))
        empty = np.flatnonzero(counts == 0)
        return float(edges[empty[0]]) if empty.size else None

    def _labels(self, X: np.ndarray) -> np.ndarray:
        n = X.shape[0]
        if n < 2:
            return np.zeros(n, dtype=np.int64)
        if self.sample_share is None:
            sample = _sample(n, self.max_sample, self.random_state)
        else:
            size = max(2, math.ceil(self.sample_share * n))
            sample = _sample(n, size, self.random_state)
        S = X if sample is None else X[sample]
        # condensed distances, not the rows: a square block of rows that happens to look
        # like a distance matrix (a symmetric 0/1 grid) would otherwise be taken for one
        Z = linkage(pdist(S), method="single")
        cut = self._threshold(S, Z[:, 2])
        if cut is None:
            labels_s = np.zeros(S.shape[0], dtype=np.int64)
        else:
            labels_s = fcluster(Z, t=cut, criterion="distance").astype(np.int64) - 1
        if self.min_cluster_size > 1:
            sizes = np.bincount(labels_s)
            labels_s = np.where(sizes[labels_s] >= self.min_cluster_size, labels_s, -1)
        if sample is None:
            return labels_s
        return labels_s[nearest_index(X, S)]


class AutoDBSCAN(Clusterer):
    """DBSCAN (Ester, Kriegel, Sander and Xu, 1996) with a data-driven radius.

    When ``eps`` is None the radius is the ``eps_quantile`` quantile of the distances from
    each row to its ``min_samples``-th nearest neighbour within the element (the
    k-distance distribution of Ester et al., who read the radius off its sorted plot), so
    that about that share of rows are core points. The k-distances are taken for a seeded
    sample of at most ``max_sample`` rows, against all rows of the element.

    Parameters
    ----------
    eps : float or None, default=None
    min_samples : int, default=5
    eps_quantile : float, default=0.9
    max_sample : int, default=1000
    random_state : int or None, default=0

    Notes
    -----
    Rows DBSCAN calls noise keep the label ``-1``; the builder's ``noise`` policy decides
    what becomes of them.
    """

    _parameter_constraints = {
        "eps": [Interval(float, 0, None, closed="neither"), NONE],
        "min_samples": [Interval(int, 1, None)],
        "eps_quantile": [Interval(float, 0, 1, closed="right")],
        "max_sample": [Interval(int, 1, None)],
        "random_state": _SEED,
    }

    def __init__(
        self,
        eps: float | None = None,
        *,
        min_samples: int = 5,
        eps_quantile: float = 0.9,
        max_sample: int = 1000,
        random_state: int | None = 0,
    ) -> None:
        self.eps = eps
        self.min_samples = min_samples
        self.eps_quantile = eps_quantile
        self.max_sample = max_sample
        self.random_state = random_state

    @property
    def min_rows(self) -> int:  # type: ignore[override]
        return max(2, int(self.min_samples))

    def radius(self, X: np.ndarray) -> float:
        """The radius used for ``X``: ``eps`` if given, else the k-distance quantile."""
        if self.eps is not None:
            return float(self.eps)
        sample = _sample(X.shape[0], self.max_sample, self.random_state)
        A = X if sample is None else X[sample]
        k = min(self.min_samples, X.shape[0] - 1)
        kd = kth_distance(A, X, max(k, 1), self_included=True)
        eps = float(np.quantile(kd, self.eps_quantile))
        return eps if eps > 0 else float(np.finfo(float).eps)

    def _labels(self, X: np.ndarray) -> np.ndarray:
        eps = self.radius(X)
        return DBSCAN(eps=eps, min_samples=self.min_samples).fit_predict(X)


class SilhouetteKMedoids(Clusterer):
    """k-medoids (scikit-learn-extra's ``KMedoids``) with k chosen by silhouette.

    For each k in ``2..max_clusters`` the rows are clustered and scored by their mean
    silhouette (Rousseeuw, 1987); the best k is kept if its silhouette reaches
    ``min_silhouette`` (0.5 by default: the level Kaufman and Rousseeuw (1990) call a
    reasonable structure; recalled from memory), else the element is one cluster. Give
    ``n_clusters`` to fix k instead.

    Parameters
    ----------
    n_clusters : int or None, default=None
    max_clusters : int, default=5
    min_silhouette : float, default=0.5
    max_sample : int, default=1000
        Larger elements are clustered on a seeded sample; other rows join their nearest
        medoid.
    random_state : int or None, default=0
    """

    _parameter_constraints = {
        "n_clusters": [Interval(int, 1, None), NONE],
        "max_clusters": [Interval(int, 2, None)],
        "min_silhouette": [Interval(float, -1, 1)],
        "max_sample": [Interval(int, 3, None)],
        "random_state": _SKLEARN_SEED,
    }

    def __init__(
        self,
        n_clusters: int | None = None,
        *,
        max_clusters: int = 5,
        min_silhouette: float = 0.5,
        max_sample: int = 1000,
        random_state: int | None = 0,
    ) -> None:
        self.n_clusters = n_clusters
        self.max_clusters = max_clusters
        self.min_silhouette = min_silhouette
        self.max_sample = max_sample
        self.random_state = random_state

    @property
    def min_rows(self) -> int:  # type: ignore[override]
        return max(3, int(self.n_clusters or 0))

    def _labels(self, X: np.ndarray) -> np.ndarray:
        with warnings.catch_warnings():
            # scikit-learn-extra 0.3 imports distutils' LooseVersion, deprecated upstream
            warnings.filterwarnings("ignore", "distutils Version classes", DeprecationWarning)
            from sklearn_extra.cluster import KMedoids

        n = X.shape[0]
        sample = _sample(n, self.max_sample, self.random_state)
        S = X if sample is None else X[sample]
        D = np.sqrt(next(iter_sq_distances(S, S, max_bytes=8 * S.shape[0] ** 2 + 8))[2])
        np.fill_diagonal(D, 0.0)  # silhouette_score needs an exact zero diagonal
        seed = 0 if self.random_state is None else self.random_state

        def fit(k: int) -> Any:
            with warnings.catch_warnings():
                # with repeated rows a cluster can end up empty; KMedoids warns and goes on
                warnings.filterwarnings("ignore", "Cluster .* is empty", UserWarning)
                return KMedoids(
                    n_clusters=k,
                    metric="precomputed",
                    method="alternate",
                    init="build",
                    random_state=seed,
                ).fit(D)

        # no more clusters than distinct rows: repeated rows cannot be told apart
        distinct = np.unique(S, axis=0).shape[0]
        if self.n_clusters is not None:
            best = fit(min(self.n_clusters, distinct))
        else:
            best, best_score = None, -np.inf
            for k in range(2, min(self.max_clusters, distinct - 1) + 1):
                model = fit(k)
                if np.unique(model.labels_).size < 2:
                    continue
                score = silhouette_score(D, model.labels_, metric="precomputed")
                if score > best_score + 1e-12:
                    best, best_score = model, score
            if best is None or best_score < self.min_silhouette:
                return np.zeros(n, dtype=np.int64)
        medoids = S[best.medoid_indices_]
        return nearest_index(X, medoids).astype(np.int64)


class HDBSCANClusterer(Clusterer):
    """HDBSCAN (Campello, Moulavi and Sander, 2013), scikit-learn's implementation.

    Parameters
    ----------
    min_cluster_size : int, default=5
    min_samples : int or None, default=None
    """

    _parameter_constraints = {
        "min_cluster_size": [Interval(int, 2, None)],
        "min_samples": [Interval(int, 1, None), NONE],
    }

    def __init__(self, min_cluster_size: int = 5, *, min_samples: int | None = None) -> None:
        self.min_cluster_size = min_cluster_size
        self.min_samples = min_samples

    @property
    def min_rows(self) -> int:  # type: ignore[override]
        # scikit-learn's HDBSCAN refuses fewer rows than min_samples
        return max(2, int(self.min_cluster_size), int(self.min_samples or 0))

    def _labels(self, X: np.ndarray) -> np.ndarray:
        model = HDBSCAN(
            min_cluster_size=self.min_cluster_size, min_samples=self.min_samples, copy=True
        )
        return model.fit_predict(X)


class KMeansMesh(Clusterer):
    """k-means with k set by the element's size, so nodes hold about ``node_rows`` rows.

    On continuous data without gaps, density-based clusterers return one cluster per
    cover element, and each node is a slab across the whole data set. A partition
    clusterer with a fixed node size instead cuts every element into a mesh of small,
    compact nodes that a region search can assemble into a pocket of any shape.
    ``k = max(1, round(n / node_rows))``; scikit-learn's ``KMeans`` (Lloyd's algorithm,
    k-means++ seeding, ``n_init`` restarts) with a fixed seed, on one OpenMP thread: with
    more, scikit-learn adds the threads' partial sums of each centre in the order the
    threads finish, so the mesh could differ between two runs, and between a serial build
    and one in worker processes or on a cluster.

    Elements of more than ``bisect_above`` rows are cut by bisecting k-means instead
    (scikit-learn's ``BisectingKMeans``, Steinbach, Karypis and Kumar, 2000: split the
    largest cluster in two with 2-means until there are ``k``), also seeded and on one
    thread. Lloyd's iterations compare every row with every centre, ``n * k`` distances
    with ``k`` growing as ``n``, so their time grows as the square of the element's rows;
    each bisection compares the rows of one cluster with two centres, so bisecting grows
    about as ``n log k``. Measured on one thread, 12 columns: 64,000 rows to 427 centres
    take 12.9 s by Lloyd and 0.46 s by bisecting; 160,000 rows to 1,067 centres 2.0 s by
    bisecting, with the middle 80% of node sizes between 117 and 178 rows. Below the
    threshold the mesh is Lloyd's, as before, so audits of up to about 100,000 rows are
    unchanged.

    Parameters
    ----------
    node_rows : int, default=150
    n_init : int, default=2
    bisect_above : int, default=20000
        Elements with more rows are cut by bisecting k-means.
    random_state : int or None, default=0

    Examples
    --------
    >>> X = np.random.default_rng(0).normal(size=(900, 3))
    >>> int(KMeansMesh(node_rows=300).fit_predict(X).max()) + 1
    3
    >>> int(KMeansMesh(node_rows=300, bisect_above=500).fit_predict(X).max()) + 1
    3
    """

    _parameter_constraints = {
        "node_rows": [Interval(int, 2, None)],
        "n_init": [Interval(int, 1, None)],
        "bisect_above": [Interval(int, 2, None)],
        "random_state": _SKLEARN_SEED,
    }

    def __init__(
        self,
        node_rows: int = 150,
        *,
        n_init: int = 2,
        bisect_above: int = 20_000,
        random_state: int | None = 0,
    ):
        self.node_rows = node_rows
        self.n_init = n_init
        self.bisect_above = bisect_above
        self.random_state = random_state

    def _labels(self, X: np.ndarray) -> np.ndarray:
        from sklearn.cluster import BisectingKMeans, KMeans
        from sklearn.exceptions import ConvergenceWarning

        k = max(1, round(X.shape[0] / self.node_rows))
        if k == 1:
            return np.zeros(X.shape[0], dtype=np.int64)
        if X.shape[0] > self.bisect_above:
            model = BisectingKMeans(
                n_clusters=k, bisecting_strategy="largest_cluster", random_state=self.random_state
            )
        else:
            model = KMeans(n_clusters=k, n_init=self.n_init, random_state=self.random_state)
        with threadpool_limits(limits=1, user_api="openmp"), warnings.catch_warnings():
            # fewer distinct rows than k: KMeans warns and returns fewer clusters, as it should
            warnings.filterwarnings("ignore", "Number of distinct clusters", ConvergenceWarning)
            return model.fit_predict(X)


class EstimatorClusterer(Clusterer):
    """Any object with ``fit_predict`` (a scikit-learn clusterer); cloned for each element.

    ``min_rows`` is the estimator's ``n_clusters`` when it has one (k-means needs at least
    k rows), else 2.
    """

    def __init__(self, estimator: Any) -> None:
        self.estimator = estimator

    @property
    def min_rows(self) -> int:  # type: ignore[override]
        k = getattr(self.estimator, "n_clusters", None)
        return max(2, int(k)) if isinstance(k, numbers.Integral) else 2

    def _labels(self, X: np.ndarray) -> np.ndarray:
        try:
            model = clone(self.estimator)
        except TypeError:
            model = self.estimator
        return np.asarray(model.fit_predict(X))


CLUSTERERS: dict[str, type[Clusterer]] = {
    "single_linkage": SingleLinkage,
    "dbscan": AutoDBSCAN,
    "kmedoids": SilhouetteKMedoids,
    "hdbscan": HDBSCANClusterer,
    "kmeans_mesh": KMeansMesh,
}


def make_clusterer(spec: Any, **params: Any) -> Clusterer:
    """Resolve ``spec`` (a name from :data:`CLUSTERERS`, a :class:`Clusterer`, or any
    object with ``fit_predict``) into a :class:`Clusterer`.

    Examples
    --------
    >>> make_clusterer("dbscan", min_samples=3)
    AutoDBSCAN(eps=None, min_samples=3, eps_quantile=0.9, max_sample=1000, random_state=0)
    """
    if isinstance(spec, str):
        if spec not in CLUSTERERS:
            raise unknown_name("clusterer", spec, CLUSTERERS)
        try:
            clusterer = CLUSTERERS[spec](**params)
        except TypeError as exc:
            msg = f"Clusterer {spec!r} does not take these parameters: {sorted(params)} ({exc})."
            raise ParameterError(msg) from exc
    elif isinstance(spec, Clusterer):
        clusterer = spec
    elif hasattr(spec, "fit_predict"):
        clusterer = EstimatorClusterer(spec)
    else:
        msg = (
            f"A clusterer must be a name ({', '.join(map(repr, sorted(CLUSTERERS)))}) or an "
            f"object with fit_predict; got {type(spec).__name__}."
        )
        raise ParameterError(msg)
    clusterer.check()
    return clusterer
