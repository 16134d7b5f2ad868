"""The error-aware lens's neighbour smoother, against scikit-learn's brute-force
``NearestNeighbors`` (a general-purpose reference library)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.neighbors import NearestNeighbors

from topoaudit.audit.search import smoothed_excess
from topoaudit.audit.weak import Losses


def _losses(observed: np.ndarray, expected: np.ndarray) -> Losses:
    return Losses("error", observed.astype(float), expected.astype(float), True)


def test_smoother_is_the_mean_excess_of_the_k_nearest_discovery_rows():
    rng = np.random.default_rng(0)
    Z = rng.normal(size=(600, 3))
    loss = _losses(rng.random(600) < 0.3, np.full(600, 0.25))
    discovery = rng.random(600) < 0.5
    k = 7
    got = smoothed_excess(Z, loss, discovery, k)
    d = np.flatnonzero(discovery)
    scale = loss.observed[d].sum() / loss.expected[d].sum()
    excess = loss.observed[d] - scale * loss.expected[d]
    nn = NearestNeighbors(n_neighbors=k + 1, algorithm="brute").fit(Z[d])
    idx = nn.kneighbors(Z, return_distance=False)
    own = discovery
    expected = np.where(own, excess[idx[:, 1:]].mean(axis=1), excess[idx[:, :k]].mean(axis=1))
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-12)


def test_the_region_set_aside_is_the_strongest_level_set_by_kulldorffs_statistic():
    # reference: Kulldorff's (1997) Poisson log-likelihood ratio, computed here from each
    # candidate's own sums; the region set aside is the error-aware graph's candidate
    # (its upper level sets on the discovery half) with the largest one
    from reference_checks.planted_pockets import simulate
    from topoaudit.audit.search import SearchSettings, search_graphs, strongest_rows
    from topoaudit.audit.weak import _level_sets, _scaled, binary_losses, split_halves

    sim = simulate("island", 6000, n_features=6, seed=4)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    loss = binary_losses(sim.y, sim.score, sim.threshold)[0]
    discovery = split_halves(sim.y.size, sim.y, 4)
    aware = next(
        g
        for g in search_graphs(X, [loss], discovery, SearchSettings(), random_state=4)
        if g.name == "error_aware"
    )
    got = strongest_rows(aware.graph, aware.lens, loss, discovery)
    obs, exp, total = _scaled(loss, discovery)

    def kulldorff(rows: np.ndarray) -> float:
        o, e = obs[rows].sum(), exp[rows].sum()
        return o * np.log(o / e) + (total - o) * np.log((total - o) / (total - e))

    levels = _level_sets(aware.graph, aware.lens, obs, exp, total, discovery, max_share=0.3)
    assert levels
    best = max(kulldorff(f.rows) for f in levels)
    rows = np.flatnonzero(got)
    assert not (got & ~discovery).any() and rows.size <= 0.3 * discovery.sum()
    assert kulldorff(rows) == pytest.approx(best, rel=1e-12)
    # the planted island: most of what is set aside lies in it
    assert sim.pocket[rows].mean() >= 0.8


def test_nothing_is_refined_or_set_aside_when_the_error_aware_graph_chose_every_feature(
    monkeypatch,
):
    # every feature chosen means none stood out (kept_features' fallback): the search
    # neither refines the lens nor sets a region aside, and fits no further relevance
    # model to find that out (step 1's fit is the only one)
    from reference_checks.planted_pockets import simulate
    from topoaudit.audit import search
    from topoaudit.audit.weak import binary_losses, split_halves

    sim = simulate("island", 6000, n_features=6, seed=4)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    loss = binary_losses(sim.y, sim.score, sim.threshold)[0]
    discovery = split_halves(sim.y.size, sim.y, 4)
    fits = []

    def every_feature(X, loss, discovery, settings, *, n_repeats, random_state):
        fits.append(n_repeats)
        return np.ones(X.shape[1]), np.zeros(X.shape[1])

    monkeypatch.setattr(search, "_chosen_features", every_feature)
    settings = search.SearchSettings()
    lens = search.error_lens(X, [loss], discovery, settings, random_state=4)
    assert len(fits) == 1
    assert lens.rest_weights is None and lens.rest_values is None
    k = settings.k(int(discovery.sum()))
    assert np.array_equal(lens.values, search.smoothed_excess(X, loss, discovery, k))


def _aware_lens(X, weights, loss, discovery, settings, seed: int):
    """The error-aware lens and graph over the columns of forced ``weights`` (as if step
    1 had chosen them)."""
    from topoaudit.audit.search import _level_graph

    Z = X[:, weights > 0]
    values = smoothed_excess(Z, loss, discovery, settings.k(int(discovery.sum())))
    return values, _level_graph(Z, values, settings, seed)


def _region_scores(loss, discovery, pocket):
    """Kulldorff's (1997) Poisson log-likelihood ratio of a region's discovery rows,
    computed here from the region's own sums (expected loss rescaled to the half's
    observed total), and its Jaccard index with the pocket's discovery rows."""
    from topoaudit.audit.weak import _scaled

    obs, exp, total = _scaled(loss, discovery)
    inside = pocket & discovery

    def kulldorff(mask: np.ndarray) -> float:
        o, e = obs[mask].sum(), exp[mask].sum()
        return o * np.log(o / e) + (total - o) * np.log((total - o) / (total - e))

    def jaccard(mask: np.ndarray) -> float:
        return (mask & inside).sum() / (mask | inside).sum()

    return kulldorff, jaccard


