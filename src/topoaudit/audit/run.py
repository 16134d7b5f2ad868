"""One audit of one release, from a config to an AnalysisResult and its bundle.

This is a fixed sequence of plain steps over the modules of this package; each step is
usable alone from Python.
"""

from __future__ import annotations

import os
import platform
from collections.abc import Callable
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from sklearn.preprocessing import StandardScaler

from topoaudit.audit.compare import compare_releases
from topoaudit.audit.describe import describe_region
from topoaudit.audit.local import local_model_test
from topoaudit.audit.metrics import (
    binary_metrics,
    calibration_bins,
    metrics_as_dict,
    regression_metrics,
)
from topoaudit.audit.regions import partition_graph
from topoaudit.audit.result import AnalysisResult, build_date
from topoaudit.audit.search import SearchSettings, search_graphs
from topoaudit.audit.shape import ShapeFeatureView, describe_shape, place_on_features
from topoaudit.audit.stability import stability_runs
from topoaudit.audit.weak import (
    CandidateRegion,
    binary_losses,
    find_weak_regions,
    merge_confirmed,
    regression_losses,
    split_halves,
)
from topoaudit.config import Config
from topoaudit.data import Dataset, load_dataset
from topoaudit.mapper.features import feature_confidence
from topoaudit.mapper.graph import MapperBuilder
from topoaudit.mapper.topology import invariants
from topoaudit.wording import plural

__all__ = ["Audit", "run_audit"]

Progress = Callable[[str], None]


@dataclass(frozen=True, eq=False)
class Audit:
    """An AnalysisResult with the row-level data that goes into the bundle only."""

    result: AnalysisResult
    graph: dict[str, Any]
    members: pd.DataFrame

    def write(self, folder: str | Path) -> Path:
        return self.result.write(folder, graph=self.graph, members=self.members)


def _versions() -> dict[str, str]:
    names = ["topoaudit", "numpy", "scipy", "scikit-learn", "networkx", "pandas"]
    out = {"python": platform.python_version()}
    for n in names:
        try:
            out[n] = metadata.version(n)
        except metadata.PackageNotFoundError:
            out[n] = "not installed"
    return out


def _display_builder(
    config: Config,
    X: np.ndarray,
    score: np.ndarray,
    *,
    n_intervals: Any = None,
    overlap: Any = None,
    clusterer: Any = None,
) -> MapperBuilder:
    """The fitted builder of the graph shown for the data's shape, at the config's
    settings (``"auto"``: chosen from the data) or at others."""
    g = config.graph
    if g.filter == "score":
        lens: Any = score
        params = None
    elif g.filter == "pca":
        lens, params = "pca", {"n_components": g.components}
    else:
        lens, params = g.filter, None
    builder = MapperBuilder(
        lens,
        filter_params=params,
        cover=g.cover,
        n_intervals=g.n_intervals if n_intervals is None else n_intervals,
        overlap=g.overlap if overlap is None else overlap,
        clusterer=g.clusterer if clusterer is None else clusterer,
        random_state=config.seed,
    )
    return builder.fit(X)


def _settings_grid(
    config: Config, X: np.ndarray, score: np.ndarray, builder: MapperBuilder
) -> list[dict[str, Any]]:
    """The shown graph's invariants at the stability offsets around the settings used."""
    a = config.audit
    base_k, base_o = builder.n_intervals_[0], builder.overlap_[0]
    grid = []
    for di in a.stability_intervals:
        for do in a.stability_overlaps:
            k = max(1, base_k + di)
            o = float(np.clip(base_o + do, 0.0, 0.9))
            other = _display_builder(
                config, X, score, n_intervals=k, overlap=o, clusterer=builder.clusterer_
            )
            grid.append({"n_intervals": k, "overlap": o, **invariants(other.graph_).as_dict()})
    return grid


