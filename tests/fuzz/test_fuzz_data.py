"""Property-based tests of the table loader: whatever a CSV file holds, reading and
preparing it ends in a table (a :class:`Dataset`) or in a :class:`TopoauditError` that names
the file, never in another exception; an accepted table has the rows and values written."""

from __future__ import annotations

import csv
import io
import math
from datetime import timedelta
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from topoaudit.config import parse_config
from topoaudit.data import Dataset, prepare_dataset, read_table
from topoaudit.errors import TopoauditError
from topoaudit.limits import MAX_CATEGORY_LEVELS, MAX_FEATURES, MAX_MAGNITUDE

FUZZ = settings(
    max_examples=200,
    deadline=timedelta(seconds=10),
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)

NAMES = ["id", "y", "s1", "x1", "x2", "c1"]
ODD_NAMES = ["", " ", "x1.1", "Unnamed: 0", "a,b", 'q"t', "é", "nan", "1"]
SPECIAL = [
    "", "nan", "NA", "NaN", "null", "inf", "-inf", "Infinity", "1e308", "-1e308", "1e309",
    "-1e-308", "5e-324", "1e150", "1.0000001e150", "0", "1", "-0", "0.5", "True", "false",
    "a", 'q"t', "a,b", "x\ny", " ", "99999999999999999999999", "0x10", "1_000",
]  # fmt: skip
CELL = st.one_of(
    st.sampled_from(SPECIAL),
    st.integers(-(10**20), 10**20).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.text(max_size=6),
)
# how the cells of one column are made: what an audit needs (the cells of a "dirty" column
# are now and then anything)
KINDS = {
    "id": lambda i: st.just(f"m{i:03d}"),
    "binary": lambda i: st.sampled_from(["0", "1", "0.0", "1.0"]),
    "probability": lambda i: st.floats(0, 1).map(repr),
    "number": lambda i: st.one_of(st.floats(-1e6, 1e6).map(repr), st.integers().map(str)),
    "category": lambda i: st.sampled_from(["north", "south", "east", "west", ""]),
    "anything": lambda i: CELL,
}
WEIGHTED_KINDS = st.sampled_from(
    ["id", "binary", "probability", "number", "number", "category", "anything"]
)


def likely(strategy: st.SearchStrategy[Any], usual: Any, odds: int = 6) -> st.SearchStrategy[Any]:
    """``usual``, or in about one draw of ``odds`` a draw from ``strategy``."""
    return st.integers(0, odds - 1).flatmap(lambda i: strategy if i == odds - 1 else st.just(usual))


@st.composite
def tables(draw: st.DrawFn) -> dict[str, Any]:
    """A header, rows of cells, and how they are written to a file."""
    header = draw(
        likely(
            st.lists(st.sampled_from(NAMES + ODD_NAMES), min_size=0, max_size=7),
            ["id", "y", "s1", "x1", "x2", "c1"],
        )
    )
    usual = {"id": "id", "y": "binary", "s1": "probability", "c1": "category"}
    kinds = [draw(likely(WEIGHTED_KINDS, usual.get(name, "number"), 10)) for name in header]
    messy = draw(likely(st.just(True), False, 3))  # a third of the tables hold junk cells
    dirty = [messy and draw(st.booleans()) for _ in header]
    n_rows = draw(likely(st.integers(0, 3), None)) or draw(st.integers(4, 30))
    rows = []
    ragged_rows = messy and draw(st.booleans())
    for i in range(n_rows):
        row = [
            draw(likely(CELL, None, 3) if mess else st.none()) or draw(KINDS[kind](i))
            for kind, mess in zip(kinds, dirty, strict=True)
        ]
        ragged = draw(likely(st.sampled_from(["short", "long"]), "no", 4)) if ragged_rows else "no"
        if ragged == "short" and row:
            row = row[: draw(st.integers(0, len(row) - 1))]
        elif ragged == "long":
            row = [*row, draw(CELL)]
        rows.append(row)
    return {
        "header": header,
        "rows": rows,
        "quoting": draw(likely(st.sampled_from(["none", "raw"]), "minimal")),
        "bom": draw(likely(st.just(True), False)),
        "junk": draw(likely(st.binary(min_size=1, max_size=40), b"")),
    }


def write(path: Path, table: dict[str, Any]) -> None:
    if table["quoting"] == "raw":  # fields joined as they are: stray quotes and separators
        text = "\n".join(",".join(r) for r in [table["header"], *table["rows"]]) + "\n"
    else:
        buffer = io.StringIO()
        quoting = csv.QUOTE_MINIMAL if table["quoting"] == "minimal" else csv.QUOTE_ALL
        writer = csv.writer(buffer, quoting=quoting, lineterminator="\n")
        writer.writerow(table["header"])
        writer.writerows(table["rows"])
        text = buffer.getvalue()
    data = ("\ufeff" if table["bom"] else "") + text
    path.write_bytes(data.encode("utf-8", errors="surrogatepass") + table["junk"])


