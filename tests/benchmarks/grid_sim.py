"""Planted pockets for the discovery-power grid: seven shape families and two nulls.

Every simulation draws ``n_rows`` rows of ``n_features`` standard-normal features (plus,
for the categorical family, two categorical columns one-hot encoded), of which only the
first three enter the release's score, ``logit = 1.1 x0 - 0.9 x1 + 0.7 x2 - 0.4``. A row
outside every pocket errs with the probability its score promises, ``q = min(p, 1 - p)``
(a calibrated release). A row inside a pocket errs with probability ``strength`` times the
mean error rate outside the pockets (capped at 0.95): the error inside is 2x to 6x the
error outside, whatever the scores say there. The families:

* ``box``: an axis-aligned box in two features (one relevant, one not), each side
  holding ``sqrt(size)`` of the rows at a seeded place;
* ``arc``: a tube around an arc in a rotated plane of the three relevant features;
* ``band``: a thin slab across a direction that mixes 3 to 5 features (an oblique pocket);
* ``island``: rows moved six standard deviations along two irrelevant features;
* ``flare_tip``: a flare of three times ``size`` rows along a ray out of the bulk in two
  irrelevant features; the pocket is its outer third;
* ``two_pockets``: a box and an island, half of ``size`` each (two pockets to find);
* ``categorical``: a combination of a level of each of two categorical columns.

The nulls have no pocket: ``calibrated`` draws outcomes from the scores; ``inflated``
multiplies every row's error probability alike by ``strength``, a release worse than its
scores everywhere by the same factor. That holds for factors below 2 only: a calibrated
row's error probability is at most 0.5, and a larger factor would be capped near the
decision boundary, inflating rows unevenly (the grid uses 1.25, 1.5 and 1.9).

The design follows the planted-slice evaluation of Eyuboglu et al. (Domino, ICLR 2022),
who plant slices of known rows and score recovery; the families and sizes here are our own.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["FAMILIES", "NULLS", "Planted", "plant"]

FAMILIES = ("box", "arc", "band", "island", "flare_tip", "two_pockets", "categorical")
NULLS = ("calibrated", "inflated")


@dataclass(frozen=True, eq=False)
class Planted:
    """One simulation: features, outcome, the release's score and the planted pockets."""

    X: np.ndarray
    y: np.ndarray
    score: np.ndarray
    pockets: tuple[np.ndarray, ...]
    threshold: float = 0.5
    #: the band's mixing features and their unit weights (band family only)
    band: tuple[np.ndarray, np.ndarray] | None = None


def _quantile_window(x: np.ndarray, share: float, rng: np.random.Generator) -> np.ndarray:
    lo = rng.uniform(0.15, 0.85 - share) if share < 0.7 else 0.0
    a, b = np.quantile(x, [lo, min(1.0, lo + share)])
    return (x >= a) & (x <= b)


def _box(X, size, rng) -> list[np.ndarray]:
    side = float(np.sqrt(size))
    return [_quantile_window(X[:, 0], side, rng) & _quantile_window(X[:, 3], side, rng)]


def _arc(X, size, rng) -> list[np.ndarray]:
    u, v, w = (X[:, 0] + X[:, 1]) / np.sqrt(2), (X[:, 0] - X[:, 1]) / np.sqrt(2), X[:, 2]
    r, angle = np.hypot(u, w), np.arctan2(w, u)
    d = np.where((angle > 0.2) & (angle < 2.6), np.hypot(r - 1.6, v - 0.3), np.inf)
    return [d <= np.quantile(d, size)]


def _band(X, size, rng, out=None) -> list[np.ndarray]:
    k = int(rng.integers(3, 6))
    cols = rng.choice(X.shape[1], size=k, replace=False)
    w = rng.normal(size=k)
    proj = X[:, cols] @ (w / np.linalg.norm(w))
    centre = np.quantile(proj, rng.uniform(0.3, 0.7))
    dist = np.abs(proj - centre)
    if out is not None:
        out.append((cols, w / np.linalg.norm(w)))
    return [dist <= np.quantile(dist, size)]


def _island(X, size, rng, cols=(3, 4)) -> list[np.ndarray]:
    pocket = np.zeros(X.shape[0], bool)
    pocket[rng.choice(X.shape[0], size=int(size * X.shape[0]), replace=False)] = True
    X[np.ix_(pocket, list(cols))] += 6.0
    return [pocket]


def _flare_tip(X, size, rng) -> list[np.ndarray]:
    n_flare = int(min(0.5, 3 * size) * X.shape[0])
    flare = np.flatnonzero(rng.permutation(X.shape[0]) < n_flare)
    t = rng.uniform(0, 1, flare.size)
    X[flare, 4] = 2.0 + 6.0 * t + rng.normal(0, 0.3, flare.size)
    X[flare, 5] = 2.0 + 3.0 * t + rng.normal(0, 0.3, flare.size)
    pocket = np.zeros(X.shape[0], bool)
    pocket[flare[t > 2 / 3]] = True
    return [pocket]


def _two(X, size, rng) -> list[np.ndarray]:
    box = _box(X, size / 2, rng)[0]
    island = _island(X, size / 2, rng, cols=(4, 5))[0]
    return [box & ~island, island]


def _categorical(X, size, rng) -> tuple[list[np.ndarray], np.ndarray]:
    """Two categorical columns (4 and 3 levels, one-hot); the pocket is one level of each,
    their probabilities set so the combination holds ``size`` of the rows."""
    n = X.shape[0]
    pa = float(np.sqrt(size))
    a = rng.choice(4, size=n, p=[pa, *([(1 - pa) / 3] * 3)])
    b = rng.choice(3, size=n, p=[pa, *([(1 - pa) / 2] * 2)])
    onehot = np.column_stack([a == k for k in range(4)] + [b == k for k in range(3)])
    return [(a == 0) & (b == 0)], onehot.astype(float)


def plant(
    family: str, n_rows: int, n_features: int, size: float, strength: float, seed: int
) -> Planted:
    """Draw one simulation (see the module docstring)."""
    rng = np.random.default_rng([seed, n_rows, n_features])
    X = rng.normal(size=(n_rows, n_features))
    pockets: list[np.ndarray] = []
    band: list[tuple[np.ndarray, np.ndarray]] = []
    if family == "categorical":
        pockets, onehot = _categorical(X, size, rng)
        X = np.column_stack([X, onehot])
    elif family == "band":
        pockets = _band(X, size, rng, band)
    elif family in FAMILIES:
        make = {"box": _box, "arc": _arc, "island": _island}
        make |= {"flare_tip": _flare_tip, "two_pockets": _two}
        pockets = make[family](X, size, rng)
    elif family not in NULLS:
        msg = f"Unknown family {family!r}; the families are {FAMILIES + NULLS}."
        raise ValueError(msg)
    logit = 1.1 * X[:, 0] - 0.9 * X[:, 1] + 0.7 * X[:, 2] - 0.4
    score = 1.0 / (1.0 + np.exp(-logit))
    q = np.minimum(score, 1 - score)
    if family == "inflated":
        q = np.minimum(strength * q, 0.95)
    elif pockets:
        inside = np.logical_or.reduce(pockets)
        q = np.where(inside, min(strength * float(q[~inside].mean()), 0.95), q)
    decision = score >= 0.5
    wrong = rng.uniform(size=n_rows) < q
    y = np.where(wrong, ~decision, decision).astype(np.int64)
    return Planted(X=X, y=y, score=score, pockets=tuple(pockets), band=band[0] if band else None)
