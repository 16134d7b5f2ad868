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
   the three lowest and the highest eigenvalues give starting directions. So do the
   :data:`PAIR_STARTS` best directions in the planes of two features
   (:func:`pair_directions`): a thin slab is too thin for second moments, but one whose
   direction lies mostly in two features shows, a little blurred, in their plane.
2. **Climbing**: from each start, normalised gradient steps on the unit sphere raise a
   smooth slab score (the Gaussian-weighted excess around a centre over the square root
   of the weighted expected loss), its width narrowing from 0.6 to 0.025 standard
   deviations: a wide slab's score changes slowly with the direction, so the climb is
   not lost at the start, and the thin ones then sharpen it. Widths thinner than the
   slab chase the noise inside it and can tilt the direction off it, so the climb
   returns, of its start and the direction it reached at each width, the one with the
   largest statistic of step 3. From a pair's direction the climb keeps to thin widths
   (:data:`FINE_WIDTHS`) with steps of about half the width: the wide ones would carry
   it off a start that is already close, and so would steps longer than the slab is
   thick.
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
    "pair_directions",
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
    *,
    widths: tuple[float, ...] = WIDTHS,
    step: float | None = None,
) -> tuple[np.ndarray, float]:
    """Climb the smooth slab score from ``w`` by normalised gradient steps on the unit
    sphere, the width narrowing through ``widths`` (a wide slab first, whose score
    varies slowly with the direction, then ever thinner ones); a step is kept only when
    it raises the score, and the step size grows after a kept step and halves after a
    refused one. The step (an angle, in radians) starts at 0.2 and grows to at most 0.5
    or, with ``step``, starts at ``step`` times the width and grows to twice that: a
    start already near a thin slab is lost by steps much longer than the slab is wide.
    Returns, of the start and the direction reached at each width, the one with the
    largest :func:`slab_statistic`, and that statistic: widths thinner than the slab
    chase the noise inside it and can tilt the direction off the slab."""
    r, v = observed - expected, expected
    t = X @ w  # kept in step with w: a kept step carries its projection on
    best_w, best = w, slab_statistic(t, observed, expected)
    for h in widths:
        eta, longest = (0.2, 0.5) if step is None else (step * h, 2 * step * h)
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
                w, c, t, eta = w_new, c_new, t_new, min(longest, 1.3 * eta)
            else:
                eta *= 0.5
                if eta < 1e-3:
                    break
        value = slab_statistic(t, observed, expected)
        if value > best:
            best_w, best = w, value
    return best_w, best


#: pair planes: the half-range of the binned features (standard deviations), bins per
#: feature, angles per plane, the bin width along a direction and the windows (in bins)
PAIR_RANGE, PAIR_BINS, PAIR_ANGLES, PAIR_STEP = 4.0, 64, 48, 0.05
PAIR_WINDOWS = (2, 3, 4, 6, 8)
#: the widths of the climb from a pair's direction (thin slabs only)
FINE_WIDTHS = (0.1, 0.06, 0.04, 0.025)
#: pair directions climbed, best first
PAIR_STARTS = 12
#: the most columns whose pairs are scanned (wider data: see :func:`slab_direction`)
PAIR_MAX_FEATURES = 64


