"""UCI Iris, the copy bundled in scikit-learn: setosa is a group apart.

The data set's own description in scikit-learn (``load_iris().DESCR``) says: "One class
is linearly separable from the other 2; the latter are NOT linearly separable from each
other." The separable class is setosa (Fisher, 1936); a data check here confirms it on
the bundled copy by linear programming (a hyperplane with margin 1 exists between
setosa and the other 100 rows). A group that a hyperplane keeps apart with a margin
is a group of its own in the four measurements, so the graph of the PCA filter,
clustered by single linkage at the neighbourhood scale chosen from the data, must show
the setosa rows as exactly one component that holds every setosa row and no other.
Unlike ``uci_iris``, which accepts setosa in several components of its own, one
component is asked for: the first principal component already leaves a gap between
setosa and the rest (a clusterer that never splits keeps setosa apart at 10 intervals,
measured), so what this case checks is chiefly that the clustering does not break
setosa into pieces, as a finer cut does.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import linprog
from sklearn.datasets import load_iris

from reference_checks._case import Data, ReferenceCase, describe
from topoaudit.mapper.topology import invariants, row_components

SETOSA = 0


def make_data() -> Data:
    d = load_iris()
    return Data(d.data, d.target)


def linearly_separable(X: np.ndarray, inside: np.ndarray) -> bool:
    """Whether some ``w, b`` give ``s_i (w . x_i + b) >= 1`` for every row, with ``s_i``
    +1 inside the group and -1 outside (a feasibility linear program, scipy's HiGHS)."""
    s = np.where(inside, 1.0, -1.0)
    A = -s[:, None] * np.column_stack([X, np.ones(X.shape[0])])
    n_vars = X.shape[1] + 1
    result = linprog(
        np.zeros(n_vars), A_ub=A, b_ub=-np.ones(X.shape[0]), bounds=[(None, None)] * n_vars
    )
    return result.status == 0


def check(graph, data, setting):
    inv = invariants(graph)
    comp = row_components(graph)
    setosa = data.labels == SETOSA
    theirs = set(comp[setosa].tolist())
    others = set(comp[~setosa].tolist())
    one = len(theirs) == 1 and -1 not in theirs and not theirs & others
    seen = f"setosa in {len(theirs)} component{'s' if len(theirs) != 1 else ''}"
    seen += ", shared with other species" if theirs & others else ", none shared"
    return one, describe(inv) + "; " + seen


CASE = ReferenceCase(
    name="iris_setosa",
    title="UCI Iris (scikit-learn copy), PCA filter, single linkage at the data's scale",
    source=(
        "scikit-learn's Iris description: 'One class is linearly separable from the other 2'"
        "; Fisher (1936)"
    ),
    expected="setosa is exactly one component, holding all 50 setosa rows and no other",
    make_data=make_data,
    params={"filter": "pca", "n_intervals": 10, "overlap": 0.3, "clusterer": "auto"},
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=check,
    data_checks=lambda d: [
        (
            "setosa linearly separable from the rest",
            linearly_separable(d.X, d.labels == SETOSA),
        ),
        (
            "versicolor not linearly separable from virginica",
            not linearly_separable(d.X[d.labels != SETOSA], d.labels[d.labels != SETOSA] == 1),
        ),
    ],
)
