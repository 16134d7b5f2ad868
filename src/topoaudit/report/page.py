"""The Markdown page of one analysis, and its charts.

The page is built from ``analysis.json`` and ``graph.json`` alone. Each chart is two
files beside the page: an SVG rendered by vl-convert, which the page shows, and its
Vega-Lite spec (``charts/<name>.vl.json``), which the page names and the site build
inlines for the site's chart loader (:mod:`topoaudit.report.figures`). So that a diff of
two releases' pages is read line by line, the page holds no spec, and its prose is
written a sentence to a line (:func:`~topoaudit.report.text.wrap_prose`).

Strings from the user's data or config are escaped where they land (see
:mod:`topoaudit.report.text`): Markdown text, raw HTML and inlined JSON each have their own
escaping.

**Aggregates only.** A page, its charts and its search text never carry a row: no id, no
feature value, no score of one row. Every number is a count, or a statistic over at
least :data:`MIN_CELL_ROWS` rows. Graph nodes, regions, score bins of the calibration
curves and the halves of a weak region with fewer rows show their row count only; their
rates, means and descriptions are left out (small-cell suppression: a "mean" over one row
is that row's value). The threshold of 10 follows common practice in statistical
disclosure control (common practice, no source). Node statistics in the graph view are
rounded to 3 decimals, as the tooltips show them, so that overlapping nodes (Mapper
nodes share rows) cannot be differenced back to one row's score with any precision.
A region description holds means over the region and the thresholds of a surrogate tree
(midway between two neighbouring values, to 4 significant digits, with at least 5 rows on
each side); neither is one row's value.

**Nodes drawn.** The graph view draws at most
:data:`topoaudit.limits.MAX_NODES_DRAWN` nodes: every node of a weak region first, then
the others largest first (by rows), with the edges between drawn nodes; the page says how
many of how many are drawn.
"""

from __future__ import annotations

import dataclasses
import json
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeVar

import networkx as nx
import numpy as np
import pandas as pd

from topoaudit import limits
from topoaudit.audit.tasks import Task, task_named
from topoaudit.bundle import MIN_CELL_ROWS, public_graph, public_view
from topoaudit.bundle.files import read_analysis, read_graph
from topoaudit.bundle.records import (
    Analysis,
    Comparison,
    Description,
    Estimate,
    GraphDocument,
    LocalModelTest,
    Node,
    ScoreChange,
    Segment,
    SegmentLevel,
    ShapeFeatureRecord,
    ShapeRecord,
    SlabBand,
    WeakRegion,
)
from topoaudit.report import views
from topoaudit.report.cautions import STANDING_CAUTIONS
from topoaudit.report.figures import chart_block, write_charts
from topoaudit.report.review import (
    candidates_section,
    drift_section,
    error_mix_sentence,
    graph_words,
    half_table,
    kind_words,
    outcomes_section,
    promise_sentence,
    regions_sentence,
)
from topoaudit.report.text import (
    change,
    code_fence,
    count,
    escape,
    html_text,
    plural,
    pvalue,
    rate,
    signed,
    wrap_prose,
)
from topoaudit.wording import join_words

__all__ = ["MIN_CELL_ROWS", "Page", "build_page", "drawn_graph", "node_layout", "render_bundle"]

#: Fewest rows behind any rate, mean or description a page shows (small-cell suppression).
NOT_SHOWN = f"not shown (fewer than {MIN_CELL_ROWS} rows)"


#: the charts of a page, name -> Vega-Lite spec; each section adds its own
Charts = dict[str, dict[str, Any]]

#: a graph as the layout helpers take it: a record, or the parsed graph.json
G = TypeVar("G", GraphDocument, dict[str, Any])


@dataclass(frozen=True)
class Page:
    """The Markdown text of a page and its charts (name -> Vega-Lite spec)."""

    markdown: str
    charts: Charts


# -- the graph view: layout and the nodes drawn ---------------------------------------------


def _parts(graph: GraphDocument | dict[str, Any]) -> tuple[list[Any], list[Any]]:
    """The nodes and links of a graph record or of a parsed graph.json."""
    if isinstance(graph, GraphDocument):
        return list(graph.nodes), list(graph.links)
    return graph["nodes"], graph["links"]


def _field(item: Any, name: str) -> Any:
    """A field of a node or link, given as a record or as parsed JSON."""
    return item.get(name) if isinstance(item, dict) else getattr(item, name)


def _component_positions(g: nx.Graph, nodes: list[Any], seed: int) -> dict[Any, np.ndarray]:
    """Positions of one component: Kamada-Kawai (loops drawn as open rings, trees spread
    out) from a circular start, or a seeded spring layout above 400 nodes; then turned so
    that the filter increases from left to right, and scaled to unit height or width."""
    sub = g.subgraph(nodes)
    if len(nodes) == 1:
        return {nodes[0]: np.zeros(2)}
    if len(nodes) <= 400:
        start = nx.circular_layout(sorted(nodes))
        pos = nx.kamada_kawai_layout(sub, pos=start, weight=None)
    else:
        pos = nx.spring_layout(sub, seed=seed, iterations=200)
    xy = np.array([pos[v] for v in nodes], dtype=np.float64)
    xy -= xy.mean(axis=0)
    f = np.array([g.nodes[v].get("filter", 0.0) or 0.0 for v in nodes], dtype=np.float64)
    if np.ptp(f) > 0 and np.ptp(xy) > 0:
        # the direction in the drawing along which the filter grows (the covariance of
        # position and filter), turned to +x
        direction = xy.T @ (f - f.mean())
        if np.linalg.norm(direction) > 0:
            c, s = direction / np.linalg.norm(direction)
            xy = xy @ np.array([[c, -s], [s, c]])
    span = max(float(np.ptp(xy[:, 0])), float(np.ptp(xy[:, 1])), 1e-9)
    xy /= span
    return {v: xy[i] for i, v in enumerate(nodes)}


