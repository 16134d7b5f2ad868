"""The slab graph's direction (:mod:`topoaudit.audit.oblique`).

References: statsmodels' ``PrincipalHessianDirections`` (a general-purpose reference
library) and the closed form of Li (1992, JASA 87: 1025-1039, section 3) for a response
``(b'x)^2`` of standard normal ``x``, whose Hessian matrix is ``2 b b'`` (Isserlis' theorem:
``E[(b'x)^2 x x'] = |b|^2 I + 2 b b'``); Kulldorff's scan statistic of
:func:`topoaudit.audit.weak.scan_statistic` for the window statistic.
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.regression.dimred import PrincipalHessianDirections

from topoaudit.audit.oblique import (
    SLAB_SHARES,
    hessian_directions,
    slab_direction,
    slab_statistic,
)
from topoaudit.audit.weak import Losses, scan_statistic


def _whitened(n: int, p: int, seed: int) -> np.ndarray:
    """Rows whose sample covariance (ddof 1) is exactly the identity."""
    X = np.random.default_rng(seed).normal(size=(n, p))
    X -= X.mean(axis=0)
    L = np.linalg.cholesky(np.cov(X.T))
    return X @ np.linalg.inv(L).T


def _planted_slab(rng, n, p, weights, centre, share, inside, outside):
    """Standard-normal rows, a slab of ``share`` of them closest to ``centre`` along the
    unit direction of ``weights`` (a column -> weight mapping), and errors drawn at rate
    ``inside`` in it and ``outside`` elsewhere, which is also what the rows expected."""
    X = rng.normal(size=(n, p))
    w = np.zeros(p)
    w[list(weights)] = list(weights.values())
    w /= np.linalg.norm(w)
    gap = np.abs(X @ w - centre)
    slab = gap <= np.quantile(gap, share)
    expected = np.full(n, outside)
    observed = (rng.random(n) < np.where(slab, inside, outside)).astype(float)
    return X, w, observed, expected


def test_hessian_directions_match_statsmodels_on_whitened_rows():
    X = _whitened(3000, 5, 0)
    rng = np.random.default_rng(1)
    y = (X @ np.array([1.0, -0.5, 0.0, 0.3, 0.0])) ** 2 - 0.5 * X[:, 2] ** 2
    y = y + rng.normal(size=y.size)
    values, vectors = hessian_directions(X, y - y.mean())
    ref = PrincipalHessianDirections(y, X).fit()
    np.testing.assert_allclose(np.sort(values), np.sort(np.real(ref.eigs)), rtol=1e-9, atol=1e-12)
    # the direction of the largest absolute eigenvalue, up to sign
    mine = vectors[:, int(np.argmax(np.abs(values)))]
    theirs = np.real(ref.params[:, 0])
    assert abs(mine @ theirs) / np.linalg.norm(theirs) == pytest.approx(1.0, abs=1e-9)


def test_hessian_directions_of_a_squared_projection_are_li_closed_form():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(200_000, 4))
    b = np.array([0.8, 0.0, -0.6, 0.0]) * 1.5
    y = (X @ b) ** 2
    values, vectors = hessian_directions(X, y - y.mean())
    assert values[-1] == pytest.approx(2 * b @ b, rel=0.05)
    assert abs(vectors[:, -1] @ b) / np.linalg.norm(b) > 0.995
    assert np.abs(values[:-1]).max() < 0.1 * values[-1]


def test_slab_statistic_is_the_largest_window_scan_of_consecutive_rows():
    rng = np.random.default_rng(3)
    n = 400
    t = rng.normal(size=n)
    observed = (rng.random(n) < np.where(np.abs(t - 0.5) < 0.1, 0.7, 0.2)).astype(float)
    expected = np.full(n, observed.sum() / n)
    order = np.argsort(t, kind="stable")
    total, best = observed.sum(), 0.0
    for share in SLAB_SHARES:
        m = max(10, int(share * n))
        for start in range(n - m + 1):
            rows = order[start : start + m]
            best = max(best, scan_statistic(observed[rows].sum(), expected[rows].sum(), total))
    assert slab_statistic(t, observed, expected) == pytest.approx(best, rel=1e-12)
    assert best > 5  # the planted window stands out


def test_slab_direction_recovers_a_slab_across_three_features():
    # common practice, no source: a planted slab whose direction is known
    rng = np.random.default_rng(4)
    n = 8000
    X, w, observed, expected = _planted_slab(
        rng, n, 6, {1: 0.7, 3: -0.5, 4: 0.5}, 0.2, 0.08, 0.6, 0.2
    )
    discovery = rng.random(n) < 0.5
    found, statistic = slab_direction(X, Losses("error", observed, expected), discovery)
    assert abs(found @ w) > 0.98
    assert statistic > 20
    assert np.linalg.norm(found) == pytest.approx(1.0)


def test_a_climb_started_on_a_thin_slab_does_not_tilt_off_it():
    # common practice, no source: a planted slab of 1% of the rows, known direction. The
    # climb's thinnest widths see the noise inside the slab; started on the slab's own
    # direction, the climb must not return a direction its window statistic ranks lower
    from topoaudit.audit.oblique import _refine

    rng = np.random.default_rng(11)
    X, w, observed, expected = _planted_slab(
        rng, 12_000, 10, {1: 0.6, 4: -0.6, 7: 0.5}, 0.1, 0.01, 0.6, 0.15
    )
    Xc = X - X.mean(axis=0)
    start = slab_statistic(Xc @ w, observed, expected)
    found, statistic = _refine(Xc, observed, expected, w)
    assert statistic == pytest.approx(slab_statistic(Xc @ found, observed, expected))
    assert statistic >= start
    assert abs(found @ w) > 0.99


def test_pair_directions_put_a_slab_in_the_plane_of_two_features_first():
    # common practice, no source: a planted slab across two of eight features, at an
    # angle between the scan's angles (3.75 degrees apart); the best pair's direction lies
    # within half a step of it (cosine of 1.9 degrees: 0.9995)
    from topoaudit.audit.oblique import pair_directions

    rng = np.random.default_rng(12)
    pair = {3: np.cos(1.0), 6: np.sin(1.0)}
    X, w, observed, expected = _planted_slab(rng, 10_000, 8, pair, 0.3, 0.04, 0.6, 0.2)
    found = pair_directions(X * 2.0, observed, expected, keep=3)  # any scale per column
    assert len(found) == 3
    assert abs(found[0] @ w) > 0.999
    assert np.flatnonzero(np.abs(found[0]) > 0).tolist() == [3, 6]
    assert np.linalg.norm(found[0]) == pytest.approx(1.0)


def test_a_thin_slab_mostly_in_two_features_is_reached_from_their_plane():
    # common practice, no source: a planted slab of 3% of the rows across three of fifteen
    # features, 0.98 of its squared weight in two of them. The best climb from the
    # principal Hessian directions alone ends far from it (cosine 0.21 to 0.30 on three
    # seeds); the pair planes hold a start near it, and the thin climb reaches it
    from topoaudit.audit.oblique import _refine

    rng = np.random.default_rng(7)
    n, p = 16_000, 15
    mostly_two = {2: 0.93, 9: -0.34, 12: 0.14}
    X, w, observed, expected = _planted_slab(rng, n, p, mostly_two, -0.2, 0.03, 0.6, 0.15)
    discovery = rng.random(n) < 0.5
    Xc = X[discovery] - X[discovery].mean(axis=0)
    o, e = observed[discovery], expected[discovery]
    _, vectors = hessian_directions(Xc, o - e)
    # what the search kept before the pair planes: the best of the Hessian climbs
    before, _ = max(
        (_refine(Xc, o, e, vectors[:, j]) for j in (0, 1, 2, p - 1)), key=lambda c: c[1]
    )
    assert abs(before @ w) < 0.5
    found, statistic = slab_direction(X, Losses("error", observed, expected), discovery)
    assert abs(found @ w) > 0.99
    assert statistic > 60


def test_wide_data_scans_the_pairs_of_the_columns_most_involved_only(monkeypatch):
    # the cap on the pair scan: with more columns than PAIR_MAX_FEATURES, the columns
    # scanned are those with the largest rows of the Hessian matrix (its Frobenius row
    # norms, checked against numpy on the matrix itself)
    import topoaudit.audit.oblique as oblique

    rng = np.random.default_rng(13)
    n, p = 3000, 12
    X = rng.normal(size=(n, p))
    expected = np.full(n, 0.2)
    observed = (rng.random(n) < np.where(np.abs(X[:, 4] + X[:, 7]) < 0.1, 0.7, 0.2)) * 1.0
    discovery = np.ones(n, bool)
    seen = {}

    def spy(X, observed, expected, keep, columns=None):
        seen["columns"] = columns
        return []

    monkeypatch.setattr(oblique, "pair_directions", spy)
    monkeypatch.setattr(oblique, "PAIR_MAX_FEATURES", 5)
    oblique.slab_direction(X, Losses("error", observed, expected), discovery)
    Xd, o, e = oblique.slab_inputs(X, Losses("error", observed, expected), discovery, 50_000, 0)
    Xc = Xd - Xd.mean(axis=0)
    M = (Xc * (o - e)[:, None]).T @ Xc / n
    top = np.argsort(-np.linalg.norm(M, axis=1))[:5]
    assert sorted(seen["columns"].tolist()) == sorted(top.tolist())
    monkeypatch.setattr(oblique, "PAIR_MAX_FEATURES", 64)
    oblique.slab_direction(X, Losses("error", observed, expected), discovery)
    assert sorted(seen["columns"].tolist()) == list(range(p))
