"""Interval estimates and tests used by the audit.

Each function states the formula it computes and its source; the test suite checks each
against scipy or statsmodels.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats as _st

from topoaudit._validation import random_generator
from topoaudit.errors import ParameterError

__all__ = [
    "PairedTest",
    "benjamini_hochberg",
    "binomial_upper_test",
    "bootstrap_interval",
    "delong_components",
    "delong_test",
    "mcnemar_exact",
    "paired_mean_test",
    "permutation_upper_test",
    "poisson_lower_bound",
    "wilson_interval",
]


def wilson_interval(successes: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion (Wilson, 1927).

    ``(p + z²/2n ± z sqrt(p(1-p)/n + z²/4n²)) / (1 + z²/n)`` with ``p = successes / n``
    and ``z`` the two-sided normal quantile. For ``n = 0`` the interval is ``(0, 1)``.

    Examples
    --------
    >>> [round(v, 4) for v in wilson_interval(8, 10)]
    [0.4902, 0.9433]
    """
    if n < 0 or successes < 0 or successes > n:
        msg = f"wilson_interval needs 0 <= successes <= n; got successes={successes}, n={n}."
        raise ParameterError(msg)
    if not 0 < confidence < 1:
        msg = f"confidence must be in (0, 1); got {confidence!r}."
        raise ParameterError(msg)
    if n == 0:
        return 0.0, 1.0
    z = float(_st.norm.ppf(0.5 + confidence / 2.0))
    p = successes / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / denom
    # The bounds are exactly 0 at successes = 0 and exactly 1 at successes = n; set them
    # so rounding cannot leave the observed proportion outside its own interval.
    lo = 0.0 if successes == 0 else max(0.0, float(centre - half))
    hi = 1.0 if successes == n else min(1.0, float(centre + half))
    return lo, hi


def binomial_upper_test(observed: int, n: int, share: float) -> float:
    """One-sided exact binomial p-value ``P(X >= observed)`` for ``X ~ Binomial(n, share)``.

    Used as the conditional test of a scan region (Kulldorff, 1997): given the ``n``
    events observed in the whole sample, each falls in the region with probability equal
    to the region's ``share`` of the expected events.

    Examples
    --------
    >>> round(binomial_upper_test(7, 10, 0.3), 6)
    0.010592
    """
    if not 0 <= share <= 1:
        msg = f"share must be a probability in [0, 1]; got {share!r}."
        raise ParameterError(msg)
    if not 0 <= observed <= n:
        msg = f"binomial_upper_test needs 0 <= observed <= n; got observed={observed}, n={n}."
        raise ParameterError(msg)
    if observed <= 0:
        return 1.0
    return float(_st.binom.sf(observed - 1, n, share))


def poisson_lower_bound(count: float, confidence: float = 0.95) -> float:
    """One-sided exact lower confidence bound of a Poisson mean from an observed count
    (Garwood, 1936): ``chi2.ppf(1 - confidence, 2 count) / 2``, 0 for a count of 0.

    Examples
    --------
    >>> round(poisson_lower_bound(1), 5)  # solves 1 - exp(-mu) = 0.05
    0.05129
    """
    if not 0 < confidence < 1 or not count >= 0:
        msg = (
            "poisson_lower_bound needs a count >= 0 and a confidence in (0, 1); "
            f"got count={count!r}, confidence={confidence!r}."
        )
        raise ParameterError(msg)
    return float(_st.chi2.ppf(1 - confidence, 2 * count) / 2) if count > 0 else 0.0


def binomial_lower_test(observed: int, n: int, share: float) -> float:
    """One-sided exact binomial p-value ``P(X <= observed)`` for ``X ~ Binomial(n, share)``.

    Examples
    --------
    >>> round(binomial_lower_test(1, 10, 0.5), 6)
    0.010742
    """
    if not 0 <= share <= 1 or not 0 <= observed <= n:
        msg = (
            "binomial_lower_test needs 0 <= observed <= n and a share in [0, 1]; "
            f"got observed={observed}, n={n}, share={share!r}."
        )
        raise ParameterError(msg)
    return float(_st.binom.cdf(observed, n, share))


def permutation_upper_test(
    region_values: np.ndarray,
    other_values: np.ndarray,
    *,
    n_permutations: int = 2000,
    random_state: int | np.random.Generator | None = 0,
) -> float:
    """One-sided permutation p-value that the region's mean exceeds the others'.

    The statistic is the region mean; rows are relabelled at random ``n_permutations``
    times and ``p = (1 + #{perm stat >= observed}) / (1 + n_permutations)`` (the
    add-one estimate of Phipson and Smyth, 2010, which is never zero).
    """
    a = np.asarray(region_values, dtype=float)
    b = np.asarray(other_values, dtype=float)
    if a.size == 0:
        return 1.0
    pooled = np.concatenate([a, b])
    rng = random_generator(random_state)
    observed = a.mean()
    k = a.size
    hits = 0
    for _ in range(n_permutations):
        idx = rng.choice(pooled.size, size=k, replace=False)
        hits += pooled[idx].mean() >= observed - 1e-12
    return (1 + hits) / (1 + n_permutations)


