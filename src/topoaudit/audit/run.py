"""One audit of one release, from a config to the records of its bundle.

:func:`run_audit` is a fixed sequence of named steps; each step is a plain function of
this module, usable alone from Python, that returns records of
:mod:`topoaudit.bundle.records` (or the arrays a later step needs). Where a
classification audit and a regression audit differ, the step asks the
:class:`~topoaudit.audit.tasks.Task` of the data.
"""

from __future__ import annotations

import dataclasses
import platform
from collections.abc import Callable
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from sklearn.preprocessing import StandardScaler
from threadpoolctl import threadpool_limits

from topoaudit.audit.compare import compare_releases
from topoaudit.audit.describe import describe_region
from topoaudit.audit.local import local_model_test
from topoaudit.audit.metrics import error_mix, outcome_table
from topoaudit.audit.newdata import Placed, place_on_previous
from topoaudit.audit.oblique import carrying_features
from topoaudit.audit.regions import Partition, partition_graph
from topoaudit.audit.search import ErrorLens, SearchGraph, SearchSettings, search_graphs
from topoaudit.audit.segments import declared_segments
from topoaudit.audit.shape import describe_shape, place_on_features
from topoaudit.audit.stability import stability_runs
from topoaudit.audit.tasks import Task, task_named
from topoaudit.audit.weak import (
    CandidateRegion,
    Losses,
    find_weak_regions,
    merge_confirmed,
    split_halves,
)
from topoaudit.bundle import records as rec
from topoaudit.bundle.files import build_date, write_bundle
from topoaudit.config import Config, GraphSettings, Release
from topoaudit.data import Dataset, load_dataset
from topoaudit.mapper.executor import make_executor, map_shared, open_executor, usable_cores
from topoaudit.mapper.features import feature_confidence
from topoaudit.mapper.graph import MapperBuilder, MapperGraph
from topoaudit.mapper.topology import invariants
from topoaudit.wording import plural

__all__ = ["Audit", "AuditInputs", "executor_spec", "run_audit"]

Progress = Callable[[str], None]
STEPS = 8
#: below this many rows, ``[compute] workers = "auto"`` runs every task in the audit's own
#: process: starting worker processes costs more than they save on so few rows
PROCESS_ROWS = 2000


@dataclass(frozen=True, eq=False)
class Audit:
    """The records of one audit and the row-level table that goes into the bundle only."""

    analysis: rec.Analysis
    graph: rec.GraphDocument
    members: pd.DataFrame

    def write(self, folder: str | Path) -> Path:
        return write_bundle(folder, self.analysis, self.graph, self.members)


@dataclass(frozen=True, eq=False)
class AuditInputs:
    """What every step reads: the config, the data, the release and how to report."""

    config: Config
    ds: Dataset
    release: Release
    baseline: Release | None
    task: Task
    X: np.ndarray  # the features as the graphs see them (standardised if asked)
    say: Progress
    executor: Any = None  # where independent tasks run (see topoaudit.mapper.executor)

    @property
    def score(self) -> np.ndarray:
        return self.ds.scores[self.release.name]

    @property
    def seed(self) -> int:
        return self.config.seed

    def step(self, k: int, message: str) -> None:
        self.say(f"step {k} of {STEPS}: {message}")

    def metrics(self, rows: np.ndarray, *, bootstrap: int = 0, release: Release | None = None):
        r = release or self.release
        y, score = self.ds.target[rows], self.ds.scores[r.name][rows]
        return self.task.metrics(y, score, r.threshold, bootstrap=bootstrap, random_state=self.seed)

    def error_mix(self, rows: np.ndarray) -> rec.ErrorMix | None:
        """The false positives and false negatives among the errors on ``rows``
        (classification only)."""
        if not self.task.has_threshold:
            return None
        return error_mix(self.ds.target[rows], self.score[rows], self.release.threshold)


@dataclass(frozen=True, eq=False)
class Search:
    """What the search for weak regions found, and what later steps need of it."""

    losses: list[Losses]
    discovery: np.ndarray
    settings: SearchSettings
    graphs: list[SearchGraph]
    candidates: list[CandidateRegion]
    weak: list[CandidateRegion]