def node_layout(graph: GraphDocument | dict[str, Any], *, seed: int = 0) -> pd.DataFrame:
    """Node positions: each connected component laid out on its own (see
    :func:`_component_positions`), scaled by the square root of its node count, and the
    components packed side by side in rows, largest (by rows) first. Deterministic; the
    coordinates are rounded so the spec is stable. ``graph`` is a graph record or the
    parsed graph.json."""
    nodes, links = _parts(graph)
    g = nx.Graph()
    for n in nodes:
        g.add_node(_field(n, "id"), rows=_field(n, "rows"), filter=_field(n, "filter"))
    g.add_edges_from((_field(e, "source"), _field(e, "target")) for e in links)
    components = sorted(
        (sorted(c) for c in nx.connected_components(g)),
        key=lambda c: (-sum(g.nodes[v]["rows"] for v in c), len(c) == 1, c[0]),
    )
    placed: dict[Any, tuple[float, float]] = {}
    if components:
        scale = [max(1.0, np.sqrt(len(c))) for c in components]
        width = max(scale[0] * 1.6, np.sqrt(sum(s * s for s in scale)) * 1.3)
        x = y = row_height = 0.0
        gap = 0.6
        for comp, s in zip(components, scale, strict=True):
            pos = _component_positions(g, comp, seed)
            xy = np.array([pos[v] for v in comp]) * s
            w = float(np.ptp(xy[:, 0])) if len(comp) > 1 else 0.0
            h = float(np.ptp(xy[:, 1])) if len(comp) > 1 else 0.0
            if x > 0 and x + w > width:
                x, y, row_height = 0.0, y - row_height - gap, 0.0
            left, top = xy[:, 0].min(), xy[:, 1].max()
            for v, (px, py) in zip(comp, xy, strict=True):
                placed[v] = (x + px - left, y + py - top)
            x += w + gap
            row_height = max(row_height, h)
    return pd.DataFrame(
        {
            "node": list(placed),
            "x": [round(float(p[0]), 4) for p in placed.values()],
            "y": [round(float(p[1]), 4) for p in placed.values()],
        }
    )


def drawn_graph(graph: G) -> G:
    """The part of ``graph`` (a graph record or the parsed graph.json, returned as the same
    kind) that the graph view draws: all of it up to
    :data:`topoaudit.limits.MAX_NODES_DRAWN` nodes; past that, the nodes of weak regions
    first, then the others by rows (largest first, ties by id), and the edges between
    drawn nodes."""
    nodes, links = _parts(graph)
    limit = limits.MAX_NODES_DRAWN
    if len(nodes) <= limit:
        return graph
    ranked = sorted(
        nodes,
        key=lambda n: (not _field(n, "weak_regions"), -_field(n, "rows"), str(_field(n, "id"))),
    )
    keep = {_field(n, "id") for n in ranked[:limit]}
    kept_nodes = [n for n in nodes if _field(n, "id") in keep]
    kept_links = [e for e in links if _field(e, "source") in keep and _field(e, "target") in keep]
    if isinstance(graph, GraphDocument):
        return dataclasses.replace(graph, nodes=tuple(kept_nodes), links=tuple(kept_links))
    return {**graph, "nodes": kept_nodes, "links": kept_links}


def _small(rows: int | None) -> bool:
    return rows is None or rows < MIN_CELL_ROWS


def _node_stat(node: Node, value: float | None) -> float | None:
    """A node statistic as drawn: rounded to 3 decimals, left out for small nodes."""
    if _small(node.rows) or value is None or not math.isfinite(float(value)):
        return None
    return round(float(value), 3)


def _graph_frames(graph: GraphDocument) -> tuple[pd.DataFrame, pd.DataFrame]:
    layout = node_layout(graph).set_index("node")
    shown = graph.nodes
    nodes = pd.DataFrame(
        {
            "node": [n.id for n in shown],
            "rows": [n.rows for n in shown],
            "region": [n.region for n in shown],
            "loss": [_node_stat(n, n.loss) for n in shown],
            "expected_loss": [_node_stat(n, n.expected_loss) for n in shown],
            "excess": [_node_stat(n, n.excess) for n in shown],
            "mean_score": [_node_stat(n, n.mean_score) for n in shown],
            "weak": [", ".join(n.weak_regions) for n in shown],
        }
    )
    nodes["x"] = nodes["node"].map(layout["x"])
    nodes["y"] = nodes["node"].map(layout["y"])
    edges = pd.DataFrame(
        {
            "x": [layout.loc[e.source, "x"] for e in graph.links],
            "y": [layout.loc[e.source, "y"] for e in graph.links],
            "x2": [layout.loc[e.target, "x"] for e in graph.links],
            "y2": [layout.loc[e.target, "y"] for e in graph.links],
        }
    )
    return nodes, edges


# -- the page, section by section ----------------------------------------------------------


def build_page(a: Analysis | dict[str, Any], graph: GraphDocument | dict[str, Any]) -> Page:
    """Build the page of analysis ``a`` (a record, or the parsed analysis.json) and its
    graph (a record, or the parsed graph.json) from their public view: no statistic of a
    cell of fewer than ``MIN_CELL_ROWS`` rows reaches the page."""
    view, shown = public_view(a), public_graph(graph)
    task = task_named(view.task)
    charts: Charts = {}
    lines = [
        *_title_section(view, task),
        *outcomes_section(view.outcomes),
        *_weak_regions_section(view, task),
        *candidates_section(view),
        *_graph_section(view, task, shown, charts),
        *_shape_section(view),
        *_regions_section(view, task, charts),
        *_calibration_section(view, task, charts),
        *_segments_section(view, task),
        *_stability_section(view, charts),
        *_local_models_section(view, charts),
        *_comparison_section(view, task, charts),
        *drift_section(view),
        *_cautions_section(view),
        *_reproduce_section(view),
    ]
    return Page(wrap_prose("\n".join(lines)), charts)


