"""Do the weak regions survive other settings and other samples?

The search is rerun over a grid around the chosen search settings (by default interval
offsets -2, 0, +2 times overlap offsets -0.1, 0, +0.1, applied to both search graphs)
and over seeded subsamples of 80% of the rows (drawn without replacement, so no row
appears twice in a graph). In each run, a weak region counts as found again when some
confirmed region of that run overlaps it with Jaccard at least ``match_jaccard`` (0.5),
measured on the rows the run used. The share of runs in which it was found again is its
stability. (The invariants of the graph shown for the data's shape at the same offsets
are recorded by :func:`topoaudit.audit.run.run_audit`, not here.)
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from topoaudit.audit.search import SearchSettings, search_graphs
from topoaudit.audit.weak import Losses, _jaccard, find_weak_regions, merge_confirmed

__all__ = ["Rerun", "stability_runs"]


@dataclass(frozen=True)
class Rerun:
    """One rerun: its settings, how many regions it confirmed, which weak regions it found."""

    label: str
    kind: str
    n_intervals: int
    overlap: float
    confirmed: int
    found: tuple[bool, ...]


def _sub_losses(losses: Sequence[Losses], rows: np.ndarray) -> list[Losses]:
    return [replace(x, observed=x.observed[rows], expected=x.expected[rows]) for x in losses]


def stability_runs(
    X: np.ndarray,
    losses: Sequence[Losses],
    discovery: np.ndarray,
    weak_rows: Sequence[np.ndarray],
    settings: SearchSettings,
    *,
    interval_offsets: Sequence[int] = (-2, 0, 2),
    overlap_offsets: Sequence[float] = (-0.1, 0.0, 0.1),
    resamples: int = 3,
    fdr: float = 0.05,
    min_rows: int = 30,
    match_jaccard: float = 0.5,
    random_state: int = 0,
    progress: Callable[[str], None] | None = None,
) -> list[Rerun]:
    """Rerun the search over the grid and the subsamples (see module docstring)."""
    plans: list[tuple[str, str, SearchSettings, np.ndarray]] = []
    every = np.arange(X.shape[0])
    for di in interval_offsets:
        for do in overlap_offsets:
            s = replace(
                settings,
                n_intervals=max(2, settings.n_intervals + di),
                lens_intervals=max(2, settings.lens_intervals + di),
                overlap=float(np.clip(settings.overlap + do, 0.0, 0.9)),
                lens_overlap=float(np.clip(settings.lens_overlap + do, 0.0, 0.9)),
            )
            label = f"intervals {s.lens_intervals}, overlap {s.lens_overlap:.2f}"
            plans.append((label, "grid", s, every))
    rng = np.random.default_rng([random_state, 29])
    for r in range(resamples):
        rows = np.sort(rng.choice(X.shape[0], size=int(0.8 * X.shape[0]), replace=False))
        plans.append((f"subsample {r + 1} (80% of rows)", "subsample", settings, rows))
    out = []
    for i, (label, kind, s, rows) in enumerate(plans):
        if progress:
            progress(f"stability run {i + 1} of {len(plans)}: {label}")
        sub_losses = _sub_losses(losses, rows)
        sub_disc = discovery[rows]
        graphs = search_graphs(X[rows], sub_losses, sub_disc, s, random_state=random_state)
        confirmed = merge_confirmed(
            find_weak_regions(
                graphs, sub_losses, sub_disc, fdr=fdr, min_rows=min_rows, random_state=random_state
            )
        )
        position = np.full(X.shape[0], -1, dtype=np.int64)
        position[rows] = np.arange(rows.size)
        found = []
        for w in weak_rows:
            mine = position[w[position[w] >= 0]]
            found.append(any(_jaccard(mine, f.rows) >= match_jaccard for f in confirmed))
        out.append(
            Rerun(label, kind, s.lens_intervals, s.lens_overlap, len(confirmed), tuple(found))
        )
    return out
