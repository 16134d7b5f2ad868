"""Altair views: one function per view, each from a tidy DataFrame to a chart.

Views never change their input. Titles, axis labels and legends are written for a
reviewer who has not read the method; every number comes from the analysis.

Strings in a spec are data, never markup: Vega draws titles, axis labels, legends and
the selector's options as text, and the site's chart loader escapes tooltip text. The
page escapes the spec's JSON where it is inlined (``<`` ``>`` ``&`` as ``\\u`` escapes).
"""

from __future__ import annotations

import json
from collections.abc import Sequence

import altair as alt
import pandas as pd

from topoaudit.report.theme import COLOURS, DIVERGING, use_theme

__all__ = [
    "calibration_view",
    "comparison_view",
    "graph_view",
    "local_model_view",
    "region_error_view",
    "stability_view",
]

METRIC_LABELS = {
    "excess": "errors above what the scores promise (per row)",
    "loss": "observed error rate",
    "mean_score": "mean score",
}
#: the graph's words for a regression: the loss is a squared error, the reference the
#: mean squared error of all rows
REGRESSION_LABELS = {
    "excess": "squared error above the mean of all rows (per row)",
    "loss": "mean squared error",
    "mean_score": "mean prediction",
}
#: the tooltip's name of each node's expected loss, by the labels in use
EXPECTED_LABELS = {
    "observed error rate": "error rate the scores promise",
    "mean squared error": "mean squared error of all rows",
}


def _largest_magnitude(values: pd.Series) -> float:
    finite = pd.to_numeric(values, errors="coerce").abs().dropna()
    return round(float(finite.max()), 3) if len(finite) and finite.max() > 0 else 1.0


GRAPH_WIDTH, GRAPH_HEIGHT = 640, 440


def equal_aspect_domains(
    x: Sequence[float], y: Sequence[float], *, margin: float = 0.08
) -> tuple[list[float], list[float]]:
    """Axis domains around the points ``(x, y)`` in which one unit is as long on both
    axes of the graph view, with a margin, so a ring looks round and a path keeps its
    direction."""
    if not len(x):
        return [0.0, 1.0], [0.0, 1.0]
    x0, x1, y0, y1 = min(x), max(x), min(y), max(y)
    w, h = max(x1 - x0, 1e-9), max(y1 - y0, 1e-9)
    per_px = max(w / GRAPH_WIDTH, h / GRAPH_HEIGHT) * (1 + 2 * margin)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    half_w, half_h = per_px * GRAPH_WIDTH / 2, per_px * GRAPH_HEIGHT / 2
    return (
        [round(cx - half_w, 4), round(cx + half_w, 4)],
        [round(cy - half_h, 4), round(cy + half_h, 4)],
    )