def _title_section(a: Analysis, task: Task) -> list[str]:
    """The title, one sentence of what was found, and the at-a-glance table."""
    model, release = escape(a.model), escape(a.release)
    prov = a.provenance
    lines = [
        f"# {model}, release {release}",
        "",
        f"Audit of {count(prov.rows)} validation rows, {a.created}. "
        f"{plural(a.summary.weak_regions, 'weak region')} confirmed out of "
        f"{plural(a.summary.candidates_tested, 'candidate')} tested.",
        "",
        "## At a glance",
        "",
        "| what | value |",
        "|---|---|",
        f"| model | {model} |",
        f"| release | {release} (score column {escape(prov.score_column)}"
        + (f", threshold {prov.threshold}" if task.has_threshold else "")
        + ") |",
        f"| rows | {count(prov.rows)} (discovery {count(prov.discovery_rows)}, "
        f"confirmation {count(prov.confirmation_rows)}) |",
        f"| data fingerprint | `{prov.fingerprint}` |",
    ]
    for metric, name in task.page_metrics:
        est = a.overall[metric]
        interval = (
            f" (95% interval {rate(est.low)} to {rate(est.high)})" if est.low is not None else ""
        )
        lines.append(f"| {name} | {rate(est.value)}{interval} |")
    lines += [f"| weak regions confirmed | {a.summary.weak_regions} |", ""]
    return [*lines, *promise_sentence(a, task.counts)]


def _weak_regions_section(a: Analysis, task: Task) -> list[str]:
    """Where it falls short: each confirmed weak region, or why there is none."""
    lines = ["## Where it falls short", ""]
    if not a.weak_regions:
        lines += [
            "No weak region was confirmed: no candidate region found on the discovery half "
            "showed, on the confirmation half, more errors than the release's own scores "
            f"promise, at a false discovery rate of {a.config['audit']['fdr']}.",
            "",
        ]
    for w in a.weak_regions:
        lines += _weak_region(w, task)
    return lines


def _weak_region(w: WeakRegion, task: Task) -> list[str]:
    """One weak region: where it was found, its two halves, its test, who is in it, its
    local model and its stability."""
    c = w.confirmation
    lines = [
        f"### {w.id}: {count(w.rows)} rows ({w.share_of_rows * 100:.1f}% of all), "
        f"{kind_words(w.kind)}{_all_of_one_kind(w)}",
        "",
        f"Found in the {graph_words(w.graph)}{_also_found(w)}.",
        "",
        *error_mix_sentence(w.error_mix, w.rows),
        *regions_sentence(w),
        *_on_feature(w),
        *half_table(w, task.counts),
    ]
    unit = "wrong decisions" if task.counts else "squared error"
    excess = "not shown" if _small(c.rows) else f"{signed(w.effect)} {unit} per row"
    against = (
        "the promise times the half's factor"
        if task.counts
        else "the mean squared error of all rows of the half"
    )
    lines += [
        f"Excess on the confirmation half (observed less {against}): {excess}; one-sided "
        f"p-value {pvalue(w.p_value)}, adjusted (Benjamini–Hochberg) {pvalue(w.p_adjusted)}.",
        "",
    ]
    if _small(w.rows):
        lines += [f"Who is in it: {NOT_SHOWN}.", ""]
    elif w.description is not None:
        lines += _description(w.description)
    lines.append(_local_model_sentence(w.local_model, task.counts))
    stability = (
        f"found again in {w.stability * 100:.0f}% of reruns."
        if w.stability is not None
        else "not rerun."
    )
    lines += ["", "Stability: " + stability, ""]
    return lines


def _also_found(w: WeakRegion) -> str:
    if not w.also_found:
        return ""
    return ", and again in " + join_words([_found_words(x) for x in w.also_found])


def _found_words(label: str) -> str:
    """``"error_aware/false_negative"`` -> ``"the error-aware graph (false negatives)"``."""
    graph, _, kind = label.partition("/")
    return f"the {graph_words(graph)} ({kind_words(kind)})"


def _all_of_one_kind(w: WeakRegion) -> str:
    """``", all false negatives"`` when every error of a region of errors is of one kind."""
    mix = w.error_mix
    if w.kind != "error" or mix is None or _small(w.rows) or not mix.errors:
        return ""
    if mix.false_negatives == mix.errors:
        return ", all of them false negatives"
    if mix.false_positives == mix.errors:
        return ", all of them false positives"
    return ""


def _on_feature(w: WeakRegion) -> list[str]:
    place = w.on_feature
    if not place:
        return []
    if place.at_tip:
        where = f"at the tip of {place.feature}"
    else:
        where = f"{'in' if place.kind == 'component' else 'on'} {place.feature}"
    return [
        f"It lies {where}: {place.share * 100:.0f}% of its rows are in that feature of "
        "the shape (see the shape of the data).",
        "",
    ]


