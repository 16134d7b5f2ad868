"""A region found along one direction across the features: the page gives the direction
and the band its rows fill (wording rules: correct plurals, every number labelled; common
practice, no source)."""

from __future__ import annotations

import copy
import json
from pathlib import Path

from topoaudit.report.page import build_page
from topoaudit.report.text import escape

FIXTURE = Path(__file__).parents[1] / "visual" / "fixture" / "2026.2"


def _fixture() -> tuple[dict, dict]:
    a = json.loads((FIXTURE / "analysis.json").read_text(encoding="utf-8"))
    g = json.loads((FIXTURE / "graph.json").read_text(encoding="utf-8"))
    return a, g


def test_the_band_of_a_region_found_along_a_direction_is_in_words():
    a, g = _fixture()
    described = [w for w in a["weak_regions"] if w.get("description")]
    assert described, "the fixture has no described weak region"
    names = [c["feature"] for c in described[0]["description"]["contrasts"]][:3]
    assert len(names) == 3
    band = {
        "terms": [
            {"feature": names[0], "weight": -0.62},
            {"feature": names[1], "weight": 0.55},
            {"feature": names[2], "weight": -0.4},
        ],
        "low": -0.118,
        "high": 0.347,
    }
    with_band = copy.deepcopy(a)
    with_band["weak_regions"][a["weak_regions"].index(described[0])]["description"]["band"] = band
    text = " ".join(build_page(with_band, g).markdown.split())
    expected = (
        f"Along the direction it was found on, -0.62 × {escape(names[0])} + 0.55 × "
        f"{escape(names[1])} - 0.40 × {escape(names[2])} (each feature standardised: value "
        "minus mean, over standard deviation), its rows lie between -0.12 and 0.35 (5th to "
        "95th percentile): a band across 3 features,"
    )
    assert expected in text
    assert "Along the direction it was found on" not in " ".join(build_page(a, g).markdown.split())


def test_a_band_along_one_feature_says_feature_in_the_singular():
    a, g = _fixture()
    w = next(w for w in a["weak_regions"] if w.get("description"))
    name = w["description"]["contrasts"][0]["feature"]
    w["description"]["band"] = {
        "terms": [{"feature": name, "weight": 1.0}],
        "low": 0.1,
        "high": 0.3,
    }
    text = " ".join(build_page(a, g).markdown.split())
    assert f"1.00 × {escape(name)} (each feature" in text
    assert "a band across 1 feature," in text
