"""The built site holds aggregates only, and the graph view draws a bounded number of nodes.

A real audit of invented meter readings with distinctive ids (``MTR-`` and 12 random hex
digits) and distinctive values (every feature and score carries 8 decimals) is built
into a site; then every file of the site (HTML, specs, SVG, JavaScript, the search index,
the sitemap) is scanned for any id and for the raw values:

* every row's value in full (its repr, and 8 to 12 decimals), which no aggregate has;
* for a few planted odd meters, whose readings are far from every other row (a stuck
  register reading thousands of litres a day), every rounding that keeps 5 or more
  significant digits. They sit in graph nodes of their own, where a "mean" of one row
  is the row's value. The roundings of all rows are not checked: with 1,500 rows, some
  row's 5- or 6-digit rounding matches one of the site's many aggregates by chance.

Small-cell suppression (``MIN_CELL_ROWS``) is then checked on the specs themselves.
"""

from __future__ import annotations

import gzip
import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tests.conftest import audit_and_publish, fixed_build_date, light
from topoaudit import limits
from topoaudit.demo import DEMO_CONFIG, FEATURES, make_meters
from topoaudit.report.page import MIN_CELL_ROWS, build_page, drawn_graph
from topoaudit.report.site import build_site

ROWS = 1500
SCORES = ("score_2026_1", "score_2026_2")
FIXTURE = Path(__file__).parent.parent / "visual" / "fixture" / "2026.2"
#: planted odd meters: (daily flow in litres, score of 2026.1, score of 2026.2, failed)
PLANTED = [
    (4000.12345678, 0.81372641, 0.64829173, 1),
    (5600.87654321, 0.37264918, 0.29183746, 0),
    (7300.24681357, 0.55318642, 0.91827364, 1),
]
NUMBER = re.compile(r"-?\d+(?:\.\d+)?")
HEX_RUN = re.compile(r"[0-9a-f]{12,}")


def _meters() -> pd.DataFrame:
    f = make_meters(ROWS, random_state=11)
    rng = np.random.default_rng(20260101)
    ids: set[str] = set()
    while len(ids) < ROWS:
        ids.add(f"{int(rng.integers(0, 16**12)):012x}")
    f["meter_id"] = [f"MTR-{h}" for h in rng.permutation(sorted(ids))]
    n = len(f)
    for col in FEATURES:
        f[col] = np.round(f[col].to_numpy() + rng.uniform(1e-7, 9e-7, n), 8)
    for col in SCORES:
        f[col] = np.round(
            np.clip(f[col].to_numpy(), 1e-4, 1 - 1e-4) + rng.uniform(1e-8, 9e-8, n), 8
        )
    for i, (flow, s1, s2, failed) in enumerate(PLANTED):
        f.loc[i, ["daily_flow_l", *SCORES, "failed_90d"]] = [flow, s1, s2, failed]
    return f


def _forbidden(frame: pd.DataFrame) -> set[str]:
    values = frame[[*FEATURES, *SCORES]]
    out = set()
    for v in values.to_numpy(dtype=float).ravel():
        out.add(repr(float(v)))
        out.update(f"{v:.{d}f}" for d in range(8, 13))
    for v in values.iloc[: len(PLANTED)].to_numpy(dtype=float).ravel():
        for d in range(13):
            text = f"{v:.{d}f}"
            if len(text.replace("-", "").replace(".", "").lstrip("0")) >= 5:
                out.add(text)
    return out


@pytest.fixture(scope="module")
def leak_site(tmp_path_factory):
    with fixed_build_date():
        root = tmp_path_factory.mktemp("leak")
        project = root / "project"
        project.mkdir()
        frame = _meters()
        frame.to_csv(project / "meters.csv", index=False)
        (project / "audit.toml").write_text(light(DEMO_CONFIG), encoding="utf-8")
        bundles, archive = audit_and_publish(project / "audit.toml", root)
        site = build_site(archive, root / "site")
        yield frame, bundles, site


def _site_texts(site: Path):
    for path in sorted(p for p in site.rglob("*") if p.is_file()):
        data = path.read_bytes()
        if path.suffix == ".gz":
            data = gzip.decompress(data)
        yield path.relative_to(site), data.decode("utf-8", errors="replace")


def test_the_planted_meters_sit_in_small_nodes(leak_site):
    _, bundles, _ = leak_site
    for bundle in bundles.values():
        graph = json.loads((bundle / "graph.json").read_text(encoding="utf-8"))
        assert any(n["rows"] < MIN_CELL_ROWS for n in graph["nodes"]), "no small node to hide"