def prepare(
    config: Config,
    dataset: Dataset | None = None,
    *,
    release: str | None = None,
    progress: Progress | None = None,
    executor: Any = None,
) -> AuditInputs:
    """Load the release's data (unless given) and pick the release and the one before it;
    the one before is compared with it row by row only when its scores are on these rows.
    ``executor`` is where the audit's independent tasks run (serial when None)."""
    rel = config.release(release) if release else config.releases[-1]
    ds = dataset if dataset is not None else load_dataset(config, rel.name)
    index = [r.name for r in config.releases].index(rel.name)
    X = StandardScaler().fit_transform(ds.X) if config.graph.standardize else ds.X
    before = config.releases[index - 1] if index > 0 else None
    return AuditInputs(
        config=config,
        ds=ds,
        release=rel,
        baseline=before if before is not None and before.name in ds.scores else None,
        task=task_named(ds.task),
        X=X,
        say=progress or (lambda _message: None),
        executor=make_executor(executor),
    )


# -- the shown graph and its shape ------------------------------------------------------------


def _shown_builder(
    graph: GraphSettings,
    score: np.ndarray,
    seed: int,
    *,
    n_intervals: Any = None,
    overlap: Any = None,
    clusterer: Any = None,
) -> MapperBuilder:
    """The builder of the graph shown for the data's shape (not fitted): the config's
    settings, or others given."""
    if graph.filter == "score":
        lens: Any = score
        params = None
    elif graph.filter == "pca":
        lens, params = "pca", {"n_components": graph.components}
    else:
        lens, params = graph.filter, None
    return MapperBuilder(
        lens,
        filter_params=params,
        cover=graph.cover,
        n_intervals=graph.n_intervals if n_intervals is None else n_intervals,
        overlap=graph.overlap if overlap is None else overlap,
        clusterer=graph.clusterer if clusterer is None else clusterer,
        random_state=seed,
    )


def shown_graph(
    inp: AuditInputs, *, n_intervals: Any = None, overlap: Any = None, clusterer: Any = None
) -> MapperBuilder:
    """The fitted builder of the graph shown for the data's shape, at the config's
    settings (``"auto"``: chosen from the data) or at others."""
    builder = _shown_builder(
        inp.config.graph,
        inp.score,
        inp.seed,
        n_intervals=n_intervals,
        overlap=overlap,
        clusterer=clusterer,
    )
    return builder.fit(inp.X)


def shape_of(
    inp: AuditInputs, builder: MapperBuilder
) -> tuple[list[rec.ShapeFeatureRecord], rec.ShapeRecord]:
    """The features of the shown graph, described, and the record of how sure they are.
    Only a graph of a one-dimensional filter has them (a product cover draws loops of its
    own grid)."""
    common = {
        "chosen": builder.auto_.as_dict() if builder.auto_ is not None else None,
        "n_intervals": tuple(builder.n_intervals_),
        "overlap": tuple(builder.overlap_),
    }
    if builder.filter_values_.shape[1] != 1:
        return [], rec.ShapeRecord(**common, resamples=0, resample_rows=0, features=(), two_d=True)
    summary = feature_confidence(
        builder,
        inp.X,
        n_resamples=inp.config.graph.resamples,
        executor=inp.executor,
        random_state=inp.seed,
        progress=lambda message: inp.step(2, f"features of the shape, {message}"),
    )
    views = describe_shape(summary, builder.graph_, inp.ds.X, list(inp.ds.feature_names))
    record = rec.ShapeRecord(
        **common,
        resamples=summary.n_resamples,
        resample_rows=summary.resample_rows,
        features=tuple(views),
    )
    return views, record


def _grid_point(
    shared: np.ndarray,
    graph: GraphSettings,
    seed: int,
    n_intervals: int,
    overlap: float,
    clusterer: Any,
) -> rec.GridPoint:
    """The shown graph's invariants at other cover settings (one task): ``shared`` holds
    the features and, last, the release's scores. On one native thread wherever it runs,
    so every executor gives the same graph."""
    X = np.ascontiguousarray(shared[:, :-1])
    score = np.ascontiguousarray(shared[:, -1])
    with threadpool_limits(limits=1):
        builder = _shown_builder(
            graph, score, seed, n_intervals=n_intervals, overlap=overlap, clusterer=clusterer
        ).fit(X)
    inv = dataclasses.asdict(invariants(builder.graph_))
    return rec.GridPoint(**inv, n_intervals=n_intervals, overlap=overlap)