def benjamini_hochberg(p_values: Sequence[float]) -> np.ndarray:
    """Benjamini–Hochberg adjusted p-values (Benjamini and Hochberg, 1995).

    ``adj_(i) = min_{j >= i} min(1, m p_(j) / j)`` over the sorted p-values; rejecting
    every hypothesis with ``adj <= q`` controls the false discovery rate at ``q``.

    Examples
    --------
    >>> benjamini_hochberg([0.01, 0.04, 0.03, 0.5]).round(4).tolist()
    [0.04, 0.0533, 0.0533, 0.5]
    """
    p = np.asarray(p_values, dtype=float)
    m = p.size
    if m == 0:
        return p
    order = np.argsort(p, kind="stable")
    ranked = p[order] * m / np.arange(1, m + 1)
    adjusted = np.minimum.accumulate(ranked[::-1])[::-1]
    out = np.empty(m)
    out[order] = np.minimum(adjusted, 1.0)
    return out


def benjamini_hochberg_present(p_values: Sequence[float | None]) -> list[float | None]:
    """:func:`benjamini_hochberg` across the p-values that are there; None (not tested)
    stays None and does not count among the hypotheses.

    Examples
    --------
    >>> benjamini_hochberg_present([0.01, None, 0.04, 0.03, 0.5])
    [0.04, None, 0.05333333333333334, 0.05333333333333334, 0.5]
    """
    present = [i for i, v in enumerate(p_values) if v is not None]
    out: list[float | None] = [None] * len(p_values)
    adjusted = benjamini_hochberg([float(p_values[i]) for i in present])  # type: ignore[arg-type]
    for i, q in zip(present, adjusted.tolist(), strict=True):
        out[i] = float(q)
    return out


def mcnemar_exact(b: int, c: int) -> float:
    """Two-sided exact McNemar p-value (McNemar, 1947) from the discordant counts.

    ``b`` rows are right under the first model and wrong under the second, ``c`` the
    reverse; under no difference ``b ~ Binomial(b + c, 1/2)`` and
    ``p = min(1, 2 P(X <= min(b, c)))``.

    Examples
    --------
    >>> round(mcnemar_exact(2, 10), 6)
    0.038574
    """
    n = b + c
    if n == 0:
        return 1.0
    return float(min(1.0, 2.0 * _st.binom.cdf(min(b, c), n, 0.5)))


def bootstrap_interval(
    statistic: Callable[[np.ndarray], float],
    n_rows: int,
    *,
    confidence: float = 0.95,
    n_resamples: int = 400,
    random_state: int | np.random.Generator | None = 0,
) -> tuple[float, float]:
    """Percentile bootstrap interval (Efron, 1979) of ``statistic(indices)``.

    ``statistic`` receives an array of row positions drawn with replacement from
    ``range(n_rows)``; resamples where it returns NaN (a metric undefined on that
    resample) are left out. Returns ``(nan, nan)`` when fewer than half are defined.
    """
    rng = random_generator(random_state)
    values = np.empty(n_resamples)
    for i in range(n_resamples):
        values[i] = statistic(rng.integers(0, n_rows, n_rows))
    values = values[np.isfinite(values)]
    if values.size < n_resamples / 2:
        return float("nan"), float("nan")
    alpha = (1.0 - confidence) / 2.0
    lo, hi = np.quantile(values, [alpha, 1.0 - alpha])
    return float(lo), float(hi)


@dataclass(frozen=True)
class PairedTest:
    """A paired comparison of two measures on the same rows: each one's value, the
    difference ``after - before``, its interval and its two-sided p-value."""

    before: float
    after: float
    change: float
    low: float
    high: float
    p_value: float


