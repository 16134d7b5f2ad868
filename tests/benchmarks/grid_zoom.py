"""An experiment, not part of the search: search a candidate region again, inside it.

The search itself now refines the error-aware lens inside its strongest candidate (step 4
of :mod:`topoaudit.audit.search`: the features that matter there join, and the lens is
smoothed again over all rows); this zoom instead keeps to the candidate's own rows and
tries each of the three strongest candidates.

Run ``python -m tests.benchmarks.grid_zoom [family size strength rows features seed]``
from the repository root (by hand; not part of ``make bench``). The grid's misses among
the arcs are regions found but too wide (Jaccard index 0.11 to 0.47 with the pocket):
the error lens keeps only the features that carry the excess over all rows, and at 1%
of the rows one of the arc's three features is not among them, so the arc is smoothed
in a projection that blurs it.

Here each of the error-aware graph's three strongest candidates (on the discovery half)
is searched again inside itself: the relevance model of step 1 of
:mod:`topoaudit.audit.search` is fitted on the candidate's discovery rows only (which
features carry the excess *within* it), those features join the ones kept over all rows,
the neighbour smoother runs in that space among the candidate's rows with ``k`` a
twentieth of its discovery rows (at least 15), and the rows are trimmed to the lens level
that maximises the scan statistic against the whole discovery half. The figures printed
are the candidate's and the zoomed region's size, Jaccard index with the pocket and
confirmation p-value (the test every candidate gets; nothing is adjusted for the extra
candidates here). Nothing asserts anything.
"""

from __future__ import annotations

import sys
import time

import numpy as np

#: two arcs the grid missed (``grid_results.jsonl``): found too wide at 1% of the rows, and
#: at 3% with the error twice as high inside
DEFAULT = (
    ("arc", 0.01, 4.0, 50_000, 25, 0),
    ("arc", 0.03, 2.0, 50_000, 25, 1),
)


def zoom(X, loss, discovery, rows, kept, seed: int):
    """The zoomed region of the candidate holding ``rows`` (both halves), and the
    features it was smoothed in; None when there are too few discovery rows or the
    model inside keeps every feature (no signal)."""
    from threadpoolctl import threadpool_limits

    from topoaudit.audit.search import relevance_weights, smoothed_excess
    from topoaudit.audit.weak import Losses, _llr, _scaled

    inside = rows[discovery[rows]]
    if inside.size < 60:
        return None
    mask = np.zeros(X.shape[0], dtype=bool)
    mask[inside] = True
    with threadpool_limits(1, user_api="openmp"):
        local, _ = relevance_weights(X, loss, mask, random_state=seed)
    if (local > 0).all():
        return None
    cols = np.flatnonzero(np.maximum(local, kept) > 0)
    Z = np.ascontiguousarray(X[np.ix_(rows, cols)])
    part = Losses(loss.kind, loss.observed[rows], loss.expected[rows], loss.counts)
    lens = smoothed_excess(Z, part, discovery[rows], max(15, inside.size // 20))
    obs, exp, total = _scaled(loss, discovery)
    own = np.flatnonzero(discovery[rows])
    order = own[np.argsort(-lens[own], kind="stable")]
    scores = _llr(np.cumsum(obs[rows[order]]), np.cumsum(exp[rows[order]]), total)
    level = lens[order[int(np.argmax(scores))]]
    return rows[lens >= level], cols


def _p_value(loss, discovery, rows) -> float:
    from topoaudit.audit.weak import _count_p_value, _scaled

    return _count_p_value(*_scaled(loss, ~discovery), rows[~discovery[rows]])


def run(family: str, size: float, strength: float, rows: int, features: int, seed: int):
    from tests.benchmarks.grid_sim import plant
    from topoaudit.audit.search import search_graphs
    from topoaudit.audit.weak import binary_losses, find_weak_regions, split_halves

    sim = plant(family, rows, features, size, strength, seed)
    sd = sim.X.std(axis=0)
    X = (sim.X - sim.X.mean(axis=0)) / np.where(sd > 0, sd, 1.0)
    discovery = split_halves(sim.y.size, sim.y, seed)
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    graphs = search_graphs(X, losses, discovery, random_state=seed)
    kept = next(g.weights for g in graphs if g.name == "error_aware")
    found = find_weak_regions(graphs, losses, discovery, random_state=seed)
    aware = sorted((f for f in found if f.graph == "error_aware"), key=lambda f: -f.llr)[:3]

    def jaccard(r: np.ndarray) -> list[float]:
        out = []
        for p in sim.pockets:
            inter = int(p[r].sum())
            out.append(round(inter / (r.size + int(p.sum()) - inter), 2))
        return out

    print(f"{family} {size:.0%} x{strength:g} {rows} rows, {features} features, seed {seed}")
    for f in aware:
        start = time.perf_counter()
        z = zoom(X, losses[0], discovery, f.rows, kept, seed)
        before = f"{f.rows.size} rows, Jaccard {jaccard(f.rows)}, p {f.p_value:.1e}"
        if z is None:
            print(f"  {before} -> not zoomed")
            continue
        r, cols = z
        print(f"  {before} -> {r.size} rows in features {cols.tolist()}, Jaccard "
              f"{jaccard(r)}, p {_p_value(losses[0], discovery, r):.1e} "
              f"({time.perf_counter() - start:.1f} s)")  # fmt: skip


def main(argv: list[str]) -> None:
    if argv:
        f, size, strength, rows, features, seed = argv
        run(f, float(size), float(strength), int(rows), int(features), int(seed))
        return
    for setting in DEFAULT:
        run(*setting)


if __name__ == "__main__":
    main(sys.argv[1:])
