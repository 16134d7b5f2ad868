"""Weak regions followed across releases: ids, fates, origins (topoaudit.audit.lineage).

The releases here are built row by row with planted error rates, so the expected fates
and origins are known by construction; the statistics are checked against statsmodels:
the fate's change test is the exact conditional test of two Poisson rates
(``statsmodels.stats.rates.test_poisson_2indep(method="exact-cond")``, Przyborowski and
Wilenski 1940) and the adjustment Benjamini–Hochberg (``multipletests(method="fdr_bh")``).
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats import rates as sm_rates
from statsmodels.stats.multitest import multipletests

from topoaudit.audit.lineage import ReleaseRows, excess, follow
from topoaudit.errors import BundleError

N = 6000
PROMISED = 0.1  # every row's scores promise a 10% chance of error


def _release(name, ids, rates, weak, *, seed, fingerprint="d1", placed_on=None, model="m"):
    """Rows with error probability ``rates`` (array), promised error PROMISED, and the
    weak regions the audit of that release found (local id -> row slice)."""
    rng = np.random.default_rng(seed)
    loss = (rng.uniform(size=ids.size) < rates).astype(float)
    masks = {}
    for w, rows in weak.items():
        m = np.zeros(ids.size, bool)
        m[rows] = True
        masks[w] = m
    return ReleaseRows(
        model=model,
        release=name,
        task="binary",
        fingerprint=fingerprint,
        ids=ids,
        loss=loss,
        promised=np.full(ids.size, PROMISED),
        weak=masks,
        placed_on=placed_on,
    )


IDS = np.array([f"r{k:05d}" for k in range(N)])
A_BLOCK, B_BLOCK, C_BLOCK, D_BLOCK = (
    slice(0, 300),
    slice(300, 500),
    slice(1000, 1200),
    slice(2000, 2200),
)


def _two_releases():
    ra = np.full(N, 0.08)
    ra[A_BLOCK] = 0.35  # weak under the first release, fixed in the second
    ra[B_BLOCK] = 0.30  # weak under both, worse under the second
    ra[D_BLOCK] = 0.30  # weak under both, but the first release's audit missed it
    rb = np.full(N, 0.08)
    rb[B_BLOCK] = 0.60
    rb[C_BLOCK] = 0.35  # introduced by the second release
    rb[D_BLOCK] = 0.30
    first = _release("1", IDS, ra, {"W1": A_BLOCK, "W2": B_BLOCK}, seed=1)
    second = _release("2", IDS, rb, {"W1": B_BLOCK, "W2": C_BLOCK, "W3": D_BLOCK}, seed=2)
    return first, second


def test_regions_keep_their_id_and_new_ones_get_the_next_number():
    first, second = _two_releases()
    lin = follow([first, second])
    assert lin.tracked_id("1", "W1") == "T1" and lin.tracked_id("1", "W2") == "T2"
    assert lin.tracked_id("2", "W1") == "T2"  # found again: the same rows
    assert {lin.tracked_id("2", "W2"), lin.tracked_id("2", "W3")} == {"T3", "T4"}
    # following again gives the same ids (an archive rebuilt)
    again = follow(list(_two_releases()))
    assert {t: v.local for t, v in again.tracked.items()} == {
        t: v.local for t, v in lin.tracked.items()
    }


def test_fates_of_the_earlier_regions_are_fixed_and_worse_as_planted():
    first, second = _two_releases()
    step = follow([first, second]).step_to("2")
    fates = {f.tracked: f for f in step.fates}
    assert fates["T1"].fate == "fixed" and fates["T1"].after_id is None
    assert fates["T2"].fate == "worse" and fates["T2"].after_id == "W1"
    # the change test is statsmodels' exact conditional test of two Poisson rates,
    # with the rescaled promised losses as exposures
    for f in step.fates:
        for alternative, got in (("larger", f.p_worse), ("smaller", f.p_better)):
            ref = sm_rates.test_poisson_2indep(
                f.after.observed,
                f.after.expected,
                f.before.observed,
                f.before.expected,
                method="exact-cond",
                alternative=alternative,
            ).pvalue
            assert got == pytest.approx(ref, rel=1e-9)
    # Benjamini-Hochberg across the earlier release's regions
    still = [f.after.p_value for f in step.fates]
    np.testing.assert_allclose(
        [f.q_still for f in step.fates], multipletests(still, method="fdr_bh")[1], rtol=1e-12
    )


def test_origins_tell_introduced_from_missed_before():
    first, second = _two_releases()
    step = follow([first, second]).step_to("2")
    origins = {o.after_id: o for o in step.origins}
    assert origins["W1"].origin == "found again" and origins["W1"].jaccard == 1.0
    assert origins["W2"].origin == "introduced"
    assert origins["W3"].origin == "missed before"
    # the earlier release on the new region's rows: observed against promised, rescaled
    e = origins["W3"].before
    rows = np.zeros(N, bool)
    rows[D_BLOCK] = True
    assert e.observed == first.loss[rows].sum()
    assert e.expected == pytest.approx(first.loss.sum() * rows.sum() / N)


def _placed_release():
    """A second data file: 4000 new rows, each placed on an earlier row (rows r0..r3999
    of the first file in the same order, so the earlier regions carry over exactly)."""
    ids = np.array([f"n{k:05d}" for k in range(4000)])
    return ids, IDS[:4000].copy()


def test_a_region_fixed_on_new_data_and_returning_in_the_next_release():
    ra = np.full(N, 0.08)
    ra[A_BLOCK] = 0.35
    first = _release("1", IDS, ra, {"W1": A_BLOCK}, seed=3)
    ids, placed = _placed_release()
    second = _release("2", ids, np.full(4000, 0.08), {}, seed=4, fingerprint="d2", placed_on=placed)
    rc = np.full(4000, 0.08)
    rc[A_BLOCK] = 0.40
    third = _release("3", ids, rc, {"W1": A_BLOCK}, seed=5, fingerprint="d2")
    lin = follow([first, second, third])
    s2, s3 = lin.step_to("2"), lin.step_to("3")
    assert not s2.same_rows and s2.placed
    assert [(f.tracked, f.fate) for f in s2.fates] == [("T1", "fixed")]
    assert s2.fates[0].after.rows == 300  # the new rows placed on the region's rows
    assert [(o.tracked, o.origin) for o in s3.origins] == [("T1", "returned")]
    assert lin.tracked["T1"].weak_in == ["1", "3"]


def test_without_placement_other_rows_cannot_be_followed():
    first, second = _two_releases()
    other = ReleaseRows(**{**second.__dict__, "fingerprint": "d9"})
    step = follow([first, other]).step_to("2")
    assert "cannot be followed" in step.note
    assert all(f.fate == "unclear" and f.after is None for f in step.fates)
    assert {o.tracked for o in step.origins} == {"T3", "T4", "T5"}


def test_bundles_of_two_models_are_refused():
    first, second = _two_releases()
    other = ReleaseRows(**{**second.__dict__, "model": "another"})
    with pytest.raises(BundleError, match="different models"):
        follow([first, other])


def test_excess_of_squared_errors_is_the_mean_ratio():
    rng = np.random.default_rng(0)
    loss = rng.exponential(size=500)
    loss[:50] *= 3
    mask = np.zeros(500, bool)
    mask[:50] = True
    rel = ReleaseRows(
        model="m",
        release="1",
        task="regression",
        fingerprint="d",
        ids=IDS[:500],
        loss=loss,
        promised=np.ones(500),
        weak={},
    )
    e = excess(rel, mask)
    assert e.ratio == pytest.approx(loss[:50].mean() / loss.mean())
    assert e.p_value < 0.01
