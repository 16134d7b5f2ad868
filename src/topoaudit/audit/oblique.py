"""A direction across several features along which the excess loss gathers in a thin slab.

A pocket that is a thin band across a direction mixing several features (an oblique
pocket) hides from both other search graphs: each feature alone carries little of it, so
the relevance model of the error-aware lens keeps few of its features, and a graph of all
features is too coarse across the band. The slab graph looks along one direction instead.
The direction is found from discovery labels only, in three steps:

1. **Starting directions**: principal Hessian directions (Li, 1992, JASA 87: 1025-1039):
   the eigenvectors of ``mean(r x x')`` over the discovery rows, where ``r`` is each
   row's excess loss (observed minus rescaled expected) and ``x`` its standardised
   features. A slab of excess across direction ``w`` near the bulk leaves a negative
   eigenvalue along ``w`` (the rows of excess lie closer to a hyperplane than the rest):
   the three lowest and the highest eigenvalues give the starting directions.
2. **Climbing**: from each start, normalised gradient steps on the unit sphere raise a
   smooth slab score (the Gaussian-weighted excess around a centre over the square root
   of the weighted expected loss), its width narrowing from 0.6 to 0.025 standard
   deviations: a wide slab's score changes slowly with the direction, so the climb is
   not lost at the start, and the thin ones then sharpen it. Widths thinner than the
   slab chase the noise inside it and can tilt the direction off it, so the climb
   returns, of its start and the direction it reached at each width, the one with the
   largest statistic of step 3.
3. Of the climbed directions, the one with the largest scan statistic (Kulldorff's
   Poisson log-likelihood ratio) of a window of consecutive discovery rows along it,
   over windows of 1% to 15% of the rows, is kept.

The slab graph's lens is then the mean excess of each row's ``k`` nearest discovery rows
along that direction (the error lens's smoother, in one dimension), and its candidates are
upper level sets, as for the error-aware graph. The statistic climbed is maximised on the
discovery half, so it is biased upwards there; only the confirmation half, which never
shapes the direction, tests a candidate.
"""

from __future__ import annotations

import numpy as np

from topoaudit.audit.weak import Losses, _llr

__all__ = [
    "SLAB_SHARES",
    "carrying_features",
    "hessian_directions",
    "slab_direction",
    "slab_inputs",
    "slab_statistic",
]

#: window sizes of the slab statistic, as shares of the rows
SLAB_SHARES = (0.01, 0.02, 0.04, 0.08, 0.15)