def _shape(
    config: Config, ds: Dataset, X: np.ndarray, builder: MapperBuilder, say: Progress
) -> tuple[list[ShapeFeatureView], dict[str, Any]]:
    """The features of the shown graph, described, and the record of how sure they are.
    Only a graph of a one-dimensional filter has them (a product cover draws loops of its
    own grid)."""
    record: dict[str, Any] = {
        "chosen": builder.auto_.as_dict() if builder.auto_ is not None else None,
        "n_intervals": list(builder.n_intervals_),
        "overlap": list(builder.overlap_),
    }
    if builder.filter_values_.shape[1] != 1:
        return [], {**record, "resamples": 0, "resample_rows": 0, "features": [], "two_d": True}
    n = config.graph.resamples
    jobs = 2 if n >= 10 and ds.n_rows >= 2000 and (os.cpu_count() or 1) >= 2 else None
    summary = feature_confidence(
        builder,
        X,
        n_resamples=n,
        executor=jobs,
        random_state=config.seed,
        progress=lambda message: say(f"step 2 of 8: features of the shape, {message}"),
    )
    views = describe_shape(summary, builder.graph_, ds.X, list(ds.feature_names))
    record |= {
        "resamples": summary.n_resamples,
        "resample_rows": summary.resample_rows,
        "features": [v.as_dict() for v in views],
    }
    return views, record


def _metrics(
    ds: Dataset, score: np.ndarray, threshold: float, rows: np.ndarray, boot: int, seed: int
) -> dict[str, Any]:
    if ds.task == "binary":
        m = binary_metrics(
            ds.target[rows], score[rows], threshold, bootstrap=boot, random_state=seed
        )
    else:
        m = regression_metrics(ds.target[rows], score[rows], bootstrap=boot, random_state=seed)
    return metrics_as_dict(m)


def _finding_dict(f: CandidateRegion) -> dict[str, Any]:
    return {
        "graph": f.graph,
        "kind": f.kind,
        "nodes": list(f.nodes),
        "rows": int(f.rows.size),
        "scan_llr": f.llr,
        "lens_threshold": f.lens_threshold,
        "discovery": f.discovery.as_dict(),
        "confirmation": f.confirmation.as_dict(),
        "tested": f.tested,
        "p_value": f.p_value,
        "p_adjusted": f.p_adjusted,
        "confirmed": f.confirmed,
        "effect": f.effect,
        "note": f.note,
        "also_found": list(f.also_found),
    }


