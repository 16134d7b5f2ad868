"""The audit end to end: a CSV and a config in, a deterministic bundle out."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import roc_auc_score
from statsmodels.stats.proportion import proportion_confint

from reference_checks.planted_pockets import simulate
from topoaudit.audit import run as run_module
from topoaudit.audit.run import executor_spec, run_audit
from topoaudit.bundle.files import canonical_json
from topoaudit.bundle.records import Analysis
from topoaudit.cli import main
from topoaudit.config import load_config, parse_config

CONFIG = """
model = "sim-model"
seed = 3

[data]
path = "rows.csv"
id = "row_id"
target = "outcome"
categorical = {{ site = "onehot" }}

[[release]]
name = "1.0"
score = "score_old"

[[release]]
name = "1.1"
score = "score_new"

[audit]
bootstrap_resamples = {resamples}
stability_intervals = [0, 2]
stability_overlaps = [0.0]
"""


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    folder = tmp_path_factory.mktemp("audit")
    sim = simulate("island", 4_000, n_features=6, seed=2)
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(sim.X, columns=[f"f{i}" for i in range(6)])
    frame.insert(0, "row_id", [f"R{i:05d}" for i in range(sim.y.size)])
    frame["site"] = rng.choice(["north", "south"], sim.y.size)
    frame["outcome"] = sim.y
    frame["score_new"] = sim.score
    frame["score_old"] = np.clip(sim.score + rng.normal(0, 0.08, sim.y.size), 0, 1)
    frame.to_csv(folder / "rows.csv", index=False)
    (folder / "audit.toml").write_text(CONFIG.format(resamples=1), encoding="utf-8")
    return folder, sim


@pytest.fixture(scope="module")
def audit(project):
    folder, _ = project
    return run_audit(load_config(folder / "audit.toml"))


def test_the_region_table_covers_every_row_once(audit, project):
    r = audit.analysis
    assert sum(reg.rows for reg in r.regions) == r.provenance.rows == 4_000
    assert audit.members["region"].isin([reg.id for reg in r.regions]).all()


def test_the_island_pocket_is_a_confirmed_weak_region(audit, project):
    _, sim = project
    r = audit.analysis
    assert r.weak_regions, "no weak region confirmed"
    w = r.weak_regions[0]
    in_w1 = audit.members["weak_regions"].map(lambda regions: "W1" in regions)
    rows = audit.members.loc[in_w1, "id"].str[1:].astype(int).to_numpy()
    inter = int(sim.pocket[rows].sum())
    assert inter / (rows.size + sim.pocket.sum() - inter) >= 0.5
    assert w.confirmed and w.p_adjusted <= 0.05
    assert w.confirmation.rows >= 30
    assert w.description.rule.text != "no rule"
    assert w.local_model.verdict in ("local model better", "recalibration enough", "no clear gain")
    assert w.local_model.recalibration == "Platt scaling" and w.local_model.model == "logistic"
    assert 0.0 <= w.stability <= 1.0


def test_each_finding_says_which_graph_it_came_from(audit):
    graphs = {s.name for s in audit.analysis.search}
    # the set-aside graph is built only when its features differ from the error-aware's
    assert {"features", "error_aware", "slab"} <= graphs
    assert graphs <= {"features", "error_aware", "slab", "set_aside"}
    assert all(c.graph in graphs for c in audit.analysis.candidates)


def test_the_later_release_is_compared_with_the_earlier(audit):
    comp = audit.analysis.comparison
    assert comp.baseline == "1.0" and comp.candidate == "1.1"
    assert sum(c.rows for c in comp.regions) == 4_000


def test_bundle_is_byte_identical_for_the_same_input(audit, project, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    folder, _ = project
    a = run_audit(load_config(folder / "audit.toml")).write(tmp_path / "a")
    b = run_audit(load_config(folder / "audit.toml")).write(tmp_path / "b")
    for name in ("analysis.json", "graph.json", "members.parquet"):
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    doc = json.loads((a / "analysis.json").read_text())
    assert doc["created"] == "2026-01-01"
    assert len(doc["provenance"]["fingerprint"]) == 64


def test_graph_json_holds_no_row_ids(audit):
    text = canonical_json(audit.graph)
    assert "R00001" not in text
    assert all("members" not in node for node in json.loads(text)["nodes"])


def test_cli_audit_writes_the_bundle_and_refuses_a_non_empty_folder(project, tmp_path, capsys):
    folder, _ = project
    out = tmp_path / "bundle"
    assert main(["audit", str(folder / "audit.toml"), "--out", str(out), "--quiet"]) == 0
    assert "sim-model 1.1: 4,000 rows" in capsys.readouterr().out
    assert sorted(p.name for p in out.iterdir()) == [
        "analysis.json",
        "charts",
        "checksums.json",
        "graph.json",
        "members.parquet",
        "page.md",
    ]
    assert main(["audit", str(folder / "audit.toml"), "--out", str(out), "--quiet"]) == 2
    assert "the output folder exists and is not empty" in capsys.readouterr().err


def test_a_regression_audit_runs_end_to_end_and_finds_the_residual_pocket(tmp_path):
    rng = np.random.default_rng(5)
    n = 4_000
    X = rng.normal(size=(n, 5))
    truth = 2.0 * X[:, 0] - X[:, 1]
    pocket = np.hypot(X[:, 0] - 1.0, X[:, 1] + 0.5) < 0.6
    y = truth + rng.normal(size=n) * np.where(pocket, 3.5, 1.0)
    frame = pd.DataFrame(X, columns=[f"f{i}" for i in range(5)])
    frame.insert(0, "row_id", [f"R{i:05d}" for i in range(n)])
    frame["y"] = y
    frame["pred_a"] = truth + 0.1
    frame["pred_b"] = truth
    frame.to_csv(tmp_path / "rows.csv", index=False)
    (tmp_path / "reg.toml").write_text(
        'model = "reg"\n[data]\npath = "rows.csv"\nid = "row_id"\ntarget = "y"\n'
        'task = "regression"\n[[release]]\nname = "a"\nscore = "pred_a"\n'
        '[[release]]\nname = "b"\nscore = "pred_b"\n[audit]\nlocal_model = "ridge"\n'
        "stability_intervals = [0]\nstability_overlaps = [0.0]\nbootstrap_resamples = 1\n",
        encoding="utf-8",
    )
    audit = run_audit(load_config(tmp_path / "reg.toml"))
    r = audit.analysis
    assert r.task == "regression" and set(r.overall) >= {"mae", "rmse", "bias", "r2"}
    assert r.weak_regions and r.weak_regions[0].kind == "squared_error"
    in_w1 = audit.members["weak_regions"].map(lambda regions: "W1" in regions)
    rows = audit.members.loc[in_w1, "id"].str[1:].astype(int).to_numpy()
    inter = int(pocket[rows].sum())
    assert inter / (rows.size + pocket.sum() - inter) >= 0.5
    assert r.comparison.baseline == "a" and len(r.comparison.regions) == len(r.regions)
    assert all(reg.calibration is None for reg in r.regions)  # no bins for a regression
    assert all(n.positive_rate is None for n in audit.graph.nodes)
    from topoaudit.report.page import build_page

    page = build_page(json.loads(canonical_json(r)), audit.graph).markdown
    assert "mean absolute error" in page and "## Cautions" in page


def _rows_with_membership(audit, project):
    """The data rows in the audit's order, with their region, weak regions and half."""
    folder, _ = project
    frame = pd.read_csv(folder / "rows.csv")
    return audit.members.merge(frame, left_on="id", right_on="row_id", validate="1:1")