def _description(desc: Description) -> list[str]:
    """Who is in a weak region: feature contrasts, categories and the surrogate rule."""
    lines = [
        "Who is in it (largest standardised mean differences against the other rows; a "
        "standardised difference is the difference of the means divided by the pooled "
        "standard deviation of the two groups):",
        "",
        "| feature | mean inside | mean outside | standardised difference |",
        "|---|---|---|---|",
    ]
    for fc in desc.contrasts:
        lines.append(
            f"| {escape(fc.feature)} | {rate(fc.region_mean)} | "
            f"{rate(fc.rest_mean)} | {signed(fc.smd, 2)} |"
        )
    lines.append("")
    if desc.categories:
        lines.append(
            "Over-represented categories: "
            + "; ".join(
                f"{escape(cc.feature)} = {escape(cc.category)} "
                f"({cc.region_share * 100:.0f}% inside, {cc.rest_share * 100:.0f}% "
                "outside)"
                for cc in desc.categories
            )
            + "."
        )
        lines.append("")
    if desc.band is not None:
        lines += _band_sentence(desc.band)
    rule = desc.rule
    n = len(re.findall(r" (?:<=|>) ", rule.text))
    conditions = "one condition" if n == 1 else f"{n} conditions"
    lines += [
        f"Approximate rule ({conditions}, from a small decision tree fitted to tell the "
        f"region's rows from the others): {escape(rule.text)}; precision "
        f"{rate(rule.precision, 2)} (the share of rows the rule picks that are in the "
        f"region), recall {rate(rule.recall, 2)} (the share of the region it picks).",
        "",
    ]
    if _poor_rule(rule.precision, rule.recall):
        lines += [
            f"This rule describes the region poorly (precision or recall below "
            f"{POOR_RULE}): read the contrasts above, not the rule.",
            "",
        ]
    return lines


def _band_sentence(band: SlabBand) -> list[str]:
    """Where a region found along one direction lies along it."""
    terms = []
    for k, t in enumerate(band.terms):
        sign = ("-" if t.weight < 0 else "") if k == 0 else (" - " if t.weight < 0 else " + ")
        terms.append(f"{sign}{abs(t.weight):.2f} × {escape(t.feature)}")
    return [
        f"Along the direction it was found on, {''.join(terms)} (each feature standardised: "
        f"value minus mean, over standard deviation), its rows lie between {rate(band.low, 2)} "
        f"and {rate(band.high, 2)} (5th to 95th percentile): a band across "
        f"{plural(len(band.terms), 'feature')}, which the approximate rule below, cutting "
        "one feature at a time, can only follow in steps.",
        "",
    ]


#: below this precision or recall, an approximate rule is labelled a poor description
POOR_RULE = 0.5


def _poor_rule(precision: float | None, recall: float | None) -> bool:
    return any(v is None or v < POOR_RULE for v in (precision, recall))


_VERDICTS = {
    "local model better": "a model of its own would do better here than the recalibrated release",
    "recalibration enough": "recalibrating the release on this region does as well as a "
    "model of its own",
    "no clear gain": "neither a model of its own nor recalibration clearly does better",
}


def _local_model_sentence(lm: LocalModelTest, counts: bool) -> str:
    if lm.verdict == "too small to try":
        return "Local model: the region is too small to try one."
    loss = "log loss" if counts else "squared error"
    base = (
        f"Local model ({escape(lm.model)}, {lm.folds}-fold cross-validation on the region): "
        f"held-out {loss} {rate(lm.local_loss)}, against the release's scores "
        f"{rate(lm.release_loss)}"
    )
    if lm.recalibrated_loss is None or lm.local_vs_recalibrated is None:
        return (
            f"{base}; difference {signed(lm.difference)} (95% interval {signed(lm.low)} to "
            f"{signed(lm.high)}): **{escape(lm.verdict)}**."
        )
    d = lm.local_vs_recalibrated
    constant = "the training folds' rate" if counts else "the training folds' mean"
    return (
        f"{base}, a constant ({constant}) "
        f"{rate(lm.constant_loss)} and the release recalibrated on "
        f"the region ({escape(lm.recalibration or 'recalibration')}, fitted on the training "
        f"folds) {rate(lm.recalibrated_loss)}. Local model less recalibrated release: "
        f"{signed(d.difference)} (95% interval {signed(d.low)} to {signed(d.high)}): "
        f"**{_VERDICTS.get(lm.verdict, escape(lm.verdict))}**."
    )


def _graph_section(a: Analysis, task: Task, graph: GraphDocument, charts: Charts) -> list[str]:
    """The shape of the data: the graph's invariants in words, and the graph view."""
    drawn = drawn_graph(graph)
    n_drawn, n_all = len(drawn.nodes), len(graph.nodes)
    nodes, edges = _graph_frames(drawn)
    notes = []
    if n_drawn < n_all:
        notes.append(
            f"showing {count(n_drawn)} of {count(n_all)} nodes: those of weak regions, "
            "then the largest"
        )
    n_small = sum(_small(n.rows) for n in drawn.nodes)
    if n_small:
        notes.append(f"grey: nodes of fewer than {MIN_CELL_ROWS} rows, statistics not shown")
    charts["graph"] = views.graph_view(
        nodes,
        edges,
        title="The shape of the validation data (Mapper graph)",
        notes=notes,
        labels=views.METRIC_LABELS if task.counts else views.REGRESSION_LABELS,
    ).to_dict()
    inv = a.graph.invariants
    lines = [
        "## The shape of the data",
        "",
        f"{plural(inv.n_nodes, 'node')}, {plural(inv.n_edges, 'edge')}, "
        f"{plural(inv.n_components, 'connected component')}, cycle rank "
        f"{inv.cycle_rank}, {plural(inv.n_leaves, 'leaf', 'leaves')}, "
        f"{plural(inv.n_branch_points, 'branch point')}. Node size shows rows; colour shows the "
        "metric picked in the selector. Weak regions were searched for on separate search "
        "graphs (see how to reproduce); here a node is ringed when at least half of its "
        "rows belong to a weak region.",
        "",
    ]
    if n_drawn < n_all:
        lines += [
            f"**The drawing shows {count(n_drawn)} of {count(n_all)} nodes**: every node of a "
            "weak region and, of the others, the largest by rows, with the edges between "
            f"drawn nodes ({count(len(drawn.links))} of {count(len(graph.links))} "
            f"edges); the other {count(n_all - n_drawn)}, the smallest outside weak regions, "
            "are left out. The counts above are of the whole graph.",
            "",
        ]
    if n_small:
        lines += [
            f"{plural(n_small, 'node')} "
            + ("holds" if n_small == 1 else "hold")
            + f" fewer than {MIN_CELL_ROWS} rows: "
            + ("it is" if n_small == 1 else "they are")
            + " drawn grey, without rates or mean score, so that no row's own values show.",
            "",
        ]
    lines.append(chart_block("graph", "Mapper graph of the validation data"))
    return lines


