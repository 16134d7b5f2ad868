"""Do the weak regions survive other settings and other samples?

The search is rerun over a grid around the chosen search settings (by default interval
offsets -2, 0, +2 times overlap offsets -0.1, 0, +0.1, applied to every search graph)
and over seeded subsamples of 80% of the rows (drawn without replacement, so no row
appears twice in a graph). In each run, a weak region counts as found again when some
confirmed region of that run overlaps it with Jaccard at least ``match_jaccard`` (0.5),
measured on the rows the run used. The share of runs in which it was found again is its
stability. (The invariants of the graph shown for the data's shape at the same offsets
are recorded by :func:`topoaudit.audit.run.run_audit`, not here.)

Each rerun is one task, :func:`_rerun`, a pure function of its arguments, handed to an
executor (:mod:`topoaudit.mapper.executor`): the rows, their losses, the halves and the
lens of the error-aware graph travel once as one shared array, each task names its
settings and its subsample. A rerun on every row differs from the search only in its
covers, so it reuses the search's lens (:class:`~topoaudit.audit.search.ErrorLens`: the
relevance model and the neighbour smoother, most of a search's cost) instead of fitting
it again; a subsample fits its own.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from threadpoolctl import threadpool_limits

from topoaudit.audit.search import ErrorLens, SearchSettings, search_graphs
from topoaudit.audit.weak import Losses, _jaccard, find_weak_regions, merge_confirmed
from topoaudit.mapper.executor import make_executor, map_shared

__all__ = ["Rerun", "stability_runs"]

#: share of the rows in each subsample rerun
SUBSAMPLE_SHARE = 0.8


@dataclass(frozen=True)
class Rerun:
    """One rerun: its settings, how many regions it confirmed, which weak regions it found."""

    label: str
    kind: str
    n_intervals: int
    overlap: float
    confirmed: int
    found: tuple[bool, ...]


@dataclass(frozen=True)
class _Plan:
    """One rerun to do: its label, its settings and its subsample (None: every row)."""

    label: str
    kind: str
    settings: SearchSettings
    subsample: int | None


def _subsample_rows(n_rows: int, r: int, random_state: int) -> np.ndarray:
    """The rows of subsample ``r`` (0-based): the ``r + 1``-th draw of one seeded
    generator, so each task draws its own rows and every executor the same ones."""
    rng = np.random.default_rng([random_state, 29])
    for _ in range(r):
        rng.choice(n_rows, size=int(SUBSAMPLE_SHARE * n_rows), replace=False)
    return np.sort(rng.choice(n_rows, size=int(SUBSAMPLE_SHARE * n_rows), replace=False))


def _pack(
    X: np.ndarray, losses: Sequence[Losses], discovery: np.ndarray, lens: ErrorLens | None
) -> np.ndarray:
    """The rerun tasks' shared array: the features, each loss's observed and expected
    values, the discovery half (0 or 1), the lens values, the slab graph's lens values and
    the set-aside graph's lens values (NaN without them)."""
    columns = [np.asarray(X, dtype=np.float64)]
    for loss in losses:
        columns += [loss.observed[:, None], loss.expected[:, None]]
    missing = np.full(X.shape[0], np.nan)
    lens_values = lens.values if lens is not None else missing
    along = lens.along if lens is not None and lens.along is not None else missing
    rest = lens.rest_values if lens is not None and lens.rest_values is not None else missing
    columns += [discovery[:, None], lens_values[:, None], along[:, None], rest[:, None]]
    return np.hstack(columns).astype(np.float64, copy=False)


