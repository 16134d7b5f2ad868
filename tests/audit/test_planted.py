"""Acceptance simulations: planted pockets are found, and no pocket means no finding.

These run the search-and-confirm step alone (search graphs, discovery, confirmation,
Benjamini–Hochberg) on the simulations of ``reference_checks.planted_pockets``; the full
audit with its stability grid on larger data runs under ``make bench``.
"""

from __future__ import annotations

import numpy as np
import pytest

from reference_checks.planted_pockets import simulate
from topoaudit.audit.search import SearchSettings, search_graphs
from topoaudit.audit.weak import (
    binary_losses,
    find_weak_regions,
    merge_confirmed,
    regression_losses,
    split_halves,
)


def _standardise(X: np.ndarray) -> np.ndarray:
    return (X - X.mean(axis=0)) / X.std(axis=0)


def _confirmed(sim, seed: int):
    X = _standardise(sim.X)
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    discovery = split_halves(sim.y.size, sim.y, seed)
    graphs = search_graphs(X, losses, discovery, SearchSettings(), random_state=seed)
    found = find_weak_regions(graphs, losses, discovery, random_state=seed)
    return merge_confirmed(found, losses=losses, discovery=discovery)


#: under pytest-xdist (make test: --dist loadgroup) the long simulations run in two
#: groups of about equal length, one per worker, started before the short tests
FIRST, SECOND = pytest.mark.xdist_group("planted-1"), pytest.mark.xdist_group("planted-2")


def _best_jaccard(found, pocket: np.ndarray) -> float:
    best = 0.0
    for f in found:
        inter = int(pocket[f.rows].sum())
        best = max(best, inter / (f.rows.size + int(pocket.sum()) - inter))
    return best


@pytest.mark.slow
@FIRST
def test_curved_pocket_is_confirmed_with_jaccard_half_in_nine_of_ten_seeds():
    scores = []
    for seed in range(10):
        sim = simulate("curved", 20_000, seed=seed)
        scores.append(_best_jaccard(_confirmed(sim, seed), sim.pocket))
    assert sum(j >= 0.5 for j in scores) >= 9, np.round(scores, 2).tolist()


@pytest.mark.slow
@SECOND
@pytest.mark.parametrize("shape", ["island", "flare"], ids=["island", "flare_tip"])
def test_island_and_flare_tip_pockets_are_confirmed(shape):
    for seed in range(3):
        sim = simulate(shape, 20_000, seed=seed)
        found = _confirmed(sim, seed)
        assert _best_jaccard(found, sim.pocket) >= 0.5, (shape, seed)


@pytest.mark.slow
@SECOND
def test_thin_band_across_three_features_is_found_by_the_slab_graph():
    for seed in range(3):
        sim = simulate("band", 20_000, seed=seed)
        found = _confirmed(sim, seed)
        assert _best_jaccard(found, sim.pocket) >= 0.5, seed
        best = max(found, key=lambda f: int(sim.pocket[f.rows].sum()))
        assert best.graph == "slab", (seed, best.graph)


@pytest.mark.slow
@SECOND
def test_two_pockets_in_different_features_are_both_found_with_the_set_aside_graph():
    # the second pocket (a box in features 0 and 5) is blurred in the error-aware graph,
    # whose features also hold the island's; set aside the strongest region and it stands
    # alone. Measured when written: both found in 3 of seeds 0 to 3, the box in none of
    # them without the set-aside graph
    both, box_without = 0, 0
    for seed in range(4):
        sim = simulate("two", 20_000, seed=seed)
        X = _standardise(sim.X)
        losses = binary_losses(sim.y, sim.score, sim.threshold)
        discovery = split_halves(sim.y.size, sim.y, seed)
        graphs = search_graphs(X, losses, discovery, SearchSettings(), random_state=seed)
        island, box = sim.parts
        for kept, with_set_aside in ((graphs, True), (graphs[:3], False)):
            assert with_set_aside or "set_aside" not in [g.name for g in kept]
            found = merge_confirmed(
                find_weak_regions(kept, losses, discovery, random_state=seed),
                losses=losses,
                discovery=discovery,
            )
            if with_set_aside:
                both += _best_jaccard(found, island) >= 0.5 and _best_jaccard(found, box) >= 0.5
            else:
                box_without += _best_jaccard(found, box) >= 0.5
    assert both >= 3, both
    assert box_without <= 1, box_without


@pytest.mark.slow
@pytest.mark.parametrize(
    "shape",
    [pytest.param("calibrated", marks=SECOND), pytest.param("inflated", marks=FIRST)],
)
def test_no_pocket_confirms_a_region_in_at_most_a_tenth_of_fifty_runs(shape):
    hits = 0
    for seed in range(50):
        sim = simulate(shape, 3_000, seed=1000 + seed)
        hits += bool(_confirmed(sim, seed))
    assert hits <= 5, f"{hits} of 50 runs confirmed a region with no pocket planted"


@pytest.mark.slow
@SECOND
def test_regression_pocket_of_large_residuals_is_found():
    rng = np.random.default_rng(5)
    n = 8_000
    X = rng.normal(size=(n, 6))
    truth = 2.0 * X[:, 0] - X[:, 1] + 0.5 * X[:, 2] ** 2
    pocket = np.hypot(X[:, 0] - 1.0, X[:, 1] + 0.5) < 0.45
    noise = rng.normal(size=n) * np.where(pocket, 3.0, 1.0)
    y = truth + noise
    losses = regression_losses(y, truth)
    discovery = split_halves(n, None, 5)
    graphs = search_graphs(_standardise(X), losses, discovery, SearchSettings(), random_state=5)
    found = merge_confirmed(find_weak_regions(graphs, losses, discovery, n_permutations=500))
    assert found
    assert _best_jaccard(found, pocket) >= 0.5
