"""The graphs searched for weak regions, and the lens of the error-aware one.

Up to four graphs are searched; each finding names the one it came from.

``features``
    The graph of the standardised features alone (PCA filter, balanced cover). Candidates
    are grown node by node (see :mod:`topoaudit.audit.weak`).

``error_aware``
    A graph whose filter is a cross-fitted estimate of each row's excess loss (observed
    minus what the release's scores promise), built in the space of the features that
    predict that excess. Candidates are its upper level sets: for each interval from the
    top, the connected components of the nodes at or above it, each trimmed row by row to
    the lens level that maximises the scan statistic on the discovery half.

``slab``
    A graph along one direction across the features, the one along which the discovery
    half's excess gathers most in a slab (:mod:`topoaudit.audit.oblique`); its lens is
    the same neighbour smoother along that direction, and its candidates are upper level
    sets, as for the error-aware graph. It finds thin pockets across directions that mix
    several features, which the other two miss.

``set_aside``
    The error-aware graph again, with the discovery rows of its strongest region set
    aside (a secondary search, as Zhang, Assunção and Kulldorff, 2010, judge secondary
    clusters with the primary removed): the features that predict the excess among the
    other discovery rows are chosen again, and the lens is smoothed in their space over
    those rows. A second pocket in other features than the first is blurred in the
    error-aware graph, whose space holds the features of both; here it stands alone.
    Built only when the error-aware graph chose some features but not all (with every
    feature, none stood out: there is no region to set aside), and the features chosen
    again differ from its own (and some are chosen); its candidates are upper level sets.

The error-aware lens is made in three steps, all from discovery labels only:

1. a gradient-boosting model of the excess (scikit-learn's
   ``HistGradientBoostingRegressor``, k-fold on a seeded sample of at most 20,000 rows of
   the discovery half; at most 150 rounds, stopped early when the loss on a tenth of the
   training fold has not improved for 10 rounds, so a fold with no signal costs a few
   rounds instead of 150) and the permutation
   importance of each feature on the held-out folds (Breiman, 2001). A feature is kept
   when its mean importance exceeds three standard errors and a quarter of the largest
   among those; kept features get weight 1, the others 0 (all features, if none is kept);
2. in that weighted space, each row's lens value is the mean excess of its ``k`` nearest
   discovery rows, itself excluded (a nearest-neighbour smoother);
3. confirmation rows get the same smoother over discovery rows, so no confirmation label
   ever shapes the graph, and the confirmation test stays a test on fresh rows;
4. refined inside its strongest region: a feature that matters only within a pocket (the
   third feature of a thin arc whose other two carry the excess over all rows) is lost
   in step 1, and the lens then smooths the pocket in a projection that blurs it into
   its surroundings. The relevance model is fitted again on the discovery rows of the
   error-aware graph's strongest candidate (at least ``REFINE_MIN_ROWS`` of them), to
   their observed loss alone (centred), not their excess: inside a pocket whose rows err
   alike, the excess still varies with what the scores promised, and the features behind
   the scores would split a uniform pocket by it (measured on the grid's islands, which
   this split into two to four regions); the observed loss varies there only where some
   rows err more often than others. The lens is smoothed again, with ``k`` a
   ``REFINE_SHARE``-th of that region's discovery rows (at least 30, at most the
   search's own ``k``, so a pocket smaller than ``k`` rows is not averaged away), in the
   space of step 1's features and those the local model keeps besides (none added when
   it keeps every feature or the two together would); when neither the features nor
   ``k`` change, nothing is refined. A thin pocket whose features step 1 chose is still
   blurred by the search's own ``k`` (measured on the grid's 1% arc in 100,000 rows:
   Jaccard 0.47 at ``k`` = 300, 0.72 refined). The refined lens replaces the first only
   when its own strongest candidate has a larger scan statistic on the discovery half
   than the first's; the confirmation half never takes part.

The strongest region set aside for the ``set_aside`` graph is the error-aware graph's
strongest candidate on the discovery half (the upper level set with the largest scan
statistic, at most ``SET_ASIDE_SHARE`` of the half), at the search's own cover: reruns of
the search at other covers reuse the set-aside lens with the rest of the lens.

The features graph uses :class:`~topoaudit.mapper.clustering.KMeansMesh` inside each
cover element, so nodes hold about ``node_rows`` rows: on continuous data a density
clusterer gives one slab per element, too coarse to isolate a pocket. The error-aware and
set-aside graphs cluster each element by ``lens_clusterer`` (single linkage), the slab
graph by gaps of ``SLAB_GAP`` along its direction. These search graphs differ from the
graph shown for the data's shape, and the page says so.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from sklearn.ensemble import HistGradientBoostingRegressor
from sklearn.model_selection import KFold
from sklearn.neighbors import NearestNeighbors
from threadpoolctl import threadpool_limits

from topoaudit.audit.oblique import slab_direction
from topoaudit.audit.weak import Found, Losses
from topoaudit.mapper.clustering import AutoDBSCAN, KMeansMesh
from topoaudit.mapper.graph import MapperBuilder, MapperGraph

__all__ = [
    "ErrorLens",
    "SearchGraph",
    "SearchSettings",
    "error_lens",
    "kept_features",
    "permutation_drops",
    "relevance_weights",
    "search_graphs",
    "smoothed_excess",
    "strongest_rows",
]

#: rows queried at once by the neighbour smoother
_BLOCK = 4096
#: inside a cover element of the slab graph, rows closer than this along the direction
#: (in standard deviations) are one node: a slab's rows stay together while its lens
#: wavers, and places apart along the direction stay apart
SLAB_GAP = 0.25
#: the largest share of the discovery half the strongest region set aside may hold (the
#: search's own bound on a candidate, ``max_share`` of
#: :func:`~topoaudit.audit.weak.find_weak_regions`)
SET_ASIDE_SHARE = 0.3
#: shuffles of each feature per held-out fold when the features are chosen again without
#: the strongest region: 25 draws per feature over five folds instead of 100, which
#: quarters the cost of the second choice (measured at 50,000 rows x 25 features: 15 s of
#: a 92 s search)
SET_ASIDE_REPEATS = 5
#: the fewest discovery rows of the strongest region inside which the lens is refined
REFINE_MIN_ROWS = 200
#: the refined lens averages the strongest region's discovery rows over this many
#: neighbours' worth (at most the search's own ``k``)
REFINE_SHARE = 16


@dataclass(frozen=True)
class SearchSettings:
    """Settings of the search graphs."""

    n_intervals: int = 8
    overlap: float = 0.3
    node_rows: int = 150
    lens_intervals: int = 20
    lens_overlap: float = 0.1
    folds: int = 5
    neighbours: int | None = None
    lens_clusterer: str = "single_linkage"

    def k(self, n_discovery: int) -> int:
        """Neighbours of the smoother: given, or ``n_discovery / 50`` within [30, 300]."""
        if self.neighbours is not None:
            return int(self.neighbours)
        return int(np.clip(n_discovery // 50, 30, 300))


@dataclass(frozen=True, eq=False)
class SearchGraph:
    """A graph searched for weak regions, with how its candidates are formed."""

    name: str
    graph: MapperGraph
    method: str
    lens: np.ndarray | None = None
    weights: np.ndarray | None = None
    importance: np.ndarray | None = field(default=None)


def _excess(loss: Losses, rows: np.ndarray) -> np.ndarray:
    exp = loss.expected[rows]
    total = exp.sum()
    scale = loss.observed[rows].sum() / total if total > 0 else 1.0
    return loss.observed[rows] - scale * exp


def permutation_drops(
    model: Any, X: np.ndarray, y: np.ndarray, *, n_repeats: int = 5, random_state: int = 0
) -> np.ndarray:
    """Permutation importance (Breiman, 2001): the rise in mean squared error when one
    feature's column is shuffled, per feature and repeat, shape ``(n_features, n_repeats)``.

    All shuffled copies are predicted in one call (a large speed-up for tree ensembles,
    whose per-call overhead dominates on small folds); the values equal scikit-learn's
    ``permutation_importance`` with the negated mean squared error as score, for the same
    permutations.
    """
    rng = np.random.default_rng([random_state, 41])
    n, p = X.shape
    base = float(np.mean((model.predict(X) - y) ** 2))
    blocks = []
    for j in range(p):
        for _ in range(n_repeats):
            Xp = X.copy()
            Xp[:, j] = X[rng.permutation(n), j]
            blocks.append(Xp)
    pred = model.predict(np.vstack(blocks)).reshape(p, n_repeats, n)
    return np.mean((pred - y[None, None, :]) ** 2, axis=2) - base


def relevance_weights(
    X: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    *,
    folds: int = 5,
    max_rows: int = 20_000,
    n_repeats: int = 20,
    random_state: int = 0,
) -> tuple[np.ndarray, np.ndarray]:
    """0/1 weight per feature (see module docstring, step 1) and the mean importances.

    The excess is computed on the whole discovery half; the importance model sees a seeded
    sample of at most ``max_rows`` of its rows, which bounds the cost on large data.
    ``n_repeats``: the shuffles of each feature on each held-out fold (predicting them is
    most of the cost on wide data).
    """
    d_all = np.flatnonzero(discovery)
    excess_all = _excess(loss, d_all)
    rng = np.random.default_rng([random_state, 43])
    pick = np.sort(rng.choice(d_all.size, size=min(max_rows, d_all.size), replace=False))
    d, excess = d_all[pick], excess_all[pick]
    draws = []
    splitter = KFold(n_splits=folds, shuffle=True, random_state=random_state)
    for train, test in splitter.split(d):
        model = HistGradientBoostingRegressor(
            max_iter=150,
            learning_rate=0.05,
            max_leaf_nodes=15,
            min_samples_leaf=max(20, d.size // 200),
            early_stopping=True,
            validation_fraction=0.1,
            n_iter_no_change=10,
            random_state=random_state,
        ).fit(X[d[train]], excess[train])
        draws.append(
            permutation_drops(
                model, X[d[test]], excess[test], n_repeats=n_repeats, random_state=random_state
            )
        )
    draws_all = np.hstack(draws)
    mean = draws_all.mean(axis=1)
    se = draws_all.std(axis=1, ddof=1) / np.sqrt(draws_all.shape[1])
    return kept_features(mean, se), mean


def kept_features(mean: np.ndarray, se: np.ndarray) -> np.ndarray:
    """The 0/1 weights of step 1 from the mean importances and their standard errors: a
    feature is kept when its mean exceeds three standard errors and a quarter of the
    largest mean among those (the largest of all may be indistinguishable from noise, and
    then none would stay); every feature when none is kept.

    Examples
    --------
    >>> kept_features(np.array([8.0, 1.0, 3.0]), np.array([10.0, 0.1, 0.1])).tolist()
    [0.0, 1.0, 1.0]
    """
    keep = (mean > 3 * se) & (mean > 0)
    if not keep.any():
        return np.ones(mean.size)
    keep &= mean >= 0.25 * mean[keep].max()
    return keep.astype(float)


def _smoothed_rows(shared: np.ndarray, start: int, stop: int, k: int) -> np.ndarray:
    """Rows ``start:stop`` of :func:`smoothed_excess` (one task): ``shared`` holds the
    weighted space, the discovery half (0 or 1) and each discovery row's excess. Each task
    indexes the discovery rows itself; on one native thread wherever it runs."""
    Z = np.ascontiguousarray(shared[:, :-2])
    own_half = shared[:, -2] > 0.5
    d = np.flatnonzero(own_half)
    excess = np.ascontiguousarray(shared[d, -1])
    algorithm = "auto" if Z.shape[1] <= 8 else "brute"
    out = np.empty(stop - start)
    with threadpool_limits(limits=1):
        nn = NearestNeighbors(n_neighbors=k + 1, algorithm=algorithm).fit(Z[d])
        for first in range(start, stop, _BLOCK):
            last = min(first + _BLOCK, stop)
            idx = nn.kneighbors(Z[first:last], return_distance=False)
            own = own_half[first:last]
            # discovery rows: drop the nearest (the row itself); others: keep the k nearest
            out[first - start : last - start] = np.where(
                own, excess[idx[:, 1:]].mean(axis=1), excess[idx[:, :k]].mean(axis=1)
            )
    return out


def smoothed_excess(
    Z: np.ndarray, loss: Losses, discovery: np.ndarray, k: int, *, executor: Any = None
) -> np.ndarray:
    """Mean excess of each row's ``k`` nearest discovery rows in ``Z`` (steps 2 and 3).

    The rows are queried in about eight tasks on ``executor`` (serial when None); the
    values do not depend on where they run."""
    from topoaudit.mapper.executor import make_executor, map_shared

    d = np.flatnonzero(discovery)
    k = int(min(k, d.size - 1))
    excess = np.zeros(Z.shape[0])
    excess[d] = _excess(loss, d)
    shared = np.column_stack([Z, discovery, excess]).astype(np.float64, copy=False)
    n = Z.shape[0]
    step = _BLOCK * max(1, -(-n // (_BLOCK * 8)))
    tasks = [(start, min(start + step, n), k) for start in range(0, n, step)]
    return np.concatenate(map_shared(make_executor(executor), _smoothed_rows, shared, tasks))


@dataclass(frozen=True, eq=False)
class ErrorLens:
    """The lens of the error-aware graph (steps 1 to 3 of the module docstring): the 0/1
    weight and the mean importance of each feature, and each row's smoothed excess.

    It depends on the rows, their losses, the discovery half, ``folds``, ``neighbours``
    and the seed, not on the covers: reruns of the search at other interval counts and
    overlaps on the same rows reuse it (:func:`search_graphs`, ``lens=``).
    """

    weights: np.ndarray
    importance: np.ndarray
    values: np.ndarray
    #: the slab graph's direction (a unit vector over the standardised features) and its
    #: lens (each row's smoothed excess along it); None: no slab graph
    direction: np.ndarray | None = None
    along: np.ndarray | None = None
    #: the set-aside graph's 0/1 feature weights and lens; None: no set-aside graph
    rest_weights: np.ndarray | None = None
    rest_values: np.ndarray | None = None

    @classmethod
    def of(cls, graphs: list[SearchGraph]) -> ErrorLens:
        """The lens the error-aware graph of ``graphs`` was built on, with the slab
        graph's direction and lens and the set-aside graph's weights and lens when there
        are such graphs."""
        by_name = {g.name: g for g in graphs}
        aware, slab, rest = by_name["error_aware"], by_name.get("slab"), by_name.get("set_aside")
        return cls(
            aware.weights,
            aware.importance,
            aware.lens,
            None if slab is None else slab.weights,
            None if slab is None else slab.lens,
            None if rest is None else rest.weights,
            None if rest is None else rest.lens,
        )


def _total(losses: list[Losses]) -> Losses:
    return next(loss for loss in losses if loss.kind in ("error", "squared_error"))


def error_lens(
    X: np.ndarray,
    losses: list[Losses],
    discovery: np.ndarray,
    settings: SearchSettings = SearchSettings(),
    *,
    random_state: int = 0,
    executor: Any = None,
) -> ErrorLens:
    """The lens of the error-aware graph of standardised ``X`` (see module docstring);
    its neighbour smoother runs on ``executor`` (serial when None)."""
    return _error_lens(
        X, losses, discovery, settings, random_state=random_state, executor=executor
    )[0]


def _chosen_features(
    X: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    settings: SearchSettings,
    *,
    n_repeats: int,
    random_state: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Step 1 over the ``discovery`` rows, on one OpenMP thread: the 0/1 weights and the
    mean importances."""
    with threadpool_limits(limits=1, user_api="openmp"):
        return relevance_weights(
            X,
            loss,
            discovery,
            folds=settings.folds,
            n_repeats=n_repeats,
            random_state=random_state,
        )


