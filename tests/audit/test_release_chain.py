"""Three releases, the second validated on a new data file: lineage, fates and drift come
out as planted.

The rows come from the invented meter generator (topoaudit.demo), with what each release
gets wrong planted by construction:

* release r1 on the first file under-scores meters whose battery runs down: a weak
  region;
* release r2 on a second file (another draw, in which most hard-water meters are left
  out: a shifted group) scores them right: the region is fixed; its rows are placed on
  r1's graph;
* release r3 on the second file under-scores the battery meters again: the region
  returns, under the id it had.

The shift is checked against the planted share (the rows of the hard-water flare) and the
statistics of each step against their references in tests/audit/test_lineage.py and
tests/audit/test_drift.py.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from tests.conftest import LIGHT_AUDIT, fixed_build_date
from topoaudit.audit.lineage import follow, load_release
from topoaudit.audit.run import run_audit
from topoaudit.bundle.files import read_members
from topoaudit.cli import _write_bundle
from topoaudit.config import load_config
from topoaudit.demo import FEATURES, make_meters

pytestmark = pytest.mark.xdist_group("release_chain")

CONFIG = """\
model = "meter-failure"
seed = 7

[data]
path = "first.csv"
id = "meter_id"
target = "failed_90d"
features = {features}

[[release]]
name = "r1"
score = "score_r1"

[[release]]
name = "r2"
score = "score_r2"
data = "second.csv"

[[release]]
name = "r3"
score = "score_r3"
data = "second.csv"

[graph]
filter = "pca"
resamples = 4
"""


def _files(folder):
    first = make_meters(2500, random_state=7)
    first = first.rename(columns={"score_2026_1": "score_r1"}).drop(columns="score_2026_2")
    second = make_meters(3200, random_state=8)
    rng = np.random.default_rng(0)
    drop = (second["mechanism"] == "calcification") & (rng.uniform(size=len(second)) < 0.75)
    second = second[~drop].copy()
    second["meter_id"] = "N" + second["meter_id"].str[3:]
    second["score_r3"] = second["score_2026_1"]
    second = second.rename(columns={"score_2026_2": "score_r2"}).drop(columns="score_2026_1")
    first.to_csv(folder / "first.csv", index=False)
    second.to_csv(folder / "second.csv", index=False)
    text = CONFIG.replace("{features}", json.dumps(list(FEATURES)))
    (folder / "audit.toml").write_text(text + LIGHT_AUDIT, encoding="utf-8")
    return first, second


@pytest.fixture(scope="module")
def chain(tmp_path_factory):
    folder = tmp_path_factory.mktemp("chain")
    first, second = _files(folder)
    config = load_config(folder / "audit.toml")
    bundles, previous = {}, None
    with fixed_build_date():
        for release in ("r1", "r2", "r3"):
            audit = run_audit(config, release=release, previous=previous)
            bundles[release] = folder / release
            _write_bundle(audit, bundles[release])
            previous = bundles[release]
    return first, second, bundles


def _mostly(rel, frame, mechanism: str) -> list[str]:
    """The weak regions of ``rel`` whose rows are mostly of the generator's ``mechanism``."""
    mech = frame.set_index("meter_id").loc[rel.ids, "mechanism"].to_numpy()
    return [w for w, m in rel.weak.items() if (mech[m] == mechanism).mean() > 0.5]


def test_a_region_fixed_on_new_data_returns_under_its_id(chain):
    first, second, bundles = chain
    releases = [load_release(bundles[r]) for r in ("r1", "r2", "r3")]
    lineage = follow(releases)
    battery = _mostly(releases[0], first, "battery")
    assert battery, "r1's weak regions should include the battery meters"
    ids = {lineage.tracked_id("r1", w) for w in battery}
    assert not _mostly(releases[1], second, "battery")  # r2 scores them right
    s2 = lineage.step_to("r2")
    assert not s2.same_rows and s2.placed
    fates = {f.tracked: f.fate for f in s2.fates}
    assert all(fates[t] == "fixed" for t in ids)
    s3 = lineage.step_to("r3")
    assert s3.same_rows
    (again,) = _mostly(releases[2], second, "battery")
    assert lineage.tracked_id("r3", again) in ids  # the id it had in r1
    origin = next(o for o in s3.origins if o.after_id == again)
    assert origin.origin == "returned"


def test_the_second_file_is_placed_and_the_left_out_group_shows_as_drift(chain):
    first, second, bundles = chain
    members = read_members(bundles["r2"])
    assert members["placed_on"].isin(first["meter_id"]).all()
    r1 = load_release(bundles["r1"])
    drift = load_release(bundles["r2"]).analysis.drift
    assert drift.previous == "r1"
    assert (drift.rows_before, drift.rows_after) == (len(first), len(second))
    # the hard-water flare: the regions where r1's calcification meters live
    mech = first.set_index("meter_id").loc[r1.ids, "mechanism"].to_numpy()
    region = read_members(bundles["r1"], ["region"])["region"].to_numpy()
    flare = {
        int(r)
        for r in np.unique(region[mech == "calcification"])
        if (mech[region == r] == "calcification").mean() > 0.5
    }
    assert flare
    by = {s.part: s for s in drift.regions}
    for r in flare:  # planted: three quarters of those meters left out
        assert by[r].share_after < by[r].share_before and by[r].p_adjusted <= 0.05
    # the shares of each side add up to one
    assert sum(s.share_before for s in drift.regions) == pytest.approx(1.0)
    assert sum(s.share_after for s in drift.regions) == pytest.approx(1.0)


def test_placing_the_first_files_own_rows_reproduces_the_graph(chain):
    _first, _second, bundles = chain
    # an audit of r1's rows placed on r1's own graph: every row stands on itself
    from topoaudit.audit.newdata import place_on_previous
    from topoaudit.audit.run import prepare, shown_graph
    from topoaudit.data import load_dataset

    config = load_config(bundles["r1"].parent / "audit.toml")
    ds = load_dataset(config, "r1")
    placed = place_on_previous(config, ds, bundles["r1"], prepare, shown_graph)
    np.testing.assert_array_equal(placed.placed_on, ds.ids.astype(str))
    nodes = read_members(bundles["r1"], ["nodes"])["nodes"]
    got = [placed.placement.nodes_of(r).tolist() for r in range(ds.n_rows)]
    assert got == [list(v) for v in nodes]
    assert all(s.p_value == pytest.approx(1.0) for s in placed.regions)


def test_the_release_page_shows_the_shift_region_by_region(chain):
    _first, _second, bundles = chain
    page = (bundles["r2"] / "page.md").read_text(encoding="utf-8")
    assert "## Population shift since release r1" in page
    drift = load_release(bundles["r2"]).analysis.drift
    for s in drift.regions:
        row = next(line for line in page.splitlines() if line.startswith(f"| region {s.part} |"))
        if s.rows_before >= 10 and s.rows_after >= 10:
            assert f"{(s.share_after - s.share_before) * 100:+.1f}" in row
    assert "## Population shift" not in (bundles["r3"] / "page.md").read_text(encoding="utf-8")