def test_a_weak_region_quotes_the_wilson_interval_of_its_confirmation_half(audit, project):
    rows = _rows_with_membership(audit, project)
    t = audit.analysis.provenance.threshold
    for w in audit.analysis.weak_regions:
        half = rows[
            rows.weak_regions.map(lambda ids, w=w: w.id in ids) & (rows.half == "confirmation")
        ]
        errors = int(((half.score_new >= t) != (half.outcome == 1)).sum())
        # reference: statsmodels proportion_confint(method="wilson")
        lo, hi = proportion_confint(errors, len(half), alpha=0.05, method="wilson")
        e = w.confirmation_error_rate
        assert len(half) == w.confirmation.rows
        assert e.value == pytest.approx(errors / len(half))
        assert (e.low, e.high) == pytest.approx((lo, hi), abs=1e-9)
        assert w.confirmation_interval_points == pytest.approx(100 * (hi - lo), abs=1e-7)


def test_regions_and_weak_regions_record_their_error_mix(audit, project):
    rows = _rows_with_membership(audit, project)
    t = audit.analysis.provenance.threshold
    rows["fp"] = (rows.score_new >= t) & (rows.outcome == 0)
    rows["fn"] = (rows.score_new < t) & (rows.outcome == 1)
    counts = rows.groupby("region")[["fp", "fn"]].sum()  # recounted with pandas
    for r in audit.analysis.regions:
        fp, fn = int(counts.loc[r.id, "fp"]), int(counts.loc[r.id, "fn"])
        assert (r.error_mix.false_positives, r.error_mix.false_negatives) == (fp, fn)
        if fp + fn:
            assert r.error_mix.false_positive_share == pytest.approx(fp / (fp + fn))
        assert {"roc_auc", "brier", "mean_score", "positive_rate"} <= set(r.metrics)
    w = audit.analysis.weak_regions[0]
    inside = rows[rows.weak_regions.map(lambda ids: "W1" in ids)]
    assert w.error_mix.errors == int(inside.fp.sum() + inside.fn.sum())