def well_formed(table: dict[str, Any]) -> bool:
    """Whether the file is a clean CSV table: every reader should return exactly its cells."""
    header = table["header"]
    return (
        table["quoting"] != "raw"
        and not table["junk"]
        and bool(header)
        and all(name.strip() for name in header)
        and len(set(header)) == len(header)
        and all(len(r) == len(header) for r in table["rows"])
        and not (len(header) == 1 and any(r == [""] for r in table["rows"]))
        # csv.writer leaves a lone "\r" unquoted unless every field is quoted
        and (table["quoting"] == "none" or not any("\r" in c for r in table["rows"] for c in r))
    )


# the cells read_csv reads as missing by default (pandas documentation, read_csv, na_values)
NA_STRINGS = {
    "", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND", "1.#QNAN",
    "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null",
}  # fmt: skip


def a_cell(text: str) -> Any:
    """What a cell written as ``text`` should be read as: a number if it reads as one."""
    try:
        return float(text)
    except ValueError:
        return text


def same_cell(read: Any, written: str) -> bool:
    """Whether a cell read back is the cell written (as text, number, truth value or NA)."""
    if pd.isna(read):
        return written in NA_STRINGS or a_cell(written) != a_cell(written)  # NA or NaN
    if isinstance(read, bool | np.bool_):
        return written.strip().lower() == str(bool(read)).lower()
    expected = a_cell(written)
    if isinstance(expected, float) and isinstance(read, int | float | np.number):
        return math.isclose(float(read), expected, rel_tol=1e-12, abs_tol=1e-300) or (
            math.isinf(expected) and float(read) == expected
        )
    return str(read) == written