def _curved_search_inputs(seed: int):
    from reference_checks.planted_pockets import simulate
    from topoaudit.audit.weak import binary_losses, split_halves

    sim = simulate("curved", 20_000, n_features=8, seed=seed)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    loss = binary_losses(sim.y, sim.score, sim.threshold)[0]
    return sim, X, loss, split_halves(sim.y.size, sim.y, seed)


def test_a_feature_that_matters_only_inside_the_strongest_region_joins_the_lens():
    # the planted arc lies in a rotated plane of features 0, 1 and 2; given a lens over
    # features 0 and 2 only (as when step 1 misses the third), the arc is blurred in that
    # projection. Refined inside its strongest region, the lens takes feature 1 in, and
    # its strongest region scores higher by Kulldorff's (1997) Poisson log-likelihood
    # ratio (computed here from the region's own sums) and overlaps the arc more
    # (Jaccard index). Planted pocket: common practice in simulation studies, no source.
    from topoaudit.audit.search import SearchSettings, _refined_lens, strongest_rows

    sim, X, loss, discovery = _curved_search_inputs(3)
    settings = SearchSettings()
    weights = np.array([1.0, 0, 1, 0, 0, 0, 0, 0])
    values, aware = _aware_lens(X, weights, loss, discovery, settings, 3)
    got_w, got_v, got_graph, got_rows = _refined_lens(
        X, loss, discovery, weights, values, aware, settings, random_state=3, executor=None
    )
    assert got_w[[0, 1, 2]].tolist() == [1.0, 1.0, 1.0]
    kulldorff, jaccard = _region_scores(loss, discovery, sim.pocket)
    before = strongest_rows(aware, values, loss, discovery)
    after = strongest_rows(got_graph, got_v, loss, discovery)
    assert np.array_equal(got_rows, after)
    assert kulldorff(after) > kulldorff(before)
    assert jaccard(after) > jaccard(before) + 0.1