def graph_view(
    nodes: pd.DataFrame,
    edges: pd.DataFrame,
    *,
    title: str,
    notes: Sequence[str] = (),
    labels: dict[str, str] | None = None,
) -> alt.LayerChart:
    """The graph as a node-link drawing.

    ``nodes``: node, x, y, rows, region, loss, expected_loss, excess, mean_score, weak
    (the weak regions a node belongs to, "" if none). ``edges``: x, y, x2, y2.
    Node size shows rows; colour shows the metric picked in the selector; nodes of weak
    regions are outlined. A node whose statistics are missing (None: too few rows to
    show them) is drawn grey and its tooltip says "not shown". ``notes`` are added to
    the subtitle. ``labels`` names the three metrics (default :data:`METRIC_LABELS`; a
    regression uses :data:`REGRESSION_LABELS`).
    """
    use_theme()
    labels = labels or METRIC_LABELS
    metric = alt.param(
        name="colour_by",
        value="excess",
        bind=alt.binding_select(
            options=list(labels),
            labels=list(labels.values()),
            name="Colour nodes by ",
        ),
    )
    axis = alt.Axis(title=None, labels=False, ticks=False, domain=False, grid=False)
    x_domain, y_domain = equal_aspect_domains(list(nodes["x"]), list(nodes["y"]))
    base_x = alt.X("x:Q", axis=axis, scale=alt.Scale(zero=False, nice=False, domain=x_domain))
    base_y = alt.Y("y:Q", axis=axis, scale=alt.Scale(zero=False, nice=False, domain=y_domain))
    links = (
        alt.Chart(edges)
        .mark_rule(color=COLOURS["edge"], strokeWidth=1, opacity=0.7)
        .encode(x=base_x, y=base_y, x2="x2:Q", y2="y2:Q")
    )
    size = alt.Size("rows:Q", title="rows in node", scale=alt.Scale(range=[90, 1400]))
    # The colour scale is symmetric about 0 for the selected metric, so that equal
    # distances from "as promised" look equally strong on both sides.
    extent = json.dumps({m: _largest_magnitude(nodes[m]) for m in labels}, sort_keys=True)
    shown = {
        f"{field}_text": f"datum.{field} == null ? 'not shown' : format(datum.{field}, '.3f')"
        for field in ("loss", "expected_loss", "mean_score")
    }
    tooltip = [
        alt.Tooltip("node:N", title="node"),
        alt.Tooltip("rows:Q", title="rows"),
        alt.Tooltip("region:N", title="region"),
        alt.Tooltip("loss_text:N", title=labels["loss"]),
        alt.Tooltip("expected_loss_text:N", title=EXPECTED_LABELS.get(labels["loss"], "expected")),
        alt.Tooltip("mean_score_text:N", title=labels["mean_score"]),
        alt.Tooltip("weak:N", title="weak regions"),
    ]
    points = _node_points(nodes, base_x, base_y, size, shown, tooltip, extent).add_params(metric)
    outline = _weak_rings(nodes, base_x, base_y, shown, tooltip)
    return alt.layer(links, points, outline).properties(
        width=GRAPH_WIDTH,
        height=GRAPH_HEIGHT,
        title=alt.Title(title, subtitle=["dashed magenta rings: nodes in a weak region", *notes]),
    )


def _node_points(
    nodes: pd.DataFrame,
    x: alt.X,
    y: alt.Y,
    size: alt.Size,
    shown: dict[str, str],
    tooltip: list[alt.Tooltip],
    extent: str,
) -> alt.Chart:
    """The nodes, coloured by the selected metric on a scale symmetric about 0 (grey when
    the metric is not shown)."""
    return (
        alt.Chart(nodes)
        .transform_calculate(value="datum[colour_by]", **shown)
        .mark_circle(opacity=0.95, stroke=COLOURS["ink"], strokeWidth=0.4, invalid="show")
        .encode(
            x=x,
            y=y,
            size=size,
            color=alt.when("datum.value == null")
            .then(alt.value(COLOURS["suppressed"]))
            .otherwise(
                alt.Color(
                    "value:Q",
                    title="selected metric",
                    scale=alt.Scale(
                        range=DIVERGING,
                        domainMid=0,
                        domainMin=alt.ExprRef(f"-{extent}[colour_by]"),
                        domainMax=alt.ExprRef(f"{extent}[colour_by]"),
                    ),
                )
            ),
            tooltip=tooltip,
        )
    )


def _weak_rings(
    nodes: pd.DataFrame, x: alt.X, y: alt.Y, shown: dict[str, str], tooltip: list[alt.Tooltip]
) -> alt.Chart:
    """Dashed rings round the nodes that belong to a weak region."""
    return (
        alt.Chart(nodes)
        .transform_calculate(**shown)
        .transform_filter("datum.weak != ''")
        .mark_point(
            shape="circle", filled=False, color=COLOURS["weak"], strokeWidth=2.5, strokeDash=[4, 2]
        )
        .encode(
            x=x,
            y=y,
            size=alt.Size("rows:Q", scale=alt.Scale(range=[260, 2200]), legend=None),
            tooltip=tooltip,
        )
    )