def _error_lens(
    X: np.ndarray,
    losses: list[Losses],
    discovery: np.ndarray,
    settings: SearchSettings,
    *,
    random_state: int,
    executor: Any,
) -> tuple[ErrorLens, MapperGraph]:
    """:func:`error_lens`, and the error-aware graph it built to find the region set
    aside (the search reuses it)."""
    total = _total(losses)
    weights, importance = _chosen_features(
        X, total, discovery, settings, n_repeats=20, random_state=random_state
    )
    # the weights are 0 or 1: the weighted space is the kept columns, which keeps the
    # neighbour search low-dimensional (tree indexes are fast there)
    Z = np.ascontiguousarray(X[:, weights > 0])
    k = settings.k(int(discovery.sum()))
    values = smoothed_excess(Z, total, discovery, k, executor=executor)
    direction, _ = slab_direction(X, total, discovery, random_state=random_state)
    along = smoothed_excess(X @ direction[:, None], total, discovery, k, executor=executor)
    with threadpool_limits(limits=1, user_api="openmp"):
        aware = _level_graph(Z, values, settings, random_state)
    rest_weights = rest_values = None
    # steps 4 and 5; neither when every feature was chosen (none stood out)
    if not (weights > 0).all():
        weights, values, aware, strongest = _refined_lens(
            X,
            total,
            discovery,
            weights,
            values,
            aware,
            settings,
            random_state=random_state,
            executor=executor,
        )
        rest_weights, rest_values = _set_aside_lens(
            X,
            total,
            discovery,
            weights,
            strongest,
            settings,
            random_state=random_state,
            executor=executor,
        )
    lens = ErrorLens(weights, importance, values, direction, along, rest_weights, rest_values)
    return lens, aware


