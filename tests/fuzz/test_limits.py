"""The documented size limits: each is refused with a LimitError that names the input, the
value asked for and the bound, before the large allocation it guards against. Most tests
lower a bound with monkeypatch to stay small; the interval, membership and config-size
bounds are also tested at their real values."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import topoaudit.config
import topoaudit.data
import topoaudit.mapper.cover
import topoaudit.mapper.graph
from topoaudit.config import load_config, parse_config
from topoaudit.data import load_dataset, prepare_dataset, read_table
from topoaudit.errors import ConfigError, LimitError, ParameterError
from topoaudit.limits import (
    MAX_CONFIG_BYTES,
    MAX_GRAPH_NODES,
    MAX_INTERVALS,
    MAX_MEMBERSHIPS,
    MAX_RELEASES,
    MAX_STABILITY_OFFSETS,
)
from topoaudit.mapper import MapperBuilder
from topoaudit.mapper.cover import BalancedCover, UniformCover

MINIMAL = """\
model = "m"

[data]
path = "rows.csv"
id = "id"
target = "y"

[[release]]
name = "r1"
score = "s1"
"""


def message(*fragments: str) -> str:
    """A pattern matching the fragments, in order, anywhere in one message."""
    return ".*".join(re.escape(f) for f in fragments)


def config(releases: int = 1, **data: object) -> topoaudit.config.Config:
    return parse_config(
        {
            "model": "m",
            "data": {"path": "rows.csv", "id": "id", "target": "y", **data},
            "release": [{"name": f"r{i}", "score": "s1"} for i in range(releases)],
        }
    )


def frame(n: int = 12, **extra: object) -> pd.DataFrame:
    rng = np.random.default_rng(0)
    return pd.DataFrame(
        {
            "id": [f"m{i}" for i in range(n)],
            "y": np.arange(n) % 2,
            "s1": rng.random(n),
            "x1": rng.normal(size=n),
            **extra,
        }
    )


# ---------------------------------------------------------------- config size and releases


def test_a_config_file_at_the_size_bound_is_read(tmp_path: Path) -> None:
    path = tmp_path / "audit.toml"
    text = MINIMAL + "#" * (MAX_CONFIG_BYTES - len(MINIMAL) - 1) + "\n"
    path.write_text(text, encoding="utf-8")
    assert path.stat().st_size == MAX_CONFIG_BYTES
    assert load_config(path).model == "m"


def test_a_config_file_one_byte_over_the_bound_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "audit.toml"
    path.write_text(MINIMAL + "#" * (MAX_CONFIG_BYTES - len(MINIMAL)) + "\n", encoding="utf-8")
    with pytest.raises(
        LimitError,
        match=message(str(path), f"larger than {MAX_CONFIG_BYTES} bytes", "MAX_CONFIG_BYTES"),
    ):
        load_config(path)


def test_a_huge_config_file_is_refused_after_reading_the_bound(tmp_path: Path) -> None:
    path = tmp_path / "huge.toml"
    with path.open("wb") as fh:  # 20 GB on paper, no disk used: a sparse file
        fh.truncate(20 * 2**30)
    with pytest.raises(LimitError, match=message(str(path), "MAX_CONFIG_BYTES")):
        load_config(path)


def test_the_number_of_releases_is_bounded() -> None:
    assert len(config(MAX_RELEASES).releases) == MAX_RELEASES
    with pytest.raises(
        LimitError,
        match=message(
            f"<config>: {MAX_RELEASES + 1} [[release]] tables",
            f"at most {MAX_RELEASES}",
            "MAX_RELEASES",
        ),
    ):
        config(MAX_RELEASES + 1)


@pytest.mark.parametrize(
    ("key", "value"), [("stability_intervals", 1), ("stability_overlaps", 0.05)]
)
def test_the_stability_grid_is_bounded(key: str, value: float) -> None:
    doc = {
        "model": "m",
        "data": {"path": "rows.csv", "id": "id", "target": "y"},
        "release": [{"name": "r1", "score": "s1"}],
    }
    ok = dict(doc, audit={key: [value] * MAX_STABILITY_OFFSETS})
    assert len(getattr(parse_config(ok).audit, key)) == MAX_STABILITY_OFFSETS
    too_many = dict(doc, audit={key: [value] * (MAX_STABILITY_OFFSETS + 1)})
    with pytest.raises(
        ConfigError, match=message(f"audit.{key}", f"at most {MAX_STABILITY_OFFSETS}")
    ):
        parse_config(too_many)


def test_the_release_bound_is_checked_before_the_releases(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.config, "MAX_RELEASES", 3)
    doc = {"model": "m", "data": {"path": "r.csv", "id": "id", "target": "y"}}
    with pytest.raises(LimitError, match=message("4 [[release]] tables", "at most 3")):
        parse_config({**doc, "release": ["not a table"] * 4})


# ---------------------------------------------------------------- rows


def test_rows_above_the_bound_are_refused_in_a_csv_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_ROWS", 10)
    path = tmp_path / "rows.csv"
    frame(10).to_csv(path, index=False)
    assert read_table(path).shape[0] == 10
    # rows past the bound are never parsed: a malformed line there is not reached
    path.write_text(frame(11).to_csv(index=False) + "bad,line,with,too,many,fields\n")
    with pytest.raises(
        LimitError, match=message(str(path), "more than 10 rows", "at most 10 rows", "MAX_ROWS")
    ):
        read_table(path)


def test_rows_above_the_bound_are_refused_in_a_parquet_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_ROWS", 10)
    path = tmp_path / "rows.parquet"
    frame(11).to_parquet(path)
    with pytest.raises(LimitError, match=message(str(path), "has 11 rows", "at most 10 rows")):
        load_dataset(config(path=str(path)))


def test_rows_above_the_bound_are_refused_in_a_data_frame(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_ROWS", 10)
    assert prepare_dataset(frame(10), config()).n_rows == 10
    with pytest.raises(LimitError, match=message("<frame>: the file has 11 rows", "MAX_ROWS")):
        prepare_dataset(frame(11), config())


# ---------------------------------------------------------------- features and levels


def test_features_above_the_bound_are_refused(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_FEATURES", 3)
    rng = np.random.default_rng(1)
    three = frame(x2=rng.normal(size=12), x3=rng.normal(size=12))
    assert prepare_dataset(three, config()).X.shape[1] == 3
    with pytest.raises(
        LimitError, match=message("<frame>: 4 feature columns;", "at most 3", "MAX_FEATURES")
    ):
        prepare_dataset(three.assign(x4=1.0), config())


def test_features_after_one_hot_encoding_are_counted(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_FEATURES", 3)
    zone = np.array(["a", "b", "c"])[np.arange(12) % 3]
    rows = frame(zone=zone)  # x1 and three zones: 4 encoded columns
    assert prepare_dataset(rows, config(categorical={"zone": "ordinal"})).X.shape[1] == 2
    with pytest.raises(
        LimitError,
        match=message("<frame>: 4 feature columns after one-hot encoding", "at most 3"),
    ):
        prepare_dataset(rows, config(categorical={"zone": "onehot"}))


def test_levels_of_a_one_hot_column_are_bounded(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.data, "MAX_CATEGORY_LEVELS", 3)
    rows = frame(zone=[f"z{i % 4}" for i in range(12)])
    with pytest.raises(
        LimitError,
        match=message(
            "<frame>: the one-hot column 'zone' has 4 distinct values",
            "at most 3",
            "MAX_CATEGORY_LEVELS",
            '"ordinal"',
        ),
    ):
        prepare_dataset(rows, config(categorical={"zone": "onehot"}))
    # an ordinal column is one column whatever its levels
    ds = prepare_dataset(rows, config(categorical={"zone": "ordinal"}))
    assert ds.encoding["zone"]["categories"] == ["z0", "z1", "z2", "z3"]


# ---------------------------------------------------------------- intervals (the real bound)


@pytest.mark.parametrize("cover", [UniformCover, BalancedCover])
def test_the_interval_bound_itself_is_accepted(cover: type) -> None:
    elements = cover(MAX_INTERVALS, overlap=0.0).fit_transform(np.linspace(0, 1, 50))
    assert sum(e.size for e in elements) == 50


@pytest.mark.parametrize(
    ("n_intervals", "asked"),
    [(MAX_INTERVALS + 1, MAX_INTERVALS + 1), (10**6, 10**6), ((3, 10**6), 10**6)],
    ids=["bound+1", "a-million", "a-million-in-2-d"],
)
def test_intervals_above_the_bound_are_a_limit_error(n_intervals: object, asked: int) -> None:
    X = np.random.default_rng(0).normal(size=(40, 3))
    builder = MapperBuilder("pca", filter_params={"n_components": 2}, n_intervals=n_intervals)
    with pytest.raises(LimitError) as info:
        builder.fit(X)
    text = str(info.value)
    assert f"asks for {asked} intervals per filter dimension" in text
    assert f"the limit of {MAX_INTERVALS} (MAX_INTERVALS)" in text
    assert isinstance(info.value, ParameterError)  # still a wrong value of n_intervals


# ---------------------------------------------------------------- memberships and graph nodes


def test_a_cover_with_too_many_memberships_is_refused_at_the_real_bound() -> None:
    # 1000 intervals at overlap 0.999 put each row in about 750 of them: 75 million in all
    values = np.random.default_rng(0).random(100_000)
    cover = UniformCover(MAX_INTERVALS, overlap=0.999)
    with pytest.raises(
        LimitError,
        match=message(
            "would place the 100000 rows in", f"at most {MAX_MEMBERSHIPS}", "MAX_MEMBERSHIPS"
        ),
    ):
        cover.fit_transform(values)


def test_a_cover_with_more_elements_than_graph_nodes_is_refused_at_the_real_bound() -> None:
    # 1000 x 1000 intervals at overlap 0.999: 200 rows fill about a million elements
    values = np.random.default_rng(0).random((200, 2))
    cover = UniformCover((MAX_INTERVALS, MAX_INTERVALS), overlap=0.999)
    with pytest.raises(
        LimitError,
        match=message("non-empty elements", f"at most {MAX_GRAPH_NODES}", "MAX_GRAPH_NODES"),
    ):
        cover.fit_transform(values)


def test_the_membership_bound_is_checked_before_the_elements(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr(topoaudit.mapper.cover, "MAX_MEMBERSHIPS", 100)
    values = np.linspace(0, 1, 50)
    assert len(UniformCover(4, overlap=0.3).fit_transform(values)) == 4  # about 60 memberships
    with pytest.raises(
        LimitError, match=message("UniformCover(n_intervals=10, overlap=0.9)", "at most 100")
    ):
        UniformCover(10, overlap=0.9).fit_transform(values)


@pytest.mark.parametrize("where", ["cover", "builder"])
def test_a_cover_with_more_elements_than_graph_nodes_is_refused(
    where: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    # the cover counts its elements before forming them; the builder checks any cover object
    monkeypatch.setattr(
        topoaudit.mapper.cover if where == "cover" else topoaudit.mapper.graph, "MAX_GRAPH_NODES", 5
    )
    X = np.linspace(0, 1, 60).reshape(-1, 1)
    assert MapperBuilder("coordinate", n_intervals=5).fit(X).graph_.n_nodes == 5
    expected = "has 6 non-empty elements" if where == "cover" else "would have at least 6 nodes"
    with pytest.raises(LimitError, match=message(expected, "at most 5", "MAX_GRAPH_NODES")):
        MapperBuilder("coordinate", n_intervals=6, overlap=0.0).fit(X)


def test_clusters_above_the_node_bound_are_refused(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(topoaudit.mapper.graph, "MAX_GRAPH_NODES", 5)
    # one cover element holding six well-separated groups: six clusters, six nodes
    X = np.repeat(np.arange(6) * 100.0, 10).reshape(-1, 1)
    X = X + np.random.default_rng(0).normal(scale=0.1, size=X.shape)
    with pytest.raises(
        LimitError, match=message("would have 6 nodes (from SingleLinkage(", "at most 5 nodes")
    ):
        MapperBuilder("coordinate", n_intervals=1).fit(X)
