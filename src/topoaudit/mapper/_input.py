"""Turn what a user passes as ``X`` into a finite float matrix, or say exactly why not."""

from __future__ import annotations

from typing import Any

import numpy as np

from topoaudit.errors import DataError, describe_rows
from topoaudit.limits import MAX_MAGNITUDE

__all__ = ["MAX_MAGNITUDE", "as_matrix", "within_magnitude"]


def within_magnitude(arr: np.ndarray) -> bool:
    """True if every value is finite and of magnitude at most MAX_MAGNITUDE (NaN fails:
    it propagates through min and max)."""
    if arr.size == 0:
        return True
    lo, hi = arr.min(), arr.max()
    return bool(lo >= -MAX_MAGNITUDE and hi <= MAX_MAGNITUDE)


def _numeric_column(dtype: Any) -> bool:
    """True for numeric, non-boolean column types, numpy's or pandas' own (Int64...)."""
    if isinstance(dtype, np.dtype):
        return dtype.kind != "b" and np.issubdtype(dtype, np.number)
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    return bool(is_numeric_dtype(dtype) and not is_bool_dtype(dtype))


def as_matrix(X: Any, *, name: str = "X", min_rows: int = 1) -> np.ndarray:
    """Return ``X`` as a C-contiguous 2-D float64 array with finite values.

    Accepts a numpy array (1-D is read as one column) or a pandas DataFrame with
    numeric columns. Raises :class:`DataError` naming the offending column or rows.
    """
    columns: list[str] | None = None
    if hasattr(X, "dtypes") and hasattr(X, "columns"):
        columns = [str(c) for c in X.columns]
        if len(set(columns)) != len(columns):
            dup = sorted({c for c in columns if columns.count(c) > 1})
            msg = f"{name} has duplicated column names {dup}; each column needs a unique name."
            raise DataError(msg)
        for col, dtype in zip(columns, X.dtypes, strict=True):
            if not _numeric_column(dtype):
                msg = (
                    f"Column {col!r} of {name} has non-numeric type {dtype}; the graph needs "
                    "numeric columns (encode categories first)."
                )
                raise DataError(msg)
        if all(isinstance(dtype, np.dtype) for dtype in X.dtypes):
            X = X.to_numpy()
        else:  # nullable pandas columns (Int64, Float64): a missing value becomes NaN
            X = np.column_stack(
                [
                    s.to_numpy()
                    if isinstance(s.dtype, np.dtype)
                    else s.to_numpy(dtype=np.float64, na_value=np.nan)
                    for _, s in X.items()
                ]
            )
    try:
        arr = np.asarray(X)
    except Exception as exc:  # ragged lists and other objects numpy cannot hold
        msg = f"{name} cannot be read as a numeric matrix: {exc}."
        raise DataError(msg) from exc
    if arr.dtype == object or not (np.issubdtype(arr.dtype, np.number) or arr.dtype == np.bool_):
        msg = f"{name} has non-numeric values (dtype {arr.dtype}); a numeric matrix is needed."
        raise DataError(msg)
    if np.iscomplexobj(arr):
        msg = f"{name} has complex values; real numbers are needed."
        raise DataError(msg)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        msg = f"{name} must be 2-D (rows x features); got an array with {arr.ndim} dimensions."
        raise DataError(msg)
    if arr.shape[0] == 0:
        msg = f"{name} has no rows; at least {min_rows} row{'s' if min_rows > 1 else ''} needed."
        raise DataError(msg)
    if arr.shape[1] == 0:
        msg = f"{name} has no columns; at least one numeric feature is needed."
        raise DataError(msg)
    if arr.shape[0] < min_rows:
        rows = f"{arr.shape[0]} row{'s' if arr.shape[0] != 1 else ''}"
        msg = f"{name} has {rows}; at least {min_rows} are needed."
        raise DataError(msg)
    arr = np.ascontiguousarray(arr, dtype=np.float64)
    if within_magnitude(arr):  # the common case, in two passes that allocate nothing
        return arr
    finite = np.isfinite(arr)
    if not finite.all():
        bad_rows = np.flatnonzero(~finite.all(axis=1))
        bad_cols = np.flatnonzero(~finite.all(axis=0))
        where = ", ".join(repr(columns[c]) if columns else str(int(c)) for c in bad_cols[:5])
        msg = (
            f"{name} has NaN or infinite values in {describe_rows(bad_rows)} "
            f"(column{'s' if bad_cols.size > 1 else ''} {where}); only finite values are accepted."
        )
        raise DataError(msg)
    huge = np.abs(arr) > MAX_MAGNITUDE
    if huge.any():
        bad_rows = np.flatnonzero(huge.any(axis=1))
        bad_cols = np.flatnonzero(huge.any(axis=0))
        where = ", ".join(repr(columns[c]) if columns else str(int(c)) for c in bad_cols[:5])
        msg = (
            f"{name} has values of magnitude above {MAX_MAGNITUDE:g} in "
            f"{describe_rows(bad_rows)} (column{'s' if bad_cols.size > 1 else ''} {where}); "
            "distances between such values overflow: rescale the columns."
        )
        raise DataError(msg)
    return arr