def test_no_file_of_the_site_holds_an_id_or_a_raw_value(leak_site):
    frame, _, site = leak_site
    ids = set(frame["meter_id"])
    hex_parts = {i.removeprefix("MTR-") for i in ids}
    forbidden = _forbidden(frame)
    found = []
    scanned = 0
    for name, text in _site_texts(site):
        scanned += 1
        found += [(name, m) for m in re.findall(r"MTR-[0-9a-fA-F]+", text)]
        for run in HEX_RUN.findall(text):
            found += [
                (name, run[i : i + 12])
                for i in range(len(run) - 11)
                if run[i : i + 12] in hex_parts
            ]
        found += [(name, t) for t in set(NUMBER.findall(text)) & forbidden]
    assert scanned > 20
    assert found == [], f"row-level values in the site: {sorted(found)[:20]}"


def test_small_cells_show_no_statistic_in_any_chart(leak_site):
    _, _, site = leak_site
    specs = sorted(site.rglob("charts/*.vl.json"))
    assert any(p.name == "graph.vl.json" for p in specs)
    shown_nodes = 0
    for path in specs:
        spec = json.loads(path.read_text(encoding="utf-8"))
        for rows in spec.get("datasets", {}).values():
            for datum in rows:
                if path.name == "graph.vl.json" and "node" in datum:
                    stats = [datum[k] for k in ("loss", "expected_loss", "excess", "mean_score")]
                    if any(s is not None for s in stats):
                        assert datum["rows"] >= MIN_CELL_ROWS, (path, datum)
                        shown_nodes += 1
                if path.name == "calibration.vl.json" and "mean_score" in datum:
                    assert datum["rows"] >= MIN_CELL_ROWS, (path, datum)
    assert shown_nodes > 0, "the graph view lost the statistics of its large nodes"


def test_small_regions_show_their_size_only(leak_site):
    _, bundles, _ = leak_site
    for bundle in bundles.values():
        a = json.loads((bundle / "analysis.json").read_text(encoding="utf-8"))
        page = (bundle / "page.md").read_text(encoding="utf-8")
        for r in a["regions"]:
            row = re.search(rf"^\| {r['id']} \| [\d,]+ \| \d+ \| (.*)$", page, flags=re.M)
            assert row is not None
            assert row.group(1).startswith("not shown") == (r["rows"] < MIN_CELL_ROWS)


# A one-row node, and the graph view's node limit, on synthetic graphs.


def _fixture() -> tuple[dict, dict]:
    a = json.loads((FIXTURE / "analysis.json").read_text(encoding="utf-8"))
    g = json.loads((FIXTURE / "graph.json").read_text(encoding="utf-8"))
    return a, g


def _node(i: int, rows: int, weak: list[str] | None = None, score: float = 0.25) -> dict:
    return {
        "id": i,
        "rows": rows,
        "region": 1 + i % 3,
        "filter": i / 100,
        "loss": 0.2,
        "expected_loss": score,
        "mean_score": score,
        "positive_rate": 0.2,
        "weak_regions": weak or [],
    }


def _graph(nodes: list[dict], links: list[dict]) -> dict:
    """A graph.json of these nodes and links (settings as in the fixture)."""
    settings = json.loads((FIXTURE / "graph.json").read_text(encoding="utf-8"))["settings"]
    return {
        "n_rows": sum(n["rows"] for n in nodes),
        "settings": settings,
        "nodes": nodes,
        "links": links,
    }


def _graph_spec_nodes(page) -> list[dict]:
    data = page.charts["graph"]["datasets"].values()
    return next(rows for rows in data if rows and "node" in rows[0])


def test_a_one_row_node_shows_its_size_but_not_its_score():
    a, _ = _fixture()
    g = _graph(
        [_node(0, 400, score=0.2), _node(1, 1, score=0.87654321)],
        [{"source": 0, "target": 1, "shared": 1, "jaccard": 0.002}],
    )
    page = build_page(a, g)
    text = json.dumps(page.charts["graph"])
    assert "0.876543" not in text and "0.87654" not in page.markdown
    small = next(n for n in _graph_spec_nodes(page) if n["node"] == 1)
    assert small["rows"] == 1 and small["mean_score"] is None and small["loss"] is None
    assert "1 node holds fewer than 10 rows" in page.markdown
    assert any("grey" in s for s in page.charts["graph"]["title"]["subtitle"])


