"""What differs between a classification audit and a regression audit, in one object.

Everything else in the audit, the page and the diff is the same for both tasks; where
they differ, the code asks the :class:`Task` of the analysis instead of testing its name.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from topoaudit.bundle.records import CalibrationBin, Estimate
from topoaudit.errors import ParameterError

if TYPE_CHECKING:
    from topoaudit.audit.weak import Losses

# The statistics are imported when first used: pages and the site read a task's words
# without loading the statistics stack.

__all__ = ["BINARY", "REGRESSION", "TASKS", "Task", "task_named"]


@dataclass(frozen=True)
class Task:
    """One kind of prediction task.

    Attributes
    ----------
    name : {"binary", "regression"}
    headline : (metric, label)
        The metric a page leads with and charts by region.
    page_metrics : tuple of (metric, label)
        The global metrics of the page's summary table and of a diff, in order.
    interval_metric : str or None
        The metric whose interval width a weak region reports (in points), if any.
    counts : bool
        Whether a row's loss is a count (0/1): the release comparison uses McNemar's
        exact test, else a paired test of mean losses.
    has_threshold : bool
        Whether a release has a decision threshold.
    loss_words : str
        What a row's loss averages to, in words ("error rate", "mean squared error").
    """

    name: str
    headline: tuple[str, str]
    page_metrics: tuple[tuple[str, str], ...]
    interval_metric: str | None
    counts: bool
    has_threshold: bool
    loss_words: str
    _metrics: Callable[..., dict[str, Estimate]]
    _losses: Callable[[np.ndarray, np.ndarray, float], list[Losses]]

    def metrics(
        self,
        y: np.ndarray,
        score: np.ndarray,
        threshold: float,
        *,
        bootstrap: int = 0,
        random_state: int = 0,
    ) -> dict[str, Estimate]:
        """The metrics of ``score`` against ``y`` (bootstrap intervals when asked)."""
        return self._metrics(y, score, threshold, bootstrap, random_state)

    def losses(self, y: np.ndarray, score: np.ndarray, threshold: float) -> list[Losses]:
        """The per-row losses searched for weak regions (the total loss first)."""
        return self._losses(y, score, threshold)

    def row_loss(self, y: np.ndarray, score: np.ndarray, threshold: float) -> np.ndarray:
        """Each row's total loss: an error (0/1) or a squared residual."""
        return self.losses(y, score, threshold)[0].observed

    def strata(self, y: np.ndarray) -> np.ndarray | None:
        """What the discovery/confirmation split is stratified by (the outcome, for counts)."""
        return y if self.counts else None

    def calibration(self, y: np.ndarray, score: np.ndarray) -> tuple[CalibrationBin, ...] | None:
        """Reliability-diagram bins of a region (classification only)."""
        if not self.counts:
            return None
        from topoaudit.audit.metrics import calibration_bins

        return tuple(CalibrationBin(**b) for b in calibration_bins(y, score))

    def positive_rate(self, y: np.ndarray) -> float | None:
        """The share of positive outcomes (classification only)."""
        return float(y.mean()) if self.counts else None


def _binary_metrics(y: Any, p: Any, t: float, boot: int, seed: int) -> dict[str, Estimate]:
    from topoaudit.audit.metrics import binary_metrics

    return binary_metrics(y, p, t, bootstrap=boot, random_state=seed)


def _regression_metrics(y: Any, f: Any, _t: float, boot: int, seed: int) -> dict[str, Estimate]:
    from topoaudit.audit.metrics import regression_metrics

    return regression_metrics(y, f, bootstrap=boot, random_state=seed)


def _binary_losses(y: Any, p: Any, t: float) -> list[Losses]:
    from topoaudit.audit.weak import binary_losses

    return binary_losses(y, p, t)


def _regression_losses(y: Any, f: Any, _t: float) -> list[Losses]:
    from topoaudit.audit.weak import regression_losses

    return regression_losses(y, f)


BINARY = Task(
    name="binary",
    headline=("error_rate", "error rate"),
    page_metrics=(
        ("error_rate", "error rate"),
        ("false_positive_rate", "false positive rate"),
        ("false_negative_rate", "false negative rate"),
        ("roc_auc", "ROC AUC"),
        ("brier", "Brier score"),
        ("ece", "expected calibration error"),
    ),
    interval_metric="error_rate",
    counts=True,
    has_threshold=True,
    loss_words="error rate",
    _metrics=_binary_metrics,
    _losses=_binary_losses,
)

REGRESSION = Task(
    name="regression",
    headline=("mae", "mean absolute error"),
    page_metrics=(
        ("mae", "mean absolute error"),
        ("rmse", "RMSE"),
        ("bias", "mean residual"),
        ("r2", "R²"),
    ),
    interval_metric=None,
    counts=False,
    has_threshold=False,
    loss_words="mean squared error",
    _metrics=_regression_metrics,
    _losses=_regression_losses,
)

TASKS = {t.name: t for t in (BINARY, REGRESSION)}


def task_named(name: str) -> Task:
    """The :class:`Task` called ``name``."""
    try:
        return TASKS[name]
    except KeyError:
        msg = f"Unknown task {name!r}; the known tasks are {', '.join(map(repr, TASKS))}."
        raise ParameterError(msg) from None
