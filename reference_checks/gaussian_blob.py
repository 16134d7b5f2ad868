"""A Gaussian blob in six dimensions: a negative control, the data have no shape.

400 rows from the standard normal distribution in six dimensions, PCA filter. A
Gaussian has one connected support and no hole, so whatever the graph happens to draw,
no loop and no component but the one with most rows may be reported with bootstrap
confidence 0.95 or more (:func:`topoaudit.mapper.features.feature_confidence`, 20
resamples: a feature reaches 0.95 only if 19 of the 20 resamples keep it). Source:
common practice, no source (a Gaussian blob has no shape).

The stated settings ask for many intervals (18, overlap 0.3) with single linkage at the
data's neighbourhood scale, fine enough that the graph draws chance components at the
tails of the filter, some of several nodes; the confidence must not back them. A graph
whose loops and extra components all have zero extent (single nodes) has nothing to
score, since such a feature has confidence 0, and passes without resampling.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, describe
from topoaudit.mapper.features import ShapeFeature, feature_confidence, shape_features
from topoaudit.mapper.graph import MapperBuilder, MapperGraph
from topoaudit.mapper.topology import invariants

N_RESAMPLES = 20
SURE = 0.95


def make_data(n: int = 400, dim: int = 6, seed: int = 0) -> Data:
    return Data(np.random.default_rng(seed).normal(size=(n, dim)))


def _extra(graph: MapperGraph, features: list[ShapeFeature]) -> list[ShapeFeature]:
    """The loops, and the components other than the one with most rows."""
    components = [f for f in features if f.kind == "component"]
    rows = [np.unique(np.concatenate([graph.members[i] for i in c.nodes])).size for c in components]
    largest = int(np.argmax(rows)) if components else -1
    extra = [c for i, c in enumerate(components) if i != largest]
    return extra + [f for f in features if f.kind == "loop"]


def spurious(
    builder: MapperBuilder, X: np.ndarray, *, n_resamples: int = N_RESAMPLES
) -> tuple[list[ShapeFeature], list[ShapeFeature]]:
    """``(sure, scored)``: the loops and extra components of ``builder.graph_`` with their
    confidence, and those of them at :data:`SURE` or above (no resampling when the graph
    has none)."""
    graph = builder.graph_
    # a feature of zero extent has confidence 0 (no distance is below 0): nothing to score
    if not any(f.extent > 0 for f in _extra(graph, shape_features(graph))):
        return [], []
    summary = feature_confidence(builder, X, n_resamples=n_resamples, random_state=0)
    scored = _extra(graph, list(summary.features))
    return [f for f in scored if f.confidence is not None and f.confidence >= SURE], scored


def check(graph, data, setting):
    builder = MapperBuilder(**setting).fit(data.X)  # the same graph (seeded), with its builder
    sure, scored = spurious(builder, data.X)
    same = builder.graph_.n_nodes == graph.n_nodes and builder.graph_.n_edges == graph.n_edges
    if scored:
        kinds = ", ".join(
            f"{n} {kind}{'s' if n != 1 else ''}"
            for kind in ("component", "loop")
            if (n := sum(f.kind == kind for f in scored))
        )
        most = max(f.confidence or 0.0 for f in scored)
        seen = f"extra: {kinds}, most sure {most:.2f}"
    else:
        seen = "no loop or extra component to score"
    return not sure and same, describe(invariants(graph)) + f"; {seen}"


CASE = ReferenceCase(
    name="gaussian_blob",
    title="Gaussian blob, 400 rows in 6-D, PCA filter (negative control)",
    source="common practice, no source (a Gaussian blob has no shape)",
    expected=f"no loop and no extra component with confidence >= {SURE}",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 18, "overlap": 0.3, "clusterer": "auto"},
    neighbourhood={"n_intervals": [16, 17, 18, 19, 20], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
