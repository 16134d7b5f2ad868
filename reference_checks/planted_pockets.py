"""Planted weak regions: simulated releases whose true failure pockets are known.

Each simulation draws rows with ``n_features`` standard-normal features, of which only
the first three matter, and a release whose scores are calibrated everywhere except in a
planted pocket, where its error probability is doubled: a row's error probability
``q = min(p, 1 - p)`` becomes ``min(2q, 0.9)``. The audit should confirm a weak region
whose rows overlap the pocket with Jaccard >= 0.5. Shapes:

* ``curved``: a tube of about 5% of rows around an arc in a rotated plane of the three
  relevant features (neither axis-aligned nor convex);
* ``island``: about 4% of rows displaced far along two irrelevant features (a small
  separate group), all of it the pocket;
* ``flare``: 12% of rows along a ray out of the bulk; the pocket is the outer third of it;
* ``band``: a thin slab of 8% of rows across a direction that mixes three features (one
  relevant, two not) with about equal weights: no feature alone, nor any axis-aligned
  box, holds it;
* ``two``: two pockets of 4% of rows each, in different features: an island as above
  (displaced along features 3 and 4) and a box of the rows inside a middle window of
  features 0 and 5 (each window a fifth of the rows, not in the island); ``parts`` holds
  each pocket, ``pocket`` their union.

The null simulations have no pocket: ``calibrated`` draws outcomes from the scores
themselves; ``inflated`` doubles the error probability of every row alike (capped at
0.9), so the release is worse than its scores everywhere by the same factor. Source for
the method of planting: common practice in simulation studies, no source.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Simulation", "simulate"]

SHAPES = ("curved", "island", "flare", "calibrated", "inflated", "band", "two")
#: the band's direction over features 0, 3 and 5 (unit length)
BAND_DIRECTION = np.array([0.6, -0.55, 0.58]) / np.linalg.norm([0.6, -0.55, 0.58])


@dataclass(frozen=True, eq=False)
class Simulation:
    X: np.ndarray
    y: np.ndarray
    score: np.ndarray
    pocket: np.ndarray
    threshold: float = 0.5
    #: each pocket, when there are several (``pocket`` is their union)
    parts: tuple[np.ndarray, ...] = ()


def _curved_pocket(X: np.ndarray, share: float) -> np.ndarray:
    u = (X[:, 0] + X[:, 1]) / np.sqrt(2)
    v = (X[:, 0] - X[:, 1]) / np.sqrt(2)
    w = X[:, 2]
    # distance to an arc of radius 1.6 in the (u, w) plane, on its upper half, offset in v
    r = np.hypot(u, w)
    angle = np.arctan2(w, u)
    d = np.hypot(r - 1.6, v - 0.3)
    d = np.where((angle > 0.2) & (angle < 2.6), d, np.inf)
    cut = np.quantile(d[np.isfinite(d)], min(1.0, share * X.shape[0] / np.isfinite(d).sum()))
    return d <= cut


def simulate(shape: str, n_rows: int = 20_000, n_features: int = 8, *, seed: int = 0) -> Simulation:
    """Draw one simulation of ``shape`` (one of ``curved``, ``island``, ``flare``,
    ``calibrated``, ``inflated``, ``band``, ``two``)."""
    if shape not in SHAPES:
        msg = f"Unknown simulation shape {shape!r}; the shapes are {', '.join(SHAPES)}."
        raise ValueError(msg)
    rng = np.random.default_rng([seed, SHAPES.index(shape)])
    X = rng.normal(size=(n_rows, n_features))
    pocket = np.zeros(n_rows, dtype=bool)
    parts: tuple[np.ndarray, ...] = ()
    if shape == "curved":
        pocket = _curved_pocket(X, 0.05)
    elif shape == "island":
        pocket[: int(0.04 * n_rows)] = True
        X[pocket, 3:5] += 6.0
    elif shape == "flare":
        flare = np.zeros(n_rows, dtype=bool)
        flare[: int(0.12 * n_rows)] = True
        t = rng.uniform(0, 1, flare.sum())
        X[flare, 5] = 2.0 + 6.0 * t + rng.normal(0, 0.3, flare.sum())
        X[flare, 6] = 2.0 + 3.0 * t + rng.normal(0, 0.3, flare.sum())
        pocket[np.flatnonzero(flare)[t > 2 / 3]] = True
    elif shape == "band":
        gap = np.abs(X[:, [0, 3, 5]] @ BAND_DIRECTION - 0.3)
        pocket = gap <= np.quantile(gap, 0.08)
    elif shape == "two":
        island = np.zeros(n_rows, dtype=bool)
        island[: int(0.04 * n_rows)] = True
        X[island, 3:5] += 6.0
        box = ~island
        for j in (0, 5):
            lo, hi = np.quantile(X[:, j], [0.4, 0.6])
            box &= (X[:, j] >= lo) & (X[:, j] <= hi)
        parts = (island, box)
        pocket = island | box
    logit = 1.1 * X[:, 0] - 0.9 * X[:, 1] + 0.7 * X[:, 2] - 0.4
    score = 1.0 / (1.0 + np.exp(-logit))
    q = np.minimum(score, 1 - score)
    if shape == "inflated":
        q = np.minimum(2 * q, 0.9)
    else:
        q = np.where(pocket, np.minimum(2 * q, 0.9), q)
    decision = score >= 0.5
    wrong = rng.uniform(size=n_rows) < q
    y = np.where(wrong, ~decision, decision).astype(np.int64)
    return Simulation(X=X, y=y, score=score, pocket=pocket, parts=parts)
