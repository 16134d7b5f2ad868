"""DeLong's paired test of two ROC AUCs, the paired Brier test, and the comparison of two
releases on their scores.

No general-purpose reference library (scipy, statsmodels, scikit-learn) implements
DeLong's test. So, said plainly, the checks are:

* the published identity that DeLong's variance and covariance are the two-sample
  delete-one jackknife's (DeLong, DeLong and Clarke-Pearson, Biometrics 1988, who build on
  Sen's 1960 structural components; Hanley and Hajian-Tilaki, Academic Radiology 1997),
  with every leave-one-out AUC computed by scikit-learn's ``roc_auc_score``;
* the worked example of Hanley and McNeil (Radiology 1982, Table 1: 109 CT images rated on
  five levels), its area 0.893 and its standard error 0.032 (the table's counts and both
  figures recalled from memory, not read from the paper here);

* the AUC point estimate against scikit-learn's ``roc_auc_score`` (ties included);
* the structural components and the variance of the difference against a brute-force
  computation of the same formula from its definition (DeLong, DeLong and Clarke-Pearson,
  Biometrics 1988: ``V10(x_i) = mean_j psi(x_i, y_j)``, ``V01(y_j) = mean_i psi(x_i, y_j)``
  with ``psi = 1, 1/2, 0`` as the positive scores above, level with or below the negative,
  and ``S = S10 / m + S01 / n``), which checks the midrank shortcut of Sun and Xu (2014)
  but not the formula itself;
* the formula itself against a simulation: its variance of the difference, averaged over
  samples, against the observed variance of the AUC difference across those samples (a
  check of what the estimator is for; common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats as st
from sklearn.metrics import roc_auc_score
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.weightstats import DescrStatsW

from topoaudit.audit.compare import compare_releases
from topoaudit.audit.stats import delong_components, delong_test, paired_mean_test
from topoaudit.errors import ParameterError


def _sample(rng: np.random.Generator, n: int, ties: bool = False):
    """Outcomes and two correlated scores (the second a noisier copy of the first)."""
    y = (rng.uniform(size=n) < 0.3).astype(int)
    a = y * 1.0 + rng.normal(size=n)
    b = a + rng.normal(scale=0.8, size=n)
    if ties:  # coarse scores, many ties within and across the classes
        a, b = np.round(a), np.round(b * 2) / 2
    return y, a, b


def _brute_force(y: np.ndarray, scores: np.ndarray):
    """The AUCs and the covariance matrix S by the definition, pair by pair."""
    x, w = scores[y == 1], scores[y == 0]
    m, n = len(x), len(w)
    psi = (x[:, None, :] > w[None, :, :]) + 0.5 * (x[:, None, :] == w[None, :, :])
    v10 = psi.mean(axis=1)  # m x k
    v01 = psi.mean(axis=0)  # n x k
    auc = psi.mean(axis=(0, 1))
    s10 = (v10 - auc).T @ (v10 - auc) / (m - 1)
    s01 = (v01 - auc).T @ (v01 - auc) / (n - 1)
    return auc, v10, v01, s10 / m + s01 / n


def _jackknife_covariance(y: np.ndarray, scores: np.ndarray) -> np.ndarray:
    """The two-sample delete-one jackknife covariance of the AUCs, each AUC computed by
    scikit-learn: leave out one positive at a time, then one negative at a time."""
    k = scores.shape[1]
    cov = np.zeros((k, k))
    for cls in (1, 0):
        idx = np.flatnonzero(y == cls)
        keep = np.ones(y.size, bool)
        loo = []
        for i in idx:
            keep[i] = False
            loo.append([roc_auc_score(y[keep], scores[keep, j]) for j in range(k)])
            keep[i] = True
        dev = np.asarray(loo) - np.mean(loo, axis=0)
        cov += (idx.size - 1) / idx.size * dev.T @ dev
    return cov


def _delong_covariance(y: np.ndarray, scores: np.ndarray) -> np.ndarray:
    _, v10, v01 = delong_components(y, scores)
    s10 = np.atleast_2d(np.cov(v10, rowvar=False, ddof=1))
    s01 = np.atleast_2d(np.cov(v01, rowvar=False, ddof=1))
    return s10 / v10.shape[0] + s01 / v01.shape[0]


@pytest.mark.parametrize(("seed", "ties"), [(7, False), (8, True)])
def test_delong_covariance_is_the_jackknife_covariance_of_scikit_learn_aucs(seed, ties):
    # DeLong et al. (1988); Hanley and Hajian-Tilaki (1997): the structural-component
    # variance equals the two-sample delete-one jackknife variance exactly, ties included.
    y, a, b = _sample(np.random.default_rng(seed), 120, ties)
    scores = np.column_stack([a, b])
    np.testing.assert_allclose(
        _delong_covariance(y, scores), _jackknife_covariance(y, scores), rtol=1e-9, atol=0
    )
    # and the paired test's standard error is the jackknife's for the difference
    jack = _jackknife_covariance(y, scores)
    res = delong_test(y, a, b)
    se = (res.high - res.change) / st.norm.ppf(0.975)
    assert se == pytest.approx(np.sqrt(jack[0, 0] + jack[1, 1] - 2 * jack[0, 1]), rel=1e-9)


def test_hanley_mcneil_worked_example():
    # Hanley and McNeil, Radiology 143 (1982), Table 1: 58 normal and 51 abnormal CT images
    # rated 1 (definitely normal) to 5 (definitely abnormal). Counts, the area 0.893 and
    # its standard error 0.032 are recalled from memory. The paper's standard error comes
    # from its own approximation (Q1 = A / (2 - A), Q2 = 2 A^2 / (1 + A)); DeLong's
    # nonparametric one estimates the same quantity and lies close to it on these data.
    normal, abnormal = [33, 6, 6, 11, 2], [3, 2, 2, 11, 33]
    levels = np.arange(1.0, 6.0)
    s = np.r_[np.repeat(levels, normal), np.repeat(levels, abnormal)]
    y = np.r_[np.zeros(58), np.ones(51)].astype(int)
    auc = delong_components(y, s[:, None])[0][0]
    assert round(auc, 3) == 0.893
    m, n = 51, 58
    q1, q2 = auc / (2 - auc), 2 * auc**2 / (1 + auc)
    hm_var = (auc * (1 - auc) + (m - 1) * (q1 - auc**2) + (n - 1) * (q2 - auc**2)) / (m * n)
    assert round(np.sqrt(hm_var), 3) == 0.032
    delong_se = np.sqrt(_delong_covariance(y, s[:, None])[0, 0])
    assert delong_se == pytest.approx(0.032, abs=0.002)


@pytest.mark.parametrize(("seed", "ties"), [(0, False), (1, True), (2, False), (3, True)])
def test_delong_components_match_the_brute_force_definition(seed, ties):
    y, a, b = _sample(np.random.default_rng(seed), 300, ties)
    auc, v10, v01 = delong_components(y, np.column_stack([a, b]))
    ref_auc, ref10, ref01, ref_s = _brute_force(y, np.column_stack([a, b]))
    np.testing.assert_allclose(auc, ref_auc, rtol=0, atol=1e-12)
    np.testing.assert_allclose(v10, ref10, rtol=0, atol=1e-12)
    np.testing.assert_allclose(v01, ref01, rtol=0, atol=1e-12)
    # the point estimate: scikit-learn's roc_auc_score (reference library)
    assert auc[0] == pytest.approx(roc_auc_score(y, a), abs=1e-12)
    assert auc[1] == pytest.approx(roc_auc_score(y, b), abs=1e-12)
    # the test: z = (AUC_b - AUC_a) / sqrt(S_aa + S_bb - 2 S_ab), brute-force S
    res = delong_test(y, a, b)
    se = np.sqrt(ref_s[0, 0] + ref_s[1, 1] - 2 * ref_s[0, 1])
    assert res.change == pytest.approx(ref_auc[1] - ref_auc[0], abs=1e-12)
    assert res.p_value == pytest.approx(2 * st.norm.sf(abs(res.change) / se), rel=1e-9)
    z = st.norm.ppf(0.975)
    assert (res.low, res.high) == pytest.approx((res.change - z * se, res.change + z * se))


def test_delong_variance_matches_the_spread_of_the_auc_difference_in_simulation():
    # Common practice, no source: an unbiased variance estimator, averaged over samples,
    # is close to the variance of the statistic across those samples. 1500 samples give
    # the observed variance a relative standard error of about 4%; the bound is 15%.
    rng = np.random.default_rng(11)
    diffs, variances = [], []
    for _ in range(1500):
        y, a, b = _sample(rng, 200)
        res = delong_test(y, a, b)
        diffs.append(res.change)
        se = (res.high - res.change) / st.norm.ppf(0.975)
        variances.append(se**2)
    ratio = np.mean(variances) / np.var(diffs, ddof=1)
    assert 0.85 < ratio < 1.15


def test_delong_of_a_score_against_itself_is_no_change():
    y, a, _ = _sample(np.random.default_rng(4), 100)
    res = delong_test(y, a, a)
    assert res.change == 0.0 and res.p_value == 1.0


def test_delong_needs_two_rows_of_each_class():
    y = np.r_[np.ones(1), np.zeros(9)].astype(int)
    with pytest.raises(ParameterError, match="at least 2 rows of each class"):
        delong_test(y, np.arange(10.0), np.arange(10.0)[::-1])


@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_paired_brier_test_matches_scipy_and_statsmodels(confidence):
    y, a, b = _sample(np.random.default_rng(5), 400)
    pa, pb = 1 / (1 + np.exp(-a)), 1 / (1 + np.exp(-b))
    res = paired_mean_test((pa - y) ** 2, (pb - y) ** 2, confidence=confidence)
    # references: scipy.stats.ttest_rel (p-value) and statsmodels DescrStatsW.tconfint_mean
    d = (pb - y) ** 2 - (pa - y) ** 2
    assert res.p_value == pytest.approx(st.ttest_rel((pb - y) ** 2, (pa - y) ** 2).pvalue)
    lo, hi = DescrStatsW(d).tconfint_mean(alpha=1 - confidence)
    assert (res.low, res.high) == pytest.approx((lo, hi), rel=1e-10)
    assert res.before == pytest.approx(np.mean((pa - y) ** 2))  # the Brier score


def _two_releases(seed: int = 6):
    rng = np.random.default_rng(seed)
    n = 1200
    region = np.repeat([1, 2, 3, 4], 300)
    y = (rng.uniform(size=n) < 0.25).astype(int)
    y[region == 4] = 0  # one class only in region 4
    signal = y + rng.normal(size=n)
    before = 1 / (1 + np.exp(-(signal - 1)))
    noise = np.where(region == 2, rng.normal(scale=2.0, size=n), 0.0)  # worse in region 2
    after = 1 / (1 + np.exp(-(signal - 1 + noise)))
    return y, before, after, region


def test_the_comparison_tests_auc_and_brier_per_region_with_bh_across_regions():
    y, before, after, region = _two_releases()
    err_b = ((before >= 0.5) != y).astype(float)
    err_a = ((after >= 0.5) != y).astype(float)
    comp = compare_releases(
        err_b, err_a, region, baseline="a", candidate="b", y=y, scores=(before, after)
    )
    by_region = {r.region: r for r in comp.regions}
    # a region with one class: no AUC test, a note the page can print
    r4 = by_region[4].roc_auc
    assert r4.p_value is None and r4.change is None and "one class only" in r4.note
    assert by_region[4].brier.p_value is not None
    # the region where the new release is noisier got worse on both
    assert by_region[2].roc_auc.verdict == "worse" and by_region[2].roc_auc.change < 0
    assert by_region[2].brier.verdict == "worse" and by_region[2].brier.change > 0
    # each region's AUC test is DeLong's on its rows; its AUCs are scikit-learn's
    rows = region == 1
    ref = delong_test(y[rows], before[rows], after[rows])
    assert by_region[1].roc_auc.p_value == pytest.approx(ref.p_value)
    assert by_region[1].roc_auc.before == pytest.approx(roc_auc_score(y[rows], before[rows]))
    # Benjamini-Hochberg across the regions where the test is defined
    # (reference: statsmodels multipletests(method="fdr_bh"))
    for metric, regions in (("roc_auc", [1, 2, 3]), ("brier", [1, 2, 3, 4])):
        p = [getattr(by_region[r], metric).p_value for r in regions]
        adj = multipletests(p, method="fdr_bh")[1]
        got = [getattr(by_region[r], metric).p_adjusted for r in regions]
        np.testing.assert_allclose(got, adj, rtol=1e-12)
    # the whole: its own p-value, on every row; the Brier score recomputed with pandas
    frame = pd.DataFrame({"y": y, "before": before, "after": after})
    brier = comp.overall.brier
    assert brier.before == pytest.approx(((frame.before - frame.y) ** 2).mean())
    assert brier.after == pytest.approx(((frame.after - frame.y) ** 2).mean())
    assert comp.overall.roc_auc.p_adjusted == comp.overall.roc_auc.p_value


def test_a_region_with_too_few_of_a_class_gets_a_reason_not_a_test():
    y, before, after, region = _two_releases()
    y = y.copy()
    rows3 = np.flatnonzero(region == 3)
    y[rows3] = 0
    y[rows3[:3]] = 1  # three events: fewer than the five ROC AUC needs
    err = np.zeros(y.size)
    comp = compare_releases(
        err, err, region, baseline="a", candidate="b", y=y, scores=(before, after)
    )
    r3 = next(r for r in comp.regions if r.region == 3).roc_auc
    assert r3.p_value is None and r3.verdict == "not tested"
    assert r3.note == "3 rows with an event, fewer than 5: the ROC AUC change is not tested"


def test_without_scores_the_comparison_stays_at_the_decisions():
    y, before, _, region = _two_releases()
    err = ((before >= 0.5) != y).astype(float)
    comp = compare_releases(err, err, region, baseline="a", candidate="b")
    assert comp.overall.roc_auc is None and all(r.brier is None for r in comp.regions)
