"""Load the validation rows named by a config, check them, encode them, fingerprint them.

Every refusal names the file and the column (and rows, where rows are at fault) and says
what would be accepted.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from topoaudit.config import Config
from topoaudit.errors import DataError, LimitError, TopoauditError, closest_names, describe_rows
from topoaudit.limits import (
    MAX_CATEGORY_LEVELS,
    MAX_FEATURES,
    MAX_MAGNITUDE,
    MAX_ROWS,
    MAX_SEGMENT_LEVELS,
)

__all__ = [
    "MISSING_LEVEL",
    "Dataset",
    "fingerprint",
    "load_dataset",
    "prepare_dataset",
    "read_table",
]

#: the level of a declared segment column that holds the rows without a value
MISSING_LEVEL = "(missing)"


@dataclass(frozen=True, eq=False)
class Dataset:
    """The rows of one audit, ready for the graph and the audit.

    Attributes
    ----------
    ids : ndarray of str
    X : ndarray of shape (n_rows, n_encoded)
        Encoded features (one-hot or ordinal codes for categorical columns).
    feature_names : tuple of str
        Names of the columns of ``X``.
    frame : DataFrame
        The feature columns as read (for describing regions in the user's terms).
    target : ndarray
    scores : dict of release name -> ndarray
    task : {"binary", "regression"}
    fingerprint : str
        sha256 of the rows and columns used (see :func:`fingerprint`).
    n_dropped : int
        Rows dropped for missing values (only with ``on_missing = "drop"``).
    segments : DataFrame
        The columns named in ``audit.segments``, one categorical column each: every row's
        value as text (:data:`MISSING_LEVEL` where it has none), the categories in order
        (numbers by value, text alphabetically, the missing level last). Not part of the
        fingerprint: they group rows for the page and are not what the audit tests.
    """

    ids: np.ndarray
    X: np.ndarray
    feature_names: tuple[str, ...]
    frame: pd.DataFrame
    target: np.ndarray
    scores: dict[str, np.ndarray]
    task: str
    fingerprint: str
    n_dropped: int = 0
    source: str = ""
    encoding: dict[str, Any] = field(default_factory=dict)
    segments: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def n_rows(self) -> int:
        return int(self.X.shape[0])


_CSV = (".csv", ".txt")
_PARQUET = (".parquet", ".pq")
# what pandas and pyarrow raise for a file they cannot parse
_READ_ERRORS = (ValueError, OSError, OverflowError, csv.Error, pd.errors.ParserError)


def _short(value: Any, limit: int = 60) -> str:
    """``repr(value)``, cut to ``limit`` characters so that junk keeps a message short."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 5] + " ...'"


def _too_many_rows(path: Path, n: int | None = None) -> LimitError:
    asked = f"{n} rows" if n is not None else f"more than {MAX_ROWS} rows"
    return LimitError(
        f"{path}: the file has {asked}; a validation table holds at most {MAX_ROWS} rows "
        "(MAX_ROWS): audit a sample of the rows."
    )


def _read_csv(path: Path) -> pd.DataFrame:
    # The header as written (read_csv renames a repeated name "x" to "x.1" and an empty one
    # to "Unnamed: 3"), then at most MAX_ROWS + 1 rows, so a huge file is refused after
    # reading no more than the limit. low_memory=False infers one type per column from all
    # its rows, not one per chunk.
    # (blank lines kept: a first line of spaces is a header without names, not a line to
    # skip, or the first row of data would become the header)
    header = pd.read_csv(
        path, header=None, nrows=1, dtype=str, keep_default_na=False, skip_blank_lines=False
    )
    written = [str(c) for c in header.iloc[0].tolist()]
    frame = pd.read_csv(path, keep_default_na=True, nrows=MAX_ROWS + 1, low_memory=False)
    if frame.shape[0] > MAX_ROWS:
        raise _too_many_rows(path)
    if not frame.index.equals(pd.RangeIndex(len(frame))) or frame.shape[1] != len(written):
        # rows with one field more than the header: pandas would take the first as an index
        msg = (
            f"{path}: some rows have more fields than the header's {len(written)} names; "
            "every row needs exactly one field per column (check for a trailing separator)."
        )
        raise DataError(msg)
    empty = [i + 1 for i, c in enumerate(written) if not c.strip()]
    if empty:
        msg = (
            f"{path}: the header gives no name to column{'s' if len(empty) > 1 else ''} "
            f"{', '.join(map(str, empty))} (counting from 1); every column needs a name."
        )
        raise DataError(msg)
    dup = sorted({c for c in written if written.count(c) > 1})
    if dup:
        msg = f"{path}: duplicated column names {dup}; each column needs a unique name."
        raise DataError(msg)
    frame.columns = written
    return frame


def _read_parquet(path: Path) -> pd.DataFrame:
    import pyarrow.parquet as pq

    n_rows = pq.ParquetFile(path).metadata.num_rows  # from the footer, before any row
    if n_rows > MAX_ROWS:
        raise _too_many_rows(path, n_rows)
    return pd.read_parquet(path)


def read_table(path: Path) -> pd.DataFrame:
    """Read a CSV or Parquet file; refuse anything else with the accepted suffixes.

    A CSV file needs a header row with one unique, non-empty name per column, and at most
    one field per column in every row; a file of more than
    :data:`~topoaudit.limits.MAX_ROWS` rows is refused after reading that many.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    try:
        exists = path.exists()
    except (OSError, ValueError) as exc:  # a name too long for the file system, a NUL byte
        raise DataError(f"{path}: cannot be opened ({exc}).") from exc
    if not exists:
        raise DataError(f"{path}: no such data file.")
    if suffix not in _CSV + _PARQUET:
        msg = f"{path}: unknown data file type {suffix!r}; accepted are .csv and .parquet."
        raise DataError(msg)
    try:
        return _read_csv(path) if suffix in _CSV else _read_parquet(path)
    except TopoauditError:
        raise
    except _READ_ERRORS as exc:
        what = str(exc).strip() or type(exc).__name__
        raise DataError(f"{path}: cannot be read as {suffix[1:].upper()} ({what}).") from exc


def fingerprint(frame: pd.DataFrame) -> str:
    """sha256 over the column names and values, column by column, in order.

    Numbers are hashed as little-endian float64, everything else as UTF-8 text joined by
    the unit separator; so the same rows and columns give the same fingerprint whether
    read from CSV or Parquet.
    """
    h = hashlib.sha256()
    h.update(f"{frame.shape[0]}x{frame.shape[1]}\n".encode())
    for col in frame.columns:
        h.update(str(col).encode("utf-8") + b"\x1e")
        values = frame[col]
        if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
            h.update(np.ascontiguousarray(values.to_numpy(dtype="<f8")).tobytes())
        else:
            h.update("\x1f".join(map(str, values.tolist())).encode("utf-8"))
        h.update(b"\x1d")
    return h.hexdigest()


def _missing_column(where: str, col: str, role: str, columns: list[str]) -> DataError:
    near = closest_names(col, columns, n=1)
    hint = f" Did you mean {near[0]!r}?" if near else ""
    return DataError(f"{where}: the {role} column {col!r} is not in the file.{hint}")


def _segment_label(value: float) -> str:
    """A number as a level's text: ``3`` for a whole number, else its shortest repr."""
    return str(int(value)) if float(value).is_integer() else repr(float(value))


def _segment_levels(values: pd.Series, col: str, where: str) -> pd.Categorical:
    """The values of a declared segment column as ordered text categories."""
    missing = values.isna().to_numpy().copy()
    if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
        numbers = values.to_numpy(dtype=float, na_value=np.nan)
        distinct = np.unique(numbers[~missing])
        labels = [_segment_label(v) for v in distinct]
        codes = np.full(values.size, len(labels), dtype=np.int64)
        codes[~missing] = np.searchsorted(distinct, numbers[~missing])
    else:
        text = values.astype(str).to_numpy()
        missing |= text == MISSING_LEVEL
        labels = sorted(set(text[~missing].tolist()))
        codes = np.full(values.size, len(labels), dtype=np.int64)
        codes[~missing] = pd.Categorical(text[~missing], categories=labels).codes
    categories = [*labels, MISSING_LEVEL] if missing.any() else labels
    if len(categories) > MAX_SEGMENT_LEVELS:
        msg = (
            f"{where}: the column {col!r} named in audit.segments has {len(categories):,} "
            f"distinct values; a segment column may have at most {MAX_SEGMENT_LEVELS} "
            "(MAX_SEGMENT_LEVELS): bin it in the data file (bands of a number, rare values "
            "grouped) and name the binned column in audit.segments."
        )
        raise LimitError(msg)
    return pd.Categorical.from_codes(codes, categories=categories)


def _segment_frame(frame: pd.DataFrame, names: tuple[str, ...], where: str) -> pd.DataFrame:
    """The declared segment columns of ``frame`` (see :attr:`Dataset.segments`)."""
    columns = [str(c) for c in frame.columns]
    for col in names:
        if col not in columns:
            near = closest_names(col, columns, n=1)
            hint = f" Did you mean {near[0]!r}?" if near else ""
            shown = ", ".join(repr(c) for c in columns[:40])
            more = f" and {len(columns) - 40:,} more" if len(columns) > 40 else ""
            msg = (
                f"{where}: the column {col!r} named in audit.segments is not in the file; "
                f"its columns are {shown}{more}.{hint}"
            )
            raise DataError(msg)
    return pd.DataFrame(
        {col: _segment_levels(frame[col], col, where) for col in names},
        index=pd.RangeIndex(frame.shape[0]),
    )


def _too_many_features(where: str, n: int, when: str) -> LimitError:
    return LimitError(
        f"{where}: {n} feature columns{when}; at most {MAX_FEATURES} are accepted "
        "(MAX_FEATURES): name fewer in data.features or list more in data.exclude."
    )


def prepare_dataset(frame: pd.DataFrame, config: Config, *, source: str = "<frame>") -> Dataset:
    """Check and encode ``frame`` as the config describes."""
    d = config.data
    where = source
    columns = [str(c) for c in frame.columns]
    if len(set(columns)) != len(columns):
        dup = sorted({c for c in columns if columns.count(c) > 1})
        raise DataError(f"{where}: duplicated column names {dup}; each column needs a unique name.")
    if frame.shape[0] > MAX_ROWS:
        raise _too_many_rows(Path(where), frame.shape[0])
    frame = frame.copy()
    frame.columns = columns
    if frame.shape[0] == 0:
        raise DataError(f"{where}: the file has no rows.")
    for col, role in [(d.id, "id"), (d.target, "target")] + [
        (r.score, f"score (release {r.name})") for r in config.releases
    ]:
        if col not in columns:
            raise _missing_column(where, col, role, columns)
    reserved = {d.id, d.target, *(r.score for r in config.releases)}
    for col in (*(d.features or ()), *d.exclude, *d.categorical):
        if col not in columns:
            raise _missing_column(where, col, "feature", columns)
    if d.features is not None:
        features = list(d.features)
        clash = [c for c in features if c in reserved]
        if clash:
            raise DataError(
                f"{where}: {clash} cannot be features: they are the id, target or a score."
            )
    else:
        features = [c for c in columns if c not in reserved and c not in d.exclude]
    if not features:
        raise DataError(f"{where}: no feature columns are left; name them in data.features.")
    if len(features) > MAX_FEATURES:
        raise _too_many_features(where, len(features), "")
    segments = _segment_frame(frame, config.audit.segments, where)

    # one column may serve several releases; select each once
    used = list(dict.fromkeys([d.id, d.target, *[r.score for r in config.releases], *features]))
    sub = frame[used]
    numeric_needed = list(
        dict.fromkeys(
            [d.target, *[r.score for r in config.releases]]
            + [c for c in features if c not in d.categorical]
        )
    )
    hint = " (declare it in data.categorical to encode it)"
    for col in numeric_needed:
        s = sub[col]
        if pd.api.types.is_bool_dtype(s):
            msg = (
                f"{where}: column {col!r} must be numeric; it holds true/false values: write "
                f"them as 1 and 0{hint if col in features else ''}."
            )
            raise DataError(msg)
        if not pd.api.types.is_numeric_dtype(s):
            if not (pd.api.types.is_object_dtype(s) or pd.api.types.is_string_dtype(s)):
                msg = (  # dates, durations, categories...
                    f"{where}: column {col!r} must be numeric; it has type {s.dtype}"
                    + (f"{hint}." if col in features else ".")
                )
                raise DataError(msg)
            numbers = pd.to_numeric(s, errors="coerce")
            bad = numbers.isna() & s.notna()
            rows = np.flatnonzero(bad.to_numpy())
            if not rows.size:  # numbers kept as text, such as integers too long for 64 bits
                sub[col] = numbers.astype(np.float64)
                continue
            msg = (
                f"{where}: column {col!r} must be numeric; {describe_rows(rows)} hold "
                f"non-numbers such as {_short(s.iloc[rows[0]])}"
                + (f"{hint}." if col in features else ".")
            )
            raise DataError(msg)
    col_bad = {
        c: ~np.isfinite(sub[c].to_numpy(dtype=float, na_value=np.nan)) for c in numeric_needed
    }
    col_bad.update({c: sub[c].isna().to_numpy() for c in (d.id, *d.categorical) if c in used})
    bad_mask = np.logical_or.reduce(list(col_bad.values()))
    n_dropped = 0
    kept = np.arange(sub.shape[0])  # file row of each remaining row, for messages
    if bad_mask.any():
        rows = np.flatnonzero(bad_mask)
        bad_cols = [c for c, m in col_bad.items() if m.any()]
        if d.on_missing == "refuse":
            msg = (
                f"{where}: missing, NaN or infinite values in {describe_rows(rows)} "
                f'(columns {bad_cols}); fix them, or set data.on_missing = "drop" to drop '
                "those rows."
            )
            raise DataError(msg)
        n_dropped = int(rows.size)
        kept = np.flatnonzero(~bad_mask)
        sub = sub.loc[~bad_mask].reset_index(drop=True)
        if sub.shape[0] == 0:
            raise DataError(f"{where}: every row has a missing value; none are left.")
    for col in numeric_needed:
        values = sub[col].to_numpy(dtype=float)
        huge = np.abs(values) > MAX_MAGNITUDE
        if huge.any():
            rows = np.flatnonzero(huge)
            msg = (
                f"{where}: column {col!r} holds values of magnitude above {MAX_MAGNITUDE:g} in "
                f"{describe_rows(kept[rows])}, such as {float(values[rows[0]])!r}; distances "
                "and means of such values overflow: replace them (often they stand for a "
                "missing value) or rescale the column."
            )
            raise DataError(msg)

    ids = sub[d.id].astype(str).to_numpy()
    dup_ids = pd.Series(ids).duplicated(keep=False).to_numpy()
    if dup_ids.any():
        rows = np.flatnonzero(dup_ids)
        msg = (
            f"{where}: the id column {d.id!r} has duplicated ids in {describe_rows(kept[rows])} "
            f"(for example {ids[rows[0]]!r}); every row needs its own id."
        )
        raise DataError(msg)
    target = sub[d.target].to_numpy(dtype=float)
    if d.task == "binary":
        values = set(np.unique(target).tolist())
        if not values <= {0.0, 1.0}:
            others = sorted(values - {0.0, 1.0})[:5]
            raise DataError(
                f"{where}: the target {d.target!r} of a binary task must hold 0 and 1 only; "
                f"found {others}."
            )
        if len(values) < 2:
            raise DataError(
                f"{where}: the target {d.target!r} holds one class only ({int(target[0])}); "
                "an audit needs both outcomes."
            )
        target = target.astype(np.int64)
    scores = {}
    for r in config.releases:
        s = sub[r.score].to_numpy(dtype=float)
        if d.task == "binary":
            out = (s < 0) | (s > 1)
            if out.any():
                rows = np.flatnonzero(out)
                raise DataError(
                    f"{where}: the score column {r.score!r} (release {r.name}) must hold "
                    f"probabilities in [0, 1]; {describe_rows(kept[rows])} are outside, such as "
                    f"{float(s[rows[0]])!r}."
                )
        scores[r.name] = s

    # the levels of each categorical column, and the encoded width, before any encoding
    levels: dict[str, list[str]] = {}
    width = 0
    for col in features:
        kind = d.categorical.get(col)
        if kind is None:
            width += 1
            continue
        cats = sorted(sub[col].astype(str).unique().tolist())
        if kind == "onehot" and len(cats) > MAX_CATEGORY_LEVELS:
            msg = (
                f"{where}: the one-hot column {col!r} has {len(cats)} distinct values; a one-hot "
                f"column may have at most {MAX_CATEGORY_LEVELS} (MAX_CATEGORY_LEVELS): encode "
                'it as "ordinal", group rare values, or leave it out.'
            )
            raise LimitError(msg)
        levels[col] = cats
        width += len(cats) if kind == "onehot" else 1
    if width > MAX_FEATURES:
        raise _too_many_features(where, width, " after one-hot encoding")

    blocks, names, encoding = [], [], {}
    for col in features:
        kind = d.categorical.get(col)
        values = sub[col]
        if kind is None:
            blocks.append(values.to_numpy(dtype=float).reshape(-1, 1))
            names.append(col)
            continue
        cats = levels[col]
        encoding[col] = {"encoding": kind, "categories": cats}
        codes = pd.Categorical(values.astype(str), categories=cats).codes.astype(float)
        if kind == "ordinal":
            blocks.append(codes.reshape(-1, 1))
            names.append(col)
        else:
            blocks.append((codes[:, None] == np.arange(len(cats))[None, :]).astype(float))
            names.extend(f"{col}={c}" for c in cats)
    X = np.hstack(blocks)
    return Dataset(
        ids=ids,
        X=X,
        feature_names=tuple(names),
        frame=sub[features].reset_index(drop=True),
        target=target,
        scores=scores,
        task=d.task,
        fingerprint=fingerprint(sub),
        n_dropped=n_dropped,
        source=source,
        encoding=encoding,
        segments=segments.iloc[kept].reset_index(drop=True),
    )


def load_dataset(config: Config, release: str | None = None) -> Dataset:
    """Read the data file of ``release`` (default: the config's last release) and prepare
    it (see :func:`prepare_dataset`). A file holds the scores of the releases validated on
    it: those that name it, or, for the ``[data]`` file, those that name no file."""
    rel = config.release(release) if release else config.releases[-1]
    path = config.data_path(rel)
    on_file = tuple(r for r in config.releases if config.data_path(r) == path)
    if len(on_file) != len(config.releases):
        config = dataclasses.replace(config, releases=on_file)
    return prepare_dataset(read_table(path), config, source=str(path))