def _interval_chart(
    frame: pd.DataFrame,
    *,
    category: str,
    category_title: str,
    value: str,
    value_title: str,
    title: str,
    reference: float | None,
    reference_label: str,
) -> alt.LayerChart:
    """Points with interval bars per category, and an optional reference line."""
    use_theme()
    y = alt.Y(f"{category}:N", title=category_title, sort=None)
    bars = (
        alt.Chart(frame)
        .mark_rule(color=COLOURS["muted"], strokeWidth=2)
        .encode(y=y, x=alt.X("low:Q", title=value_title), x2="high:Q")
    )
    dots = (
        alt.Chart(frame)
        .mark_point(filled=True, size=70, color=COLOURS["ink"])
        .encode(
            y=y,
            x=alt.X(f"{value}:Q"),
            tooltip=[
                alt.Tooltip(f"{category}:N", title=category_title),
                alt.Tooltip(f"{value}:Q", title=value_title, format=".3f"),
                alt.Tooltip("low:Q", title="interval low", format=".3f"),
                alt.Tooltip("high:Q", title="interval high", format=".3f"),
            ],
        )
    )
    layers = [bars, dots]
    if reference is not None:
        ref = pd.DataFrame({"ref": [reference], "label": [reference_label]})
        layers.append(
            alt.Chart(ref)
            .mark_rule(color=COLOURS["accent"], strokeDash=[6, 3], strokeWidth=2)
            .encode(x="ref:Q", tooltip=[alt.Tooltip("label:N", title="line")])
        )
    height = max(80, 22 * len(frame))
    return alt.layer(*layers).properties(width=560, height=height, title=title)


def region_error_view(
    regions: pd.DataFrame, *, overall: float, metric_title: str
) -> alt.LayerChart:
    """Per-region error (``region``, ``value``, ``low``, ``high``) with 95% intervals and
    the overall value as a dashed line."""
    return _interval_chart(
        regions,
        category="region",
        category_title="region",
        value="value",
        value_title=f"{metric_title} (95% interval)",
        title=f"{metric_title} by region, against the whole data set (dashed)",
        reference=overall,
        reference_label=f"whole data set: {overall:.3f}",
    )


def comparison_view(changes: pd.DataFrame, *, baseline: str, candidate: str) -> alt.LayerChart:
    """Change in error rate per region (``region``, ``value``, ``low``, ``high``)."""
    return _interval_chart(
        changes,
        category="region",
        category_title="region",
        value="value",
        value_title=f"change in error rate, {candidate} minus {baseline} (95% interval)",
        title=f"Release {candidate} against {baseline}: right of the line is worse",
        reference=0.0,
        reference_label="no change",
    )


def local_model_view(tests: pd.DataFrame, *, against: str = "release") -> alt.LayerChart:
    """Held-out loss of a local model minus that of ``against`` (the release, or the
    release recalibrated on the region), per weak region (``region``, ``value``,
    ``low``, ``high``)."""
    return _interval_chart(
        tests,
        category="region",
        category_title="weak region",
        value="value",
        value_title=f"local model loss minus {against} loss (95% interval over folds)",
        title="Would a local model do better? Left of the line: yes",
        reference=0.0,
        reference_label="no difference",
    )


def calibration_view(bins: pd.DataFrame) -> alt.LayerChart:
    """Observed rate against mean score per score bin, one line per region
    (``region``, ``mean_score``, ``observed_rate``, ``rows``)."""
    use_theme()
    diagonal = pd.DataFrame({"p": [0.0, 1.0]})
    line = (
        alt.Chart(diagonal)
        .mark_line(color=COLOURS["muted"], strokeDash=[4, 4])
        .encode(x="p:Q", y="p:Q")
    )
    curves = (
        alt.Chart(bins)
        .mark_line(point=True)
        .encode(
            x=alt.X("mean_score:Q", title="mean score in bin", scale=alt.Scale(domain=[0, 1])),
            y=alt.Y(
                "observed_rate:Q", title="observed positive rate", scale=alt.Scale(domain=[0, 1])
            ),
            color=alt.Color("region:N", title="region", scale=alt.Scale(scheme="tableau10")),
            tooltip=[
                alt.Tooltip("region:N"),
                alt.Tooltip("rows:Q", title="rows in bin"),
                alt.Tooltip("mean_score:Q", format=".3f"),
                alt.Tooltip("observed_rate:Q", format=".3f"),
            ],
        )
    )
    return alt.layer(line, curves).properties(
        width=420, height=420, title="Calibration by region (dashed: perfectly calibrated)"
    )