@FUZZ
@given(table=tables())
def test_a_random_csv_file_is_a_table_or_a_data_error(
    table: dict[str, Any], tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = tmp_path_factory.getbasetemp() / "rows.csv"
    write(path, table)
    try:
        frame = read_table(path)
    except TopoauditError as exc:
        event(f"refused: {str(exc)[len(str(path)) : len(str(path)) + 30]}")
        assert str(exc).startswith(f"{path}: ")
        assert not well_formed(table), exc
        return
    event("read a table")
    assert frame.columns.is_unique
    assert all(str(c).strip() for c in frame.columns)
    if well_formed(table):
        assert frame.shape == (len(table["rows"]), len(table["header"]))
    if table["quoting"] != "raw" and not table["junk"] and table["header"]:
        # whatever else the file holds, what is read is what was written, cell by cell
        assert list(frame.columns) == table["header"]
        rows = table["rows"]
        if not any(r in ([], [""]) or any("\r" in c for c in r) for r in rows):
            for i, row in enumerate(rows[:5]):
                for j, cell in enumerate(row[: frame.shape[1]]):
                    assert same_cell(frame.iat[i, j], cell), (i, j, frame.iat[i, j], cell)


@st.composite
def settings_for(draw: st.DrawFn, header: list[str]) -> dict[str, Any]:
    names = [n for n in header if n] or ["id"]
    pick = likely(st.just("absent"), None, 20).flatmap(
        lambda absent: st.just(absent) if absent else st.sampled_from(names)
    )

    data: dict[str, Any] = {
        "path": "rows.csv",
        "id": draw(likely(pick, "id", 10)),
        "target": draw(likely(pick, "y", 10)),
        "task": draw(likely(st.just("regression"), "binary")),
        "on_missing": draw(st.sampled_from(["refuse", "drop"])),
    }
    features = draw(likely(st.lists(pick, min_size=1, max_size=3, unique=True), None, 3))
    if features is not None:
        data["features"] = features
    cats = draw(likely(st.lists(pick, max_size=2, unique=True), ["c1"] if "c1" in names else [], 3))
    data["categorical"] = {c: draw(st.sampled_from(["onehot", "ordinal"])) for c in cats}
    releases = [{"name": "r1", "score": draw(likely(pick, "s1", 10))}]
    if draw(st.booleans()):
        releases.append({"name": "r2", "score": draw(likely(pick, "s1", 10))})
    return {"model": "m", "data": data, "release": releases}


@FUZZ
@given(table=tables(), choice=st.data())
def test_a_random_table_is_prepared_or_refused_by_name(
    table: dict[str, Any], choice: st.DataObject, tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = tmp_path_factory.getbasetemp() / "table.csv"
    write(path, table)
    try:
        config = parse_config(choice.draw(settings_for(table["header"])))
        frame = read_table(path)
        ds = prepare_dataset(frame, config, source=str(path))
    except TopoauditError as exc:
        event(f"refused: {str(exc).replace(str(path), '')[:40]}")
        assert str(exc).startswith(("<config>: ", f"{path}: "))
        return
    event("prepared a dataset")
    check_dataset(ds, frame, config)


def frame_columns(n: int) -> st.SearchStrategy[pd.Series]:
    """A column of ``n`` values of one of the types a data frame may hold."""

    def of(elements: st.SearchStrategy[Any]) -> st.SearchStrategy[list[Any]]:
        return st.lists(elements, min_size=n, max_size=n)

    return st.one_of(
        *[of(st.floats(-1e6, 1e6)).map(pd.Series)] * 4,
        of(st.floats(allow_nan=True, allow_infinity=True)).map(pd.Series),
        of(st.integers(-(2**63), 2**63 - 1)).map(lambda v: pd.Series(v, dtype="int64")),
        of(st.one_of(st.none(), st.integers(-5, 5))).map(lambda v: pd.Series(v, dtype="Int64")),
        of(st.one_of(st.none(), st.floats(0, 1))).map(lambda v: pd.Series(v, dtype="Float64")),
        of(st.booleans()).map(pd.Series),
        of(st.one_of(st.none(), st.text(max_size=3), st.integers(), st.floats())).map(
            lambda v: pd.Series(v, dtype=object)
        ),
        of(st.sampled_from(["a", "b"])).map(lambda v: pd.Series(v, dtype="category")),
        of(st.integers(0, 10**12)).map(lambda v: pd.Series(pd.to_datetime(v))),
    )


@st.composite
def frames(draw: st.DrawFn) -> pd.DataFrame:
    n = draw(st.integers(0, 20))
    base = pd.DataFrame(
        {
            "id": [f"m{i}" for i in range(n)],
            "y": [i % 2 for i in range(n)],
            "s1": np.linspace(0, 1, n),
        }
    )
    names = ["x1", *draw(st.lists(st.sampled_from(["id", "y", "s1", "x2", "c1"]), max_size=3))]
    for name in names:
        base[name] = draw(frame_columns(n))
    return base


@FUZZ
@given(frame=frames(), choice=st.data())
def test_a_random_data_frame_is_prepared_or_refused_by_name(
    frame: pd.DataFrame, choice: st.DataObject
) -> None:
    try:
        config = parse_config(choice.draw(settings_for(list(frame.columns))))
        ds = prepare_dataset(frame, config, source="<frame>")
    except TopoauditError as exc:
        event(f"refused: {str(exc)[:40]}")
        assert str(exc).startswith("<config>: ") or str(exc).startswith("<frame>: ")
        return
    event("prepared a dataset")
    check_dataset(ds, frame, config)


def check_dataset(ds: Dataset, frame: pd.DataFrame, config: Any) -> None:
    """What every prepared table satisfies, whatever was read."""
    d = config.data
    assert ds.n_rows >= 1 and ds.n_rows + ds.n_dropped == frame.shape[0]
    assert ds.n_dropped == 0 or d.on_missing == "drop"
    assert ds.X.shape == (ds.n_rows, len(ds.feature_names)) and ds.X.dtype == np.float64
    assert 1 <= ds.X.shape[1] <= MAX_FEATURES
    assert np.isfinite(ds.X).all() and (np.abs(ds.X) <= MAX_MAGNITUDE).all()
    assert len(set(ds.ids.tolist())) == ds.n_rows
    assert ds.target.shape == (ds.n_rows,)
    for r in config.releases:
        s = ds.scores[r.name]
        assert s.shape == (ds.n_rows,) and np.isfinite(s).all()
        if ds.task == "binary":
            assert ((s >= 0) & (s <= 1)).all()
    if ds.task == "binary":
        assert set(np.unique(ds.target).tolist()) == {0, 1}
    for col, enc in ds.encoding.items():
        if enc["encoding"] == "onehot":
            assert len(enc["categories"]) <= MAX_CATEGORY_LEVELS
            block = ds.X[:, [i for i, n in enumerate(ds.feature_names) if n.startswith(col + "=")]]
            assert (block.sum(axis=1) == 1).all()
    if ds.n_dropped == 0:  # the numeric features are the values read
        for j, name in enumerate(ds.feature_names):
            if name in frame.columns and name not in d.categorical:
                read = pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float)
                np.testing.assert_array_equal(ds.X[:, j], read)
    again = prepare_dataset(frame, config, source=ds.source)
    assert again.fingerprint == ds.fingerprint and len(ds.fingerprint) == 64
