"""``topoaudit init``: a starter config guessed from a data file, which audits as written."""

from __future__ import annotations

import re
import tomllib

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from topoaudit.cli import main
from topoaudit.config import load_config
from topoaudit.demo import FEATURES, write_demo_project
from topoaudit.errors import ConfigError, DataError
from topoaudit.starter import guess_starter, starter_toml, write_starter

# (loader, class that becomes target 1, name of that class); each a UCI Machine Learning
# Repository data set in the copy bundled with scikit-learn (no network needed)
UCI = {
    # UCI Iris (Fisher, 1936), copy bundled with scikit-learn: 150 flowers, 4 features
    "iris": (load_iris, 2, "virginica"),
    # UCI Wine, copy bundled with scikit-learn: 178 wines, 13 features
    "wine": (load_wine, 0, "class_0"),
    # UCI Breast Cancer Wisconsin (Diagnostic), copy bundled with scikit-learn: 569 cases,
    # 30 features; class 0 is malignant
    "breast_cancer": (load_breast_cancer, 0, "malignant"),
}


def _uci_csv(folder, name: str):
    """The data set as a CSV: an invented id, a 0/1 target from the class, and the
    cross-validated probabilities of a logistic regression fitted here as the score."""
    loader, positive, label = UCI[name]
    bunch = loader(as_frame=True)
    X = bunch.data
    y = (bunch.target.to_numpy() == positive).astype(int)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=2000))
    score = cross_val_predict(model, X, y, cv=5, method="predict_proba")[:, 1]
    frame = X.copy()
    frame.insert(0, "sample_id", [f"S-{i:04d}" for i in range(len(frame))])
    frame[f"is_{label}"] = y
    frame["score_logistic"] = np.round(score, 6)
    path = folder / f"{name}.csv"
    frame.to_csv(path, index=False)
    return path, list(X.columns), f"is_{label}"


def _audit(config, out) -> int:
    return main(["audit", str(config), "--out", str(out), "--quiet"])


@pytest.mark.slow
def test_the_demo_config_is_guessed_and_audits_as_written(tmp_path, capsys):
    write_demo_project(tmp_path / "project", 1500, seed=7)
    data = tmp_path / "project" / "meters.csv"
    config = tmp_path / "starter.toml"
    assert main(["init", str(data), "--out", str(config)]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0] == f"guessed from {data} (1,500 rows), task binary:"
    assert out[1] == "  id           'meter_id': text with a different value on every row"
    assert out[2] == "  target       'failed_90d': the only column of 0 and 1"
    assert out[-1] == (
        f"wrote {config}; audit it with: topoaudit audit {config} --out audit-bundle"
    )
    c = load_config(config)
    assert (c.data.id, c.data.target, c.data.task) == ("meter_id", "failed_90d", "binary")
    assert [r.score for r in c.releases] == ["score_2026_1", "score_2026_2"]
    # the demo's text columns (its segments among them) are guessed as categorical features
    text_columns = ("mechanism", "district", "material")
    assert dict(c.data.categorical) == dict.fromkeys(text_columns, "onehot")
    assert c.data.exclude == ()
    guessed = guess_starter(pd.read_csv(data), source=str(data))
    assert guessed.features == (*FEATURES, *text_columns)
    assert _audit(config, tmp_path / "bundle") == 0


@pytest.mark.slow
@pytest.mark.parametrize("name", list(UCI), ids=list(UCI))
def test_uci_copies_in_scikit_learn_are_guessed_and_audit_as_written(tmp_path, name):
    data, features, target = _uci_csv(tmp_path, name)
    config = tmp_path / "audit.toml"
    starter, _ = write_starter(data, config)
    assert (starter.id, starter.target, starter.task) == ("sample_id", target, "binary")
    assert starter.releases == (("score_logistic", "score_logistic"),)
    assert starter.features == tuple(features)
    assert starter.exclude == ()
    assert _audit(config, tmp_path / "bundle") == 0


def _frame(**columns) -> pd.DataFrame:
    return pd.DataFrame(columns)


N = 200
RNG = np.random.default_rng(3)
Y = (RNG.uniform(size=N) < 0.3).astype(int)
P = np.clip(0.3 + 0.4 * (Y - 0.3) + RNG.normal(0, 0.1, N), 0.01, 0.99).round(4)
IDS = [f"R{i:04d}" for i in range(N)]