def stability_view(runs: pd.DataFrame) -> alt.Chart:
    """Whether each weak region was found again in each rerun
    (``run``, ``region``, ``found`` as "found again" / "not found")."""
    use_theme()
    return (
        alt.Chart(runs)
        .mark_rect(stroke="#ffffff", strokeWidth=2)
        .encode(
            x=alt.X("region:N", title="weak region"),
            y=alt.Y("run:N", title="rerun (cover settings or subsample)", sort=None),
            color=alt.Color(
                "found:N",
                title="in this rerun",
                scale=alt.Scale(
                    domain=["found again", "not found"], range=[COLOURS["good"], "#e9e4da"]
                ),
            ),
            tooltip=["run:N", "region:N", "found:N"],
        )
        .properties(title="Do the weak regions survive other settings and samples?")
    )


def release_trend_view(frame: pd.DataFrame, *, metric_title: str) -> alt.LayerChart:
    """A metric of every release (``release``, ``value``, ``low``, ``high``), oldest at the
    top, with its 95% interval."""
    return _interval_chart(
        frame,
        category="release",
        category_title="release",
        value="value",
        value_title=f"{metric_title} (95% interval)",
        title=f"{metric_title} by release, oldest first",
        reference=None,
        reference_label="",
    )


#: the statuses of weak regions across releases, in the order a legend lists them
STATUSES = (
    "in the first audit",
    "found again",
    "introduced",
    "returned",
    "weak before, missed then",
    "fixed since the release before",
    "gone, not shown fixed",
)


def region_status_view(counts: pd.DataFrame) -> alt.Chart:
    """Weak regions by status in every release (``release``, ``status``, ``regions``)."""
    use_theme()
    palette = ["#3b3f46", COLOURS["muted"], COLOURS["accent"], COLOURS["weak"], "#e0a174"]
    palette += [COLOURS["good"], "#8fb3cf"]
    return (
        alt.Chart(counts)
        .mark_bar()
        .encode(
            y=alt.Y("release:N", title="release", sort=None),
            x=alt.X("regions:Q", title="weak regions", axis=alt.Axis(tickMinStep=1, format="d")),
            color=alt.Color(
                "status:N", title="status", scale=alt.Scale(domain=list(STATUSES), range=palette)
            ),
            order=alt.Order("order:Q"),
            tooltip=["release:N", "status:N", "regions:Q"],
        )
        .properties(width=560, title="Weak regions of each release, and those it fixed")
    )


def drift_view(frame: pd.DataFrame) -> alt.Chart:
    """The population shift of each release validated on new rows (``release``,
    ``region``, ``change`` in percentage points, ``shifted`` yes/no)."""
    use_theme()
    return (
        alt.Chart(frame)
        .mark_bar()
        .encode(
            y=alt.Y("region:N", title="region of the earlier graph", sort=None),
            x=alt.X("change:Q", title="share of rows now less then (percentage points)"),
            row=alt.Row("release:N", title="release", sort=None),
            color=alt.Color(
                "shifted:N",
                title="shift (BH-adjusted p at most 0.05)",
                scale=alt.Scale(domain=["yes", "no"], range=[COLOURS["accent"], "#e9e4da"]),
            ),
            tooltip=["release:N", "region:N", alt.Tooltip("change:Q", format=".1f"), "shifted:N"],
        )
        .properties(width=480, title="Where the rows moved, release by release")
    )
