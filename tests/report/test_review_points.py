"""What a model-risk reviewer found on the release page, point by point: each test here
failed on the page as it was and passes now. The numbers are recomputed from the data or
checked against general-purpose libraries; the wording rules (correct plurals, no
internal identifiers, every label saying what its number is) are common practice, no
source."""

from __future__ import annotations

import hashlib
import re
import shlex
import shutil
from pathlib import Path

import pytest

from tests.conftest import LIGHT_AUDIT, light
from topoaudit.cli import main
from topoaudit.demo import write_demo_project
from topoaudit.report.figures import stable_svg_ids
from topoaudit.report.page import build_page
from topoaudit.report.text import escape

FIXTURE = Path(__file__).parents[1] / "visual" / "fixture"


def _page(release: str = "2026.2") -> str:
    import json

    folder = FIXTURE / release
    a = json.loads((folder / "analysis.json").read_text(encoding="utf-8"))
    g = json.loads((folder / "graph.json").read_text(encoding="utf-8"))
    return build_page(a, g).markdown


def _digests(folder: Path) -> dict[str, str]:
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


# -- point 8: a reproduce command that runs as printed and gives the same bundle ---------


@pytest.mark.slow
def test_the_printed_command_runs_as_printed_and_reproduces_every_file(tmp_path, monkeypatch):
    config = write_demo_project(tmp_path / "project", 800, seed=3)
    config.write_text(light(config.read_text(encoding="utf-8")), encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    out = Path("bundles") / "2026.2"
    assert main(["audit", "project/audit.toml", "--out", str(out), "--quiet"]) == 0
    page = (out / "page.md").read_text(encoding="utf-8")
    block = re.search(r"## How to reproduce\n\n(`+)\n(.+)\n\1", page)
    assert block, "no command on the page"
    words = shlex.split(block.group(2))
    assert words[0] == "SOURCE_DATE_EPOCH=1767225600" and words[1] == "topoaudit"
    first = _digests(out)
    shutil.move(out, tmp_path / "first")
    monkeypatch.delenv("SOURCE_DATE_EPOCH")
    name, value = words[0].split("=", 1)
    monkeypatch.setenv(name, value)
    assert main([*words[2:], "--quiet"]) == 0  # as printed (--quiet only hides progress)
    assert _digests(out) == first  # every file, SVGs and page included


def test_svg_ids_do_not_depend_on_what_was_drawn_before():
    a = '<svg><linearGradient id="gradient_3"/><rect fill="url(#gradient_3)"/></svg>'
    b = '<svg><linearGradient id="gradient_0"/><rect fill="url(#gradient_0)"/></svg>'
    assert stable_svg_ids(a, "graph") == stable_svg_ids(b, "graph")
    assert 'fill="url(#graph-gradient-0)"' in stable_svg_ids(a, "graph")


def test_the_page_says_what_the_fingerprint_covers():
    text = _page()
    assert "it is not the checksum of the file" in text
    assert "SHA-256 of the rows and columns the audit used" in text


# -- point 10: words only ----------------------------------------------------------------


def test_no_internal_identifier_or_plural_placeholder_in_the_prose():
    text = _page()
    prose = re.sub(r"<pre.*?</pre>|```.*?```|`[^`]*`", "", text, flags=re.S)
    prose = re.sub(r"<script.*?</script>", "", prose, flags=re.S)
    for word in ("error_aware", "false_negative", "false_positive", "(s)", "features/"):
        assert word not in prose, word
    assert escape("error_aware") not in prose


def test_no_table_has_an_empty_header_row():
    for line in _page().splitlines():
        assert not re.fullmatch(r"\|(\s*\|)+", line.strip()), line


def test_the_standardised_difference_is_defined_where_it_is_shown():
    text = _page()
    assert "standardised difference" in text
    assert "pooled standard deviation" in text


def test_a_rule_is_named_by_its_conditions_not_by_a_tree_depth():
    text = _page()
    assert "surrogate tree" not in text
    assert re.search(r"Approximate rule \((one condition|\d+ conditions)", text)


def _analysis(release: str = "2026.2") -> dict:
    import json

    return json.loads((FIXTURE / release / "analysis.json").read_text(encoding="utf-8"))


# -- point 1: the promise, its rescaling factor, and labels that say what they are ----------


def test_the_rescaling_factor_is_a_headline_with_its_meaning():
    a = _analysis()
    factor = next(c["confirmation"]["scale"] for c in a["candidates"] if c["kind"] == "error")
    text = _page()
    assert f"makes {factor:.2f} times as many wrong decisions as its own scores promise" in text
    w = a["weak_regions"][0]["confirmation"]
    # the unscaled promise and the rescaled one are both shown, each under its own label
    assert re.search(
        rf"\| error rate its scores promise \| [\d.]+ \| {w['promised_rate']:.3f} \|", text
    )
    assert f"{w['expected_rate']:.3f} (× {w['scale']:.2f})" in text
    assert "rate the scores promise |" not in text  # the old, untrue label


# -- point 2: an interval quoted in a caution is the one of the sample it names -------------


def test_the_caution_quotes_the_interval_of_the_confirmation_half():
    from statsmodels.stats.proportion import proportion_confint

    a = _analysis()
    w = a["weak_regions"][0]
    n = w["confirmation"]["rows"]
    errors = round(w["confirmation_error_rate"]["value"] * n)
    low, high = proportion_confint(errors, n, alpha=0.05, method="wilson")  # statsmodels
    text = _page()
    sentence = re.search(
        r"has (\d+) rows in the confirmation half; the 95% interval of its "
        r"error rate on those rows spans (\d+) points",
        text,
    )
    assert sentence and int(sentence.group(1)) == n
    assert int(sentence.group(2)) == round(100 * (high - low))


# -- point 3: the local model against a constant rate and the recalibrated release ----------


def test_the_local_model_is_judged_against_the_recalibrated_release():
    lm = _analysis()["weak_regions"][0]["local_model"]
    text = _page()
    assert f"a constant (the training folds' rate) {lm['constant_loss']:.3f}" in text
    assert "recalibrated on the region (Platt scaling" in text
    assert f"{lm['recalibrated_loss']:.3f}" in text
    if lm["verdict"] == "recalibration enough":
        assert "recalibrating the release on this region does as well" in text
        assert "**local model better**" not in text


# -- point 4: the error mix and the rules that use no information ---------------------------


def test_the_error_mix_and_the_no_skill_rules_are_on_the_page():
    a = _analysis()
    w = a["weak_regions"][0]
    text = _page()
    if w["error_mix"]["false_negatives"] == w["error_mix"]["errors"]:
        assert re.search(rf"### {w['id']}: .*errors, all of them false negatives", text)
    never = next(n for n in a["outcomes"]["no_skill"] if n["name"] == "never flag")
    assert f"Never flagging anything would err on {never['error_rate']:.3f}" in text
    assert "## Decisions at the threshold" in text
    assert "**0.50 (the release's)**" in text


# -- point 5: stability in the configuration's own terms -------------------------------------


def test_stability_names_what_was_varied_in_the_config_terms():
    text = _page()
    for key in (
        "audit.stability_intervals",
        "audit.stability_overlaps",
        "audit.bootstrap_resamples",
    ):
        assert key in text
    assert "subsamples, not bootstrap resamples" in text


# -- point 6: one rounding rule, scores compared too ------------------------------------------


def test_a_change_is_the_difference_of_the_numbers_shown_and_scores_are_compared():
    text = _page()
    m = re.search(r"moved from ([\d.]+) to ([\d.]+) \(([+-][\d.]+);", text)
    assert m
    before, after, change = (float(g) for g in m.groups())
    assert round(after - before, 3) == change
    assert "DeLong's paired test" in text
    assert "no decision changed between the releases" in text  # instead of "0 to 0"


# -- point 7: findings tied together ------------------------------------------------------------


def test_every_candidate_is_listed_and_the_weak_region_is_placed_in_its_region():
    a = _analysis()
    text = _page()
    table = text.split("## Every candidate region")[1].split("\n## ")[0]
    rows = [line for line in table.splitlines() if re.match(r"\| \d+ \|", line)]
    assert len(rows) == len(a["candidates"])
    assert sum("not tested" in r for r in rows) == a["summary"]["candidates_untested"]
    share = a["weak_regions"][0]["regions"][0]
    assert (
        f"It holds {share['rows']} of the {share['region_rows']} rows of region {share['region']}"
        in text
    )
    assert "A region's error rate can be high without a weak region there" in text


# -- point 11: a regression page speaks of regression ----------------------------------------


@pytest.mark.slow
def test_a_regression_page_speaks_in_regression_terms(tmp_path):
    # UCI-style open data shipped with scikit-learn: the diabetes data (442 rows), with
    # cross-fitted ridge predictions as the release
    from sklearn.datasets import load_diabetes
    from sklearn.linear_model import Ridge
    from sklearn.model_selection import cross_val_predict

    from topoaudit.audit.run import run_audit
    from topoaudit.config import load_config

    X, y = load_diabetes(return_X_y=True, as_frame=True)
    frame = X.copy()
    frame.insert(0, "row", [f"r{i}" for i in range(len(y))])
    frame["progression"] = y
    frame["ridge"] = cross_val_predict(Ridge(alpha=1.0), X, y, cv=5)
    frame.to_csv(tmp_path / "diabetes.csv", index=False)
    (tmp_path / "audit.toml").write_text(
        'model = "diabetes"\n[data]\npath = "diabetes.csv"\nid = "row"\n'
        'target = "progression"\ntask = "regression"\n[[release]]\nname = "r1"\n'
        'score = "ridge"\n[graph]\nresamples = 8\n' + LIGHT_AUDIT,
        encoding="utf-8",
    )
    audit = run_audit(load_config(tmp_path / "audit.toml"))
    text = build_page(audit.analysis, audit.graph).markdown
    for label in ("observed rate", "rate the scores promise", "observed error rate", "log loss"):
        assert label not in text, label
    for w in audit.analysis.weak_regions:
        assert "| mean squared error |" in text
        assert f"Local model ({w.local_model.model}," in text
        assert w.local_model.model != "logistic"
        rule = w.description.rule if w.description else None
        if rule and min(rule.precision, rule.recall) < 0.5:
            assert "This rule describes the region poorly" in text
        if w.share_of_rows >= 0.25:
            assert "a broad part of the data, not a pocket" in text


# -- point 9: a sign-off record the release page shows ---------------------------------------


@pytest.mark.slow
def test_the_release_page_of_the_site_shows_the_sign_offs(fixture_archive, tmp_path):
    from topoaudit.report.archive import sign_off
    from topoaudit.report.site import build_site

    archive = tmp_path / "archive"
    shutil.copytree(fixture_archive[2], archive)
    release = archive / "meter-failure" / "2026.2"
    sign_off(release, reviewer="A. Reviewer", decision="rejected", note="W1 needs a fix <b>")
    sign_off(release, reviewer="B. Lead", decision="approved-with-conditions", note="after fix")
    site = build_site(archive, tmp_path / "site")
    html = (site / "meter-failure" / "2026.2" / "index.html").read_text(encoding="utf-8")
    assert "Sign-off" in html and "approved with conditions" in html and "rejected" in html
    assert html.index("B. Lead") < html.index("A. Reviewer")  # newest first
    assert "<b>" not in html.split("Sign-off")[1]  # the note shows literally
    other = (site / "meter-failure" / "2026.1" / "index.html").read_text(encoding="utf-8")
    assert "Not signed off yet." in other
