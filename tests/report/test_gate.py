"""The release gate and the review across releases (topoaudit.report.gate, topoaudit gate).

The demo's two releases plant a battery run-down region that release 2026.1 misses and
2026.2 fixes, and a batch of large-bore meters that 2026.2 under-scores (invented data,
topoaudit.demo). The metric tests are checked against scipy: the exact one-sided McNemar
test is ``binomtest(newly wrong, discordant, 0.5, alternative="greater")`` (McNemar, 1947)
and Fisher's one-sided test the hypergeometric upper tail (``scipy.stats.hypergeom``).
"""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
from scipy import stats as st

from topoaudit.audit.lineage import ReleaseRows, follow, load_release
from topoaudit.cli import main
from topoaudit.config import GatePolicy
from topoaudit.report.gate import FAIL, PASS, UNDECIDED, decide, metric_check, run_gate


def _table(text: str, heading: str) -> list[list[str]]:
    """The cells of the data rows of the Markdown table after the heading holding
    ``heading``."""
    part = text[text.index(heading) :]
    rows = []
    for line in part.splitlines()[1:]:
        if line.startswith("#"):
            break
        if line.startswith("| ") and not line.startswith("| tracked"):
            rows.append([c.strip() for c in line.strip("|").split(" | ")])
    return rows


def test_the_demo_gate_fails_on_the_region_2026_2_introduced(fixture_archive):
    _folder, bundles, _archive = fixture_archive
    code, text = run_gate(bundles["2026.2"], before=bundles["2026.1"], pages="https://x.example")
    assert code == FAIL
    first = text.splitlines()[0]
    assert "2026.2 against 2026.1" in first and "**fails**" in first
    fates, origins = _table(text, "under 2026.2"), _table(text, "of release 2026.2\n")
    # the battery run-down region(s) of 2026.1 are fixed in 2026.2, with their numbers
    battery = [row for row in fates if "battery" in row[1]]
    assert battery and all(row[-1] == "**fixed**" and "x)" in row[4] for row in battery)
    # the large-bore batch (new meters: young, high flow) is introduced by 2026.2, under
    # an id of its own
    # (with the slab graph, a second region of 2026.2 is introduced too)
    introduced = [row for row in origins if row[-1] == "**introduced by this release**"]
    assert 1 <= len(introduced) <= 2
    assert any(c in new[1] for new in introduced for c in ("flow", "pressure", "hardness", "age"))
    new_ids = [new[0].split()[0] for new in introduced]
    assert not set(new_ids) & {row[0].split()[0] for row in fates}
    assert all(i in text.splitlines()[0] + text for i in new_ids)
    assert "introduced by this release: " + new_ids[0] in text
    assert "(https://x.example/meter-failure/2026.2/)" in text


def _config_with_gate(folder, tmp_path, gate: str):
    """The fixture's config with its [gate] table's keys replaced by ``gate``."""
    text = (folder / "project" / "audit.toml").read_text(encoding="utf-8")
    text = text[: text.index("\n[gate]")] if "\n[gate]" in text else text
    path = tmp_path / "audit.toml"
    path.write_text(text + "\n[gate]\n" + gate, encoding="utf-8")
    return path


def test_switching_the_rule_off_passes_the_demo_release(fixture_archive, tmp_path, capsys):
    folder, bundles, archive = fixture_archive
    config = _config_with_gate(folder, tmp_path, 'fail_on = ["returned", "worse", "metric"]\n')
    args = ["gate", str(bundles["2026.2"]), "--archive", str(archive), "--config", str(config)]
    assert main(args) == PASS
    out = capsys.readouterr().out
    assert out.startswith("## Release gate") and "**passes**" in out.splitlines()[0]
    assert main([*args[:4]]) == FAIL  # the bundle's own policy (the default) fails it


