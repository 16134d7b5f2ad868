"""UCI Wine (Forina et al.; UCI Machine Learning Repository), the copy in scikit-learn.

178 wines of three cultivars, 59, 71 and 48 rows, 13 chemical measurements on very
different scales (standardised here). Nodes must be far purer in cultivar than the data
as a whole: the mean node purity must be at least halfway from the majority-class share
(71/178 = 0.40) to 1, i.e. at least 0.70.
"""

from __future__ import annotations

from sklearn.datasets import load_wine
from sklearn.preprocessing import StandardScaler

from reference_checks._case import Data, ReferenceCase, counts_check, purity_case_check


def make_data() -> Data:
    d = load_wine()
    return Data(StandardScaler().fit_transform(d.data), d.target)


CASE = ReferenceCase(
    name="uci_wine",
    title="UCI Wine (scikit-learn copy, standardised), PCA filter",
    source="UCI Machine Learning Repository, Wine (Forina et al., 1988)",
    expected="178 rows (59/71/48); mean node purity >= 0.70 (base rate 0.40)",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 10, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=purity_case_check(71 / 178),
    data_checks=lambda d: counts_check(d.labels, {0: 59, 1: 71, 2: 48}),
)
