"""The features of the shape in the user's terms, and where a weak region lies."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from topoaudit.audit.shape import _loop_columns, describe_shape, place_on_features
from topoaudit.mapper.features import ShapeFeature, ShapeSummary
from topoaudit.mapper.graph import MapperGraph


def _members(sizes):
    out, start = [], 0
    for s in sizes:
        out.append(np.arange(start, start + s))
        start += s
    return tuple(out)


def _graph(sizes):
    members = _members(sizes)
    return MapperGraph.from_members(list(members), sum(sizes))


def test_loop_columns_are_ranked_by_eta_squared_as_in_a_one_way_anova():
    # Source: eta squared = SS_between / SS_total = F df_b / (F df_b + df_w), the one-way
    # analysis of variance (common practice, no source); F from scipy.stats.f_oneway.
    rng = np.random.default_rng(0)
    members = _members([30, 40, 50])
    X = rng.normal(size=(120, 3))
    X[members[1], 0] += 1.5  # column 0 changes between nodes, column 2 a little
    X[members[2], 2] += 0.4
    got = _loop_columns(X, ["a", "b", "c"], members, (0, 1, 2))
    for entry in got:
        j = "abc".index(entry.column)
        f, _ = stats.f_oneway(*(X[m, j] for m in members))
        df_b, df_w = 2, 120 - 3
        assert entry.eta_squared == pytest.approx(f * df_b / (f * df_b + df_w), rel=1e-9)
    assert got[0].column == "a"


def _summary():
    # node 0-3: the main component with a flare at node 3; node 4-5: a separate group
    feats = (
        ShapeFeature("component", "ext0", 0.0, 3.0, (0, 1, 2, 3), confidence=1.0),
        ShapeFeature("component", "ext0", 1.0, 2.0, (4, 5), confidence=0.9),
        ShapeFeature("component", "ext0", 5.0, 5.0, (6,), confidence=0.0),
        ShapeFeature("flare", "branch", 3.0, 2.0, (3,), tip=3, confidence=0.97),
    )
    return ShapeSummary(features=feats, n_resamples=10, resample_rows=50)


def test_features_are_named_in_words_and_single_node_groups_left_out():
    graph = _graph([40, 40, 40, 20, 15, 15, 1])
    X = np.random.default_rng(1).normal(size=(171, 2))
    views = describe_shape(_summary(), graph, X, ["age", "flow"])
    assert [v.name for v in views] == ["the main component", "separate group 1", "flare 1"]
    assert [v.rows for v in views] == [140, 30, 20]
    assert views[0].main and not views[1].main


@pytest.mark.parametrize(
    ("rows", "expected"),
    [
        (np.arange(120, 140), {"feature": "flare 1", "kind": "flare", "at_tip": True}),
        (
            np.arange(140, 170),
            {"feature": "separate group 1", "kind": "component", "at_tip": False},
        ),
        (np.arange(0, 60), None),
    ],
    ids=["the-flare-tip", "a-separate-group", "only-the-main-component"],
)
def test_a_weak_region_is_placed_on_the_most_specific_feature_holding_half_of_it(rows, expected):
    graph = _graph([40, 40, 40, 20, 15, 15, 1])
    X = np.random.default_rng(1).normal(size=(171, 2))
    views = describe_shape(_summary(), graph, X, ["age", "flow"])
    got = place_on_features(rows, views, graph)
    if expected is None:
        assert got is None
    else:
        assert {k: getattr(got, k) for k in expected} == expected
        assert got.share == 1.0