def _unpack(
    shared: np.ndarray, n_features: int, kinds: Sequence[tuple[str, bool]], rows: Any
) -> tuple[np.ndarray, list[Losses], np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The rows ``rows`` (a slice or positions) of :func:`_pack`'s array, as fresh
    contiguous arrays: features, losses, discovery half, lens values, slab lens values,
    set-aside lens values."""

    def column(j: int) -> np.ndarray:
        return np.ascontiguousarray(shared[rows, j])

    X = np.ascontiguousarray(shared[rows, :n_features])
    losses, j = [], n_features
    for kind, counts in kinds:
        losses.append(Losses(kind, column(j), column(j + 1), counts))
        j += 2
    return X, losses, column(j) > 0.5, column(j + 1), column(j + 2), column(j + 3)


def _rerun(
    shared: np.ndarray,
    n_features: int,
    kinds: tuple[tuple[str, bool], ...],
    plan: _Plan,
    lens: tuple[np.ndarray, np.ndarray, np.ndarray | None, np.ndarray | None] | None,
    fdr: float,
    min_rows: int,
    random_state: int,
) -> list[np.ndarray]:
    """One rerun (a task): the rows, as positions in the whole data, of each region it
    confirms. ``lens`` (the weights and importances of the search's lens, its values
    being in ``shared``) is reused on every row; None fits the lens on the run's rows.
    Runs on one native thread wherever it runs, so every executor gives the same sums."""
    n_rows = shared.shape[0]
    if plan.subsample is None:
        rows = np.arange(n_rows)
        X, losses, discovery, values, along, rest = _unpack(shared, n_features, kinds, slice(None))
    else:
        rows = _subsample_rows(n_rows, plan.subsample, random_state)
        X, losses, discovery, values, along, rest = _unpack(shared, n_features, kinds, rows)
    known = None
    if lens is not None:
        direction, rest_weights = lens[2], lens[3]
        known = ErrorLens(
            lens[0],
            lens[1],
            values,
            direction,
            along if direction is not None else None,
            rest_weights,
            rest if rest_weights is not None else None,
        )
    with threadpool_limits(limits=1):
        graphs = search_graphs(
            X, losses, discovery, plan.settings, random_state=random_state, lens=known
        )
        found = find_weak_regions(
            graphs, losses, discovery, fdr=fdr, min_rows=min_rows, random_state=random_state
        )
    merged = merge_confirmed(found, losses=losses, discovery=discovery)
    return [rows[f.rows] for f in merged]


def _known(
    lens: ErrorLens | None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, np.ndarray | None] | None:
    """What a rerun reuses of the search's lens besides its values (which travel in the
    shared array): the weights, importances, slab direction and set-aside weights."""
    if lens is None:
        return None
    return lens.weights, lens.importance, lens.direction, lens.rest_weights


def _plans(
    settings: SearchSettings,
    interval_offsets: Sequence[int],
    overlap_offsets: Sequence[float],
    resamples: int,
) -> list[_Plan]:
    plans = []
    for di in interval_offsets:
        for do in overlap_offsets:
            s = replace(
                settings,
                n_intervals=max(2, settings.n_intervals + di),
                lens_intervals=max(2, settings.lens_intervals + di),
                overlap=float(np.clip(settings.overlap + do, 0.0, 0.9)),
                lens_overlap=float(np.clip(settings.lens_overlap + do, 0.0, 0.9)),
            )
            label = f"intervals {s.lens_intervals}, overlap {s.lens_overlap:.2f}"
            plans.append(_Plan(label, "grid", s, None))
    for r in range(resamples):
        label = f"subsample {r + 1} ({SUBSAMPLE_SHARE:.0%} of rows)"
        plans.append(_Plan(label, "subsample", settings, r))
    return plans


def stability_runs(
    X: np.ndarray,
    losses: Sequence[Losses],
    discovery: np.ndarray,
    weak_rows: Sequence[np.ndarray],
    settings: SearchSettings,
    *,
    interval_offsets: Sequence[int] = (-2, 0, 2),
    overlap_offsets: Sequence[float] = (-0.1, 0.0, 0.1),
    resamples: int = 3,
    fdr: float = 0.05,
    min_rows: int = 30,
    match_jaccard: float = 0.5,
    random_state: int = 0,
    lens: ErrorLens | None = None,
    search_regions: Sequence[np.ndarray] | None = None,
    executor: Any = None,
    progress: Callable[[str], None] | None = None,
) -> list[Rerun]:
    """Rerun the search over the grid and the subsamples (see module docstring).

    ``lens``: the search's :class:`~topoaudit.audit.search.ErrorLens` on these rows
    (``ErrorLens.of(graphs)``), reused by the reruns on every row; fitted again by each
    when None. ``search_regions``: the rows of each region the search itself confirmed
    (merged); the rerun at the search's own settings on every row is the search, so it
    takes them instead of running again (run again when None). ``executor``: where the
    reruns run (any executor or spec that :func:`~topoaudit.mapper.executor.make_executor`
    takes; serial when None). The result depends on none of the three.
    """
    plans = _plans(settings, interval_offsets, overlap_offsets, resamples)
    if not plans:
        return []
    known_runs = {
        i: list(search_regions)
        for i, p in enumerate(plans)
        if search_regions is not None and p.subsample is None and p.settings == settings
    }
    to_run = [p for i, p in enumerate(plans) if i not in known_runs]
    shared = _pack(X, losses, discovery, lens)
    kinds = tuple((x.kind, bool(x.counts)) for x in losses)
    known = _known(lens)
    tasks = [
        (
            X.shape[1],
            kinds,
            p,
            known if p.subsample is None else None,
            fdr,
            min_rows,
            random_state,
        )
        for p in to_run
    ]
    # a subsample fits its own lens: the costliest tasks, handed out first
    weights = [2.0 if p.subsample is not None or known is None else 1.0 for p in to_run]

    def done(k: int) -> None:
        if progress is not None:
            progress(f"stability run {k + len(known_runs)} of {len(plans)} done")

    if progress is not None:
        progress(f"stability runs: {len(plans)} reruns of the search, {len(to_run)} to run")
    ran = iter(
        map_shared(make_executor(executor), _rerun, shared, tasks, weights, done) if tasks else []
    )
    confirmed = [known_runs[i] if i in known_runs else next(ran) for i in range(len(plans))]
    out = []
    for plan, regions in zip(plans, confirmed, strict=True):
        used = np.ones(X.shape[0], dtype=bool)
        if plan.subsample is not None:
            used[:] = False
            used[_subsample_rows(X.shape[0], plan.subsample, random_state)] = True
        found = tuple(
            any(_jaccard(w[used[w]], f) >= match_jaccard for f in regions) for w in weak_rows
        )
        s = plan.settings
        out.append(
            Rerun(plan.label, plan.kind, s.lens_intervals, s.lens_overlap, len(regions), found)
        )
    return out
