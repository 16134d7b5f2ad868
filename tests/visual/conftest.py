"""Fixtures of the visual suite: the committed fixture analyses and their pages."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from topoaudit.report.page import build_page

FIXTURE = Path(__file__).parent / "fixture"
RELEASES = ("2026.1", "2026.2")


@pytest.fixture(scope="session")
def fixture_pages():
    """release -> Page built from the committed fixture bundle."""
    out = {}
    for release in RELEASES:
        a = json.loads((FIXTURE / release / "analysis.json").read_text(encoding="utf-8"))
        g = json.loads((FIXTURE / release / "graph.json").read_text(encoding="utf-8"))
        out[release] = build_page(a, g)
    return out
