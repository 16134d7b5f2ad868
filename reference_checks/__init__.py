"""Reference checks: the graph builder against data sets whose shape is known.

Each module holds one case: its data, its stated settings and the neighbourhood of
settings around them, the invariants expected and where that expectation comes from.
Every case is also run at the settings chosen from the data (its filter kept, the rest
``"auto"``). The
runner (:mod:`reference_checks.runner`) is used by the test suite and by
``topoaudit check``.
"""

from __future__ import annotations

from reference_checks import (
    breast_cancer,
    circle,
    concentric_circles,
    digits,
    four_gaussians,
    gaussian_blob,
    iris,
    iris_setosa,
    sphere,
    three_armed_star,
    torus,
    two_circles,
    two_spirals,
    wine,
    y_flares,
)
from reference_checks._case import CaseResult, ReferenceCase, run_case

__all__ = ["CASES", "CaseResult", "ReferenceCase", "run_case"]

CASES: tuple[ReferenceCase, ...] = (
    circle.CASE,
    two_circles.CASE,
    concentric_circles.CASE,
    two_spirals.CASE,
    three_armed_star.CASE,
    four_gaussians.CASE,
    iris.CASE,
    wine.CASE,
    breast_cancer.CASE,
    digits.CASE,
    torus.CASE,
    sphere.CASE,
    y_flares.CASE,
    iris_setosa.CASE,
    gaussian_blob.CASE,
)