def settings_grid(inp: AuditInputs, builder: MapperBuilder) -> tuple[rec.GridPoint, ...]:
    """The shown graph's invariants at the stability offsets around the settings used,
    each one a task on the audit's executor."""
    a = inp.config.audit
    base_k, base_o = builder.n_intervals_[0], builder.overlap_[0]
    tasks = []
    for di in a.stability_intervals:
        for do in a.stability_overlaps:
            k = max(1, base_k + di)
            o = float(np.clip(base_o + do, 0.0, 0.9))
            tasks.append((inp.config.graph, inp.seed, k, o, builder.clusterer_))
    if not tasks:
        return ()
    shared = np.column_stack([inp.X, inp.score]).astype(np.float64, copy=False)

    def done(n: int) -> None:
        inp.step(7, f"the shown graph at other cover settings, {n} of {len(tasks)}")

    return tuple(map_shared(inp.executor, _grid_point, shared, tasks, progress=done))


# -- weak regions -------------------------------------------------------------------------------


def search(inp: AuditInputs) -> Search:
    """Search the discovery half for candidate regions and confirm them on the other half."""
    a = inp.config.audit
    losses = inp.task.losses(inp.ds.target, inp.score, inp.release.threshold)
    discovery = split_halves(inp.ds.n_rows, inp.task.strata(inp.ds.target), inp.seed)
    settings = SearchSettings(n_intervals=a.search_intervals, node_rows=a.node_rows, folds=a.folds)
    graphs = search_graphs(
        inp.X, losses, discovery, settings, random_state=inp.seed, executor=inp.executor
    )
    found = find_weak_regions(
        graphs, losses, discovery, fdr=a.fdr, min_rows=a.min_rows, random_state=inp.seed
    )
    weak = merge_confirmed(found, losses=losses, discovery=discovery)
    return Search(losses, discovery, settings, graphs, found, weak)


def regions_holding(rows: np.ndarray, partition: Partition) -> tuple[rec.RegionShare, ...]:
    """The regions of the shown graph that hold ``rows``, most rows first (at most 3)."""
    ids, counts = np.unique(partition.row_region[rows], return_counts=True)
    order = sorted(zip(counts.tolist(), ids.tolist(), strict=True), key=lambda t: (-t[0], t[1]))
    sizes = np.bincount(partition.row_region)
    return tuple(rec.RegionShare(r, n, int(sizes[r])) for n, r in order[:3])


def candidate_record(f: CandidateRegion, partition: Partition | None = None) -> rec.Candidate:
    return rec.Candidate(
        graph=f.graph,
        kind=f.kind,
        nodes=tuple(f.nodes),
        rows=int(f.rows.size),
        scan_llr=f.llr,
        lens_threshold=f.lens_threshold,
        discovery=f.discovery,
        confirmation=f.confirmation,
        tested=f.tested,
        p_value=f.p_value,
        p_adjusted=f.p_adjusted,
        confirmed=f.confirmed,
        effect=f.effect,
        note=f.note,
        also_found=tuple(f.also_found),
        regions=regions_holding(f.rows, partition) if partition is not None else None,
    )


def _points(interval: rec.Estimate | None) -> float | None:
    """The width of an interval in points (hundredths), if it has one."""
    if interval is None or interval.low is None or interval.high is None:
        return None
    return 100 * (interval.high - interval.low)


