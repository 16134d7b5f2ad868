"""The graph builder against data sets of known shape (see reference_checks/).

Each case names its source in its module; here every case must pass at its stated
settings and over its whole neighbourhood, with our invariants equal to networkx's, and
at the settings chosen from the data (its filter kept, the rest "auto"). The negative
controls show that the checks can fail: settings that cannot show the known shape must
be reported as failing.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from sklearn.decomposition import PCA

from reference_checks import (
    CASES,
    circle,
    four_gaussians,
    gaussian_blob,
    iris_setosa,
    sphere,
    torus,
    two_spirals,
    wine,
    y_flares,
)
from reference_checks._case import (
    networkx_disagreements,
    purity_case_check,
    run_auto,
    run_case,
)
from reference_checks.runner import auto_cell, failures, format_table, run_cases
from topoaudit.errors import UnknownNameError
from topoaudit.mapper.graph import MapperBuilder
from topoaudit.mapper.topology import invariants


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_case_passes_at_settings_chosen_from_the_data(case):
    result = run_auto(case)
    assert result.setting == case.auto_settings()
    assert result.auto is not None  # what was chosen is recorded
    assert result.networkx_agrees
    assert result.passed, (
        f"{result.got} ({result.auto.n_intervals} intervals, scale {result.auto.scale:.3g})"
    )


def test_wine_too_sparse_for_the_scale_rule_takes_the_freedman_diaconis_count():
    # The standardised UCI Wine table (178 rows, 13 columns): the neighbourhood scale is
    # about the median distance between two rows (4.29 against 5.0, measured), so the
    # scale rule gives one interval; the count is then the Freedman-Diaconis bin count
    # of the filter's values (Freedman and Diaconis, 1981), as numpy's reference
    # implementation (histogram_bin_edges, bins="fd") counts them.
    data = wine.make_data()
    builder = MapperBuilder(**wine.CASE.auto_settings()).fit(data.X)
    values = PCA(n_components=1).fit(data.X).transform(data.X)[:, 0]
    fd = len(np.histogram_bin_edges(values, bins="fd")) - 1
    assert builder.auto_.resolution == ("histogram",)
    assert builder.auto_.n_intervals == (fd,) and fd > 1
    assert builder.auto_.scale == pytest.approx(4.29, abs=0.01)
    ok, got = wine.CASE.check(builder.graph_, data, wine.CASE.auto_settings())
    assert ok, got


def test_dense_shapes_keep_the_scale_rule():
    for module in (circle, torus, two_spirals, y_flares):
        data = module.CASE.make_data()
        builder = MapperBuilder(**module.CASE.auto_settings()).fit(data.X)
        assert builder.auto_.resolution == ("scale",), module.CASE.name


def test_auto_settings_keep_the_filter_and_leave_the_rest_to_the_builder():
    assert circle.CASE.auto_settings() == {
        "filter": "coordinate",
        "filter_params": {"columns": 1},
        "n_intervals": "auto",
        "overlap": "auto",
        "clusterer": "auto",
    }
    # four_gaussians states a balanced cover; the rule is stated for the uniform default
    assert "cover" not in four_gaussians.CASE.auto_settings()


def test_circle_at_auto_is_a_cycle_of_2k_minus_2_nodes_for_the_chosen_k():
    data = circle.make_data()
    setting = circle.CASE.auto_settings()
    builder = MapperBuilder(**setting).fit(data.X)
    (k,) = builder.n_intervals_
    ok, got = circle.CASE.check(builder.graph_, data, setting)
    assert ok, got
    assert builder.graph_.n_nodes == 2 * k - 2
    assert got.startswith(f"{2 * k - 2} nodes, {2 * k - 2} edges, 1 component, cycle rank 1")


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
    assert table.splitlines()[0] == (
        "| case | expected | got (stated settings) | neighbourhood | auto settings | pass |"
    )
    assert "| circle | a cycle of 2k-2 nodes" in table
    assert "| not run | pass (12 intervals, scale 0.114) | pass |" in table.splitlines()[2]
    assert table.count(" | pass |") == 3  # the header and two passing rows
    assert table.endswith("2 of 2 reference cases pass.")


def test_table_says_when_a_case_fails_at_auto_and_what_the_graph_showed():
    # A case that claims what the data cannot show: UCI Wine's nodes all but pure in
    # cultivar (a bound of 0.99) fails at every setting, and the table says what it got.
    strict = replace(wine.CASE, name="wine_claimed_pure", check=purity_case_check(0.98))
    results = [run_case(strict, neighbourhood=False)]
    row = format_table(results).splitlines()[2]
    assert row.endswith(
        "| FAIL (6 intervals by the histogram rule, scale 4.29): mean node purity 0.865 "
        "(bound 0.990), 8 nodes | FAIL |"
    )
    assert failures(results)[-1] == (
        "wine_claimed_pure auto: FAIL (6 intervals by the histogram rule, scale 4.29): "
        "mean node purity 0.865 (bound 0.990), 8 nodes"
    )


def test_auto_column_says_not_run_when_skipped():
    (result,) = run_cases(["circle"], neighbourhood=False, auto=False)
    assert auto_cell(result) == "not run"
    assert result.auto_passed is None
    assert result.passed


def test_unknown_case_name_suggests_the_closest():
    with pytest.raises(
        UnknownNameError, match=r"Unknown reference case 'circel'.*Did you mean 'circle'"
    ):
        run_cases(["circel"])


def _graph(module, **changes):
    data = module.CASE.make_data()
    setting = dict(module.CASE.params, **changes)
    return module.CASE.check(MapperBuilder(**setting).fit(data.X).graph_, data, setting)


def test_torus_with_two_intervals_is_reported_failing():
    # Two intervals cover the torus by two pieces that meet in the two sides of the hole,
    # but the nerve of two sets is one edge (common practice, no source): the loop is
    # invisible, and the Reeb-graph check must say so.
    ok, got = _graph(torus, n_intervals=2)
    assert not ok
    assert got == "2 nodes, 1 edges, 1 component, cycle rank 0, 2 leaves, 0 branch points"


def test_sphere_check_fails_on_the_torus_and_y_check_fails_on_the_circle():
    data = torus.make_data()
    setting = dict(torus.CASE.params)
    graph = MapperBuilder(**setting).fit(data.X).graph_
    ok, got = sphere.CASE.check(graph, data, setting)
    assert not ok
    assert got.endswith("; not a path")
    data = circle.make_data()
    setting = dict(circle.CASE.params)
    graph = MapperBuilder(**setting).fit(data.X).graph_
    ok, got = y_flares.CASE.check(graph, data, setting)
    assert not ok
    assert got.endswith(", 0 flares, 0 leaves")


def test_setosa_joined_by_a_clusterer_that_never_splits_is_reported_failing():
    # one interval and no split: a single node holds every species
    ok, got = _graph(iris_setosa, n_intervals=1, clusterer=_OneCluster())
    assert not ok
    assert got.endswith("; setosa in 1 component, shared with other species")


def test_blob_control_reports_a_real_loop_as_sure():
    # The negative control can fail: on a noisy circle (one loop; common practice, no
    # source) the same test finds a loop at confidence >= 0.95.
    data = circle.make_data()
    builder = MapperBuilder(**circle.CASE.auto_settings()).fit(data.X)
    sure, scored = gaussian_blob.spurious(builder, data.X)
    assert [f.kind for f in sure] == ["loop"]
    assert scored == sure


def test_iris_data_checks_confirm_the_documented_separation():
    # scikit-learn's Iris description: "One class is linearly separable from the other 2;
    # the latter are NOT linearly separable from each other."
    data = iris_setosa.make_data()
    assert iris_setosa.CASE.data_checks(data) == [
        ("setosa linearly separable from the rest", True),
        ("versicolor not linearly separable from virginica", True),
    ]
