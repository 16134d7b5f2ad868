"""The demo's graph, at the settings chosen from the data, shows what the generator plants.

The generator (topoaudit.demo, invented data) plants a seasonal loop, a battery run-down
flare leaving its winter end, a calcification flare leaving its summer end and an island
of large-bore meters. The graph the audit shows (PCA filter, standardised columns, every
other setting "auto") must show each of them, and say how sure it is.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.preprocessing import StandardScaler

from topoaudit.demo import FEATURES, make_meters
from topoaudit.mapper import MapperBuilder, invariants
from topoaudit.mapper.features import feature_confidence


@pytest.fixture(scope="module")
def demo_shape():
    frame = make_meters(8000, random_state=7)
    X = StandardScaler().fit_transform(frame[list(FEATURES)].to_numpy())
    builder = MapperBuilder("pca", filter_params={"n_components": 1}).fit(X)
    summary = feature_confidence(builder, X, n_resamples=20, random_state=7)
    return frame, builder.graph_, summary


def _share(frame, rows, mechanism):
    return float((frame["mechanism"].to_numpy()[rows] == mechanism).mean())


def test_the_demo_graph_has_one_loop_held_with_confidence(demo_shape):
    _, graph, summary = demo_shape
    assert invariants(graph).cycle_rank >= 1
    loops = summary.of_kind("loop")
    assert loops and max(f.confidence for f in loops) >= 0.9


def test_the_large_bore_island_is_a_component_of_its_own(demo_shape):
    frame, graph, summary = demo_shape
    batch = np.flatnonzero(frame["mechanism"].to_numpy() == "batch")
    islands = [
        f
        for f in summary.of_kind("component")
        if np.isin(batch, graph.rows_of(f.nodes)).all()
        and _share(frame, graph.rows_of(f.nodes), "batch") == 1.0
    ]
    assert len(islands) == 1


@pytest.mark.parametrize("mechanism", ["battery", "calcification"])
def test_each_failure_mechanism_is_a_flare(demo_shape, mechanism):
    # a flare whose tip node is the mechanism's meters and which holds most of them
    frame, graph, summary = demo_shape
    meters = np.flatnonzero(frame["mechanism"].to_numpy() == mechanism)
    flares = [
        f
        for f in summary.of_kind("flare")
        if _share(frame, graph.members[f.tip], mechanism) >= 0.9
        and np.isin(meters, graph.rows_of(f.nodes)).mean() >= 0.5
    ]
    assert len(flares) == 1
    assert flares[0].confidence >= 0.9