def run_audit(
    config: Config,
    dataset: Dataset | None = None,
    *,
    release: str | None = None,
    progress: Progress | None = None,
    command: str = "",
) -> Audit:
    """Audit one release of ``config`` (by default its last) on its data.

    When the config names an earlier release, the audited release is also compared with
    the one just before it, on the same rows.
    """
    say = progress or (lambda _msg: None)
    ds = dataset if dataset is not None else load_dataset(config)
    rel = config.release(release) if release else config.releases[-1]
    index = [r.name for r in config.releases].index(rel.name)
    baseline = config.releases[index - 1] if index > 0 else None
    a = config.audit
    seed = config.seed
    score = ds.scores[rel.name]
    X = StandardScaler().fit_transform(ds.X) if config.graph.standardize else ds.X

    size = f"{plural(ds.n_rows, 'row')} x {plural(ds.X.shape[1], 'feature')}"
    say(f"step 1 of 8: building the graph of {size}")
    builder = _display_builder(config, X, score)
    graph = builder.graph_
    partition = partition_graph(graph, random_state=seed)
    say(f"step 2 of 8: scoring the features of the shape on {config.graph.resamples} resamples")
    shape_views, shape = _shape(config, ds, X, builder, say)

    say("step 3 of 8: computing metrics")
    every = np.arange(ds.n_rows)
    overall = _metrics(ds, score, rel.threshold, every, 200, seed)

    if ds.task == "binary":
        losses = binary_losses(ds.target, score, rel.threshold)
    else:
        losses = regression_losses(ds.target, score)
    discovery = split_halves(ds.n_rows, ds.target if ds.task == "binary" else None, seed)
    settings = SearchSettings(n_intervals=a.search_intervals, node_rows=a.node_rows, folds=a.folds)
    say("step 4 of 8: searching for weak regions (discovery half)")
    searched = search_graphs(X, losses, discovery, settings, random_state=seed)
    findings = find_weak_regions(
        searched, losses, discovery, fdr=a.fdr, min_rows=a.min_rows, random_state=seed
    )
    weak = merge_confirmed(findings)
    say(
        f"step 4 of 8: {plural(sum(f.tested for f in findings), 'candidate')} tested, "
        f"{plural(len(weak), 'weak region')} confirmed"
    )

    weak_out = []
    for i, f in enumerate(weak, start=1):
        mask = np.zeros(ds.n_rows, dtype=bool)
        mask[f.rows] = True
        say(
            f"step 5 of 8: describing weak region W{i} ({i} of {len(weak)}) and testing a "
            "local model there"
        )
        desc = describe_region(mask, ds.frame, ds.X, ds.feature_names, random_state=seed)
        local = local_model_test(
            ds.X[f.rows],
            ds.target[f.rows],
            score[f.rows],
            task=ds.task,
            model=a.local_model,
            folds=a.folds,
            random_state=seed,
        )
        weak_out.append(
            {
                "id": f"W{i}",
                **_finding_dict(f),
                "share_of_rows": f.rows.size / ds.n_rows,
                "error_interval_points": None,
                "metrics": _metrics(ds, score, rel.threshold, f.rows, 0, seed),
                "description": desc.as_dict(),
                "local_model": local.as_dict(),
                "on_feature": place_on_features(f.rows, shape_views, graph),
            }
        )

    for w in weak_out:
        key = "error_rate" if ds.task == "binary" else None
        if key and w["metrics"][key]["low"] is not None:
            w["error_interval_points"] = 100 * (
                w["metrics"][key]["high"] - w["metrics"][key]["low"]
            )

    runs = []
    if weak and (a.bootstrap_resamples or len(a.stability_intervals) * len(a.stability_overlaps)):
        runs = stability_runs(
            X,
            losses,
            discovery,
            [f.rows for f in weak],
            settings,
            interval_offsets=a.stability_intervals,
            overlap_offsets=a.stability_overlaps,
            resamples=a.bootstrap_resamples,
            fdr=a.fdr,
            min_rows=a.min_rows,
            match_jaccard=a.match_jaccard,
            random_state=seed,
            progress=lambda message: say(f"step 6 of 8: {message}"),
        )
    for j, w in enumerate(weak_out):
        found = [r.found[j] for r in runs]
        w["stability"] = sum(found) / len(found) if found else None

    say("step 7 of 8: the shown graph at other cover settings")
    grid = _settings_grid(config, X, score, builder)

    # per-region table and per-node statistics
    regions = []
    for r in range(0 if (partition.row_region == 0).any() else 1, partition.n_regions + 1):
        rows = partition.rows_of(r)
        if rows.size == 0:
            continue
        entry = {
            "id": r,
            "rows": int(rows.size),
            "nodes": int(np.sum(partition.node_region == r)),
            "metrics": _metrics(ds, score, rel.threshold, rows, 0, seed),
        }
        if ds.task == "binary":
            entry["calibration"] = calibration_bins(ds.target[rows], score[rows])
        regions.append(entry)
    weak_mask = {
        w["id"]: np.isin(np.arange(ds.n_rows), f.rows) for w, f in zip(weak_out, weak, strict=True)
    }
    error = losses[0].observed
    nodes = []
    for v, m in enumerate(graph.members):
        node = {
            "id": v,
            "rows": int(m.size),
            "region": int(partition.node_region[v]),
            "filter": float(graph.node_filter[v, 0]),
            "mean_score": float(score[m].mean()),
            "loss": float(error[m].mean()),
            "expected_loss": float(losses[0].expected[m].mean()),
            "weak_regions": [wid for wid, mk in weak_mask.items() if mk[m].mean() >= 0.5],
        }
        if ds.task == "binary":
            node["positive_rate"] = float(ds.target[m].mean())
        nodes.append(node)
    graph_doc = {
        "n_rows": graph.n_rows,
        "settings": graph.settings,
        "nodes": nodes,
        "links": [
            {"source": int(s), "target": int(t), "shared": int(c), "jaccard": float(j)}
            for (s, t), c, j in zip(graph.edges, graph.edge_shared, graph.edge_jaccard, strict=True)
        ],
    }

    comparison = None
    if baseline is not None:
        say(f"step 8 of 8: comparing release {rel.name} with {baseline.name}")
        base_score = ds.scores[baseline.name]
        if ds.task == "binary":
            before = binary_losses(ds.target, base_score, baseline.threshold)[0].observed
            after = losses[0].observed
        else:
            before = (ds.target - base_score) ** 2
            after = (ds.target - score) ** 2
        comp = compare_releases(
            before,
            after,
            partition.row_region,
            baseline=baseline.name,
            candidate=rel.name,
            counts=ds.task == "binary",
            fdr=a.fdr,
        )
        comparison = {
            "baseline": comp.baseline,
            "candidate": comp.candidate,
            "overall": comp.overall.as_dict(),
            "regions": [c.as_dict() for c in comp.regions],
            "worse": list(comp.worse),
            "better": list(comp.better),
            "baseline_overall": _metrics(ds, base_score, baseline.threshold, every, 0, seed),
        }

    node_lists: list[list[int]] = [[] for _ in range(ds.n_rows)]
    for v, m in enumerate(graph.members):
        for r in m.tolist():
            node_lists[r].append(v)
    members = pd.DataFrame(
        {
            "id": ds.ids,
            "nodes": node_lists,
            "region": partition.row_region,
            "weak_regions": [
                [wid for wid, mk in weak_mask.items() if mk[r]] for r in range(ds.n_rows)
            ],
            "half": np.where(discovery, "discovery", "confirmation"),
        }
    )
    result = AnalysisResult(
        model=config.model,
        release=rel.name,
        task=ds.task,
        created=build_date(),
        config=config.to_dict(),
        provenance={
            "fingerprint": ds.fingerprint,
            "data_file": Path(ds.source).name,
            "rows": ds.n_rows,
            "rows_dropped": ds.n_dropped,
            "features": list(ds.feature_names),
            "encoding": ds.encoding,
            "seed": seed,
            "versions": _versions(),
            "command": command,
            "threshold": rel.threshold,
            "score_column": rel.score,
            "discovery_rows": int(discovery.sum()),
            "confirmation_rows": int((~discovery).sum()),
        },
        overall=overall,
        graph={
            "settings": graph.settings,
            "invariants": invariants(graph).as_dict(),
            "regions": partition.n_regions,
            "grid": grid,
            "shape": shape,
        },
        search=[
            {
                "name": s.name,
                "method": s.method,
                "nodes": s.graph.n_nodes,
                "edges": s.graph.n_edges,
                "settings": s.graph.settings,
                "features_used": [
                    n for n, w in zip(ds.feature_names, s.weights, strict=True) if w > 0
                ]
                if s.weights is not None
                else list(ds.feature_names),
            }
            for s in searched
        ],
        regions=regions,
        weak_regions=weak_out,
        candidates=[_finding_dict(f) for f in findings],
        stability={
            "runs": [
                {
                    "label": r.label,
                    "kind": r.kind,
                    "confirmed": r.confirmed,
                    "found": dict(zip([w["id"] for w in weak_out], r.found, strict=True)),
                }
                for r in runs
            ],
        },
        comparison=comparison,
        summary={
            "candidates": len(findings),
            "candidates_tested": sum(f.tested for f in findings),
            "candidates_untested": sum(not f.tested for f in findings),
            "weak_regions": len(weak_out),
            "regions": len(regions),
            "confidence": 0.95,
        },
    )
    return Audit(result=result, graph=graph_doc, members=members)