def _shape_section(a: Analysis) -> list[str]:
    """The features of the shape: what the graph shows and how sure each feature is."""
    shape = a.graph.shape
    lines = [
        "### Features of the shape",
        "",
        _settings_sentence(shape, a.config, a.provenance.rows),
        "",
    ]
    if shape.two_d:
        return [
            *lines,
            "The filter has two dimensions: the cover's grid of intervals draws loops of its "
            "own, so the graph's components, loops and flares are not listed or scored. Use "
            "a one-dimensional filter to have them.",
            "",
        ]
    n = shape.resamples
    if n:
        lines += [
            f"How sure: each feature was checked on {plural(n, 'resample')} of "
            f"{count(shape.resample_rows)} rows drawn without replacement, the settings "
            "chosen again on each. A feature's confidence is the share of resamples whose "
            "graph lies closer to this one than half the feature's extent along the filter "
            "(bottleneck distance between extended persistence diagrams, after Carrière, "
            "Michel and Oudot, 2018): in those the feature is still there. Below 95%, "
            "treat it as possibly an accident of the sample.",
            "",
        ]
    else:
        lines += ["No resamples were drawn: the features below carry no confidence.", ""]
    lines += _feature_table(shape.features, resampled=bool(n))
    lines += [
        "",
        "A loop's columns are those that change most from node to node round it (the share "
        "of their variance between nodes); a flare's, those that change most from where it "
        "joins the rest to its tip, and a separate group's, those that differ most from all "
        "other rows (standardised mean differences, in brackets).",
        "",
    ]
    return lines


def _feature_table(features: tuple[ShapeFeatureRecord, ...], *, resampled: bool) -> list[str]:
    """One row per feature of the shape, and a note on narrow groups of low confidence."""
    lines = [
        "| feature | rows | filter range | what sets it apart | how sure |",
        "|---|---|---|---|---|",
    ]
    for f in features:
        conf = "n/a" if f.confidence is None else f"{f.confidence * 100:.0f}%"
        where = "" if f.main else _feature_where(f)
        lines.append(
            f"| {f.name} | {count(f.rows)} | {f.filter_low:.2f} to "
            f"{f.filter_high:.2f} | {where} | {conf} |"
        )
    narrow = [
        f.name
        for f in features
        if f.kind == "component" and not f.main and (f.confidence or 0) < 0.95
    ]
    if narrow and resampled:
        lines += [
            "",
            f"The confidence of {join_words(narrow)} is low: it measures a feature's extent along "
            "the filter, and a group narrow along the filter scores low even when it lies "
            "far from the other rows in other columns (see what sets it apart).",
        ]
    return lines


def _feature_where(f: ShapeFeatureRecord) -> str:
    if f.kind == "loop":
        cols = ", ".join(escape(c.column) for c in f.columns)
        return f"goes round in {cols}" if cols else ""
    return ", ".join(f"{escape(c.column)} {c.direction} ({signed(c.smd, 1)})" for c in f.columns)


def _farthest(quantile: float) -> str:
    if quantile >= 1:
        return "the farthest"
    return f"all but the farthest {(1 - quantile) * 100:.0f}%"


def _settings_sentence(shape: ShapeRecord, config: dict[str, Any], rows: int) -> str:
    """How the shown graph's settings came about, in words."""
    k, g = shape.n_intervals[0], shape.overlap[0]
    chosen = shape.chosen
    cover = f"{plural(k, 'interval')} overlapping by {g * 100:.0f}%"
    if not chosen:
        return f"The graph's settings were given in the configuration: {cover}."
    sampled = chosen["sample_rows"] < rows
    given = config["graph"]
    quantile = chosen.get("quantile", 1.0)
    parts = [
        "The graph's settings were chosen from the data by the rule of Carrière, Michel and "
        f"Oudot (2018): a neighbourhood scale of {chosen['scale']:.3g} (how far "
        + _farthest(quantile)
        + f" of {count(chosen['sample_rows'])} rows"
        + (", a seeded sample of all rows," if sampled else "")
        + f" lie from the nearest of {count(chosen['subsample_rows'])} of them drawn at "
        f"random, averaged over {plural(chosen['n_subsamples'], 'draw')})"
    ]
    if given["n_intervals"] == "auto" and chosen.get("resolution", ["scale"])[0] == "histogram":
        parts.append(
            "the filter's change between rows within that scale "
            f"({chosen['filter_spread'][0]:.3g}) divided by the overlap {chosen['gain'][0]:g} "
            "spans the filter's whole range, so the rows are too sparse for the rule to "
            "resolve any shape; the number of intervals is instead the Freedman and "
            "Diaconis (1981) bin count of the filter's values, the finest histogram of "
            "these rows that is still stable"
        )
    elif given["n_intervals"] == "auto":
        parts.append(
            f"an interval length of {chosen['interval_length'][0]:.3g}: the filter's "
            + ("largest" if quantile >= 1 else f"{quantile * 100:g}th-percentile")
            + f" change between rows within that scale ({chosen['filter_spread'][0]:.3g}) "
            f"divided by the overlap {chosen['gain'][0]:g}"
        )
    parts.append(f"which gives {cover}")
    if given["clusterer"] == "auto":
        parts.append("each interval's rows are clustered by single linkage cut at the scale")
    text = "; ".join(parts) + "."
    if given["n_intervals"] == "auto" and k == 1:
        text += (
            " With one interval the rule finds no shape it can resolve in these rows: the "
            "farthest rows lie about as far from the others as the data is wide. Explicit "
            "settings (n_intervals, overlap) draw a finer graph, whose features then need "
            "their confidence to be read."
        )
    return text


