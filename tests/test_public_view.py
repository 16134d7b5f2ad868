"""No statistic of a cell of fewer than MIN_CELL_ROWS rows leaves a bundle.

Small-cell suppression (common practice in statistical disclosure control, no source):
each output path (the release page and its chart specs, the pull-request diff) is fed an
audit whose node, region, calibration bin, weak region, halves, comparison region,
candidate and feature of the shape hold fewer than 10 rows and carry marker values; no
marker may appear in any output, while the same markers in large cells do appear.
"""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest

from topoaudit.audit.changes import release_changes
from topoaudit.bundle import MIN_CELL_ROWS, public_graph, public_view
from topoaudit.bundle.records import Estimate
from topoaudit.config import parse_config
from topoaudit.errors import ConfigError
from topoaudit.report.diff import diff_markdown
from topoaudit.report.page import build_page

FIXTURE = Path(__file__).parent / "visual" / "fixture"
MARK = 0.987654  # shows as 0.988, 0.99, 98.8, 98.77 or 0.987654 wherever it is printed
SHOWN = ("0.988", "0.99", "98.8", "98.77", "0.9877", "0.987654", "+0.988", "+0.99")


def _load(release: str) -> tuple[dict, dict]:
    folder = FIXTURE / release
    return (
        json.loads((folder / "analysis.json").read_text()),
        json.loads((folder / "graph.json").read_text()),
    )


def _plant(a: dict, g: dict, rows: int) -> None:
    """Give one cell of every kind ``rows`` rows and the marker value."""
    region = a["regions"][0]
    region["rows"] = rows
    region["metrics"]["error_rate"]["value"] = MARK
    region["calibration"][0].update(rows=rows, observed_rate=MARK)
    w = a["weak_regions"][0]
    w.update(rows=rows, effect=MARK)
    w["confirmation"].update(rows=rows, ratio=MARK, observed_rate=MARK)
    w["discovery"].update(rows=rows, ratio=MARK, observed_rate=MARK)
    w["metrics"]["error_rate"]["value"] = MARK
    w["confirmation_error_rate"]["value"] = MARK
    a["outcomes"]["thresholds"][-1].update(flagged=rows, precision=MARK)
    w["description"]["contrasts"][0]["region_mean"] = MARK
    a["comparison"]["regions"][0].update(rows=rows, before=MARK, after=MARK)
    c = a["candidates"][0]
    c["confirmation"].update(rows=rows, ratio=MARK, observed_rate=MARK)
    feature = a["graph"]["shape"]["features"][1]
    feature["rows"] = rows
    feature["columns"] = [{"column": "pressure_bar", "smd": MARK, "direction": "higher"}]
    node = g["nodes"][0]
    node.update(rows=rows, loss=MARK, mean_score=MARK, expected_loss=MARK)
    level = a["segments"][0]["levels"][0]
    level.update(rows=rows, loss=MARK, rest_loss=MARK)
    level["metrics"]["error_rate"]["value"] = MARK


def _leaks(text: str) -> list[str]:
    return [s for s in SHOWN if re.search(rf"(?<![\d.]){re.escape(s)}(?!\d)", text)]


def test_the_view_blanks_every_statistic_of_a_small_cell_and_keeps_its_size():
    a, g = _load("2026.2")
    _plant(a, g, 7)
    view, graph = public_view(a), public_graph(g)
    assert view.regions[0].rows == 7
    assert view.regions[0].metrics["error_rate"] == Estimate(value=None, low=None, high=None)
    assert view.weak_regions[0].description is None
    assert view.weak_regions[0].effect is None
    assert view.comparison is not None and view.comparison.regions[0].before is None
    assert graph.nodes[0].loss is None and graph.nodes[0].rows == 7
    assert a["regions"][0]["metrics"]["error_rate"]["value"] == MARK  # input unchanged


@pytest.mark.parametrize("rows", [1, MIN_CELL_ROWS - 1], ids=["one-row", "nine-rows"])
def test_no_statistic_of_a_small_cell_reaches_the_page_or_its_charts(rows):
    a, g = _load("2026.2")
    _plant(a, g, rows)
    page = build_page(a, g)
    assert _leaks(page.markdown + json.dumps(page.charts)) == []


def test_the_same_markers_in_large_cells_do_reach_the_page():
    # the control: the test would see a leak
    a, g = _load("2026.2")
    _plant(a, g, 500)
    page = build_page(a, g)
    assert _leaks(page.markdown + json.dumps(page.charts))


def test_no_statistic_of_a_small_weak_region_reaches_the_diff(tmp_path):
    before, after = tmp_path / "2026.1", tmp_path / "2026.2"
    shutil.copytree(FIXTURE / "2026.1", before)
    shutil.copytree(FIXTURE / "2026.2", after)
    a = json.loads((after / "analysis.json").read_text())
    a["weak_regions"][0]["rows"] = 6
    a["weak_regions"][0]["confirmation"].update(rows=6, ratio=MARK)
    a["weak_regions"][0]["p_adjusted"] = 0.0123456
    (after / "analysis.json").write_text(json.dumps(a))
    text = diff_markdown(release_changes(before, after))
    assert _leaks(text) == []
    assert "1.2e-02" not in text
    assert f"statistics not shown (fewer than {MIN_CELL_ROWS} rows)" in text


def test_min_rows_below_the_cell_size_is_refused():
    doc = {
        "model": "m",
        "data": {"path": "d.csv", "id": "i", "target": "t"},
        "release": [{"name": "r1", "score": "s"}],
        "audit": {"min_rows": 1},
    }
    with pytest.raises(
        ConfigError, match=re.escape("key 'audit.min_rows' must be an int in the range [10, inf)")
    ):
        parse_config(doc)
