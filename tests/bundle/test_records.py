"""The typed records of a bundle: a stored bundle reads back to the same bytes, and a
renamed, missing or mistyped key fails when the bundle is read, naming the file and the
key. Strict reading of a versioned schema is common practice, no source."""

from __future__ import annotations

import json
import shutil

import pytest

from topoaudit.bundle.files import (
    ANALYSIS,
    GRAPH,
    canonical_json,
    read_analysis,
    read_graph,
)
from topoaudit.bundle.records import SCHEMA, Analysis, HalfEstimate, WeakRegion
from topoaudit.errors import BundleError


@pytest.mark.parametrize("release", ["2026.1", "2026.2"])
def test_a_stored_bundle_reads_back_to_the_same_bytes(fixture_archive, release):
    bundle = fixture_archive[1][release]
    analysis, graph = read_analysis(bundle), read_graph(bundle)
    assert isinstance(analysis, Analysis)
    assert canonical_json(analysis) == (bundle / ANALYSIS).read_text(encoding="utf-8")
    assert canonical_json(graph) == (bundle / GRAPH).read_text(encoding="utf-8")
    assert all(isinstance(w, WeakRegion) for w in analysis.weak_regions)
    assert analysis.weak_regions, "the demo has a weak region to read"


def _edited(fixture_archive, tmp_path, edit):
    bundle = tmp_path / "bundle"
    shutil.copytree(fixture_archive[1]["2026.2"], bundle)
    doc = json.loads((bundle / ANALYSIS).read_text(encoding="utf-8"))
    edit(doc)
    (bundle / ANALYSIS).write_text(json.dumps(doc), encoding="utf-8")
    return bundle


def test_a_renamed_key_is_refused_with_the_file_and_the_key_path(fixture_archive, tmp_path):
    def rename(doc):
        doc["weak_regions"][0]["local_model"]["loss"] = doc["weak_regions"][0]["local_model"].pop(
            "local_loss"
        )

    bundle = _edited(fixture_archive, tmp_path, rename)
    with pytest.raises(BundleError) as err:
        read_analysis(bundle)
    text = str(err.value)
    assert str(bundle / ANALYSIS) in text
    assert "weak_regions[0].local_model: unknown key 'loss'" in text
    assert "local_loss" in text  # what a record of this kind holds


def test_a_missing_key_and_a_wrong_kind_are_named(fixture_archive, tmp_path):
    bundle = _edited(fixture_archive, tmp_path, lambda d: d["provenance"].pop("seed"))
    with pytest.raises(BundleError, match=r"provenance: missing key 'seed'"):
        read_analysis(bundle)
    bundle2 = _edited(
        fixture_archive, tmp_path / "two", lambda d: d["summary"].update(weak_regions="one")
    )
    with pytest.raises(BundleError, match=r"summary.weak_regions: expected a whole number"):
        read_analysis(bundle2)


def test_another_schema_is_refused_with_both_versions(fixture_archive, tmp_path):
    bundle = _edited(fixture_archive, tmp_path, lambda d: d.update(schema=SCHEMA + 1))
    with pytest.raises(BundleError, match=rf"schema {SCHEMA + 1}; this topoaudit reads schema"):
        read_analysis(bundle)


def test_a_half_estimate_derives_its_rates():
    h = HalfEstimate.of(40, 18.0, 4.0)
    assert (h.observed_rate, h.expected_rate, h.ratio) == (0.45, 0.1, 4.5)
    empty = HalfEstimate.of(0, 0.0, 0.0)
    assert all(v != v for v in (empty.observed_rate, empty.expected_rate, empty.ratio))