def _big_graph(n: int, weak: set[int]) -> dict:
    rng = np.random.default_rng(3)
    rows = rng.integers(1, 500, n)
    nodes = [_node(i, int(rows[i]), ["W1"] if i in weak else None) for i in range(n)]
    links = [{"source": i, "target": i + 1, "shared": 1, "jaccard": 0.1} for i in range(n - 1)]
    links += [{"source": i, "target": (i * 7) % n, "shared": 1, "jaccard": 0.1} for i in range(n)]
    links = [e for e in links if e["source"] != e["target"]]
    return _graph(nodes, links)


def test_the_graph_view_draws_at_most_the_limit_and_says_so(monkeypatch):
    monkeypatch.setattr(limits, "MAX_NODES_DRAWN", 40)
    weak = {3, 50, 77, 101, 119}  # small and large nodes of a weak region
    g = _big_graph(120, weak)
    for i in (3, 50):
        g["nodes"][i]["rows"] = 2
    a, _ = _fixture()
    page = build_page(a, g)
    drawn = {n["node"] for n in _graph_spec_nodes(page)}
    assert len(drawn) == 40
    assert weak <= drawn
    others = sorted((n for n in g["nodes"] if n["id"] not in weak), key=lambda n: -n["rows"])
    assert {n["id"] for n in others[:35]} <= drawn
    assert min(n["rows"] for n in others[:35]) >= max(n["rows"] for n in others[35:])
    expected_edges = sum(e["source"] in drawn and e["target"] in drawn for e in g["links"])
    edges = next(r for r in page.charts["graph"]["datasets"].values() if r and "x2" in r[0])
    assert len(edges) == expected_edges
    assert "**The drawing shows 40 of 120 nodes**" in page.markdown
    assert "showing 40 of 120 nodes" in " ".join(page.charts["graph"]["title"]["subtitle"])


def test_a_graph_within_the_limit_is_drawn_whole_without_a_note(monkeypatch):
    monkeypatch.setattr(limits, "MAX_NODES_DRAWN", 120)
    g = _big_graph(120, {5})
    assert drawn_graph(g) is g
    page = build_page(_fixture()[0], g)
    assert len(_graph_spec_nodes(page)) == 120
    assert "The drawing shows" not in page.markdown


def test_weak_nodes_past_the_limit_are_kept_largest_first(monkeypatch):
    monkeypatch.setattr(limits, "MAX_NODES_DRAWN", 10)
    g = _big_graph(60, set(range(30)))
    kept = drawn_graph(g)
    assert len(kept["nodes"]) == 10
    weak_rows = sorted((n["rows"] for n in g["nodes"][:30]), reverse=True)
    assert sorted((n["rows"] for n in kept["nodes"]), reverse=True) == weak_rows[:10]


def test_row_ids_appear_only_when_asked_for_and_only_in_the_row_lists(fixture_archive, tmp_path):
    _, bundles, archive = fixture_archive
    plain = build_site(archive, tmp_path / "plain")
    assert not [p for p in plain.rglob("*") if re.search(r"WM-\d{6}", p.name)]
    assert not [n for n, t in _site_texts(plain) if re.search(r"WM-\d{6}", t)]
    site = build_site(archive, tmp_path / "with-ids", row_ids=True)
    holders = sorted(str(n) for n, t in _site_texts(site) if re.search(r"WM-\d{6}", t))
    assert holders == [f"meter-failure/{r}/weak-region-rows.csv" for r in ("2026.1", "2026.2")]
    for release, bundle in bundles.items():
        members = pd.read_parquet(bundle / "members.parquet")
        expected = set(members["id"][members["weak_regions"].map(len) > 0])
        listed = pd.read_csv(site / "meter-failure" / release / "weak-region-rows.csv")
        assert set(listed["id"]) == expected and len(expected) > 0
        page = (site / "meter-failure" / release / "index.html").read_text(encoding="utf-8")
        assert "row-level data, opted in" in page and "data policy" in page


def test_row_lists_cannot_carry_a_spreadsheet_formula():
    # OWASP, "CSV Injection": cells starting with = + - @ are read as formulas.
    from topoaudit.report.site import _csv_cell

    assert _csv_cell('=HYPERLINK("x")') == '\'=HYPERLINK("x")'
    assert _csv_cell("@SUM(A1)") == "'@SUM(A1)"
    assert _csv_cell("WM-000001") == "WM-000001"
