"""The model's history page: trends across releases and the weak regions followed.

Checked against the bundles themselves: the trend points are each release's overall
estimates, the status counts are the lineage's fates and origins recounted with pandas.
"""

from __future__ import annotations

import pandas as pd

from topoaudit.audit.lineage import follow, load_release
from topoaudit.report.archive import list_releases
from topoaudit.report.history import _status_counts, history_charts, history_page


def _lineage(archive):
    rels = list_releases(archive, "meter-failure")
    return rels, follow([load_release(r.folder) for r in reversed(rels)])


def test_history_charts_hold_each_releases_estimates_and_the_region_statuses(fixture_archive):
    _folder, _bundles, archive = fixture_archive
    rels, lineage = _lineage(archive)
    analyses = [r.analysis for r in reversed(rels)]
    charts = history_charts(lineage, analyses)
    assert set(charts) == {"trend_error_rate", "trend_ece", "region_status"}
    values = charts["trend_error_rate"][1]["datasets"]
    (points,) = [v for v in values.values() if v and "release" in v[0]]
    assert [p["release"] for p in points] == ["2026.1", "2026.2"]
    for p, a in zip(points, analyses, strict=True):
        est = a.overall["error_rate"]
        assert (p["value"], p["low"], p["high"]) == (est.value, est.low, est.high)
    counts = _status_counts(lineage)
    step = lineage.step_to("2026.2")
    origins = pd.Series([o.origin for o in step.origins]).value_counts()
    got = counts[counts.release == "2026.2"].set_index("status")["regions"]
    assert got.get("introduced", 0) == origins.get("introduced", 0)
    assert got.get("fixed since the release before", 0) == sum(
        f.fate == "fixed" for f in step.fates
    )
    first = counts[counts.release == "2026.1"].set_index("status")["regions"]
    assert first["in the first audit"] == len(rels[-1].analysis.weak_regions)


def test_the_lineage_table_names_every_tracked_region_once(fixture_archive):
    _folder, _bundles, archive = fixture_archive
    _rels, lineage = _lineage(archive)
    text = history_page("meter-failure", ["(release table)"], lineage, {})
    rows = [line for line in text.splitlines() if line.startswith("| T")]
    assert [r.split(" | ")[0][2:] for r in rows] == sorted(
        lineage.tracked, key=lambda t: int(t[1:])
    )
    assert "## Cautions" in text and "Not a fairness certification" in text