def weak_region(
    inp: AuditInputs,
    i: int,
    f: CandidateRegion,
    views: list[rec.ShapeFeatureRecord],
    graph: MapperGraph,
    discovery: np.ndarray | None = None,
    partition: Partition | None = None,
    direction: np.ndarray | None = None,
) -> rec.WeakRegion:
    """Weak region ``W{i}``: its metrics, who is in it, and whether a local model does
    better there (its stability is filled in by :func:`with_stability`). With the
    ``discovery`` half's mask, a classification also gets the error rate of its rows on
    the confirmation half, with its Wilson interval. ``direction``: the slab graph's
    direction, for a region found there (its description then gives the band)."""
    ds, a = inp.ds, inp.config.audit
    mask = np.zeros(ds.n_rows, dtype=bool)
    mask[f.rows] = True
    metrics = inp.metrics(f.rows)
    name = inp.task.interval_metric
    interval = metrics.get(name) if name else None
    confirmed = None
    if name and discovery is not None:
        confirmed = inp.metrics(f.rows[~discovery[f.rows]]).get(name)
    return rec.WeakRegion(
        **vars(candidate_record(f, partition)),
        id=f"W{i}",
        share_of_rows=f.rows.size / ds.n_rows,
        error_interval_points=_points(interval),
        metrics=metrics,
        description=describe_region(
            mask,
            ds.frame,
            ds.X,
            ds.feature_names,
            random_state=inp.seed,
            direction=direction,
            search_scale=None if inp.config.graph.standardize else np.ones(ds.X.shape[1]),
        ),
        local_model=local_model_test(
            ds.X[f.rows],
            ds.target[f.rows],
            inp.score[f.rows],
            task=inp.task.name,
            model=a.local_model,
            folds=a.folds,
            random_state=inp.seed,
        ),
        on_feature=place_on_features(f.rows, views, graph),
        stability=None,
        confirmation_error_rate=confirmed,
        confirmation_interval_points=_points(confirmed),
        error_mix=inp.error_mix(f.rows),
    )


def weak_regions(
    inp: AuditInputs,
    found: Search,
    views: list[rec.ShapeFeatureRecord],
    graph: MapperGraph,
    partition: Partition,
) -> list[rec.WeakRegion]:
    """Every confirmed weak region, described (:func:`weak_region`), in order."""
    weak = []
    for i, f in enumerate(found.weak, start=1):
        inp.step(
            5,
            f"describing weak region W{i} ({i} of {len(found.weak)}) and testing a local model "
            "there",
        )
        slab = next((g.weights for g in found.graphs if g.name == f.graph == "slab"), None)
        weak.append(weak_region(inp, i, f, views, graph, found.discovery, partition, slab))
    return weak


def with_stability(
    inp: AuditInputs, found: Search, weak: list[rec.WeakRegion]
) -> tuple[list[rec.WeakRegion], rec.Stability]:
    """Rerun the search at other settings and on subsamples; each weak region gets the
    share of reruns that found it again."""
    a = inp.config.audit
    runs = []
    if weak and (a.bootstrap_resamples or len(a.stability_intervals) * len(a.stability_overlaps)):
        runs = stability_runs(
            inp.X,
            found.losses,
            found.discovery,
            [f.rows for f in found.weak],
            found.settings,
            interval_offsets=a.stability_intervals,
            overlap_offsets=a.stability_overlaps,
            resamples=a.bootstrap_resamples,
            fdr=a.fdr,
            min_rows=a.min_rows,
            match_jaccard=a.match_jaccard,
            random_state=inp.seed,
            lens=ErrorLens.of(found.graphs),
            search_regions=[f.rows for f in found.weak],
            executor=inp.executor,
            progress=lambda message: inp.step(6, message),
        )
    shares = [[r.found[j] for r in runs] for j in range(len(weak))]
    weak = [
        dataclasses.replace(w, stability=sum(s) / len(s) if s else None)
        for w, s in zip(weak, shares, strict=True)
    ]
    ids = [w.id for w in weak]
    record = rec.Stability(
        tuple(
            rec.StabilityRun(r.label, r.kind, r.confirmed, dict(zip(ids, r.found, strict=True)))
            for r in runs
        )
    )
    return weak, record


# -- regions, nodes, comparison ---------------------------------------------------------------


def region_records(
    inp: AuditInputs, partition: Partition, losses: list[Losses] | None = None
) -> tuple[rec.RegionRecord, ...]:
    """Each region of the partition with its metrics (and calibration bins, and for a
    classification the error rate its scores promise)."""
    out = []
    first = 0 if (partition.row_region == 0).any() else 1
    for r in range(first, partition.n_regions + 1):
        rows = partition.rows_of(r)
        if rows.size == 0:
            continue
        out.append(
            rec.RegionRecord(
                id=r,
                rows=int(rows.size),
                nodes=int(np.sum(partition.node_region == r)),
                metrics=inp.metrics(rows),
                calibration=inp.task.calibration(inp.ds.target[rows], inp.score[rows]),
                error_mix=inp.error_mix(rows),
                promised_error_rate=(
                    float(losses[0].expected[rows].mean()) if losses and inp.task.counts else None
                ),
            )
        )
    return tuple(out)


