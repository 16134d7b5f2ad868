"""The interval estimates and tests of topoaudit.audit.stats, each against an outside
reference (scipy, statsmodels) or, for the Monte Carlo procedures, against the property
that defines them."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy import stats as st
from statsmodels.stats.contingency_tables import mcnemar
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.proportion import proportion_confint

from topoaudit.audit.stats import (
    benjamini_hochberg,
    binomial_upper_test,
    bootstrap_interval,
    mcnemar_exact,
    permutation_upper_test,
    poisson_lower_bound,
    wilson_interval,
)
from topoaudit.errors import ParameterError

# ---------------------------------------------------------------- wilson_interval

WILSON_COUNTS = [(0, 1), (1, 1), (0, 10), (10, 10), (3, 10), (8, 10), (1, 1000), (500, 1000)]
WILSON_COUNTS += [(999, 1000), (0, 5000), (17, 23)]
WILSON_CASES = [(k, n, conf) for k, n in WILSON_COUNTS for conf in (0.8, 0.95, 0.99)]


@pytest.mark.parametrize(("k", "n", "confidence"), WILSON_CASES)
def test_wilson_interval_matches_statsmodels(k: int, n: int, confidence: float) -> None:
    # Reference: statsmodels.stats.proportion.proportion_confint(method="wilson").
    lo_ref, hi_ref = proportion_confint(k, n, alpha=1 - confidence, method="wilson")
    lo, hi = wilson_interval(k, n, confidence)
    assert lo == pytest.approx(lo_ref, abs=1e-9)
    assert hi == pytest.approx(hi_ref, abs=1e-9)
    assert 0.0 <= lo <= k / n <= hi <= 1.0


def test_wilson_interval_of_no_rows_is_the_unit_interval() -> None:
    assert wilson_interval(0, 0) == (0.0, 1.0)
    assert wilson_interval(0, 0, 0.5) == (0.0, 1.0)


def test_wilson_interval_narrows_with_lower_confidence() -> None:
    lo90, hi90 = wilson_interval(30, 100, 0.90)
    lo99, hi99 = wilson_interval(30, 100, 0.99)
    assert lo99 < lo90 < 0.3 < hi90 < hi99


@pytest.mark.parametrize(
    ("k", "n", "fragment"),
    [
        (11, 10, "got successes=11, n=10"),
        (-1, 10, "got successes=-1, n=10"),
        (0, -1, "got successes=0, n=-1"),
    ],
)
def test_wilson_interval_refuses_impossible_counts(k: int, n: int, fragment: str) -> None:
    pattern = re.escape("wilson_interval needs 0 <= successes <= n; ") + re.escape(fragment)
    with pytest.raises(ParameterError, match=pattern):
        wilson_interval(k, n)


@pytest.mark.parametrize("confidence", [0.0, 1.0, 1.5, -0.2, float("nan")])
def test_wilson_interval_refuses_confidence_outside_open_unit_interval(confidence: float) -> None:
    pattern = re.escape(f"confidence must be in (0, 1); got {confidence!r}.")
    with pytest.raises(ParameterError, match=pattern):
        wilson_interval(3, 10, confidence)


# ---------------------------------------------------------------- binomial_upper_test


@pytest.mark.parametrize(
    ("k", "n", "share"),
    [
        (7, 10, 0.3),
        (0, 10, 0.3),
        (1, 1, 0.2),
        (10, 10, 0.5),
        (3, 50, 0.01),
        (40, 100, 0.5),
        (55, 100, 0.5),
        (12, 400, 0.02),
        (0, 10, 0.0),
        (2, 10, 0.0),
        (5, 10, 1.0),
        (10, 10, 1.0),
    ],
)
def test_binomial_upper_test_matches_scipy(k: int, n: int, share: float) -> None:
    # Reference: scipy.stats.binomtest(k, n, p, alternative="greater").pvalue.
    expected = st.binomtest(k, n, share, alternative="greater").pvalue
    assert binomial_upper_test(k, n, share) == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize("share", [-0.1, 1.1, float("nan")])
def test_binomial_upper_test_refuses_a_share_that_is_not_a_probability(share: float) -> None:
    pattern = re.escape(f"share must be a probability in [0, 1]; got {share!r}.")
    with pytest.raises(ParameterError, match=pattern):
        binomial_upper_test(3, 10, share)


# ---------------------------------------------------------------- benjamini_hochberg


@pytest.mark.parametrize("m", [1, 2, 7, 50, 1000])
def test_benjamini_hochberg_matches_statsmodels_on_random_p_values(m: int) -> None:
    rng = np.random.default_rng(m)
    # A mixture of small (signal) and uniform (null) p-values.
    p = np.where(rng.random(m) < 0.3, rng.random(m) * 1e-3, rng.random(m))
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh")[1].
    expected = multipletests(p, method="fdr_bh")[1]
    np.testing.assert_allclose(benjamini_hochberg(p), expected, rtol=0, atol=1e-9)


def test_benjamini_hochberg_matches_statsmodels_with_ties() -> None:
    p = np.array([0.02, 0.01, 0.5, 0.01, 0.02, 1.0, 0.5, 0.04, 0.04, 0.0])
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh")[1].
    expected = multipletests(p, method="fdr_bh")[1]
    adjusted = benjamini_hochberg(p)
    np.testing.assert_allclose(adjusted, expected, rtol=0, atol=1e-9)
    # Equal p-values get equal adjusted values.
    for v in np.unique(p):
        assert np.ptp(adjusted[p == v]) == 0


def test_benjamini_hochberg_matches_statsmodels_on_discrete_ties() -> None:
    rng = np.random.default_rng(11)
    p = rng.choice([0.001, 0.01, 0.03, 0.2, 0.7, 1.0], size=200)
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh")[1].
    expected = multipletests(p, method="fdr_bh")[1]
    np.testing.assert_allclose(benjamini_hochberg(p), expected, rtol=0, atol=1e-9)


def test_benjamini_hochberg_of_no_p_values_is_empty() -> None:
    out = benjamini_hochberg([])
    assert isinstance(out, np.ndarray)
    assert out.shape == (0,)


def test_benjamini_hochberg_keeps_input_order_and_does_not_modify_it() -> None:
    p = [0.5, 0.001, 0.2, 0.03]
    before = list(p)
    adjusted = benjamini_hochberg(p)
    assert p == before
    assert np.argsort(adjusted, kind="stable").tolist() == np.argsort(p, kind="stable").tolist()
    assert np.all(adjusted >= np.asarray(p))
    assert np.all(adjusted <= 1.0)


# ---------------------------------------------------------------- mcnemar_exact


@pytest.mark.parametrize(
    ("b", "c"),
    [(0, 0), (1, 0), (0, 7), (2, 10), (10, 2), (5, 5), (6, 5), (30, 45), (100, 130), (0, 25)],
)
def test_mcnemar_exact_matches_statsmodels(b: int, c: int) -> None:
    rng = np.random.default_rng(b * 1000 + c)
    both_right, both_wrong = rng.integers(0, 200, size=2)
    table = np.array([[both_right, b], [c, both_wrong]])
    # Reference: statsmodels.stats.contingency_tables.mcnemar(table, exact=True).pvalue.
    expected = mcnemar(table, exact=True).pvalue
    assert mcnemar_exact(b, c) == pytest.approx(expected, abs=1e-9)
    assert mcnemar_exact(b, c) == mcnemar_exact(c, b)


# ---------------------------------------------------------------- permutation_upper_test


def _two_samples(seed: int, shift: float, n_region: int = 15, n_other: int = 45):
    rng = np.random.default_rng(seed)
    return rng.normal(shift, 1.0, n_region), rng.normal(0.0, 1.0, n_other)


def test_permutation_upper_test_is_deterministic_for_a_seed() -> None:
    a, b = _two_samples(0, 0.3)
    first = permutation_upper_test(a, b, n_permutations=300, random_state=5)
    assert first == permutation_upper_test(a, b, n_permutations=300, random_state=5)
    gen_1 = permutation_upper_test(a, b, n_permutations=300, random_state=np.random.default_rng(5))
    gen_2 = permutation_upper_test(a, b, n_permutations=300, random_state=np.random.default_rng(5))
    assert gen_1 == gen_2


def test_permutation_upper_test_is_never_zero() -> None:
    a, b = _two_samples(1, 25.0)
    # Phipson and Smyth (2010): the add-one estimate's smallest value is 1 / (1 + B).
    assert permutation_upper_test(a, b, n_permutations=99, random_state=0) == pytest.approx(0.01)
    assert permutation_upper_test(a, b, n_permutations=999, random_state=0) == pytest.approx(1e-3)


def test_permutation_upper_test_is_small_for_a_clearly_shifted_region() -> None:
    a, b = _two_samples(2, 1.5)
    assert permutation_upper_test(a, b, n_permutations=500, random_state=0) < 0.01


def test_permutation_upper_test_is_large_for_a_region_shifted_down() -> None:
    a, b = _two_samples(3, -1.5)
    assert permutation_upper_test(a, b, n_permutations=500, random_state=0) > 0.99


def test_permutation_upper_test_of_an_empty_region_is_one() -> None:
    assert permutation_upper_test(np.array([]), np.array([1.0, 2.0])) == 1.0


def test_permutation_upper_test_is_one_for_constant_values() -> None:
    # Every relabelling ties the observed mean, so every permutation counts as a hit.
    assert permutation_upper_test(np.ones(5), np.ones(20), n_permutations=50) == 1.0


def test_permutation_upper_test_is_roughly_uniform_under_the_null() -> None:
    n_draws, n_perm = 200, 199
    p = np.array(
        [
            permutation_upper_test(
                *_two_samples(seed, 0.0), n_permutations=n_perm, random_state=seed
            )
            for seed in range(n_draws)
        ]
    )
    assert p.min() >= 1 / (1 + n_perm)
    # Under the null the observed statistic and the B Monte Carlo relabellings are
    # exchangeable, so for continuous data P(p <= k / (B + 1)) = k / (B + 1) exactly
    # (Phipson and Smyth, 2010). With B = 199, p <= 0.05 and p <= 0.5 have probability
    # 0.05 and 0.5, and the number of the 200 independent draws below each level is
    # Binomial(200, level). The accepted range is the central 99.9 % of that binomial
    # (scipy.stats.binom quantiles): a correct test fails it once in a thousand seeds.
    for level in (0.05, 0.5):
        count = int(np.sum(p <= level + 1e-12))
        low = st.binom.ppf(0.0005, n_draws, level)
        high = st.binom.isf(0.0005, n_draws, level)
        assert low <= count <= high, (level, count, low, high)


# ---------------------------------------------------------------- bootstrap_interval


def test_bootstrap_interval_contains_the_true_mean_of_a_large_sample() -> None:
    rng = np.random.default_rng(42)
    x = rng.normal(2.0, 1.0, 5000)
    lo, hi = bootstrap_interval(lambda i: float(x[i].mean()), x.size, random_state=0)
    assert lo < 2.0 < hi
    assert lo < x.mean() < hi
    # The width is close to the normal-theory 2 z sigma / sqrt(n).
    expected_width = 2 * st.norm.ppf(0.975) / math.sqrt(x.size)
    assert hi - lo == pytest.approx(expected_width, rel=0.25)


def test_bootstrap_interval_is_deterministic_for_a_seed() -> None:
    x = np.random.default_rng(0).exponential(size=300)

    def stat(i: np.ndarray) -> float:
        return float(np.median(x[i]))

    first = bootstrap_interval(stat, x.size, n_resamples=200, random_state=3)
    assert first == bootstrap_interval(stat, x.size, n_resamples=200, random_state=3)
    assert first != bootstrap_interval(stat, x.size, n_resamples=200, random_state=4)


def test_bootstrap_interval_narrows_with_lower_confidence() -> None:
    x = np.random.default_rng(1).normal(size=400)

    def stat(i: np.ndarray) -> float:
        return float(x[i].mean())

    lo80, hi80 = bootstrap_interval(stat, x.size, confidence=0.8, random_state=0)
    lo99, hi99 = bootstrap_interval(stat, x.size, confidence=0.99, random_state=0)
    assert lo99 < lo80 < hi80 < hi99


def test_bootstrap_interval_is_nan_when_the_statistic_is_mostly_undefined() -> None:
    calls = {"n": 0}

    def defined_once_in_three(i: np.ndarray) -> float:
        calls["n"] += 1
        return float(i.mean()) if calls["n"] % 3 == 0 else float("nan")

    lo, hi = bootstrap_interval(defined_once_in_three, 50, n_resamples=300, random_state=0)
    assert calls["n"] == 300
    assert math.isnan(lo)
    assert math.isnan(hi)


def test_bootstrap_interval_is_nan_when_the_statistic_is_never_defined() -> None:
    lo, hi = bootstrap_interval(lambda i: float("nan"), 20, n_resamples=40)
    assert math.isnan(lo)
    assert math.isnan(hi)


def test_bootstrap_interval_uses_the_defined_resamples_when_half_are_defined() -> None:
    calls = {"n": 0}

    def defined_every_other(i: np.ndarray) -> float:
        calls["n"] += 1
        return 1.0 if calls["n"] % 2 == 0 else float("nan")

    assert bootstrap_interval(defined_every_other, 10, n_resamples=100) == (1.0, 1.0)


@pytest.mark.parametrize("count", [1, 2, 5, 10, 37, 400])
def test_poisson_lower_bound_is_where_the_upper_tail_is_five_percent(count: int) -> None:
    # Garwood (1936): the one-sided lower bound mu solves P(X >= count | mu) = 0.05;
    # checked against scipy's Poisson distribution
    mu = poisson_lower_bound(count)
    assert st.poisson.sf(count - 1, mu) == pytest.approx(0.05, rel=1e-9)


def test_poisson_lower_bound_of_one_event_in_closed_form() -> None:
    # 1 - exp(-mu) = 0.05 (common practice, no source)
    assert poisson_lower_bound(1) == pytest.approx(-math.log(0.95), rel=1e-12)
    assert poisson_lower_bound(0) == 0.0


def test_poisson_lower_bound_refuses_a_negative_count() -> None:
    with pytest.raises(ParameterError, match="count >= 0"):
        poisson_lower_bound(-1)