def test_the_outcome_table_and_the_score_comparison_are_in_the_analysis(audit, project):
    rows = _rows_with_membership(audit, project)
    r = audit.analysis
    assert r.outcomes.base_rate == pytest.approx(rows.outcome.mean())
    assert r.outcomes.rows == len(rows)
    auc = r.comparison.overall.roc_auc
    # the point estimates: scikit-learn's roc_auc_score on every row
    assert auc.before == pytest.approx(roc_auc_score(rows.outcome, rows.score_old))
    assert auc.after == pytest.approx(roc_auc_score(rows.outcome, rows.score_new))
    assert all(c.roc_auc is not None and c.brier is not None for c in r.comparison.regions)


def test_a_bundle_written_before_the_new_fields_still_reads(audit, tmp_path):
    # strict reading of a versioned schema with optional additions (common practice, no
    # source): the keys added later are dropped from a written bundle, which reads back
    # with None in their place
    folder = audit.write(tmp_path / "bundle")
    doc = json.loads((folder / "analysis.json").read_text(encoding="utf-8"))
    doc.pop("outcomes")
    for w in doc["weak_regions"]:
        for key in ("confirmation_error_rate", "confirmation_interval_points", "error_mix"):
            w.pop(key)
        for key in ("constant_loss", "recalibrated_loss", "recalibration"):
            w["local_model"].pop(key)
        for key in ("local_vs_recalibrated", "recalibrated_vs_release"):
            w["local_model"].pop(key)
        for half in (w["discovery"], w["confirmation"]):
            half.pop("scale"), half.pop("promised_rate")
    for region in doc["regions"]:
        region.pop("error_mix")
    for c in (doc["comparison"]["overall"], *doc["comparison"]["regions"]):
        c.pop("roc_auc"), c.pop("brier")
    old = Analysis.from_dict(doc, "analysis.json:")
    assert old.outcomes is None and old.regions[0].error_mix is None
    assert old.weak_regions[0].local_model.recalibrated_loss is None
    assert old.weak_regions[0].confirmation.scale is None
    assert old.comparison.overall.roc_auc is None


@pytest.mark.parametrize(
    ("compute", "cores", "rows", "expected"),
    [
        ({}, 2, 5_000, 2),
        ({}, 2, 1_000, None),
        ({}, 1, 5_000, None),
        ({"workers": 1}, 2, 5_000, 1),
        ({"workers": 3}, 2, 100, 3),
        ({"scheduler": "tcp://10.0.0.5:8786", "workers": 1}, 2, 100, "tcp://10.0.0.5:8786"),
    ],
    ids=["auto", "auto-small", "auto-one-core", "one", "three", "scheduler"],
)
def test_the_audit_runs_its_tasks_where_the_compute_section_says(
    monkeypatch, compute, cores, rows, expected
):
    # reference: the rule ComputeSettings documents (common practice, no source)
    monkeypatch.setattr(run_module, "usable_cores", lambda: cores)
    config = parse_config(
        {
            "model": "m",
            "data": {"path": "rows.csv", "id": "id", "target": "y"},
            "release": [{"name": "r1", "score": "s1"}],
            "compute": compute,
        }
    )
    assert executor_spec(config, rows) == expected