def weak_masks(n_rows: int, weak: list[rec.WeakRegion], found: Search) -> dict[str, np.ndarray]:
    """Weak region name -> boolean mask of its rows."""
    masks = {}
    for w, f in zip(weak, found.weak, strict=True):
        mask = np.zeros(n_rows, dtype=bool)
        mask[f.rows] = True
        masks[w.id] = mask
    return masks


def graph_document(
    inp: AuditInputs,
    graph: MapperGraph,
    partition: Partition,
    losses: list[Losses],
    masks: dict[str, np.ndarray],
) -> rec.GraphDocument:
    """graph.json: each node's size, region and statistics, and the links."""
    loss = losses[0]
    # a classification's promise is the scores' own; a regression's reference is the mean
    # squared error of all rows (its expected loss is 1 per row, before scaling)
    expected = loss.expected if inp.task.counts else loss.expected * loss.observed.mean()
    nodes = tuple(
        rec.Node(
            id=v,
            rows=int(m.size),
            region=int(partition.node_region[v]),
            filter=float(graph.node_filter[v, 0]),
            mean_score=float(inp.score[m].mean()),
            loss=float(loss.observed[m].mean()),
            expected_loss=float(expected[m].mean()),
            weak_regions=tuple(wid for wid, mk in masks.items() if mk[m].mean() >= 0.5),
            positive_rate=inp.task.positive_rate(inp.ds.target[m]),
            excess=float(loss.observed[m].mean() - expected[m].mean()),
        )
        for v, m in enumerate(graph.members)
    )
    links = tuple(rec.Link(**link) for link in graph.node_link()["links"])
    return rec.GraphDocument(graph.n_rows, graph.settings, nodes, links)


def comparison(
    inp: AuditInputs, partition: Partition, losses: list[Losses]
) -> rec.Comparison | None:
    """The release against the one before it on the same rows, region by region: its
    decisions (or squared errors) and, for classification, its ROC AUC and Brier score."""
    base = inp.baseline
    if base is None:
        return None
    y = inp.ds.target
    before = inp.task.row_loss(y, inp.ds.scores[base.name], base.threshold)
    comp = compare_releases(
        before,
        losses[0].observed,
        partition.row_region,
        baseline=base.name,
        candidate=inp.release.name,
        counts=inp.task.counts,
        fdr=inp.config.audit.fdr,
        y=y if inp.task.has_threshold else None,
        scores=(inp.ds.scores[base.name], inp.score),
    )
    return rec.Comparison(
        baseline=comp.baseline,
        candidate=comp.candidate,
        overall=comp.overall,
        regions=tuple(comp.regions),
        worse=tuple(comp.worse),
        better=tuple(comp.better),
        baseline_overall=inp.metrics(np.arange(inp.ds.n_rows), release=base),
    )


def segment_records(inp: AuditInputs, losses: list[Losses]) -> tuple[rec.Segment, ...] | None:
    """Each level of each column of ``audit.segments`` with its rows, the release's metrics
    and its test against the other rows (see :mod:`topoaudit.audit.segments`); None when
    no column is declared. A task whose headline metric has no interval of its own gets
    200 percentile-bootstrap resamples per level."""
    if not inp.config.audit.segments:
        return None
    resamples = 0 if inp.task.interval_metric else 200
    return declared_segments(
        inp.ds.segments,
        losses[0].observed,
        lambda rows: inp.metrics(rows, bootstrap=resamples),
        counts=inp.task.counts,
        fdr=inp.config.audit.fdr,
    )


def members_table(
    inp: AuditInputs, graph: MapperGraph, partition: Partition, found: Search, masks: dict
) -> pd.DataFrame:
    """The row-level table (bundle only): each row's nodes, region, weak regions, half, and
    its observed and promised loss of the main kind (error, or squared error), which the
    review across releases reads (:mod:`topoaudit.audit.lineage`)."""
    indptr, nodes = graph.row_nodes()
    n = inp.ds.n_rows
    main = found.losses[0]
    return pd.DataFrame(
        {
            "id": inp.ds.ids,
            "nodes": [nodes[indptr[r] : indptr[r + 1]].tolist() for r in range(n)],
            "region": partition.row_region,
            "weak_regions": [[wid for wid, mk in masks.items() if mk[r]] for r in range(n)],
            "half": np.where(found.discovery, "discovery", "confirmation"),
            "loss": main.observed,
            "promised": main.expected,
        }
    )