def test_columns_to_leave_out_are_excluded_with_their_reason():
    flipped = Y.copy()
    flipped[:1] = 1 - flipped[:1]  # agrees with the target on 199 of 200 rows
    frame = _frame(
        row_id=IDS,
        serial_no=RNG.permutation(N) * 7 + 1000,
        district=np.array(["north", "south", "east", "west"])[np.arange(N) % 4],
        postcode=[f"PC{i % 60:02d}" for i in range(N)],
        constant=np.ones(N),
        outcome_copy=flipped,
        noisy_copy=Y + RNG.normal(0, 0.01, N),
        age=RNG.uniform(0, 10, N),
        failed=Y,
        score=P,
    )
    s = guess_starter(frame, source="rows.csv")
    assert (s.id, s.target, s.releases) == ("row_id", "failed", (("score", "score"),))
    assert s.categorical == ("district",)
    assert s.features == ("serial_no", "district", "age")
    why = {g.column: g.why for g in s.guesses if g.role == "exclude"}
    assert why == {
        "postcode": "text of 60 levels, more than 20 to one-hot encode",
        "constant": "one value on every row",
        "outcome_copy": "its value alone gives the target on 99.5% of rows: likely leakage",
        "noisy_copy": "correlation 1.000 with the target: a near-duplicate, likely leakage",
    }


def test_a_second_id_is_excluded_when_the_first_is_named_as_one():
    frame = _frame(meter_id=IDS, serial=[f"X{i}" for i in range(N)], y=Y, p_fail=P, a=P * 3)
    s = guess_starter(frame, source="rows.csv")
    assert s.id == "meter_id"
    assert {g.column: g.why for g in s.guesses if g.role == "exclude"} == {
        "serial": "a different value on every row, like an id"
    }


def test_of_several_zero_one_columns_the_target_is_the_one_the_scores_predict():
    frame = _frame(id=IDS, has_pump=(np.arange(N) % 2), failed=Y, prob_failed=P, flow=P * 9)
    s = guess_starter(frame, source="rows.csv")
    assert s.target == "failed"
    assert s.features == ("has_pump", "flow")


def test_a_numeric_target_with_prediction_columns_is_a_regression():
    truth = RNG.normal(50, 10, N)
    frame = _frame(
        id=IDS,
        litres=truth,
        litres_pred_v1=truth + RNG.normal(0, 3, N),
        litres_pred_v2=truth + RNG.normal(0, 2, N),
        pressure=RNG.normal(3, 0.2, N),
    )
    s = guess_starter(frame, source="rows.csv")
    assert (s.task, s.target) == ("regression", "litres")
    assert [c for c, _ in s.releases] == ["litres_pred_v1", "litres_pred_v2"]
    assert "threshold" not in starter_toml(s, "rows.csv")


def test_parquet_with_dates_and_missing_values(tmp_path):
    frame = _frame(
        meter_id=IDS,
        read_on=pd.date_range("2026-01-01", periods=N, freq="D"),
        age=np.where(np.arange(N) == 5, np.nan, RNG.uniform(0, 10, N)),
        failed=Y,
        score=P,
    )
    data = tmp_path / "rows.parquet"
    frame.to_parquet(data)
    starter, config = write_starter(data, tmp_path / "audit.toml")
    assert starter.exclude == ("read_on",)
    assert {g.column: g.why for g in starter.guesses if g.role == "exclude"} == {
        "read_on": "dates or times, which are not encoded; derive numbers from them to use them"
    }
    assert config.data.on_missing == "drop"


def test_names_that_need_quoting_read_back_the_same(tmp_path):
    odd = 'flow "peak"\\ l/s\tmax'
    frame = _frame(**{"id #1": IDS, odd: RNG.uniform(size=N) * 5, "y": Y, "score [v1]": P})
    data = tmp_path / "rows.csv"
    frame.to_csv(data, index=False)
    write_starter(data, tmp_path / "audit.toml")
    c = load_config(tmp_path / "audit.toml")
    assert (c.data.id, c.releases[0].score, c.releases[0].name) == (
        "id #1",
        "score [v1]",
        "score-v1",
    )
    text = (tmp_path / "audit.toml").read_text(encoding="utf-8")
    assert tomllib.loads(text)["data"]["id"] == "id #1"