def test_a_thin_pocket_in_the_chosen_features_is_smoothed_again_at_its_own_scale():
    # a thin arc of 1% of 40,000 rows whose three features step 1 chose: the search's own
    # k (300 neighbours) is as large as the arc's discovery rows, and blurs it into a
    # region five times its size. Smoothed again over a sixteenth of that region's rows,
    # in the same features, its strongest region scores higher by Kulldorff's (1997)
    # Poisson log-likelihood ratio (computed here from the region's own sums) and
    # overlaps the arc more (Jaccard index). Planted pocket: common practice in
    # simulation studies, no source.
    from reference_checks.planted_pockets import _curved_pocket
    from topoaudit.audit.search import SearchSettings, _refined_lens, strongest_rows

    rng = np.random.default_rng(1)
    n = 40_000
    X = rng.normal(size=(n, 6))
    pocket = _curved_pocket(X, 0.01)
    observed = (rng.random(n) < np.where(pocket, 0.45, 0.12)).astype(float)
    loss = _losses(observed, np.full(n, 0.12))
    discovery = rng.random(n) < 0.5
    settings = SearchSettings()
    weights = np.array([1.0, 1, 1, 0, 0, 0])
    values, aware = _aware_lens(X, weights, loss, discovery, settings, 1)
    got_w, got_v, got_graph, got_rows = _refined_lens(
        X, loss, discovery, weights, values, aware, settings, random_state=1, executor=None
    )
    assert got_w.tolist() == weights.tolist() and got_v is not values
    kulldorff, jaccard = _region_scores(loss, discovery, pocket)
    before = strongest_rows(aware, values, loss, discovery)
    assert np.array_equal(got_rows, strongest_rows(got_graph, got_v, loss, discovery))
    assert kulldorff(got_rows) > kulldorff(before)
    assert jaccard(got_rows) > jaccard(before) + 0.1


def test_the_lens_is_not_refined_when_its_strongest_region_is_small():
    from topoaudit.audit.search import (
        REFINE_MIN_ROWS,
        SearchSettings,
        _level_graph,
        _refined_lens,
        strongest_rows,
    )

    sim, X, loss, discovery = _curved_search_inputs(3)
    settings = SearchSettings()
    # a strongest region of fewer than REFINE_MIN_ROWS discovery rows is too small to fit
    # a model in (three here: not even one row per fold); three erring discovery rows of
    # the arc under a lens flat elsewhere are the strongest level set alone
    tiny = np.zeros(X.shape[0], dtype=bool)
    erring = sim.pocket & discovery & (loss.observed > 0)
    tiny[np.flatnonzero(erring)[:3]] = True
    small = np.where(tiny, 1.0, -1.0)
    weights = np.array([1.0, 0, 1, 0, 0, 0, 0, 0])
    small_graph = _level_graph(X[:, weights > 0], small, settings, 3)
    got = _refined_lens(
        X, loss, discovery, weights, small, small_graph, settings, random_state=3, executor=None
    )
    strongest = strongest_rows(small_graph, small, loss, discovery)
    assert 0 < strongest.sum() < REFINE_MIN_ROWS
    assert all(a is b for a, b in zip(got[:3], (weights, small, small_graph), strict=True))
    assert np.array_equal(got[3], strongest)


def test_a_pocket_whose_rows_err_alike_is_not_split_by_what_the_scores_promised():
    # an island (features 3 and 4) whose rows all err with probability 0.45, however
    # sure the scores were: inside it the excess still varies with the promise (features
    # 0 to 2), but the observed loss does not, so the lens is not refined into pieces
    # along the scores. Planted pocket: common practice in simulation studies, no source.
    from reference_checks.planted_pockets import simulate
    from topoaudit.audit.search import SearchSettings, _refined_lens
    from topoaudit.audit.weak import binary_losses, split_halves

    sim = simulate("island", 20_000, n_features=8, seed=5)
    rng = np.random.default_rng(5)
    q = np.where(sim.pocket, 0.45, np.minimum(sim.score, 1 - sim.score))
    decision = sim.score >= sim.threshold
    y = np.where(rng.uniform(size=q.size) < q, ~decision, decision).astype(np.int64)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    loss = binary_losses(y, sim.score, sim.threshold)[0]
    discovery = split_halves(y.size, y, 5)
    settings = SearchSettings()
    weights = np.array([0.0, 0, 0, 1, 1, 0, 0, 0])
    values, aware = _aware_lens(X, weights, loss, discovery, settings, 5)
    got = _refined_lens(
        X, loss, discovery, weights, values, aware, settings, random_state=5, executor=None
    )
    assert got[0].tolist() == weights.tolist()
    assert got[1] is values and got[2] is aware