def test_a_missing_bundle_two_models_and_an_unknown_policy_key_cannot_be_decided(
    fixture_archive, tmp_path, capsys
):
    folder, bundles, _archive = fixture_archive
    assert main(["gate", str(tmp_path / "nope"), "--before", str(bundles["2026.1"])]) == UNDECIDED
    assert "nope" in capsys.readouterr().err
    other = tmp_path / "other"
    shutil.copytree(bundles["2026.2"], other)
    doc = json.loads((other / "analysis.json").read_text(encoding="utf-8"))
    doc["model"] = "pump-failure"
    (other / "analysis.json").write_text(json.dumps(doc), encoding="utf-8")
    assert main(["gate", str(other), "--before", str(bundles["2026.1"])]) == UNDECIDED
    assert "different models" in capsys.readouterr().err
    config = _config_with_gate(folder, tmp_path, 'fail_onn = ["worse"]\n')
    args = ["gate", str(bundles["2026.2"]), "--before", str(bundles["2026.1"])]
    assert main([*args, "--config", str(config)]) == UNDECIDED
    err = capsys.readouterr().err
    assert "gate.fail_onn" in err and "gate.fail_on" in err and "gate.metric_tolerance" in err


def _pair(rate_a: float, rate_b: float, *, same: bool = True, n: int = 4000):
    rng = np.random.default_rng(3)
    ids = np.array([f"r{k}" for k in range(n)])
    u = rng.uniform(size=n)
    loss_a = (u < rate_a).astype(float)
    loss_b = (rng.uniform(size=n) < rate_b).astype(float) if not same else (u < rate_b) * 1.0
    mk = lambda name, loss, fp, ids_: ReleaseRows(  # noqa: E731
        model="m",
        release=name,
        task="binary",
        fingerprint=fp,
        ids=ids_,
        loss=loss,
        promised=np.full(n, 0.1),
        weak={},
    )
    if same:
        return mk("1", loss_a, "d", ids), mk("2", loss_b, "d", ids[::-1].copy())
    return mk("1", loss_a, "d1", ids), mk("2", loss_b, "d2", np.char.add("n", ids))


def test_the_metric_rule_on_the_same_rows_is_the_one_sided_exact_mcnemar_test():
    before, after = _pair(0.10, 0.13)  # rows listed in another order in the second
    m = metric_check(before, after)
    b_aligned = after.loss[::-1]
    worse = int(((before.loss == 0) & (b_aligned == 1)).sum())
    better = int(((before.loss == 1) & (b_aligned == 0)).sum())
    ref = st.binomtest(worse, worse + better, 0.5, alternative="greater").pvalue
    assert m.p_value == pytest.approx(ref, rel=1e-9)
    assert m.change == pytest.approx(after.loss.mean() - before.loss.mean())
    step = follow([before, after]).step_to("2")
    assert decide(step, m, GatePolicy(fail_on=("metric",), metric_tolerance=0.01)).code == FAIL
    assert decide(step, m, GatePolicy(fail_on=("metric",), metric_tolerance=0.05)).code == PASS


def test_the_metric_rule_on_other_rows_is_fishers_one_sided_test():
    before, after = _pair(0.10, 0.12, same=False)
    m = metric_check(before, after)
    k, n_b = int(after.loss.sum()), after.loss.size
    total_err = int(before.loss.sum()) + k
    ref = st.hypergeom.sf(k - 1, n_b + before.loss.size, total_err, n_b)
    assert m.p_value == pytest.approx(ref, rel=1e-9)
    assert "other rows" in m.test


def test_regions_that_cannot_be_followed_leave_the_gate_undecided():
    before, after = _pair(0.10, 0.10, same=False)
    w = np.zeros(before.ids.size, bool)
    w[:300] = True
    before = ReleaseRows(**{**before.__dict__, "weak": {"W1": w}})
    step = follow([before, after]).step_to("2")
    verdict = decide(step, metric_check(before, after), GatePolicy())
    assert verdict.code == UNDECIDED and "cannot be followed" in verdict.reason


def test_load_release_reads_losses_and_weak_regions_from_a_bundle(fixture_archive):
    _folder, bundles, _archive = fixture_archive
    rel = load_release(bundles["2026.1"])
    assert rel.loss is not None and set(np.unique(rel.loss)) <= {0.0, 1.0}
    assert rel.promised.min() >= 0 and rel.promised.max() <= 0.5
    # the overall error rate the page shows (rounded to 6 places) is the mean row loss
    assert rel.loss.mean() == pytest.approx(rel.analysis.overall["error_rate"].value, abs=1e-6)
    assert set(rel.weak) == {w.id for w in rel.analysis.weak_regions}
