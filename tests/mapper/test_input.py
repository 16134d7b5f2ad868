"""What as_matrix accepts, what it returns, and how it names bad rows."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from topoaudit.errors import DataError, describe_rows
from topoaudit.mapper._input import as_matrix


@pytest.mark.parametrize(
    ("X", "expected"),
    [
        (np.array([1, 2, 3]), [[1.0], [2.0], [3.0]]),
        ([[1, 2], [3, 4]], [[1.0, 2.0], [3.0, 4.0]]),
        (np.array([[True, False], [False, True]]), [[1.0, 0.0], [0.0, 1.0]]),
        (np.array([[1, 2]], dtype=np.int8), [[1.0, 2.0]]),
        (np.array([[0.5, 2.0]], dtype=np.float32), [[0.5, 2.0]]),
    ],
    ids=["1-d-is-one-column", "nested-lists", "boolean-array", "int8", "float32"],
)
def test_numeric_input_becomes_a_float64_matrix(X, expected):
    out = as_matrix(X)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, expected)


def test_dataframe_values_keep_their_column_order():
    df = pd.DataFrame({"b": [1.0, 2.0], "a": [3, 4], "c": np.array([5, 6], dtype=np.uint16)})
    np.testing.assert_array_equal(as_matrix(df), [[1.0, 3.0, 5.0], [2.0, 4.0, 6.0]])


def test_nullable_pandas_columns_are_numeric():
    df = pd.DataFrame(
        {
            "count": pd.array([1, 2, 3], dtype="Int64"),
            "share": pd.array([0.5, 0.25, 1.0], dtype="Float64"),
            "plain": [7.0, 8.0, 9.0],
        }
    )
    np.testing.assert_array_equal(
        as_matrix(df), [[1.0, 0.5, 7.0], [2.0, 0.25, 8.0], [3.0, 1.0, 9.0]]
    )


def test_a_missing_value_in_a_nullable_column_is_named_by_row_and_column():
    df = pd.DataFrame({"a": [1.0, 2.0, 3.0], "count": pd.array([1, None, 3], dtype="Int64")})
    fragment = "NaN or infinite values in row 1 (column 'count')"
    with pytest.raises(DataError, match=re.escape(fragment)):
        as_matrix(df)


@pytest.mark.parametrize(
    "X",
    [np.asfortranarray(np.arange(12.0).reshape(3, 4)), np.arange(24.0).reshape(3, 8)[:, ::2]],
    ids=["fortran-order", "strided-view"],
)
def test_the_result_is_c_contiguous(X):
    out = as_matrix(X)
    assert out.flags["C_CONTIGUOUS"]
    np.testing.assert_array_equal(out, X)


def test_the_name_given_appears_in_messages():
    with pytest.raises(DataError, match=r"^scores has no rows; at least 1 row needed\.$"):
        as_matrix(np.empty((0, 2)), name="scores")


def test_min_rows_is_enforced_with_the_count():
    with pytest.raises(DataError, match=r"X has 2 rows; at least 3 are needed\."):
        as_matrix(np.zeros((2, 2)), min_rows=3)
    with pytest.raises(DataError, match=r"X has no rows; at least 3 rows needed\."):
        as_matrix(np.zeros((0, 2)), min_rows=3)


@pytest.mark.parametrize(
    ("X", "fragment"),
    [
        (np.array([[1 + 2j, 0]]), "X has complex values; real numbers are needed."),
        (np.zeros((2, 2, 2)), "X must be 2-D (rows x features); got an array with 3 dimensions."),
        (np.array([["a", "b"]]), "X has non-numeric values (dtype <U1); a numeric matrix is"),
        (np.array([[1, None]], dtype=object), "X has non-numeric values (dtype object)"),
        ([[1.0, 2.0], [3.0]], "X cannot be read as a numeric matrix"),
        (np.zeros((3, 0)), "X has no columns; at least one numeric feature is needed."),
    ],
    ids=["complex", "three-d", "strings", "objects", "ragged", "no-columns"],
)
def test_input_that_is_no_numeric_matrix_is_refused(X, fragment):
    with pytest.raises(DataError, match=re.escape(fragment)):
        as_matrix(X)


@pytest.mark.parametrize(
    ("column", "type_name"),
    [
        (pd.Series(["x", "y"]), "non-numeric type"),
        (pd.Categorical(["x", "y"]), "non-numeric type category"),
        (pd.to_datetime(["2020-01-01", "2020-01-02"]), "non-numeric type datetime64"),
        (pd.array([True, False], dtype="boolean"), "non-numeric type boolean"),
        ([1, "x"], "non-numeric type object"),
    ],
    ids=["strings", "category", "datetime", "nullable-boolean", "mixed-objects"],
)
def test_a_non_numeric_dataframe_column_is_named(column, type_name):
    df = pd.DataFrame({"ok": [1.0, 2.0], "bad": column})
    with pytest.raises(DataError, match=re.escape(f"Column 'bad' of X has {type_name}")):
        as_matrix(df)


def test_infinite_values_are_refused_like_nan():
    X = np.zeros((4, 2))
    X[2, 0] = -np.inf
    with pytest.raises(DataError, match=re.escape("NaN or infinite values in row 2 (column 0)")):
        as_matrix(X)


@pytest.mark.parametrize(
    ("rows", "expected"),
    [
        ([3], "row 3"),
        ([3, 17], "rows 3, 17"),
        ([0, 1, 2, 3, 4], "rows 0, 1, 2, 3, 4"),
        ([0, 1, 2, 3, 4, 5, 6], "rows 0, 1, 2, 3, 4 and 2 more"),
    ],
    ids=["one", "two", "five", "seven"],
)
def test_describe_rows_names_at_most_five_rows(rows, expected):
    assert describe_rows(np.array(rows)) == expected