def _interval(est: Estimate) -> str:
    """``"0.046 to 0.076"``, or why there is none."""
    if est.low is None or est.high is None:
        return "not computed for regions"
    return f"{rate(est.low)} to {rate(est.high)}"


def _regions_section(a: Analysis, task: Task, charts: Charts) -> list[str]:
    """The regions of the partition: the headline metric by region, chart and table."""
    key, label = task.headline
    shown = [r for r in a.regions if not _small(r.rows)]
    reg = pd.DataFrame(
        {
            "region": [f"region {r.id}" for r in shown],
            "value": [r.metrics[key].value for r in shown],
            "low": [r.metrics[key].low for r in shown],
            "high": [r.metrics[key].high for r in shown],
        }
    )
    if task.interval_metric is None:
        # the regions of this task carry no interval: the chart draws the value alone
        reg["low"], reg["high"] = reg["value"], reg["value"]
    lines = [
        "## Regions",
        "",
        f"The graph is partitioned into {plural(a.summary.regions, 'region')} (Louvain "
        "communities); "
        "every row has one home region and the table adds up to the whole data set.",
        "",
    ]
    if len(shown) < len(a.regions):
        lines += [f"Regions of fewer than {MIN_CELL_ROWS} rows show their size only.", ""]
    overall = a.overall[key]
    if shown:
        charts["regions"] = views.region_error_view(
            reg, overall=overall.value, metric_title=label
        ).to_dict()
        lines.append(chart_block("regions", f"{label} by region"))
    promised = task.counts and any(r.promised_error_rate is not None for r in a.regions)
    extra = " error rate its scores promise |" if promised else ""
    lines += [
        f"| region | rows | nodes | {label} | 95% interval |{extra}",
        "|---|---|---|---|---|" + ("---|" if promised else ""),
    ]
    for r in a.regions:
        est = r.metrics[key]
        cells = f"{NOT_SHOWN} | " if _small(r.rows) else f"{rate(est.value)} | {_interval(est)}"
        more = f" {'' if _small(r.rows) else rate(r.promised_error_rate)} |" if promised else ""
        lines.append(f"| {r.id} | {count(r.rows)} | {r.nodes} | {cells} |{more}")
    lines += [
        f"| all | {count(a.provenance.rows)} | {a.graph.invariants.n_nodes} | "
        f"{rate(overall.value)} | {rate(overall.low)} to {rate(overall.high)} |"
        + (" |" if promised else ""),
        "",
    ]
    if promised:
        lines += [
            "A region's error rate can be high without a weak region there: a weak region "
            "is one where the release errs more than its own scores promise (times the "
            "factor above). Where the last two columns are close, the scores already say "
            "that these rows are hard to decide.",
            "",
        ]
    return lines


#: the test of each level of a declared segment against the other rows, in words
SEGMENT_TESTS = {
    "fisher_exact": "Fisher's exact test (two-sided) of each row's error",
    "welch_t": "Welch's t test (two-sided) of the squared errors",
}


def _segments_section(a: Analysis, task: Task) -> list[str]:
    """The columns the configuration declares as segments: a table per column."""
    if not a.segments:
        return []
    names = join_words([escape(s.column) for s in a.segments])
    tests = join_words(sorted({SEGMENT_TESTS.get(s.test, escape(s.test)) for s in a.segments}))
    lines = [
        "## Declared segments",
        "",
        f"The configuration asks about the rows grouped by {names} (audit.segments). "
        f"Each value is compared with all the other rows by {tests}, with "
        "Benjamini–Hochberg across every value of every column: worse and better need an "
        f"adjusted p-value of at most {a.config['audit']['fdr']}, the audit's false "
        "discovery rate. These groups were named before the audit, not found by it, so "
        "every row counts and no half is set aside.",
        "",
    ]
    for segment in a.segments:
        lines += _segment_table(segment, task)
    return lines


def _segment_table(segment: Segment, task: Task) -> list[str]:
    """One declared column: each value's rows, headline metric and interval, the loss of
    the other rows, the adjusted p-value and the verdict."""
    key, label = task.headline
    # the loss tested is the headline for a count task; else it gets a column of its own
    loss_column = label != task.loss_words
    head = f"| value | rows | {label} | 95% interval |"
    head += f" {task.loss_words} |" if loss_column else ""
    head += f" {task.loss_words} of the other rows | adjusted p-value | verdict |"
    width = head.count("|") - 1
    lines = [f"### {escape(segment.column)}", "", head, "|" + "---|" * width]
    for level in segment.levels:
        lines.append(_segment_row(level, key, loss_column, width))
    return [*lines, ""]


def _segment_row(level: SegmentLevel, key: str, loss_column: bool, width: int) -> str:
    start = f"| {escape(level.level)} | {count(level.rows)} |"
    if level.verdict == "not shown":
        rest = [f"not shown ({escape(level.note)})"] + [""] * (width - 3)
        return start + " " + " | ".join(rest) + " |"
    est = level.metrics[key]
    cells = [rate(est.value), _interval(est) if est.low is not None else "not computed"]
    if loss_column:
        cells.append(rate(level.loss))
    verdict = level.verdict + (f" ({escape(level.note)})" if level.note else "")
    cells += [rate(level.rest_loss), pvalue(level.p_adjusted), verdict]
    return start + " " + " | ".join(cells) + " |"


