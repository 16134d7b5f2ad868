"""What a reference case is, and how one is run over its stated settings, their
neighbourhood, and the settings chosen from the data.

The run at settings chosen from the data (``"auto"``) keeps the case's filter and its
parameters and leaves everything else to the builder's defaults: ``n_intervals``,
``overlap`` and ``clusterer`` are ``"auto"`` (:mod:`topoaudit.mapper.auto`) and the cover
is uniform, the cover the rule is stated for. It is what a user gets by naming the
filter and nothing else.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import numpy as np

from topoaudit.mapper.auto import AutoChoice
from topoaudit.mapper.graph import AUTO, MapperBuilder, MapperGraph
from topoaudit.mapper.topology import Invariants, invariants, row_components

__all__ = [
    "AUTO_KEPT",
    "CaseResult",
    "ReferenceCase",
    "SettingResult",
    "chosen_intervals",
    "networkx_disagreements",
    "run_auto",
    "run_case",
]

AUTO_KEPT = ("filter", "filter_params")
"""The stated parameters the run at settings chosen from the data keeps."""

Check = Callable[[MapperGraph, "Data", Mapping[str, Any]], tuple[bool, str]]


@dataclass(frozen=True)
class Data:
    """A case's rows and, where the case has them, the known group of each row."""

    X: np.ndarray
    labels: np.ndarray | None = None


@dataclass(frozen=True)
class ReferenceCase:
    """A data set with a known answer, and the graph settings that must find it.

    ``params`` are the stated MapperBuilder settings; ``neighbourhood`` maps a parameter
    name to the values tried around the stated one (every combination is built), so a case
    that passes only on a knife-edge fails. ``check`` says whether a graph shows the known
    answer and what it shows.
    """

    name: str
    title: str
    source: str
    expected: str
    make_data: Callable[[], Data]
    params: Mapping[str, Any]
    check: Check
    neighbourhood: Mapping[str, Sequence[Any]] = field(default_factory=dict)
    data_checks: Callable[[Data], list[tuple[str, bool]]] | None = None

    def auto_settings(self) -> dict[str, Any]:
        """The case's filter with the interval count, overlap and clusterer left to
        ``"auto"`` (every other parameter at the builder's default)."""
        kept = {k: v for k, v in self.params.items() if k in AUTO_KEPT}
        return {**kept, "n_intervals": AUTO, "overlap": AUTO, "clusterer": AUTO}

    def settings(self) -> list[dict[str, Any]]:
        """The stated settings first, then every other combination of the neighbourhood."""
        stated = dict(self.params)
        out = [stated]
        names = list(self.neighbourhood)
        for values in itertools.product(*(self.neighbourhood[n] for n in names)):
            s = dict(stated, **dict(zip(names, values, strict=True)))
            if s not in out:
                out.append(s)
        return out


@dataclass(frozen=True)
class SettingResult:
    setting: dict[str, Any]
    passed: bool
    got: str
    invariants: Invariants
    networkx_agrees: bool
    auto: AutoChoice | None = None


@dataclass(frozen=True)
class CaseResult:
    case: ReferenceCase
    stated: SettingResult
    neighbours: list[SettingResult]
    data_checks: list[tuple[str, bool]]
    auto: SettingResult | None = None

    @property
    def passed(self) -> bool:
        """The stated settings, every neighbour, the data checks and (when run) the
        settings chosen from the data all pass, with networkx agreeing on every graph."""
        return self.settings_passed and self.auto_passed is not False

    @property
    def settings_passed(self) -> bool:
        """The stated settings, every neighbour and the data checks pass (networkx
        agreeing), whatever the settings chosen from the data gave."""
        return (
            self.stated.passed
            and self.stated.networkx_agrees
            and all(r.passed and r.networkx_agrees for r in self.neighbours)
            and all(ok for _, ok in self.data_checks)
        )

    @property
    def auto_passed(self) -> bool | None:
        """Whether the case passes at the settings chosen from the data (None: not run)."""
        if self.auto is None:
            return None
        return self.auto.passed and self.auto.networkx_agrees

    @property
    def neighbours_passed(self) -> int:
        return sum(r.passed and r.networkx_agrees for r in self.neighbours)


