"""Reference checks: the graph builder against data sets whose shape is known.

Each module holds one case: its data, its stated settings and the neighbourhood of
settings around them, the invariants expected and where that expectation comes from. The
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
    iris,
    three_armed_star,
    two_circles,
    two_spirals,
    wine,
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
)
