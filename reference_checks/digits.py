"""Optical Recognition of Handwritten Digits (Alpaydin and Kaynak, 1998; UCI).

scikit-learn's copy holds 1,797 images of 8 x 8 pixels (64 features) of the ten digits,
178 of digit 0 up to 183 of digit 3 (the per-class counts below are those of the
scikit-learn copy as documented in its data set description; recalled from memory and
checked against the bundled file here). Features standardised. The mean node purity
must be at least halfway from the majority-class share (183/1797 = 0.10) to 1, i.e. at
least 0.55.
"""

from __future__ import annotations

from sklearn.datasets import load_digits
from sklearn.preprocessing import StandardScaler

from reference_checks._case import Data, ReferenceCase, counts_check, purity_case_check

PER_DIGIT = {0: 178, 1: 182, 2: 177, 3: 183, 4: 181, 5: 182, 6: 181, 7: 179, 8: 174, 9: 180}


def make_data() -> Data:
    d = load_digits()
    return Data(StandardScaler().fit_transform(d.data), d.target)


CASE = ReferenceCase(
    name="uci_digits",
    title="UCI Optical Digits (scikit-learn's 1,797-row copy, standardised), PCA filter",
    source="Alpaydin and Kaynak (1998); UCI Machine Learning Repository, optdigits",
    expected="1,797 rows in 10 classes; mean node purity >= 0.55 (base rate 0.10)",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 10, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=purity_case_check(183 / 1797),
    data_checks=lambda d: counts_check(d.labels, PER_DIGIT),
)