def outcomes(inp: AuditInputs) -> rec.Outcomes | None:
    """The outcome table of a classification on every row: base rate, confusion counts,
    the no-skill rules and the decisions at other thresholds (none for a regression)."""
    if not inp.task.has_threshold:
        return None
    return outcome_table(inp.ds.target, inp.score, inp.release.threshold)


# -- the records around the findings ----------------------------------------------------------


def _versions() -> dict[str, str]:
    names = ["topoaudit", "numpy", "scipy", "scikit-learn", "networkx", "pandas"]
    out = {"python": platform.python_version()}
    for n in names:
        try:
            out[n] = metadata.version(n)
        except metadata.PackageNotFoundError:
            out[n] = "not installed"
    return out


def provenance(inp: AuditInputs, discovery: np.ndarray, command: str) -> rec.Provenance:
    ds = inp.ds
    return rec.Provenance(
        fingerprint=ds.fingerprint,
        data_file=Path(ds.source).name,
        rows=ds.n_rows,
        rows_dropped=ds.n_dropped,
        features=tuple(ds.feature_names),
        encoding=ds.encoding,
        seed=inp.seed,
        versions=_versions(),
        command=command,
        threshold=inp.release.threshold,
        score_column=inp.release.score,
        discovery_rows=int(discovery.sum()),
        confirmation_rows=int((~discovery).sum()),
    )


def search_records(
    inp: AuditInputs, graphs: list[SearchGraph]
) -> tuple[rec.SearchGraphRecord, ...]:
    names = list(inp.ds.feature_names)

    def used(s: SearchGraph) -> tuple[str, ...]:
        if s.weights is None:
            return tuple(names)
        if s.name == "slab":  # a direction: the features that carry it, largest first
            return tuple(names[j] for j in carrying_features(s.weights))
        return tuple(n for n, w in zip(names, s.weights, strict=True) if w > 0)

    return tuple(
        rec.SearchGraphRecord(
            name=s.name,
            method=s.method,
            nodes=s.graph.n_nodes,
            edges=s.graph.n_edges,
            settings=s.graph.settings,
            features_used=used(s),
        )
        for s in graphs
    )


def summary(found: Search, weak: list, regions: tuple) -> rec.Summary:
    tested = sum(f.tested for f in found.candidates)
    return rec.Summary(
        candidates=len(found.candidates),
        candidates_tested=tested,
        candidates_untested=len(found.candidates) - tested,
        weak_regions=len(weak),
        regions=len(regions),
        confidence=0.95,
    )


# -- the sequence -------------------------------------------------------------------------------


def placed_rows(inp: AuditInputs, previous: str | Path | None) -> Placed | None:
    """The release's rows on the graph of the bundle ``previous``, when the two releases
    ran on different data files (None when there is no such bundle or no need)."""
    if previous is None:
        return None
    from topoaudit.bundle.files import read_analysis

    earlier = read_analysis(previous)
    if earlier.provenance.fingerprint == inp.ds.fingerprint:
        return None  # the same rows: the review follows regions by row id
    inp.step(1, f"placing the rows on the graph of release {earlier.release}")
    return place_on_previous(inp.config, inp.ds, previous, prepare, shown_graph)


def drift_record(placed: Placed | None) -> rec.Drift | None:
    """The record of :func:`placed_rows` (None without placed rows)."""
    if placed is None:
        return None
    return rec.Drift(
        previous=placed.previous,
        rows_before=placed.rows_before,
        rows_after=placed.placement.n_rows,
        outside=int(placed.placement.outside.size),
        regions=tuple(placed.regions),
        nodes=tuple(placed.nodes),
    )