def strongest_rows(
    graph: MapperGraph,
    lens: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    share: float = SET_ASIDE_SHARE,
) -> np.ndarray:
    """Mask of the discovery rows of the strongest candidate of a level-set ``graph`` with
    ``lens`` (the search's upper level sets, :func:`~topoaudit.audit.weak.find_weak_regions`,
    at most ``share`` of the discovery half); none when no level set holds an excess."""
    return _rows_of(_strongest(graph, lens, loss, discovery, share), discovery.size)


def _strongest(
    graph: MapperGraph,
    lens: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    share: float = SET_ASIDE_SHARE,
) -> Found | None:
    """The strongest level set of :func:`strongest_rows`, with its scan statistic."""
    from topoaudit.audit.weak import _level_sets, _pick, _scaled

    obs, exp, total = _scaled(loss, discovery)
    if total <= 0:
        return None
    top = _pick(_level_sets(graph, lens, obs, exp, total, discovery, max_share=share), 1)
    return top[0] if top else None


def _rows_of(found: Found | None, n: int) -> np.ndarray:
    """Mask of the rows of ``found`` among ``n`` (none when nothing was found)."""
    out = np.zeros(n, dtype=bool)
    if found is not None:
        out[found.rows] = True
    return out


def _level_graph(
    Z: np.ndarray, lens: np.ndarray, settings: SearchSettings, random_state: int
) -> MapperGraph:
    """The graph of an error lens over the weighted space ``Z`` (error-aware, set-aside)."""
    return (
        MapperBuilder(
            lens,
            cover="balanced",
            n_intervals=settings.lens_intervals,
            overlap=settings.lens_overlap,
            clusterer=settings.lens_clusterer,
            random_state=random_state,
        )
        .fit(np.ascontiguousarray(Z))
        .graph_
    )


