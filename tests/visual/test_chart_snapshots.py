"""Every view of the fixture analysis against its committed spec snapshot and PNG
baseline; and proof that the comparisons catch the regressions they exist for."""

from __future__ import annotations

import copy
import json

import pytest
import vl_convert as vlc

from tests.visual.compare import changed_share, check_image, check_spec

CHARTS = [
    ("2026.2", n)
    for n in ("graph", "regions", "calibration", "stability", "local_models", "comparison")
]


def _spec(fixture_pages, release, name):
    return fixture_pages[release].charts[name]


def _png(spec) -> bytes:
    return vlc.vegalite_to_png(json.dumps(spec), scale=1)


@pytest.mark.parametrize(("release", "name"), CHARTS, ids=[n for _, n in CHARTS])
def test_chart_spec_matches_its_snapshot(fixture_pages, release, name):
    check_spec(name, _spec(fixture_pages, release, name))


@pytest.mark.parametrize(("release", "name"), CHARTS, ids=[n for _, n in CHARTS])
def test_chart_image_matches_its_baseline(fixture_pages, release, name):
    check_image("charts", name, _png(_spec(fixture_pages, release, name)))


def test_rendering_twice_changes_no_pixel(fixture_pages):
    from io import BytesIO

    from PIL import Image

    spec = _spec(fixture_pages, "2026.2", "graph")
    a, b = Image.open(BytesIO(_png(spec))), Image.open(BytesIO(_png(spec)))
    assert changed_share(a, b) == 0.0


def _points_layer(spec):
    return next(layer for layer in spec["layer"] if layer["mark"]["type"] == "circle")


def _mutations():
    def colour_scale(spec):
        _points_layer(spec)["encoding"]["color"]["scale"]["range"] = [
            "#440154",
            "#3b528b",
            "#21918c",
            "#5ec962",
            "#fde725",
        ]

    def drop_outline(spec):
        spec["layer"] = [layer for layer in spec["layer"] if layer["mark"]["type"] != "point"]

    def rename_axis(spec):
        for layer in spec["layer"]:
            x = layer.get("encoding", {}).get("x", {})
            if x.get("title"):
                x["title"] = "error"

    return [("graph", colour_scale), ("graph", drop_outline), ("regions", rename_axis)]


@pytest.mark.parametrize(
    ("name", "mutate"),
    _mutations(),
    ids=["colour_scale_changed", "weak_outline_dropped", "axis_renamed"],
)
def test_an_altered_view_fails_both_comparisons(fixture_pages, name, mutate, tmp_path, monkeypatch):
    monkeypatch.setattr("tests.visual.compare.FAILURES", tmp_path)
    spec = copy.deepcopy(_spec(fixture_pages, "2026.2", name))
    mutate(spec)
    with pytest.raises(AssertionError, match=f"spec of {name} differs"):
        check_spec(name, spec)
    with pytest.raises(AssertionError, match=r"of pixels changed.*written to"):
        check_image("charts", name, _png(spec))
    assert (tmp_path / "charts" / f"{name}.actual.png").exists()