def hessian_directions(X: np.ndarray, excess: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenvalues (ascending) and unit eigenvectors (columns) of ``mean(r x x')``: the
    principal Hessian directions of Li (1992) with the excess ``r`` as response.

    ``X`` is centred here; the response is centred as given (the excess sums to zero
    over the rows it was rescaled on)."""
    Xc = X - X.mean(axis=0)
    M = (Xc * excess[:, None]).T @ Xc / max(1, X.shape[0])
    return np.linalg.eigh((M + M.T) / 2)


def slab_statistic(t: np.ndarray, observed: np.ndarray, expected: np.ndarray) -> float:
    """The largest Poisson LLR of a window of consecutive rows along ``t``, over windows
    of :data:`SLAB_SHARES` of the rows (``expected`` rescaled to the observed total)."""
    order = np.argsort(t, kind="stable")
    co = np.concatenate([[0.0], np.cumsum(observed[order])])
    ce = np.concatenate([[0.0], np.cumsum(expected[order])])
    total, best = float(co[-1]), 0.0
    for share in SLAB_SHARES:
        m = max(10, int(share * t.size))
        if m >= t.size:
            continue
        best = max(best, float(_llr(co[m:] - co[:-m], ce[m:] - ce[:-m], total).max()))
    return best


#: the widths of the smooth slab, widest first (standard deviations along the direction)
WIDTHS = (0.6, 0.4, 0.25, 0.15, 0.1, 0.06, 0.04, 0.025)


def _smooth_slab(t: np.ndarray, r: np.ndarray, v: np.ndarray, c: float, h: float) -> float:
    """The smooth slab score: the Gaussian-weighted excess around ``c`` over the square
    root of its weighted expected loss (a smooth z of a window of width about ``h``)."""
    k = np.exp(-0.5 * ((t - c) / h) ** 2)
    return float(r @ k) / float(np.sqrt(v @ k + 1e-12))


def _centre(t: np.ndarray, r: np.ndarray, v: np.ndarray, h: float) -> float:
    """The centre, among 97 quantiles of ``t``, with the largest smooth slab score."""
    centres = np.quantile(t, np.linspace(0.02, 0.98, 97))
    return float(centres[int(np.argmax([_smooth_slab(t, r, v, c, h) for c in centres]))])


def _refine(
    X: np.ndarray,
    observed: np.ndarray,
    expected: np.ndarray,
    w: np.ndarray,
    iterations: int = 40,
) -> tuple[np.ndarray, float]:
    """Climb the smooth slab score from ``w`` by normalised gradient steps on the unit
    sphere, the width narrowing through :data:`WIDTHS` (a wide slab first, whose score
    varies slowly with the direction, then ever thinner ones); a step is kept only when
    it raises the score, and the step size grows after a kept step and halves after a
    refused one. Returns, of the start and the direction reached at each width, the one
    with the largest :func:`slab_statistic`, and that statistic: widths thinner than the
    slab chase the noise inside it and can tilt the direction off the slab."""
    r, v = observed - expected, expected
    t = X @ w  # kept in step with w: a kept step carries its projection on
    best_w, best = w, slab_statistic(t, observed, expected)
    for h in WIDTHS:
        eta = 0.2
        c = _centre(t, r, v, h)
        for _ in range(iterations):
            u = (t - c) / h
            k = np.exp(-0.5 * u**2)
            excess, var = float(r @ k), float(v @ k) + 1e-12
            score = excess / np.sqrt(var)
            # d score / d t_i, then d t_i / d w = x_i and d t_i / d c = -1
            coef = k * (-u / h) * (r / np.sqrt(var) - 0.5 * score * v / var)
            grad = X.T @ coef
            grad -= (grad @ w) * w
            norm = float(np.linalg.norm(grad))
            if norm == 0.0:
                break
            w_new = w + eta * grad / norm
            w_new /= np.linalg.norm(w_new)
            c_new = c - 0.5 * eta * h * float(np.sign(coef.sum()))
            t_new = X @ w_new  # the projection of a kept step serves the next iteration
            if _smooth_slab(t_new, r, v, c_new, h) > score:
                w, c, t, eta = w_new, c_new, t_new, min(0.5, 1.3 * eta)
            else:
                eta *= 0.5
                if eta < 1e-3:
                    break
        value = slab_statistic(t, observed, expected)
        if value > best:
            best_w, best = w, value
    return best_w, best


def slab_inputs(
    X: np.ndarray, loss: Losses, discovery: np.ndarray, max_rows: int, random_state: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """What the climb works on: the centred features, observed and rescaled expected loss
    of at most ``max_rows`` discovery rows (a seeded sample)."""
    d = np.flatnonzero(discovery)
    rng = np.random.default_rng([random_state, 47])
    if d.size > max_rows:
        d = np.sort(rng.choice(d, size=max_rows, replace=False))
    observed, expected = loss.observed[d], loss.expected[d]
    total_exp = float(expected.sum())
    if total_exp > 0:
        expected = expected * float(observed.sum()) / total_exp
    Xd = np.asarray(X[d], dtype=np.float64)
    return Xd - Xd.mean(axis=0), observed, expected


def slab_direction(
    X: np.ndarray,
    loss: Losses,
    discovery: np.ndarray,
    *,
    max_rows: int = 50_000,
    random_state: int = 0,
) -> tuple[np.ndarray, float]:
    """The unit direction (in the columns of ``X``) along which the discovery half's
    excess gathers most in a slab, and its slab statistic (see the module docstring).

    At most ``max_rows`` discovery rows (a seeded sample) are used, which bounds the cost
    of each step on large data."""
    Xd, observed, expected = slab_inputs(X, loss, discovery, max_rows, random_state)
    _, vectors = hessian_directions(Xd, observed - expected)
    p = Xd.shape[1]
    best_w, best = vectors[:, 0], -1.0
    for j in sorted({0, min(1, p - 1), min(2, p - 1), p - 1}):
        w, value = _refine(Xd, observed, expected, vectors[:, j])
        if value > best:
            best_w, best = w, value
    return best_w, best


def carrying_features(direction: np.ndarray, share: float = 0.9) -> np.ndarray:
    """The columns that carry a direction: the fewest, largest weights first, whose
    squared weights hold at least ``share`` of its squared length.

    Examples
    --------
    >>> carrying_features(np.array([0.1, -0.7, 0.0, 0.7])).tolist()
    [1, 3]
    """
    sq = np.asarray(direction, dtype=float) ** 2
    order = np.argsort(-sq, kind="stable")
    held = np.cumsum(sq[order]) / max(float(sq.sum()), 1e-300)
    return order[: int(np.searchsorted(held, share - 1e-12)) + 1]
