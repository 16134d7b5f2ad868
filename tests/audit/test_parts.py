"""Regions, descriptions, local-model tests and release comparison, each against a
reference or a constructed answer."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.contingency_tables import mcnemar

from topoaudit.audit.compare import compare_releases
from topoaudit.audit.describe import describe_region
from topoaudit.audit.local import local_model_test
from topoaudit.audit.regions import partition_graph
from topoaudit.mapper.graph import MapperBuilder


@pytest.fixture(scope="module")
def blobs():
    rng = np.random.default_rng(0)
    centres = np.array([[0, 0], [6, 0], [0, 6]], dtype=float)
    X = np.vstack([c + rng.normal(0, 0.5, (300, 2)) for c in centres])
    return X


def test_regions_partition_every_row_once_and_follow_the_blobs(blobs):
    graph = MapperBuilder("pca", n_intervals=8, overlap=0.3).fit(blobs).graph_
    part = partition_graph(graph, random_state=0)
    assert part.row_region.min() >= 1  # no row without a home region
    assert sum(part.rows_of(r).size for r in range(1, part.n_regions + 1)) == blobs.shape[0]
    # every blob lies in regions of its own (regions never straddle two blobs)
    blob = np.repeat([0, 1, 2], 300)
    for r in range(1, part.n_regions + 1):
        assert np.unique(blob[part.rows_of(r)]).size == 1


def test_regions_are_seeded(blobs):
    graph = MapperBuilder("pca", n_intervals=8, overlap=0.3).fit(blobs).graph_
    a = partition_graph(graph, random_state=4).row_region
    b = partition_graph(graph, random_state=4).row_region
    np.testing.assert_array_equal(a, b)


def test_description_ranks_the_distinguishing_feature_and_finds_a_rule():
    rng = np.random.default_rng(1)
    n = 2000
    frame = pd.DataFrame(
        {
            "age": rng.uniform(0, 20, n),
            "noise": rng.normal(size=n),
            "site": rng.choice(["a", "b", "c"], n),
        }
    )
    mask = (frame["age"] > 15).to_numpy() & (frame["site"] == "a").to_numpy()
    X = np.column_stack(
        [
            frame["age"],
            frame["noise"],
            frame["site"] == "a",
            frame["site"] == "b",
            frame["site"] == "c",
        ]
    ).astype(float)
    names = ["age", "noise", "site=a", "site=b", "site=c"]
    d = describe_region(mask, frame, X, names)
    assert d.contrasts[0].feature == "age"
    # standardised mean difference with the pooled standard deviation (Austin, 2009)
    a, b = frame["age"][mask], frame["age"][~mask]
    smd = (a.mean() - b.mean()) / np.sqrt((a.var() + b.var()) / 2)
    assert d.contrasts[0].smd == pytest.approx(smd, rel=1e-12)
    assert d.categories[0].category == "a" and d.categories[0].region_share == 1.0
    assert "age >" in d.rule.text and "site=a" in d.rule.text
    assert d.rule.precision > 0.9 and d.rule.recall > 0.9 and d.rule.depth <= 3


@pytest.mark.parametrize("standardised_search", [True, False])
def test_slab_band_gives_the_direction_on_standardised_features(standardised_search):
    # constructed answer (common practice, no source): a band across two features of
    # different scales, found by a search that did or did not standardise them
    rng = np.random.default_rng(6)
    n = 4000
    X = np.column_stack([rng.normal(50, 10, n), rng.normal(0, 0.1, n), rng.normal(size=n)])
    Z = (X - X.mean(axis=0)) / X.std(axis=0)
    truth = np.array([0.8, -0.6, 0.0])  # on the standardised columns
    t = Z @ truth
    mask = np.abs(t - 0.5) < 0.1
    if standardised_search:
        direction, scale = truth, None
    else:  # the same direction over the raw columns: weights divided by the deviations
        direction = truth / X.std(axis=0)
        direction /= np.linalg.norm(direction)
        scale = np.ones(3)
    frame = pd.DataFrame(X, columns=["pipe_age", "pressure_drop", "noise"])
    d = describe_region(
        mask, frame, X, list(frame.columns), direction=direction, search_scale=scale
    )
    assert [(x.feature, x.weight) for x in d.band.terms] == [
        ("pipe_age", 0.8),
        ("pressure_drop", -0.6),
    ]
    assert 0.4 <= d.band.low < 0.45 and 0.55 < d.band.high <= 0.6
    assert describe_region(mask, frame, X, list(frame.columns)).band is None


def test_local_model_helps_where_the_release_is_miscalibrated():
    rng = np.random.default_rng(2)
    n = 1500
    X = rng.normal(size=(n, 3))
    true_p = 1 / (1 + np.exp(-(1.5 * X[:, 0])))
    y = (rng.uniform(size=n) < true_p).astype(int)
    flat = np.full(n, 0.5)  # a release that ignores the feature that matters here
    res = local_model_test(X, y, flat, folds=5)
    assert res.verdict == "local model better" and res.high < 0
    calibrated = local_model_test(X, y, true_p, folds=5)
    assert calibrated.verdict == "no clear gain" and calibrated.low <= 0 <= calibrated.high


def test_local_model_test_says_when_a_region_is_too_small():
    res = local_model_test(
        np.zeros((20, 2)), np.r_[np.zeros(18), np.ones(2)].astype(int), np.full(20, 0.3), folds=5
    )
    assert res.verdict == "too small to try"


def test_comparison_uses_the_exact_mcnemar_test_per_region():
    rng = np.random.default_rng(3)
    n = 600
    region = np.repeat([1, 2, 3], 200)
    before = (rng.uniform(size=n) < 0.2).astype(float)
    after = before.copy()
    worse = (region == 2) & (rng.uniform(size=n) < 0.3)
    after[worse] = 1.0
    comp = compare_releases(before, after, region, baseline="a", candidate="b")
    assert comp.worse == (2,) and comp.better == ()
    r2 = comp.regions[1]
    b = int(np.sum((before[region == 2] == 0) & (after[region == 2] == 1)))
    c = int(np.sum((before[region == 2] == 1) & (after[region == 2] == 0)))
    table = [[100, b], [c, 100]]  # concordant cells do not enter the exact test
    # reference: statsmodels' exact McNemar test
    assert r2.p_value == pytest.approx(mcnemar(table, exact=True).pvalue, abs=1e-9)
    assert r2.change == pytest.approx((b - c) / 200)
    assert r2.low < r2.change < r2.high
    assert sum(r.rows for r in comp.regions) == n


def test_a_split_whose_two_sides_are_both_inside_gives_one_rule():
    # Both children of the x1 split predict "inside" (100% and 70% positive): the rule
    # must read "x0 > 0.5", not one copy per side of x1 (common practice, no source).
    from sklearn.tree import DecisionTreeClassifier

    from topoaudit.audit.describe import _rule_text

    x0 = np.repeat([0.0, 1.0, 1.0], [100, 50, 50])
    x1 = np.tile([0.0, 1.0], 100)
    x1[100:150], x1[150:] = 1.0, 0.0
    y = (x0 > 0.5).astype(int)
    y[150:165] = 0  # 30% of the x1 = 0 side outside
    tree = DecisionTreeClassifier(max_depth=2, random_state=0).fit(np.c_[x0, x1], y)
    assert tree.get_depth() == 2  # the redundant split exists
    assert _rule_text(tree, ["x0", "x1"]) == ["x0 > 0.5"]
