"""Two concentric circles (scikit-learn's ``make_circles``, factor 0.5, noise 0.03).

The rings never touch: 2 connected components and first Betti number 2. The graph must
show 2 components, cycle rank 2, each ring in its own component. Source: common practice,
no source.
"""

from __future__ import annotations

from sklearn.datasets import make_circles

from reference_checks._case import Data, ReferenceCase
from reference_checks.two_circles import _HEIGHT, check


def make_data() -> Data:
    X, y = make_circles(n_samples=2000, noise=0.03, factor=0.5, random_state=0)
    return Data(X, y)


CASE = ReferenceCase(
    name="concentric_circles",
    title="Concentric circles (make_circles, factor 0.5), height filter",
    source="common practice, no source (2 components, Betti-1 number 2)",
    expected="2 components, cycle rank 2, each ring in its own component",
    make_data=make_data,
    params={**_HEIGHT, "n_intervals": 8, "overlap": 0.3, "clusterer": "single_linkage"},
    neighbourhood={"n_intervals": [6, 7, 8, 9, 10], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
