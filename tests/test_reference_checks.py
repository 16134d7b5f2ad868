"""The graph builder against data sets of known shape (see reference_checks/).

Each case names its source in its module; here every case must pass at its stated
settings and over its whole neighbourhood, with our invariants equal to networkx's.
The negative controls show that the checks can fail: settings that cannot show the
known shape must be reported as failing.
"""

from __future__ import annotations

import numpy as np
import pytest

from reference_checks import CASES, circle, four_gaussians, two_spirals
from reference_checks._case import networkx_disagreements, run_case
from reference_checks.runner import failures, format_table, run_cases
from topoaudit.errors import UnknownNameError
from topoaudit.mapper.graph import MapperBuilder
from topoaudit.mapper.topology import invariants


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_case_passes_at_stated_settings_and_neighbourhood(case):
    result = run_case(case)
    assert result.passed, "\n".join(failures([result]))
    assert len(result.neighbours) >= 10


def test_every_case_names_its_source():
    for case in CASES:
        assert case.source.strip(), case.name
        assert case.expected.strip(), case.name


def test_circle_with_two_intervals_is_reported_failing():
    # Two intervals cover a circle by two arcs that meet twice, but the nerve of two
    # sets is one edge: the loop is invisible, and the check must say so.
    data = circle.make_data()
    setting = dict(circle.CASE.params, n_intervals=2)
    graph = MapperBuilder(**setting).fit(data.X).graph_
    ok, got = circle.CASE.check(graph, data, setting)
    assert not ok
    assert "cycle rank 0" in got


class _OneCluster:
    """A clusterer that never splits: every cover element is a single node."""

    def fit_predict(self, X):
        return np.zeros(X.shape[0], dtype=int)


@pytest.mark.parametrize(
    "module", [four_gaussians, two_spirals], ids=["four_gaussians", "two_spirals"]
)
def test_a_clusterer_that_never_splits_fails_the_separation_cases(module):
    data = module.CASE.make_data()
    setting = dict(module.CASE.params, clusterer=_OneCluster())
    graph = MapperBuilder(**setting).fit(data.X).graph_
    ok, _ = module.CASE.check(graph, data, setting)
    assert not ok


def test_networkx_disagreement_is_detected():
    data = circle.make_data()
    graph = MapperBuilder(**circle.CASE.params).fit(data.X).graph_
    inv = invariants(graph)
    wrong = type(inv)(**{**inv.as_dict(), "cycle_rank": inv.cycle_rank + 1})
    assert networkx_disagreements(graph, inv) == []
    assert networkx_disagreements(graph, wrong) == ["cycle_rank: ours 2, networkx 1"]


def test_table_lists_each_case_with_its_verdict():
    results = run_cases(["circle", "three_armed_star"], neighbourhood=False)
    table = format_table(results)
    assert (
        table.splitlines()[0]
        == "| case | expected | got (stated settings) | neighbourhood | pass |"
    )
    assert "| circle | a cycle of 2k-2 nodes" in table
    assert table.count(" | pass |") == 3  # the header and two passing rows
    assert table.endswith("2 of 2 reference cases pass.")


def test_unknown_case_name_suggests_the_closest():
    with pytest.raises(
        UnknownNameError, match=r"Unknown reference case 'circel'.*Did you mean 'circle'"
    ):
        run_cases(["circel"])