def _refined_lens(
    X: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    weights: np.ndarray,
    values: np.ndarray,
    aware: MapperGraph,
    settings: SearchSettings,
    *,
    random_state: int,
    executor: Any,
) -> tuple[np.ndarray, np.ndarray, MapperGraph, np.ndarray]:
    """The error-aware lens refined inside its strongest region (module docstring), or
    the lens as given when nothing is refined, with the mask of the discovery rows of the
    strongest region of the lens returned."""
    found = _strongest(aware, values, loss, discovery)
    strongest = _rows_of(found, discovery.size)
    kept = (weights, values, aware, strongest)
    if found is None or found.rows.size < REFINE_MIN_ROWS:
        return kept
    inside = int(found.rows.size)
    # inside the region, the observed loss alone (centred) is the response: see step 4
    observed = Losses(loss.kind, loss.observed, np.ones_like(loss.expected), loss.counts)
    local, _ = _chosen_features(
        X, observed, strongest, settings, n_repeats=SET_ASIDE_REPEATS, random_state=random_state
    )
    joined = np.maximum(weights, local)
    if (local > 0).all() or (joined > 0).all():
        joined = weights  # none stood out inside, or every feature would: scale alone
    own_k = settings.k(int(discovery.sum()))
    k = int(np.clip(inside // REFINE_SHARE, 30, own_k))
    if np.array_equal(joined, weights) and k == own_k:
        return kept
    Z = np.ascontiguousarray(X[:, joined > 0])
    refined = smoothed_excess(Z, loss, discovery, k, executor=executor)
    with threadpool_limits(limits=1, user_api="openmp"):
        graph = _level_graph(Z, refined, settings, random_state)
    better = _strongest(graph, refined, loss, discovery)
    if better is not None and better.llr > found.llr:
        return joined, refined, graph, _rows_of(better, discovery.size)
    return kept


def _set_aside_lens(
    X: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    weights: np.ndarray,
    strongest: np.ndarray,
    settings: SearchSettings,
    *,
    random_state: int,
    executor: Any,
) -> tuple[np.ndarray | None, np.ndarray | None]:
    """The set-aside graph's weights and lens (module docstring), without the discovery
    rows of ``strongest`` (the error-aware graph's strongest region), or ``(None, None)``
    when there is none, or the features chosen without it are the graph's own (or every
    feature)."""
    rest = discovery & ~strongest
    if not strongest.any() or rest.sum() < 2 * settings.folds:
        return None, None
    rest_weights, _ = _chosen_features(
        X, loss, rest, settings, n_repeats=SET_ASIDE_REPEATS, random_state=random_state
    )
    if (rest_weights > 0).all() or np.array_equal(rest_weights, weights):
        return None, None
    Z = np.ascontiguousarray(X[:, rest_weights > 0])
    k = settings.k(int(rest.sum()))
    return rest_weights, smoothed_excess(Z, loss, rest, k, executor=executor)


def search_graphs(
    X: np.ndarray,
    losses: list[Losses],
    discovery: np.ndarray,
    settings: SearchSettings = SearchSettings(),
    *,
    random_state: int = 0,
    lens: ErrorLens | None = None,
    executor: Any = None,
) -> list[SearchGraph]:
    """Build the ``features``, ``error_aware``, ``slab`` and ``set_aside`` search graphs of
    standardised ``X`` (the slab graph only when the lens has a direction, the set-aside
    graph only when it has a set-aside lens).

    ``lens``: the :class:`ErrorLens` of the same rows, losses, halves, folds, neighbours
    and seed, when it is known already (reruns at other covers); computed when None.
    ``executor``: where the cover elements of the features graph and the neighbour
    smoother's tasks run (serial when None); the graphs do not depend on it.

    The many small models here run on one OpenMP thread each: on folds of a few thousand
    rows, thread start-up costs more than a second thread gains, and one thread cannot
    oversubscribe the cores when other work runs beside it.
    """
    aware = None
    if lens is None:
        lens, aware = _error_lens(
            X, losses, discovery, settings, random_state=random_state, executor=executor
        )
    with threadpool_limits(limits=1, user_api="openmp"):
        return _search_graphs(
            X, lens, settings, random_state=random_state, executor=executor, aware=aware
        )


def _search_graphs(
    X: np.ndarray,
    lens: ErrorLens,
    settings: SearchSettings,
    *,
    random_state: int,
    executor: Any,
    aware: MapperGraph | None = None,
) -> list[SearchGraph]:
    """The graphs of :func:`search_graphs`; ``aware``: the error-aware graph when the
    lens was just made (it is built to find the region set aside), else built here."""
    mesh = KMeansMesh(node_rows=settings.node_rows, random_state=random_state)
    features = MapperBuilder(
        "pca",
        cover="balanced",
        n_intervals=settings.n_intervals,
        overlap=settings.overlap,
        clusterer=mesh,
        random_state=random_state,
        n_jobs=executor,
    ).fit(X)
    if aware is None:
        aware = _level_graph(X[:, lens.weights > 0], lens.values, settings, random_state)
    graphs = [
        SearchGraph("features", features.graph_, "grow"),
        SearchGraph(
            "error_aware",
            aware,
            "level",
            lens=lens.values,
            weights=lens.weights,
            importance=lens.importance,
        ),
    ]
    if lens.direction is not None and lens.along is not None:
        slab = MapperBuilder(
            lens.along,
            cover="balanced",
            n_intervals=settings.lens_intervals,
            overlap=settings.lens_overlap,
            clusterer=AutoDBSCAN(SLAB_GAP, min_samples=1),
            random_state=random_state,
        ).fit(np.ascontiguousarray(X @ lens.direction[:, None]))
        graphs.append(
            SearchGraph("slab", slab.graph_, "level", lens=lens.along, weights=lens.direction)
        )
    if lens.rest_weights is not None and lens.rest_values is not None:
        rest = _level_graph(X[:, lens.rest_weights > 0], lens.rest_values, settings, random_state)
        graphs.append(
            SearchGraph(
                "set_aside", rest, "level", lens=lens.rest_values, weights=lens.rest_weights
            )
        )
    return graphs