def _calibration_section(a: Analysis, task: Task, charts: Charts) -> list[str]:
    """The calibration curves by region, for a task whose regions have score bins."""
    if not task.counts:
        return []
    all_bins = [(r, b) for r in a.regions for b in r.calibration or ()]
    bins = pd.DataFrame(
        [{"region": f"region {r.id}", **b.to_dict()} for r, b in all_bins if not _small(b.rows)]
    )
    lines = []
    if len(bins) < len(all_bins):
        lines += [
            f"Score bins of fewer than {MIN_CELL_ROWS} rows are left out of the "
            "calibration curves.",
            "",
        ]
    if not bins.empty:
        charts["calibration"] = views.calibration_view(bins).to_dict()
        lines += [
            chart_block("calibration", "calibration curves by region"),
            "",
        ]
    return lines


def _stability_section(a: Analysis, charts: Charts) -> list[str]:
    """Whether each weak region is found again under other settings and samples."""
    if not (a.weak_regions and a.stability.runs):
        return []
    runs = pd.DataFrame(
        [
            {"run": r.label, "region": wid, "found": "found again" if f else "not found"}
            for r in a.stability.runs
            for wid, f in r.found.items()
        ]
    )
    charts["stability"] = views.stability_view(runs).to_dict()
    return [
        "## Stability",
        "",
        *_stability_words(a),
        chart_block("stability", "stability of weak regions"),
        "",
    ]


def _stability_words(a: Analysis) -> list[str]:
    """What was varied in the reruns, in the configuration's own terms."""
    audit = a.config.get("audit", {})
    grid = [r for r in a.stability.runs if r.kind == "grid"]
    subsamples = [r for r in a.stability.runs if r.kind != "grid"]
    parts = []
    if grid:
        parts.append(
            f"- {plural(len(grid), 'rerun')} of the whole search with the covers of the "
            "search graphs changed: their interval counts moved by "
            f"{_listed(audit.get('stability_intervals', []))} "
            f"(audit.stability_intervals) and their overlaps by "
            f"{_listed(audit.get('stability_overlaps', []))} (audit.stability_overlaps); "
            "each is labelled below by the error-aware graph's resulting setting;"
        )
    if subsamples:
        parts.append(
            f"- {plural(len(subsamples), 'rerun')} on a subsample of 80% of the rows drawn "
            "without replacement (audit.bootstrap_resamples counts them; they are "
            "subsamples, not bootstrap resamples)."
        )
    return [
        "Each weak region was looked for again in:",
        "",
        *parts,
        "",
        "A region counts as found again when a region confirmed in the rerun shares at "
        f"least {audit.get('match_jaccard', 0.5)} of their rows (Jaccard). The intervals "
        "of the metrics on this page come from elsewhere: Wilson intervals for rates, 200 "
        "percentile-bootstrap resamples of all rows for the other metrics.",
        "",
    ]


def _listed(values: list) -> str:
    words = [f"{v:+g}" for v in values]
    return join_words(words) if words else "nothing"


def _local_models_section(a: Analysis, charts: Charts) -> list[str]:
    """The local-model tests of the weak regions large enough to try one."""
    tested = [w for w in a.weak_regions if w.local_model.verdict != "too small to try"]
    if not tested:
        return []
    recal = all(w.local_model.local_vs_recalibrated is not None for w in tested)
    diffs = [w.local_model.local_vs_recalibrated if recal else w.local_model for w in tested]
    lm = pd.DataFrame(
        {
            "region": [w.id for w in tested],
            "value": [d.difference for d in diffs],
            "low": [d.low for d in diffs],
            "high": [d.high for d in diffs],
        }
    )
    against = "recalibrated release" if recal else "release"
    charts["local_models"] = views.local_model_view(lm, against=against).to_dict()
    return [
        "## Local models",
        "",
        f"Left of the line, a model fitted on the weak region alone has a lower held-out "
        f"loss than the {against}"
        + (
            " (the release's scores refitted to the region by "
            f"{escape(tested[0].local_model.recalibration or 'recalibration')}): only then "
            "does the region need a model of its own rather than a recalibration."
            if recal
            else "."
        ),
        "",
        chart_block("local_models", "local model results"),
        "",
    ]