def test_the_path_in_the_config_is_relative_to_the_config(tmp_path):
    data = tmp_path / "data" / "rows.csv"
    data.parent.mkdir()
    _frame(id=IDS, y=Y, score=P, a=P * 4).to_csv(data, index=False)
    write_starter(data, tmp_path / "configs" / "audit.toml")
    c = load_config(tmp_path / "configs" / "audit.toml")
    doc = tomllib.loads((tmp_path / "configs" / "audit.toml").read_text(encoding="utf-8"))
    assert doc["data"]["path"] == "../data/rows.csv"
    assert c.data.path.resolve() == data.resolve()


def test_an_existing_config_is_never_overwritten(tmp_path):
    data = tmp_path / "rows.csv"
    _frame(id=IDS, y=Y, score=P, a=P * 4).to_csv(data, index=False)
    out = tmp_path / "audit.toml"
    out.write_text("mine\n", encoding="utf-8")
    expected = f"{out}: already exists; init never overwrites a file, so give another --out."
    with pytest.raises(ConfigError, match=f"^{re.escape(expected)}$"):
        write_starter(data, out)
    assert out.read_text(encoding="utf-8") == "mine\n"


HOSTILE = {
    "empty_file": (
        "",
        "{path}: the file is empty; init needs a header row and the validation rows.",
    ),
    "header_only": (
        "id,y,score\n",
        "{path}: the file has a header but no rows; init guesses from the values, so it "
        "needs the validation rows.",
    ),
    "no_numeric_column": (
        "id,colour\na,red\nb,blue\n",
        "{path}: no column holds numbers (columns 'id', 'colour'); an audit needs a 0/1 "
        "target column and a score column of numbers in [0, 1].",
    ),
    "no_zero_one_column": (
        "id,flow,score\na,3.5,0.2\nb,4.1,0.7\nc,2.2,0.4\n",
        "{path}: no column holds only 0 and 1 (numeric columns 'flow', 'score'), so none can "
        "be the target; accepted are a 0/1 target with score columns in [0, 1], or a numeric "
        "target with columns named as predictions (pred, forecast, estimate).",
    ),
    "two_candidate_ids": (
        "code,serial,y,score\na,x1,0,0.1\nb,x2,1,0.9\nc,x3,0,0.2\n",
        "{path}: columns 'code' and 'serial' could each be the id (a different value on every "
        "row); name the one that identifies a row with --id.",
    ),
    "no_id": (
        "site,y,score\na,0,0.1\na,1,0.9\nb,0,0.2\n",
        "{path}: no column has a different value on every row, so none can be the id; add a "
        "column of row ids (text or whole numbers) and run init again.",
    ),
    "no_score_column": (
        "id,y,flow\na,0,3.1\nb,1,2.2\nc,0,5.0\n",
        "{path}: no column holds a release's scores for the target 'y': numbers in [0, 1] "
        "that predict it better than its base rate; add the model's predicted probabilities "
        "as a column, for example 'score'.",
    ),
}


@pytest.mark.parametrize("name", list(HOSTILE), ids=list(HOSTILE))
def test_hostile_files_get_one_clear_sentence(tmp_path, name):
    text, expected = HOSTILE[name]
    data = tmp_path / "rows.csv"
    data.write_text(text, encoding="utf-8")
    message = expected.format(path=data)
    with pytest.raises(DataError, match=f"^{re.escape(message)}$"):
        write_starter(data, tmp_path / "audit.toml")
    assert not (tmp_path / "audit.toml").exists()


def test_the_cli_prints_a_hostile_file_error_on_one_line_and_exits_2(tmp_path, capsys):
    data = tmp_path / "rows.csv"
    data.write_text(HOSTILE["two_candidate_ids"][0], encoding="utf-8")
    assert main(["init", str(data), "--out", str(tmp_path / "audit.toml")]) == 2
    err = capsys.readouterr().err
    assert err == "topoaudit: error: " + HOSTILE["two_candidate_ids"][1].format(path=data) + "\n"


def test_id_and_target_can_be_named(tmp_path):
    data = tmp_path / "rows.csv"
    data.write_text(
        "code,serial,y,flag,score,flow\na,x1,1,0,0.1,2.5\nb,x2,0,1,0.9,3.5\nc,x3,0,0,0.2,1.5\n",
        encoding="utf-8",
    )
    starter, _ = write_starter(data, tmp_path / "audit.toml", id="serial", target="flag")
    assert (starter.id, starter.target, starter.exclude) == ("serial", "flag", ("code",))
