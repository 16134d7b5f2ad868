"""Population shift per part of the graph (topoaudit.audit.drift).

References: statsmodels' two-proportion z test (``proportions_ztest``; its two-sided
p-value equals Pearson's chi-square without continuity correction on the 2 x 2 table,
common practice, no source) and ``multipletests(method="fdr_bh")``.
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.proportion import proportions_ztest

from topoaudit.audit.drift import shifts


def test_shift_per_part_matches_the_two_proportion_z_test_and_bh():
    rng = np.random.default_rng(0)
    before = rng.choice(5, size=3000, p=[0.4, 0.3, 0.15, 0.1, 0.05])
    after = rng.choice(5, size=2000, p=[0.4, 0.3, 0.05, 0.1, 0.15])  # 2 shrank, 4 grew
    got = shifts(before, after)
    assert [s.part for s in got] == [0, 1, 2, 3, 4]
    for s in got:
        a, b = np.count_nonzero(before == s.part), np.count_nonzero(after == s.part)
        assert (s.rows_before, s.rows_after) == (a, b)
        assert s.share_before == pytest.approx(a / 3000) and s.share_after == pytest.approx(
            b / 2000
        )
        _z, p = proportions_ztest([a, b], [3000, 2000])
        assert s.p_value == pytest.approx(p, rel=1e-9)
    adj = multipletests([s.p_value for s in got], method="fdr_bh")[1]
    np.testing.assert_allclose([s.p_adjusted for s in got], adj, rtol=1e-12)
    moved = {s.part for s in got if s.p_adjusted <= 0.05}
    assert moved == {2, 4}


def test_a_part_only_one_side_has_is_reported_with_zero_rows_on_the_other():
    got = shifts(np.array([0, 0, 1, 1]), np.array([0, 0, 0, 2]), parts=np.array([0, 1, 2, 3]))
    by = {s.part: s for s in got}
    assert by[2].rows_before == 0 and by[2].rows_after == 1
    assert by[3].rows_before == 0 and by[3].rows_after == 0 and by[3].p_value == 1.0