def executor_spec(config: Config, n_rows: int) -> Any:
    """Where an audit of ``n_rows`` rows runs its tasks, as
    :func:`~topoaudit.mapper.executor.make_executor` takes it: the ``[compute]``
    scheduler's address when one is set, else ``[compute] workers`` local processes
    (``"auto"``: one per usable core, none below :data:`PROCESS_ROWS` rows)."""
    compute = config.compute
    if compute.scheduler is not None:
        return compute.scheduler
    if compute.workers == "auto":
        cores = usable_cores()
        return cores if cores > 1 and n_rows >= PROCESS_ROWS else None
    return compute.workers


def run_audit(
    config: Config,
    dataset: Dataset | None = None,
    *,
    release: str | None = None,
    progress: Progress | None = None,
    command: str = "",
    previous: str | Path | None = None,
    executor: Any = None,
) -> Audit:
    """Audit one release of ``config`` (by default its last) on its data.

    When the config names an earlier release, the audited release is also compared with
    the one just before it, on the same rows. When the release has a data file of its own
    and ``previous`` is the earlier release's bundle, its rows are placed on that
    release's graph (:mod:`topoaudit.audit.newdata`).

    The independent tasks (resamples, reruns, graphs at other settings) run on
    ``executor`` (an executor, or what :func:`~topoaudit.mapper.executor.make_executor`
    takes), by default where ``config.compute`` says (:func:`executor_spec`). The bundle
    is the same wherever they run.
    """
    inp = prepare(config, dataset, release=release, progress=progress)
    spec = executor if executor is not None else executor_spec(config, inp.ds.n_rows)
    with open_executor(spec) as ex:
        connect = getattr(ex, "connect", None)
        if connect is not None:
            inp.say(f"connecting to the cluster at {getattr(ex, 'address', ex)}")
            connect()
        return _audit(dataclasses.replace(inp, executor=ex), command, previous)


def _audit(inp: AuditInputs, command: str, previous: str | Path | None) -> Audit:
    """The steps of :func:`run_audit`, in order."""
    config = inp.config
    placed = placed_rows(inp, previous)
    ds = inp.ds
    size = f"{plural(ds.n_rows, 'row')} x {plural(ds.X.shape[1], 'feature')}"
    inp.step(1, f"building the graph of {size}")
    builder = shown_graph(inp)
    graph = builder.graph_
    partition = partition_graph(graph, random_state=inp.seed)
    inp.step(2, f"scoring the features of the shape on {config.graph.resamples} resamples")
    views, shape = shape_of(inp, builder)
    inp.step(3, "computing metrics")
    overall = inp.metrics(np.arange(ds.n_rows), bootstrap=200)
    table = outcomes(inp)
    inp.step(4, "searching for weak regions (discovery half)")
    found = search(inp)
    tested = sum(f.tested for f in found.candidates)
    inp.step(
        4,
        f"{plural(tested, 'candidate')} tested, {plural(len(found.weak), 'weak region')} confirmed",
    )
    weak, stability = with_stability(inp, found, weak_regions(inp, found, views, graph, partition))
    inp.step(7, "the shown graph at other cover settings")
    grid = settings_grid(inp, builder)
    regions = region_records(inp, partition, found.losses)
    masks = weak_masks(ds.n_rows, weak, found)
    if inp.baseline is not None:
        inp.step(8, f"comparing release {inp.release.name} with {inp.baseline.name}")
    analysis = rec.Analysis(
        model=config.model,
        release=inp.release.name,
        task=ds.task,
        created=build_date(),
        config=config.to_dict(),
        provenance=provenance(inp, found.discovery, command),
        overall=overall,
        graph=rec.GraphSummary(
            settings=graph.settings,
            invariants=rec.Invariants(**dataclasses.asdict(invariants(graph))),
            regions=partition.n_regions,
            grid=grid,
            shape=shape,
        ),
        search=search_records(inp, found.graphs),
        regions=regions,
        weak_regions=tuple(weak),
        candidates=tuple(candidate_record(f, partition) for f in found.candidates),
        stability=stability,
        summary=summary(found, weak, regions),
        comparison=comparison(inp, partition, found.losses),
        outcomes=table,
        segments=segment_records(inp, found.losses),
        drift=drift_record(placed),
    )
    members = members_table(inp, graph, partition, found, masks)
    if placed is not None:
        members["placed_on"] = placed.placed_on
    return Audit(
        analysis=analysis,
        graph=graph_document(inp, graph, partition, found.losses, masks),
        members=members,
    )
