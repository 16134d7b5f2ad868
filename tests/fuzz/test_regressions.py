"""Inputs the fuzz tests once broke on, kept as ordinary tests with their messages."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from topoaudit.config import load_config, parse_config
from topoaudit.data import read_table
from topoaudit.errors import ConfigError, DataError
from topoaudit.mapper import MapperBuilder

BASE = {
    "model": "m",
    "data": {"path": "rows.csv", "id": "id", "target": "y"},
    "release": [{"name": "r1", "score": "s1"}],
}
MINIMAL = b'model = "m"\n[data]\npath = "rows.csv"\nid = "id"\ntarget = "y"\n'
MINIMAL += b'[[release]]\nname = "r1"\nscore = "s1"\n'


def test_rows_with_one_field_more_than_the_header_are_refused(tmp_path: Path) -> None:
    # pandas would silently take the first column as the index and shift every name
    path = tmp_path / "rows.csv"
    path.write_text("id,y,s\n1,0,0.5,9\n2,1,0.4,8\n")
    with pytest.raises(DataError, match=r"rows.csv: .*more fields than the header"):
        read_table(path)


def test_a_row_with_an_extra_field_is_named_by_line(tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("id,y,s\n1,0,0.5\n2,1,0.4,9\n")
    with pytest.raises(DataError, match=r"rows.csv: cannot be read as CSV .*line 3"):
        read_table(path)


def test_an_empty_header_cell_is_named_by_position(tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("id,,s\n1,0,0.5\n")
    with pytest.raises(
        DataError, match=r"the header gives no name to column 2 \(counting from 1\)"
    ):
        read_table(path)


def test_a_config_with_a_byte_order_mark_is_read(tmp_path: Path) -> None:
    path = tmp_path / "audit.toml"
    path.write_bytes(b"\xef\xbb\xbf" + MINIMAL)  # UTF-8 BOM, as some editors write it
    assert load_config(path).model == "m"


def test_deeply_nested_toml_is_refused_without_a_recursion_error(tmp_path: Path) -> None:
    path = tmp_path / "audit.toml"
    path.write_text("x = " + "[" * 3000 + "]" * 3000 + "\n")
    with pytest.raises(ConfigError, match=r"audit.toml: not valid TOML.*nested too deeply"):
        load_config(path)


def test_nan_stability_offsets_are_refused_by_key() -> None:
    doc = dict(BASE, audit={"stability_overlaps": [float("nan")]})
    with pytest.raises(ConfigError, match=re.escape("'audit.stability_overlaps' must be")):
        parse_config(doc)


def test_the_id_and_the_target_must_be_two_columns() -> None:
    doc = dict(BASE, data={"path": "rows.csv", "id": "y", "target": "y"})
    with pytest.raises(ConfigError, match=r"'data.id' and 'data.target' both name the column"):
        parse_config(doc)


def test_values_that_would_overflow_distances_are_named_by_row_and_column() -> None:
    x = np.random.default_rng(0).normal(size=(50, 3))
    x[7, 1] = 1e300
    with pytest.raises(DataError, match=re.escape("magnitude above 1e+150 in row 7 (column 1)")):
        MapperBuilder().fit(x)
