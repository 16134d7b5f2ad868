"""Breast Cancer Wisconsin (Diagnostic) (Street, Wolberg and Mangasarian, 1993).

The scikit-learn copy of the UCI data set: 569 rows, 212 malignant and 357 benign, 30
features of cell nuclei (standardised here). The mean node purity must be at least
halfway from the majority-class share (357/569 = 0.63) to 1, i.e. at least 0.81.
"""

from __future__ import annotations

from sklearn.datasets import load_breast_cancer
from sklearn.preprocessing import StandardScaler

from reference_checks._case import Data, ReferenceCase, counts_check, purity_case_check


def make_data() -> Data:
    d = load_breast_cancer()
    return Data(StandardScaler().fit_transform(d.data), d.target)


CASE = ReferenceCase(
    name="uci_breast_cancer",
    title="Breast Cancer Wisconsin Diagnostic (scikit-learn copy, standardised), PCA filter",
    source="Street, Wolberg and Mangasarian (1993); UCI Machine Learning Repository",
    expected="569 rows (212 malignant, 357 benign); mean node purity >= 0.81 (base rate 0.63)",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 10, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=purity_case_check(357 / 569),
    # scikit-learn codes malignant as 0 and benign as 1.
    data_checks=lambda d: counts_check(d.labels, {0: 212, 1: 357}),
)