def delong_components(
    y: np.ndarray, scores: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The ROC AUCs of ``k`` scores and DeLong's structural components (DeLong, DeLong and
    Clarke-Pearson, Biometrics 1988), computed from midranks (Sun and Xu, IEEE Signal
    Processing Letters 2014, Algorithm 2).

    ``scores`` has one column per score; with ``m`` positive rows (``y == 1``) and ``n``
    negative rows, for each score the AUC is ``(sum of the positives' midranks among all
    rows - m(m+1)/2) / (m n)``, and the components are
    ``V10_i = (T_Z(x_i) - T_X(x_i)) / n`` for each positive ``x_i`` and
    ``V01_j = 1 - (T_Z(y_j) - T_Y(y_j)) / m`` for each negative ``y_j``, where ``T_Z``,
    ``T_X`` and ``T_Y`` are midranks among all rows, among the positives and among the
    negatives. ``V10_i`` is the share of negatives scored below ``x_i`` (ties count half);
    ``V01_j`` the share of positives scored above ``y_j``.

    Returns ``(auc, v10, v01)`` with shapes ``(k,)``, ``(m, k)`` and ``(n, k)``.
    """
    y = np.asarray(y)
    z = np.asarray(scores, dtype=float)
    if z.ndim == 1:
        z = z[:, None]
    pos = y == 1
    m, n = int(pos.sum()), int((~pos).sum())
    x, w = z[pos], z[~pos]
    t_z = _st.rankdata(np.vstack([x, w]), axis=0)
    t_x = _st.rankdata(x, axis=0)
    t_y = _st.rankdata(w, axis=0)
    auc = (t_z[:m].sum(axis=0) - m * (m + 1) / 2.0) / (m * n)
    v10 = (t_z[:m] - t_x) / n
    v01 = 1.0 - (t_z[m:] - t_y) / m
    return auc, v10, v01


def delong_test(
    y: np.ndarray, before: np.ndarray, after: np.ndarray, *, confidence: float = 0.95
) -> PairedTest:
    """DeLong's test of the difference of two correlated ROC AUCs (DeLong, DeLong and
    Clarke-Pearson, 1988) on the same rows.

    With the components of :func:`delong_components`, ``S = S10 / m + S01 / n`` where
    ``S10`` and ``S01`` are the sample covariance matrices (divisor ``m - 1``, ``n - 1``) of
    the ``V10`` and ``V01`` columns; the difference ``d = AUC_after - AUC_before`` has
    variance ``S_aa + S_bb - 2 S_ab``, the interval is ``d ± z se`` and the two-sided
    p-value ``2 (1 - Φ(|d| / se))``. With a variance of 0 the p-value is 1 when ``d = 0``
    and 0 otherwise. Needs at least two rows of each class.
    """
    y = np.asarray(y)
    m = int(np.sum(y == 1))
    n = int(y.size - m)
    if m < 2 or n < 2:
        msg = f"delong_test needs at least 2 rows of each class; got {m} positive, {n} negative."
        raise ParameterError(msg)
    auc, v10, v01 = delong_components(y, np.column_stack([before, after]))
    s = np.cov(v10, rowvar=False) / m + np.cov(v01, rowvar=False) / n
    var = max(float(s[0, 0] + s[1, 1] - 2.0 * s[0, 1]), 0.0)
    return _normal_test(float(auc[0]), float(auc[1]), var, confidence)


def _normal_test(before: float, after: float, var: float, confidence: float) -> PairedTest:
    d = after - before
    se = float(np.sqrt(var))
    z = float(_st.norm.ppf(0.5 + confidence / 2.0))
    p = _two_sided(d, se, _st.norm.sf)
    return PairedTest(before, after, d, d - z * se, d + z * se, p)


def _two_sided(change: float, se: float, sf: Callable[[float], float]) -> float:
    """``2 sf(|change| / se)``; with ``se = 0``, 1 when ``change = 0`` and 0 otherwise."""
    if se > 0:
        return float(2.0 * sf(abs(change) / se))
    return 1.0 if change == 0 else 0.0


def paired_mean_test(
    before: np.ndarray, after: np.ndarray, *, confidence: float = 0.95
) -> PairedTest:
    """Paired t-test of the mean of per-row values (Student, 1908): ``before`` and
    ``after`` are each row's loss under two models (a squared error for the Brier score).

    With ``d_i = after_i - before_i``, the change is ``mean(d)``, the interval
    ``mean(d) ± t_{n-1} sd(d) / sqrt(n)`` and the p-value two-sided from Student's t with
    ``n - 1`` degrees of freedom (the same as ``scipy.stats.ttest_rel``). When every
    ``d_i`` is equal the p-value is 1 if they are 0 and 0 otherwise. Needs two rows.
    """
    a = np.asarray(before, dtype=float)
    b = np.asarray(after, dtype=float)
    n = a.size
    if n < 2:
        raise ParameterError(f"paired_mean_test needs at least 2 rows; got {n}.")
    d = b - a
    mean = float(d.mean())
    se = float(d.std(ddof=1) / np.sqrt(n))
    t = float(_st.t.ppf(0.5 + confidence / 2.0, n - 1))
    p = _two_sided(mean, se, lambda v: _st.t.sf(v, n - 1))
    return PairedTest(float(a.mean()), float(b.mean()), mean, mean - t * se, mean + t * se, p)
