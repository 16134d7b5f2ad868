"""Declared segments: each value of each column of ``audit.segments``, its metrics and its
test against the other rows, checked against pandas, statsmodels and scipy; small levels
withheld from the public view; a bad declaration refused by name."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.proportion import proportion_confint
from statsmodels.stats.weightstats import ttest_ind as sm_ttest_ind

from topoaudit.audit.run import prepare, segment_records
from topoaudit.bundle import public_view
from topoaudit.bundle.records import Analysis
from topoaudit.config import load_config, parse_config
from topoaudit.data import MISSING_LEVEL, prepare_dataset
from topoaudit.demo import DISTRICTS, MATERIALS
from topoaudit.errors import ConfigError, DataError, LimitError
from topoaudit.limits import MAX_SEGMENT_LEVELS, MIN_CELL_ROWS
from topoaudit.report.page import build_page

FIXTURE = Path(__file__).parents[1] / "visual" / "fixture"
FDR = 0.05


def _doc(task: str = "binary", segments: list[str] | None = None) -> dict[str, Any]:
    """A config over the rows of :func:`_frame`: zone and size are segments, not features."""
    return {
        "model": "m",
        "data": {
            "path": "rows.csv",
            "id": "id",
            "target": "y",
            "task": task,
            "exclude": ["zone", "size"],
        },
        "release": [{"name": "r1", "score": "s", "threshold": 0.5}],
        "audit": {"segments": segments or ["zone", "size"], "fdr": FDR},
    }


def _frame(task: str = "binary", n: int = 1200, seed: int = 4) -> pd.DataFrame:
    """Rows with two features, a text column (one small level, a few missing values) and
    a number column; zone "east" holds more errors."""
    rng = np.random.default_rng(seed)
    zone = rng.choice(["east", "north", "south", "west"], n, p=[0.25, 0.35, 0.3, 0.1])
    zone[:6] = "tiny"  # a level of fewer than MIN_CELL_ROWS rows
    zone = zone.astype(object)
    zone[6:9] = None  # missing values: a level of their own
    x1, x2 = rng.normal(size=n), rng.normal(size=n)
    if task == "binary":
        p = 1 / (1 + np.exp(-(x1 - 1.5)))
        y = (rng.uniform(size=n) < p).astype(int)
        flip = (zone == "east") & (rng.uniform(size=n) < 0.25)
        s = np.where(flip, 1 - p, p)
    else:
        y = 2 * x1 + rng.normal(size=n)
        s = 2 * x1 + np.where(zone == "east", rng.normal(0, 2.5, n), rng.normal(0, 1, n))
    return pd.DataFrame(
        {
            "id": [f"r{i}" for i in range(n)],
            "x1": x1,
            "x2": x2,
            "zone": zone,
            "size": rng.choice([15, 20, 25], n),
            "y": y,
            "s": s,
        }
    )


def _records(frame: pd.DataFrame, doc: dict[str, Any]):
    config = parse_config(doc)
    ds = prepare_dataset(frame, config, source="rows.csv")
    inp = prepare(config, ds)
    losses = inp.task.losses(ds.target, inp.score, inp.release.threshold)
    return segment_records(inp, losses)


@pytest.fixture(scope="module")
def binary():
    frame = _frame("binary")
    return frame, _records(frame, _doc("binary"))


def _labelled(frame: pd.DataFrame) -> pd.DataFrame:
    """The rows as pandas groups them: a missing value labelled as the audit labels it."""
    out = frame.copy()
    out["zone"] = out["zone"].fillna(MISSING_LEVEL)
    out["size"] = out["size"].astype(str)
    out["error"] = ((out["s"] >= 0.5).astype(int) != out["y"]).astype(int)
    return out


def test_levels_are_the_column_values_in_order_with_missing_last(binary):
    _, segments = binary
    assert [s.column for s in segments] == ["zone", "size"]
    assert [lv.level for lv in segments[0].levels] == [
        "east",
        "north",
        "south",
        "tiny",
        "west",
        MISSING_LEVEL,
    ]
    assert [lv.level for lv in segments[1].levels] == ["15", "20", "25"]  # numbers by value
    assert {s.test for s in segments} == {"fisher_exact"}


def test_rows_and_error_rates_equal_a_pandas_groupby(binary):
    frame, segments = binary
    rows = _labelled(frame)
    for segment in segments:
        grouped = rows.groupby(segment.column)["error"].agg(["size", "mean", "sum"])  # pandas
        for lv in segment.levels:
            assert lv.rows == grouped.loc[lv.level, "size"]
            assert lv.metrics["error_rate"].value == pytest.approx(grouped.loc[lv.level, "mean"])
            assert lv.loss == pytest.approx(grouped.loc[lv.level, "mean"])
            rest = rows[rows[segment.column] != lv.level]["error"]
            assert lv.rest_rows == rest.size
            assert lv.rest_loss == pytest.approx(rest.mean())


def test_the_error_rate_interval_is_wilson_as_statsmodels_computes_it(binary):
    # the audit's rates carry Wilson intervals (audit/metrics.py); statsmodels' reference
    frame, segments = binary
    rows = _labelled(frame)
    for segment in segments:
        for lv in segment.levels:
            errors = int(rows.loc[rows[segment.column] == lv.level, "error"].sum())
            low, high = proportion_confint(errors, lv.rows, alpha=0.05, method="wilson")
            est = lv.metrics["error_rate"]
            assert (est.low, est.high) == (pytest.approx(low), pytest.approx(high))


def test_each_level_is_tested_by_fisher_exact_and_adjusted_by_bh_across_columns(binary):
    frame, segments = binary
    rows = _labelled(frame)
    p_values = []
    for segment in segments:
        for lv in segment.levels:
            in_level = rows[segment.column] == lv.level
            table = pd.crosstab(in_level, rows["error"]).reindex(  # pandas
                index=[True, False], columns=[1, 0], fill_value=0
            )
            expected = stats.fisher_exact(table.to_numpy(), alternative="two-sided").pvalue
            assert lv.p_value == pytest.approx(expected, rel=1e-12)  # scipy
            p_values.append(lv.p_value)
    reject, adjusted, _, _ = multipletests(p_values, alpha=FDR, method="fdr_bh")  # statsmodels
    levels = [lv for s in segments for lv in s.levels]
    assert [lv.p_adjusted for lv in levels] == pytest.approx(list(adjusted), rel=1e-12)
    for lv, rejected in zip(levels, reject, strict=True):
        if rejected:
            assert lv.verdict == ("worse" if lv.loss > lv.rest_loss else "better")
        else:
            assert lv.verdict == "no clear difference"
    # the planted flips make zone "east" worse (the control: a verdict can be reached)
    assert segments[0].levels[0].verdict == "worse"


def test_a_regression_level_is_tested_by_welch_t_on_squared_errors():
    frame = _frame("regression", seed=5)
    segments = _records(frame, _doc("regression"))
    rows = _labelled(frame)
    squared = (rows["y"] - rows["s"]) ** 2
    p_values = []
    for segment in segments:
        assert segment.test == "welch_t"
        for lv in segment.levels:
            inside = (rows[segment.column] == lv.level).to_numpy()
            assert lv.loss == pytest.approx(squared[inside].mean())
            # scipy and statsmodels (two-sided, unequal variances) agree on Welch's test
            p = stats.ttest_ind(squared[inside], squared[~inside], equal_var=False).pvalue
            _, p_sm, _ = sm_ttest_ind(squared[inside], squared[~inside], usevar="unequal")
            assert lv.p_value == pytest.approx(p, rel=1e-10)
            assert lv.p_value == pytest.approx(p_sm, rel=1e-8)
            # the mean absolute error's interval: a percentile bootstrap of the level
            mae = lv.metrics["mae"]
            assert mae.value == pytest.approx(np.abs(rows["y"] - rows["s"])[inside].mean())
            assert mae.low is not None and mae.low <= mae.value <= mae.high
            p_values.append(lv.p_value)
    adjusted = multipletests(p_values, method="fdr_bh")[1]  # statsmodels
    got = [lv.p_adjusted for s in segments for lv in s.levels]
    assert got == pytest.approx(list(adjusted), rel=1e-10)
    assert segments[0].levels[0].verdict == "worse"  # east's wider errors


def test_a_level_without_other_rows_is_not_tested():
    frame = _frame("binary")
    frame["size"] = 20  # one level holding every row
    segments = _records(frame, _doc("binary"))
    (only,) = segments[1].levels
    assert (only.verdict, only.note, only.p_value, only.rest_rows) == (
        "not tested",
        "no other rows",
        None,
        0,
    )


def test_small_levels_keep_their_size_and_lose_every_statistic_in_the_public_view(binary):
    _, segments = binary
    a = json.loads((FIXTURE / "2026.2" / "analysis.json").read_text(encoding="utf-8"))
    a["segments"] = [s.to_dict() for s in segments]
    view = public_view(a)
    levels = {lv.level: lv for lv in view.segments[0].levels}
    tiny, missing = levels["tiny"], levels[MISSING_LEVEL]
    for small in (tiny, missing):
        assert small.rows < MIN_CELL_ROWS
        assert small.verdict == "not shown"
        assert small.note == f"fewer than {MIN_CELL_ROWS} rows"
        assert (small.loss, small.rest_loss, small.p_value, small.p_adjusted) == (None,) * 4
        assert all(e.value is None for k, e in small.metrics.items() if k != "rows")
        assert small.rows == small.metrics["rows"].value  # the size stays
    assert levels["east"].loss is not None and levels["east"].verdict != "not shown"
    # a level with fewer than MIN_CELL_ROWS other rows would give those away too
    a["segments"][1]["levels"][0].update(rows=1195, rest_rows=5)
    big = public_view(a).segments[1].levels[0]
    assert (big.verdict, big.note, big.loss) == ("not shown", "fewer than 10 other rows", None)
    # the page says why, and shows no rate of the small level
    page = build_page(a, json.loads((FIXTURE / "2026.2" / "graph.json").read_text()))
    row = next(line for line in page.markdown.splitlines() if line.startswith("| tiny |"))
    assert row.startswith(f"| tiny | 6 | not shown (fewer than {MIN_CELL_ROWS} rows) |")
    assert row.count("|") == page.markdown.split("### zone")[1].splitlines()[2].count("|")


def test_a_bundle_without_segments_still_reads():
    a = json.loads((FIXTURE / "2026.2" / "analysis.json").read_text(encoding="utf-8"))
    a.pop("segments", None)
    assert Analysis.from_dict(a, "analysis.json:").segments is None
    assert (
        "## Declared segments"
        not in build_page(a, json.loads((FIXTURE / "2026.2" / "graph.json").read_text())).markdown
    )


# -- bad declarations ----------------------------------------------------------------------


def test_a_segment_column_missing_from_the_file_names_the_key_and_the_columns():
    doc = _doc("binary", ["zone", "zones_old"])
    with pytest.raises(DataError) as info:
        prepare_dataset(_frame("binary"), parse_config(doc), source="rows.csv")
    assert str(info.value) == (
        "rows.csv: the column 'zones_old' named in audit.segments is not in the file; its "
        "columns are 'id', 'x1', 'x2', 'zone', 'size', 'y', 's'. Did you mean 'zone'?"
    )


def test_a_segment_column_of_too_many_values_is_refused_with_a_way_out():
    doc = _doc("binary", ["x1"])  # a feature of 1,200 distinct numbers
    with pytest.raises(LimitError) as info:
        prepare_dataset(_frame("binary"), parse_config(doc), source="rows.csv")
    assert str(info.value) == (
        "rows.csv: the column 'x1' named in audit.segments has 1,200 distinct values; a "
        f"segment column may have at most {MAX_SEGMENT_LEVELS} (MAX_SEGMENT_LEVELS): bin it "
        "in the data file (bands of a number, rare values grouped) and name the binned "
        "column in audit.segments."
    )


def test_a_column_of_exactly_the_most_values_is_accepted():
    frame = _frame("binary")
    frame["band"] = np.arange(len(frame)) % MAX_SEGMENT_LEVELS
    doc = _doc("binary", ["band"])
    doc["data"]["exclude"] = ["zone", "size", "band"]
    (segment,) = _records(frame, doc)
    assert len(segment.levels) == MAX_SEGMENT_LEVELS


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ('"zone"', "key 'audit.segments' must be a list of column names; got 'zone'."),
        ("[1, 2]", "key 'audit.segments' must be a list of column names; got [1, 2]."),
        (
            '["zone", "zone"]',
            "'audit.segments' names ['zone'] more than once; list each column once.",
        ),
    ],
    ids=["not-a-list", "not-names", "twice"],
)
def test_a_bad_segments_value_is_refused_by_key(tmp_path, value, expected):
    path = tmp_path / "audit.toml"
    path.write_text(
        'model = "m"\n[data]\npath = "rows.csv"\nid = "id"\ntarget = "y"\n'
        f'[[release]]\nname = "r1"\nscore = "s"\n[audit]\nsegments = {value}\n',
        encoding="utf-8",
    )
    with pytest.raises(ConfigError, match=re.escape(f"{path}: {expected}")):
        load_config(path)


# -- the demo ------------------------------------------------------------------------------


def test_the_demo_declares_its_districts_and_materials_and_counts_them_as_pandas_does(
    fixture_archive,
):
    folder, bundles, _ = fixture_archive
    rows = pd.read_csv(folder / "project" / "meters.csv")
    for release, score in (("2026.1", "score_2026_1"), ("2026.2", "score_2026_2")):
        a = json.loads((bundles[release] / "analysis.json").read_text(encoding="utf-8"))
        assert "district" not in a["provenance"]["features"]  # excluded: not a feature
        error = ((rows[score] >= 0.5).astype(int) != rows["failed_90d"]).astype(int)
        by_column = {s["column"]: s for s in a["segments"]}
        assert [lv["level"] for lv in by_column["district"]["levels"]] == sorted(DISTRICTS)
        assert [lv["level"] for lv in by_column["material"]["levels"]] == list(MATERIALS)
        for column, segment in by_column.items():
            grouped = error.groupby(rows[column]).agg(["size", "mean"])  # pandas
            for lv in segment["levels"]:
                assert lv["rows"] == grouped.loc[lv["level"], "size"]
                assert lv["loss"] == pytest.approx(grouped.loc[lv["level"], "mean"], abs=1e-6)
        page = (bundles[release] / "page.md").read_text(encoding="utf-8")
        assert "## Declared segments" in page and "### district" in page


def test_a_regression_audit_tables_its_segments_in_regression_terms(tmp_path):
    # the whole audit on the regression rows: the page's table leads with the mean absolute
    # error and its bootstrap interval, then the mean squared error that is tested
    from topoaudit.audit.run import run_audit

    frame = _frame("regression", n=600, seed=5)
    frame.to_csv(tmp_path / "rows.csv", index=False)
    doc = _doc("regression", ["zone"])
    doc["data"]["path"] = str(tmp_path / "rows.csv")
    doc["graph"] = {"resamples": 0}
    doc["audit"].update(stability_intervals=[0], stability_overlaps=[0.0], bootstrap_resamples=0)
    audit = run_audit(parse_config(doc))
    (segment,) = audit.analysis.segments
    rows = _labelled(frame)
    squared = (rows["y"] - rows["s"]) ** 2
    page = build_page(audit.analysis, audit.graph).markdown
    table = page.split("### zone")[1].split("\n\n")[1].splitlines()
    assert table[0] == (
        "| value | rows | mean absolute error | 95% interval | mean squared error | mean squared "
        "error of the other rows | adjusted p-value | verdict |"
    )
    east = next(lv for lv in segment.levels if lv.level == "east")
    inside = (rows["zone"] == "east").to_numpy()
    assert table[2].startswith(
        f"| east | {inside.sum()} | {np.abs(rows['y'] - rows['s'])[inside].mean():.3f} | "
        f"{east.metrics['mae'].low:.3f} to {east.metrics['mae'].high:.3f} | "
        f"{squared[inside].mean():.3f} | {squared[~inside].mean():.3f} | "  # pandas
    )
    assert "Welch's t test (two-sided) of the squared errors" in " ".join(page.split())
