"""Loading, checking, encoding and fingerprinting the validation rows; every refusal names
the file, the column and, where rows are at fault, the rows."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from topoaudit.config import Config, parse_config
from topoaudit.data import Dataset, fingerprint, load_dataset, prepare_dataset, read_table
from topoaudit.errors import DataError


def message(*fragments: str) -> str:
    """A pattern matching the fragments, in order, anywhere in one message."""
    return ".*".join(re.escape(f) for f in fragments)


def config(
    path: str | Path = "rows.csv",
    *,
    releases: list[dict[str, Any]] | None = None,
    **data: Any,
) -> Config:
    """A config over columns id, y and score s1 (one release r1) by default."""
    table = {"path": str(path), "id": "id", "target": "y", **data}
    doc = {
        "model": "m",
        "data": table,
        "release": releases or [{"name": "r1", "score": "s1"}],
    }
    return parse_config(doc)


def frame(n: int = 12, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    y = np.arange(n) % 2
    return pd.DataFrame(
        {
            "id": [f"m{i:03d}" for i in range(n)],
            "y": y,
            "s1": np.round(rng.random(n), 6),
            "x1": rng.normal(size=n),
            "x2": rng.integers(0, 100, n),
            "region": np.array(["north", "south", "east"])[np.arange(n) % 3],
        }
    )


def numeric_frame(n: int = 12, seed: int = 0) -> pd.DataFrame:
    return frame(n, seed).drop(columns="region")


# ---------------------------------------------------------------- happy path


def test_features_default_to_every_other_column() -> None:
    df = numeric_frame()
    ds = prepare_dataset(df, config())
    assert isinstance(ds, Dataset)
    assert ds.feature_names == ("x1", "x2")
    assert ds.n_rows == len(df)
    np.testing.assert_array_equal(ds.X, df[["x1", "x2"]].to_numpy(dtype=float))
    np.testing.assert_array_equal(ds.ids, df["id"].to_numpy(dtype=str))
    np.testing.assert_array_equal(ds.target, df["y"].to_numpy())
    assert ds.target.dtype == np.int64
    assert list(ds.scores) == ["r1"]
    np.testing.assert_array_equal(ds.scores["r1"], df["s1"].to_numpy())
    assert ds.task == "binary"
    assert ds.n_dropped == 0
    assert ds.source == "<frame>"
    assert ds.encoding == {}
    assert list(ds.frame.columns) == ["x1", "x2"]


def test_every_release_score_is_kept_out_of_the_features() -> None:
    df = numeric_frame().assign(s2=0.5)
    cfg = config(releases=[{"name": "r1", "score": "s1"}, {"name": "r2", "score": "s2"}])
    ds = prepare_dataset(df, cfg)
    assert ds.feature_names == ("x1", "x2")
    assert set(ds.scores) == {"r1", "r2"}


def test_exclude_leaves_columns_out() -> None:
    ds = prepare_dataset(frame(), config(exclude=["x2", "region"]))
    assert ds.feature_names == ("x1",)


def test_features_name_the_columns_used_in_order() -> None:
    ds = prepare_dataset(frame(), config(features=["x2", "x1"]))
    assert ds.feature_names == ("x2", "x1")


def test_onehot_columns_are_named_column_equals_value() -> None:
    df = frame(9)
    ds = prepare_dataset(df, config(categorical={"region": "onehot"}))
    assert ds.feature_names == ("x1", "x2", "region=east", "region=north", "region=south")
    onehot = ds.X[:, 2:]
    expected = np.stack([(df["region"] == c).to_numpy() for c in ("east", "north", "south")], 1)
    np.testing.assert_array_equal(onehot, expected.astype(float))
    assert ds.encoding == {
        "region": {"encoding": "onehot", "categories": ["east", "north", "south"]}
    }
    # The frame keeps the values as read, for describing regions.
    assert ds.frame["region"].tolist() == df["region"].tolist()


def test_ordinal_columns_are_coded_in_sorted_order() -> None:
    df = frame(6)
    ds = prepare_dataset(df, config(categorical={"region": "ordinal"}))
    assert ds.feature_names == ("x1", "x2", "region")
    codes = {"east": 0.0, "north": 1.0, "south": 2.0}
    np.testing.assert_array_equal(ds.X[:, 2], [codes[v] for v in df["region"]])
    assert ds.encoding["region"] == {"encoding": "ordinal", "categories": list(codes)}


def test_a_numeric_column_can_be_declared_categorical() -> None:
    df = numeric_frame(6).assign(grade=[3, 1, 2, 3, 1, 2])
    ds = prepare_dataset(df, config(categorical={"grade": "onehot"}))
    assert ds.feature_names[-3:] == ("grade=1", "grade=2", "grade=3")


def test_a_categorical_column_outside_the_features_is_ignored() -> None:
    ds = prepare_dataset(frame(), config(features=["x1"], categorical={"region": "onehot"}))
    assert ds.feature_names == ("x1",)
    assert ds.encoding == {}


def test_a_regression_task_keeps_float_targets_and_any_scores() -> None:
    df = numeric_frame()
    df["y"] = np.linspace(-3, 40, len(df))
    df["s1"] = df["y"] + 7.5
    ds = prepare_dataset(df, config(task="regression"))
    assert ds.task == "regression"
    assert ds.target.dtype == np.float64
    np.testing.assert_array_equal(ds.scores["r1"], df["s1"].to_numpy())


def test_load_dataset_reads_csv_and_parquet_alike(tmp_path: Path) -> None:
    df = frame(30, seed=3)
    df.to_csv(tmp_path / "rows.csv", index=False)
    df.to_parquet(tmp_path / "rows.parquet", index=False)
    from_csv = load_dataset(config(tmp_path / "rows.csv", categorical={"region": "onehot"}))
    from_pq = load_dataset(config(tmp_path / "rows.parquet", categorical={"region": "onehot"}))
    assert from_csv.source == str(tmp_path / "rows.csv")
    assert from_csv.feature_names == from_pq.feature_names
    np.testing.assert_array_equal(from_csv.X, from_pq.X)
    np.testing.assert_array_equal(from_csv.ids, from_pq.ids)
    assert from_csv.fingerprint == from_pq.fingerprint


# ---------------------------------------------------------------- fingerprint


def test_the_fingerprint_is_the_same_from_csv_and_from_parquet(tmp_path: Path) -> None:
    rng = np.random.default_rng(7)
    df = frame(200, seed=7)
    df["x1"] = rng.normal(size=len(df)) * 1e-7  # full-precision floats
    df["x3"] = rng.standard_cauchy(len(df))
    df.to_csv(tmp_path / "rows.csv", index=False)
    df.to_parquet(tmp_path / "rows.parquet", index=False)
    csv = read_table(tmp_path / "rows.csv")
    pq = read_table(tmp_path / "rows.parquet")
    assert fingerprint(csv) == fingerprint(pq) == fingerprint(df)
    assert len(fingerprint(df)) == 64


def test_the_fingerprint_changes_when_one_value_changes() -> None:
    df = frame()
    before = fingerprint(df)
    changed = df.copy()
    changed.loc[5, "x1"] = changed.loc[5, "x1"] + 1e-12
    assert fingerprint(changed) != before
    relabelled = df.copy()
    relabelled.loc[0, "region"] = "west"
    assert fingerprint(relabelled) != before
    renamed = df.rename(columns={"x2": "x9"})
    assert fingerprint(renamed) != before
    assert fingerprint(df.iloc[:-1]) != before
    assert fingerprint(df.copy()) == before


def test_the_dataset_fingerprint_covers_the_rows_used() -> None:
    df = numeric_frame()
    base = prepare_dataset(df, config()).fingerprint
    changed = df.copy()
    changed.loc[2, "s1"] = 0.123
    assert prepare_dataset(changed, config()).fingerprint != base
    # A column outside the audit does not change it.
    assert prepare_dataset(df.assign(note="x"), config(exclude=["note"])).fingerprint == base


# ---------------------------------------------------------------- refusals


def test_a_missing_file_is_named(tmp_path: Path) -> None:
    path = tmp_path / "absent.csv"
    with pytest.raises(DataError, match=message(f"{path}: no such data file.")):
        load_dataset(config(path))


def test_an_unknown_suffix_is_named(tmp_path: Path) -> None:
    path = tmp_path / "rows.xlsx"
    path.write_bytes(b"not a table")
    with pytest.raises(
        DataError,
        match=message(f"{path}: unknown data file type '.xlsx'; accepted are .csv and .parquet."),
    ):
        load_dataset(config(path))


def test_an_unreadable_file_is_named(tmp_path: Path) -> None:
    path = tmp_path / "rows.parquet"
    path.write_bytes(b"this is not parquet")
    with pytest.raises(DataError, match=message(f"{path}: cannot be read as PARQUET (")):
        read_table(path)
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    with pytest.raises(DataError, match=message(f"{empty}: cannot be read as CSV (")):
        read_table(empty)


@pytest.mark.parametrize(
    ("changes", "expected"),
    [
        ({"target": "failed"}, "the target column 'failed' is not in the file."),
        ({"id": "idd"}, "the id column 'idd' is not in the file. Did you mean 'id'?"),
        ({"features": ["x_1"]}, "the feature column 'x_1' is not in the file. Did you mean 'x1'?"),
        ({"exclude": ["regio"]}, "the feature column 'regio' is not in the file."),
        ({"categorical": {"zone": "onehot"}}, "the feature column 'zone' is not in the file."),
    ],
)
def test_a_missing_column_is_named_with_a_suggestion(
    tmp_path: Path, changes: dict[str, Any], expected: str
) -> None:
    path = tmp_path / "rows.csv"
    frame().to_csv(path, index=False)
    with pytest.raises(DataError, match=message(str(path), ": ", expected)):
        load_dataset(config(path, **changes))


def test_a_missing_score_column_names_the_release() -> None:
    cfg = config(releases=[{"name": "r1", "score": "s_1"}])
    with pytest.raises(
        DataError,
        match=message(
            "<frame>: the score (release r1) column 's_1' is not in the file. Did you mean 's1'?"
        ),
    ):
        prepare_dataset(frame(), cfg)


def test_a_suggestion_is_given_for_a_near_name() -> None:
    df = frame().rename(columns={"y": "failed_90d"})
    with pytest.raises(DataError, match=message("Did you mean 'failed_90d'?")):
        prepare_dataset(df, config(target="failed_90"))


def test_duplicated_column_names_are_refused() -> None:
    df = frame(4)
    df.columns = ["id", "y", "s1", "x1", "x1", "region"]
    with pytest.raises(
        DataError,
        match=message("<frame>: duplicated column names ['x1']; each column needs a unique name."),
    ):
        prepare_dataset(df, config())


def test_duplicated_column_names_in_a_csv_file_are_refused(tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("id,y,s1,x1,x1\na,0,0.2,1,2\nb,1,0.7,3,4\n")
    with pytest.raises(DataError, match=message(f"{path}: duplicated column names ['x1']")):
        load_dataset(config(path))


def test_no_rows_are_refused() -> None:
    with pytest.raises(DataError, match=message("<frame>: the file has no rows.")):
        prepare_dataset(frame().iloc[:0], config())


def test_a_non_binary_target_is_refused() -> None:
    df = numeric_frame()
    df.loc[3, "y"] = 2
    with pytest.raises(
        DataError,
        match=message("the target 'y' of a binary task must hold 0 and 1 only; found [2.0]."),
    ):
        prepare_dataset(df, config())


def test_a_target_with_one_class_is_refused() -> None:
    df = numeric_frame().assign(y=1)
    with pytest.raises(
        DataError,
        match=message("the target 'y' holds one class only (1); an audit needs both outcomes."),
    ):
        prepare_dataset(df, config())


def test_scores_outside_the_unit_interval_are_refused() -> None:
    df = numeric_frame()
    df.loc[4, "s1"] = 1.2
    df.loc[9, "s1"] = -0.1
    with pytest.raises(
        DataError,
        match=message(
            "<frame>: the score column 's1' (release r1) must hold probabilities in [0, 1]; "
            "rows 4, 9 are outside, such as 1.2."
        ),
    ):
        prepare_dataset(df, config())


def test_a_non_numeric_target_names_the_rows() -> None:
    df = frame()
    df["y"] = df["y"].astype(object)
    df.loc[2, "y"] = "yes"
    with pytest.raises(
        DataError, match=message("column 'y' must be numeric; row 2 hold non-numbers such as 'yes'")
    ):
        prepare_dataset(df, config())


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_missing_or_infinite_values_are_refused_naming_rows_and_columns(bad: float) -> None:
    df = frame()
    df.loc[2, "x1"] = bad
    df.loc[7, "x2"] = np.nan
    with pytest.raises(
        DataError,
        match=message(
            "<frame>: missing, NaN or infinite values in rows 2, 7 (columns ['x1', 'x2']); ",
            'set data.on_missing = "drop" to drop those rows.',
        ),
    ):
        prepare_dataset(df, config(exclude=["region"]))


def test_missing_values_in_a_csv_file_are_refused(tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("id,y,s1,x1\na,0,0.2,1\nb,1,0.7,\nc,1,0.9,3\n")
    with pytest.raises(
        DataError,
        match=message(f"{path}: missing, NaN or infinite values in row 1 (columns ['x1'])"),
    ):
        load_dataset(config(path))


def test_missing_ids_and_categories_are_refused() -> None:
    df = frame()
    df["id"] = df["id"].astype(object)
    df.loc[1, "id"] = None
    df["region"] = df["region"].astype(object)
    df.loc[5, "region"] = None
    with pytest.raises(DataError, match=message("in rows 1, 5 (columns ['id', 'region'])")):
        prepare_dataset(df, config(categorical={"region": "onehot"}))


def test_on_missing_drop_drops_the_rows_and_reports_them() -> None:
    df = numeric_frame(20)
    df.loc[[3, 11], "x1"] = np.nan
    df.loc[15, "s1"] = np.inf
    ds = prepare_dataset(df, config(on_missing="drop"))
    assert ds.n_dropped == 3
    assert ds.n_rows == 17
    kept = df.drop(index=[3, 11, 15])
    np.testing.assert_array_equal(ds.ids, kept["id"].to_numpy(dtype=str))
    np.testing.assert_array_equal(ds.X, kept[["x1", "x2"]].to_numpy(dtype=float))
    assert list(ds.frame.index) == list(range(17))


def test_on_missing_drop_refuses_when_no_row_is_left() -> None:
    df = numeric_frame(4).assign(x1=np.nan)
    with pytest.raises(DataError, match=message("every row has a missing value; none are left.")):
        prepare_dataset(df, config(on_missing="drop"))


def test_duplicate_ids_are_named_with_their_rows() -> None:
    df = numeric_frame()
    df.loc[8, "id"] = "m002"
    with pytest.raises(
        DataError,
        match=message(
            "<frame>: the id column 'id' has duplicated ids in rows 2, 8 (for example 'm002'); "
            "every row needs its own id."
        ),
    ):
        prepare_dataset(df, config())


def test_rows_are_named_as_in_the_file_after_dropping() -> None:
    df = numeric_frame(12)
    df.loc[0, "x1"] = np.nan
    df.loc[6, "id"] = "m004"
    with pytest.raises(
        DataError, match=message("duplicated ids in rows 4, 6 (for example 'm004')")
    ):
        prepare_dataset(df, config(on_missing="drop"))
    df = numeric_frame(12)
    df.loc[1, "x2"] = np.nan
    df.loc[9, "s1"] = 3.0
    with pytest.raises(DataError, match=message("row 9 are outside, such as 3.0.")):
        prepare_dataset(df, config(on_missing="drop"))


def test_a_non_numeric_feature_must_be_declared_categorical() -> None:
    with pytest.raises(
        DataError,
        match=message(
            "<frame>: column 'region' must be numeric; rows 0, 1, 2, 3, 4 and 7 more hold "
            "non-numbers such as 'north' (declare it in data.categorical to encode it)."
        ),
    ):
        prepare_dataset(frame(), config())


def test_a_partly_numeric_feature_names_only_the_bad_rows(tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("id,y,s1,x1\na,0,0.2,1\nb,1,0.7,n/a?\nc,1,0.9,3\n")
    with pytest.raises(
        DataError, match=message(f"{path}: column 'x1' must be numeric; row 1 hold ", "'n/a?'")
    ):
        load_dataset(config(path))


@pytest.mark.parametrize("clash", ["y", "id", "s1"])
def test_a_feature_that_is_the_target_id_or_a_score_is_refused(clash: str) -> None:
    with pytest.raises(
        DataError,
        match=message(
            f"<frame>: ['{clash}'] cannot be features: they are the id, target or a score."
        ),
    ):
        prepare_dataset(frame(), config(features=["x1", clash]))


def test_no_features_left_is_refused() -> None:
    df = frame().drop(columns=["x2", "region"])
    with pytest.raises(
        DataError, match=message("no feature columns are left; name them in data.features.")
    ):
        prepare_dataset(df, config(exclude=["x1"]))


def test_a_first_line_of_spaces_is_a_header_without_names_not_a_line_to_skip(
    tmp_path: Path,
) -> None:
    # found by the fuzz test of random CSV files: the blank header line was skipped and the
    # first row of data became the header (RFC 4180: the first line is the header when
    # there is one)
    path = tmp_path / "rows.csv"
    path.write_text(" \n0.0\n0.0\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"the header gives no name to column 1"):
        read_table(path)