def _score_changes(comp: Comparison) -> list[str]:
    """The paired tests on the scores (classification): decisions at the threshold can
    stay put while the scores move."""
    ov = comp.overall
    if ov.roc_auc is None and ov.brier is None:
        return []
    lines = [
        "Decisions at the threshold are only part of it: the scores themselves, compared "
        "on the same rows (ROC AUC: DeLong's paired test; Brier score: paired t-test of "
        "the per-row differences):",
        "",
        "| rows | ROC AUC before | after | change | adjusted p-value | Brier before | after "
        "| change | adjusted p-value |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for name, c in [("all", ov), *((f"region {c.region}", c) for c in comp.regions)]:
        lines.append(
            f"| {name} | {_score_cells(c.roc_auc, c.rows)} | {_score_cells(c.brier, c.rows)} |"
        )
    return [*lines, "", *_no_change_note(comp)]


def _score_cells(s: ScoreChange | None, rows: int) -> str:
    if s is None:
        return "n/a | n/a | n/a | n/a"
    if _small(rows):
        return " | ".join([NOT_SHOWN] + ["" for _ in range(3)])
    if s.change is None:
        return f"{escape(s.note) or 'not defined'} | | |"
    p = pvalue(s.p_adjusted if s.p_adjusted is not None else s.p_value)
    return f"{rate(s.before)} | {rate(s.after)} | {change(s.before, s.after)} | {p}"


def _no_change_note(comp: Comparison) -> list[str]:
    same = [c.region for c in comp.regions if c.worse_only_after == 0 and c.worse_only_before == 0]
    if not same:
        return []
    return [
        f"In {plural(len(same), 'region')} ({', '.join(map(str, same))}) no decision "
        "changed between the releases: their change is exactly 0, with no interval to "
        "show; the score tests above still compare them.",
        "",
    ]


def _comparison_section(a: Analysis, task: Task, charts: Charts) -> list[str]:
    """The release against its baseline on the same rows, overall and by region."""
    comp = a.comparison
    if not comp:
        return []
    compared = [c for c in comp.regions if not _small(c.rows)]
    ch = pd.DataFrame(
        {
            "region": [f"region {c.region}" for c in compared],
            "value": [c.change for c in compared],
            "low": [c.low for c in compared],
            "high": [c.high for c in compared],
        }
    )
    ov = comp.overall
    test = "exact McNemar p-value" if task.counts else "paired t-test p-value"
    lines = [
        f"## Against release {escape(comp.baseline)}",
        "",
        f"On the same rows, the {task.loss_words} moved from {rate(ov.before)} to "
        f"{rate(ov.after)} ({change(ov.before, ov.after)}; {test} {pvalue(ov.p_value)}). "
        f"Regions whose {task.loss_words} got worse: "
        f"{', '.join(str(x) for x in comp.worse) or 'none'}; better: "
        f"{', '.join(str(x) for x in comp.better) or 'none'} (Benjamini–Hochberg across "
        "regions).",
        "",
        *_score_changes(comp),
    ]
    if len(compared) < len(comp.regions):
        lines += [f"Regions of fewer than {MIN_CELL_ROWS} rows are left out of the chart.", ""]
    if compared:
        charts["comparison"] = views.comparison_view(
            ch, baseline=comp.baseline, candidate=comp.candidate
        ).to_dict()
        lines += [
            chart_block("comparison", "change in error by region"),
            "",
        ]
    return lines


def _cautions_section(a: Analysis) -> list[str]:
    """The cautions of this analysis, then the standing ones."""
    return [
        "## Cautions",
        "",
        *(f"- {c}" for c in _cautions(a)),
        *(f"- {c}" for c in STANDING_CAUTIONS),
        "",
    ]


def _cautions(a: Analysis) -> list[str]:
    out = []
    min_rows = a.config["audit"]["min_rows"]
    for w in a.weak_regions:
        rows = w.confirmation.rows
        width = w.confirmation_interval_points
        if width is not None and (rows < 4 * min_rows or width > 15):
            out.append(
                f"Weak region {w.id} has {count(rows)} rows in the confirmation "
                f"half; the 95% interval of its error rate on those rows spans "
                f"{width:.0f} points."
            )
        if w.stability is not None and w.stability < 0.5:
            out.append(
                f"Weak region {w.id} was found again in only {w.stability * 100:.0f}% of "
                "reruns with other settings or samples: treat it as a lead, not a finding."
            )
    untested = a.summary.candidates_untested
    if untested:
        out.append(
            f"{plural(untested, 'candidate region')} had fewer than {min_rows} confirmation rows "
            "and were not tested; they are neither confirmed nor cleared."
        )
    for r in a.regions:
        if _small(r.rows):
            out.append(
                f"Region {r.id} has only {count(r.rows)} rows; its metrics are not "
                f"shown (fewer than {MIN_CELL_ROWS} rows)."
            )
        elif r.rows < min_rows:
            out.append(f"Region {r.id} has only {count(r.rows)} rows; its metrics are fragile.")
    dropped = a.provenance.rows_dropped
    if dropped:
        out.append(f"{count(dropped)} rows with missing values were dropped before the audit.")
    return out


def _epoch(day: str) -> int:
    """Seconds from 1970-01-01 to midnight UTC of ``day`` (YYYY-MM-DD)."""
    import datetime as dt

    return int(dt.datetime.fromisoformat(day).replace(tzinfo=dt.UTC).timestamp())


def _reproduce_section(a: Analysis) -> list[str]:
    """How to reproduce: the command, seed, data, graphs, versions and configuration."""
    prov = a.provenance
    settings = a.graph.settings
    command = prov.command or f"topoaudit audit CONFIG --out BUNDLE --release {a.release}"
    return [
        "## How to reproduce",
        "",
        code_fence(f"SOURCE_DATE_EPOCH={_epoch(a.created)} {command}"),
        "",
        "Run it from the folder the audit ran in (the paths are as they were given). The "
        "output folder must not exist or be empty: move this bundle aside first. With the "
        "same data, configuration and versions, every file of the new bundle is byte for "
        "byte the same as this one's; SOURCE_DATE_EPOCH keeps the audit's date.",
        "",
        f"- seed {prov.seed}; data file {escape(prov.data_file)}",
        f"- data fingerprint `{prov.fingerprint}`: the SHA-256 of the rows and columns the "
        "audit used (the id, the target, the score columns and the features, after rows "
        "were dropped as configured), hashed column by column; it is not the checksum of "
        "the file, and the same rows read from CSV or Parquet give the same fingerprint",
        f"- graph shown: {escape(settings.get('filter', ''))}, {escape(settings.get('cover', ''))}",
        "- search graphs: "
        + "; ".join(
            f"the {graph_words(s.name)} ({plural(s.nodes, 'node')}, features used: "
            f"{', '.join(escape(f) for f in s.features_used)})"
            for s in a.search
        ),
        "- versions: "
        + ", ".join(f"{escape(k)} {escape(val)}" for k, val in sorted(prov.versions.items())),
        "",
        "The configuration used (as read, with defaults filled in):",
        "",
        '<pre class="ta-config"><code>'
        + html_text(json.dumps(a.config, sort_keys=True, indent=1))
        + "</code></pre>",
        "",
    ]


def render_bundle(folder: str | Path) -> Page:
    """Write ``page.md``, ``charts/*.vl.json`` and ``charts/*.svg`` into a bundle folder."""
    folder = Path(folder)
    page = build_page(read_analysis(folder), read_graph(folder))
    write_charts(folder / "charts", page.charts)
    (folder / "page.md").write_text(page.markdown, encoding="utf-8")
    return page