def pair_directions(
    X: np.ndarray,
    observed: np.ndarray,
    expected: np.ndarray,
    keep: int,
    columns: np.ndarray | None = None,
) -> list[np.ndarray]:
    """The ``keep`` best directions in the planes of two features, by a binned slab
    statistic: each pair's standardised values are binned on a grid of
    :data:`PAIR_BINS` squared bins over ``+-PAIR_RANGE``, the grid's bins projected at
    :data:`PAIR_ANGLES` angles onto bins :data:`PAIR_STEP` wide, and Kulldorff's LLR
    taken over windows of :data:`PAIR_WINDOWS` consecutive bins; each pair offers its
    best angle. Only pairs of ``columns`` are scanned when given (all by default).
    Returned as unit directions in the columns of ``X``, best first. The cost grows with
    the square of the columns scanned: about 2 s for 50 columns of 50,000 rows, 9 s for
    100 and 37 s for 200 (measured on 2 cores).

    A projection pursuit restricted to planes of two features (common practice, no
    source): an oblique slab whose direction lies mostly in two features is seen, a
    little blurred, in their plane, and a climb from there at thin widths reaches it,
    where a search over every direction at once is lost in the noise of the rest."""
    p = X.shape[1]
    sd = X.std(axis=0)
    sd = np.where(sd > 0, sd, 1.0)
    cell = 2 * PAIR_RANGE / PAIR_BINS
    b = np.clip(((X / sd + PAIR_RANGE) / cell).astype(np.intp), 0, PAIR_BINS - 1)
    centres = -PAIR_RANGE + cell * (np.arange(PAIR_BINS) + 0.5)
    ca, cb = (g.ravel() for g in np.meshgrid(centres, centres, indexing="ij"))
    angles = np.linspace(0.0, np.pi, PAIR_ANGLES, endpoint=False)
    reach = PAIR_RANGE * np.sqrt(2)
    n_bins = int(np.ceil(2 * reach / PAIR_STEP)) + 1
    along = np.cos(angles)[:, None] * ca + np.sin(angles)[:, None] * cb
    slot = (
        ((along + reach) / PAIR_STEP).astype(np.intp) + n_bins * np.arange(PAIR_ANGLES)[:, None]
    ).ravel()
    total = float(observed.sum())
    scored: list[tuple[float, int, int, float]] = []
    scanned = np.arange(p) if columns is None else np.sort(np.asarray(columns))
    for a, i in enumerate(scanned):
        for j in scanned[a + 1 :]:
            code = b[:, i] * PAIR_BINS + b[:, j]
            sums = []
            for values in (observed, expected):
                grid = np.bincount(code, weights=values, minlength=PAIR_BINS**2)
                lines = np.bincount(
                    slot, weights=np.tile(grid, PAIR_ANGLES), minlength=n_bins * PAIR_ANGLES
                ).reshape(PAIR_ANGLES, n_bins)
                sums.append(np.concatenate([np.zeros((PAIR_ANGLES, 1)), np.cumsum(lines, 1)], 1))
            co, ce = sums
            best, angle = 0.0, 0.0
            for m in PAIR_WINDOWS:
                llr = _llr(co[:, m:] - co[:, :-m], ce[:, m:] - ce[:, :-m], total)
                at = int(np.argmax(llr))
                if llr.flat[at] > best:
                    best, angle = float(llr.flat[at]), float(angles[at // llr.shape[1]])
            scored.append((best, i, j, angle))
    scored.sort(key=lambda row: -row[0])
    directions = []
    for _, i, j, angle in scored[:keep]:
        w = np.zeros(p)
        w[i], w[j] = np.cos(angle) / sd[i], np.sin(angle) / sd[j]
        directions.append(w / np.linalg.norm(w))
    return directions


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
    of each step on large data. With more than :data:`PAIR_MAX_FEATURES` columns, the
    pair planes are scanned among that many only: those with the largest rows of the
    Hessian matrix (the root of the sum of squared entries), the columns most involved in
    the excess's second moments; a slab across other columns is then left to the
    Hessian starts."""
    Xd, observed, expected = slab_inputs(X, loss, discovery, max_rows, random_state)
    values, vectors = hessian_directions(Xd, observed - expected)
    p = Xd.shape[1]
    best_w, best = vectors[:, 0], -1.0
    climbs = [(vectors[:, j], {}) for j in sorted({0, min(1, p - 1), min(2, p - 1), p - 1})]
    # wide data: the pairs of the columns most involved in the excess's second moments
    # (the largest rows of the Hessian matrix), which bounds the scan's cost; a single
    # column has no pair
    involved = np.sqrt((vectors**2) @ (values**2))
    columns = np.argsort(-involved, kind="stable")[:PAIR_MAX_FEATURES]
    fine = {"widths": FINE_WIDTHS, "step": 0.5}
    climbs += [(w, fine) for w in pair_directions(Xd, observed, expected, PAIR_STARTS, columns)]
    for start, how in climbs:
        w, value = _refine(Xd, observed, expected, start, **how)
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