def networkx_disagreements(graph: MapperGraph, inv: Invariants) -> list[str]:
    """Where our invariants differ from networkx's on the same graph (empty: they agree)."""
    g = graph.to_networkx()
    theirs = {
        "n_nodes": g.number_of_nodes(),
        "n_edges": g.number_of_edges(),
        "n_components": nx.number_connected_components(g) if g.number_of_nodes() else 0,
        "cycle_rank": len(nx.cycle_basis(g)),
        "n_leaves": sum(1 for _, d in g.degree() if d == 1),
        "n_branch_points": sum(1 for _, d in g.degree() if d >= 3),
        "n_isolated": nx.number_of_isolates(g),
    }
    ours = inv.as_dict()
    return [f"{k}: ours {ours[k]}, networkx {v}" for k, v in theirs.items() if ours[k] != v]


def _run_setting(case: ReferenceCase, data: Data, setting: dict[str, Any]) -> SettingResult:
    builder = MapperBuilder(**setting).fit(data.X)
    graph = builder.graph_
    inv = invariants(graph)
    passed, got = case.check(graph, data, setting)
    return SettingResult(
        setting=setting,
        passed=bool(passed),
        got=got,
        invariants=inv,
        networkx_agrees=not networkx_disagreements(graph, inv),
        auto=builder.auto_,
    )


def run_auto(case: ReferenceCase, data: Data | None = None) -> SettingResult:
    """Build and check the case's graph at :meth:`ReferenceCase.auto_settings` only."""
    return _run_setting(case, case.make_data() if data is None else data, case.auto_settings())


def run_case(case: ReferenceCase, *, neighbourhood: bool = True, auto: bool = True) -> CaseResult:
    """Build the case's graph at its stated settings, over their neighbourhood and at the
    settings chosen from the data (:meth:`ReferenceCase.auto_settings`), and check each."""
    data = case.make_data()
    settings = case.settings()
    stated = _run_setting(case, data, settings[0])
    neighbours = [_run_setting(case, data, s) for s in settings[1:]] if neighbourhood else []
    at_auto = run_auto(case, data) if auto else None
    checks = case.data_checks(data) if case.data_checks else []
    return CaseResult(
        case=case, stated=stated, neighbours=neighbours, data_checks=checks, auto=at_auto
    )


# Shared checks used by several cases -------------------------------------------------


def chosen_intervals(graph: MapperGraph, setting: Mapping[str, Any]) -> int:
    """The interval count the graph was built with: the stated one, or the one chosen from
    the data when the setting says ``"auto"`` (one filter dimension)."""
    k = setting.get("n_intervals", AUTO)
    if k == AUTO:
        return int(graph.settings["auto"]["n_intervals"][0])
    return int(k)


def describe(inv: Invariants) -> str:
    return (
        f"{inv.n_nodes} nodes, {inv.n_edges} edges, {inv.n_components} component"
        f"{'s' if inv.n_components != 1 else ''}, cycle rank {inv.cycle_rank}"
    )


def groups_apart(graph: MapperGraph, labels: np.ndarray) -> tuple[bool, int]:
    """True when no connected component holds rows of two groups; also the number of
    components that hold rows."""
    comp = row_components(graph)
    used = comp >= 0
    pairs = {(int(c), int(g)) for c, g in zip(comp[used], labels[used], strict=True)}
    comps = {c for c, _ in pairs}
    return len(pairs) == len(comps), len(comps)


def nodes_pure(graph: MapperGraph, labels: np.ndarray) -> bool:
    """True when every node holds rows of one group only."""
    return all(np.unique(labels[m]).size == 1 for m in graph.members)


def mean_node_purity(graph: MapperGraph, labels: np.ndarray) -> float:
    """Mean over nodes of the share of the node's most common group."""
    labels = np.asarray(labels).astype(np.int64)
    return float(np.mean([np.bincount(labels[m]).max() / m.size for m in graph.members]))


def purity_case_check(base_rate: float) -> Check:
    """Pass when mean node purity is at least halfway from the majority share to 1."""
    bound = (1.0 + base_rate) / 2.0

    def check(graph: MapperGraph, data: Data, setting: Mapping[str, Any]) -> tuple[bool, str]:
        assert data.labels is not None
        p = mean_node_purity(graph, data.labels)
        return p >= bound, f"mean node purity {p:.3f} (bound {bound:.3f}), {graph.n_nodes} nodes"

    return check


def counts_check(labels: np.ndarray, published: Mapping[int, int]) -> list[tuple[str, bool]]:
    """Compare the rows per class with published counts."""
    got = {int(k): int(v) for k, v in zip(*np.unique(labels, return_counts=True), strict=True)}
    rows = [(f"{sum(published.values())} rows", int(labels.size) == sum(published.values()))]
    rows.append((f"rows per class {dict(published)}", got == dict(published)))
    return rows
