"""The stability reruns as tasks: what they reuse from the search, and where they run,
changes nothing in what they find.

Reference: the reruns computed from scratch, one after the other in this process (each
fitting its own lens and running the search at its own settings again), as the search's
definition in :mod:`topoaudit.audit.stability` states them (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from reference_checks.planted_pockets import simulate
from topoaudit.audit.search import ErrorLens, SearchSettings, search_graphs
from topoaudit.audit.stability import (
    _known,
    _pack,
    _Plan,
    _rerun,
    _subsample_rows,
    stability_runs,
)
from topoaudit.audit.weak import binary_losses, find_weak_regions, merge_confirmed, split_halves
from topoaudit.mapper.executor import ProcessExecutor

GRID = {"interval_offsets": (0, 2), "overlap_offsets": (0.0,), "resamples": 1}


pytestmark = pytest.mark.usefixtures("stop_local_workers")


@pytest.fixture(scope="module")
def searched():
    sim = simulate("island", 3000, n_features=6, seed=2)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    discovery = split_halves(sim.y.size, sim.y, 3)
    graphs = search_graphs(X, losses, discovery, SearchSettings(), random_state=3)
    weak = merge_confirmed(find_weak_regions(graphs, losses, discovery, random_state=3))
    return X, losses, discovery, graphs, [f.rows for f in weak]


def test_reruns_that_reuse_the_search_find_what_reruns_from_scratch_find(searched):
    X, losses, discovery, graphs, weak_rows = searched
    assert weak_rows, "the planted island was not confirmed"
    scratch = stability_runs(
        X, losses, discovery, weak_rows, SearchSettings(), random_state=3, **GRID
    )
    reused = stability_runs(
        X,
        losses,
        discovery,
        weak_rows,
        SearchSettings(),
        random_state=3,
        lens=ErrorLens.of(graphs),
        search_regions=weak_rows,
        executor=ProcessExecutor(2),
        **GRID,
    )
    assert [r.kind for r in scratch] == ["grid", "grid", "subsample"]
    assert any(any(r.found) for r in scratch)
    assert reused == scratch


def test_a_rerun_at_the_search_settings_with_its_lens_is_the_search_set_aside_graph_included():
    # two pockets in different features (seed 2: the second one is confirmed in the
    # set-aside graph alone); a rerun reusing the search's lens, at the search's settings
    # on every row, must confirm the very regions the search confirmed
    sim = simulate("two", 20_000, seed=2)
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    discovery = split_halves(sim.y.size, sim.y, 2)
    graphs = search_graphs(X, losses, discovery, SearchSettings(), random_state=2)
    weak = merge_confirmed(
        find_weak_regions(graphs, losses, discovery, random_state=2),
        losses=losses,
        discovery=discovery,
    )
    assert "set_aside" in [f.graph for f in weak]
    lens = ErrorLens.of(graphs)
    plan = _Plan("search", "grid", SearchSettings(), None)
    known = _known(lens)
    kinds = tuple((x.kind, bool(x.counts)) for x in losses)
    shared = _pack(X, losses, discovery, lens)
    rerun = _rerun(shared, X.shape[1], kinds, plan, known, 0.05, 30, 2)
    assert [r.tolist() for r in rerun] == [f.rows.tolist() for f in weak]


def test_each_subsample_draws_the_rows_of_one_seeded_sequence():
    # reference: numpy's Generator drawn in sequence, as the reruns drew them one by one
    rng = np.random.default_rng([5, 29])
    drawn = [np.sort(rng.choice(1000, size=800, replace=False)) for _ in range(3)]
    for r in range(3):
        assert np.array_equal(_subsample_rows(1000, r, 5), drawn[r])
