"""The TOML audit configuration: what is accepted, its defaults, and every refusal with the
file and key it names."""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path
from typing import Any

import pytest

from topoaudit.config import (
    AuditSettings,
    ComputeSettings,
    Config,
    DataSettings,
    GraphSettings,
    Release,
    load_config,
    parse_config,
)
from topoaudit.errors import ConfigError

MINIMAL = """\
model = "meter-failure"

[data]
path = "validation.csv"
id = "meter_id"
target = "failed_90d"

[[release]]
name = "2026.1"
score = "score_2026_1"
"""


def message(*fragments: str) -> str:
    """A pattern matching the fragments, in order, anywhere in one message."""
    return ".*".join(re.escape(f) for f in fragments)


def write(folder: Path, text: str, name: str = "audit.toml") -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def doc(**changes: Any) -> dict[str, Any]:
    """A minimal parsed document, with top-level keys replaced (None removes one)."""
    base: dict[str, Any] = {
        "model": "m1",
        "data": {"path": "rows.csv", "id": "id", "target": "y"},
        "release": [{"name": "r1", "score": "s1"}],
    }
    for key, value in changes.items():
        if value is None:
            base.pop(key, None)
        else:
            base[key] = value
    return base


# ---------------------------------------------------------------- accepted files


def test_a_minimal_file_is_read(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL)
    cfg = load_config(path)
    assert isinstance(cfg, Config)
    assert cfg.model == "meter-failure"
    assert cfg.data.id == "meter_id"
    assert cfg.data.target == "failed_90d"
    assert cfg.releases == (Release(name="2026.1", score="score_2026_1"),)
    assert cfg.source == path


def test_defaults_fill_what_the_file_leaves_out(tmp_path: Path) -> None:
    cfg = load_config(write(tmp_path, MINIMAL))
    assert cfg.seed == 0
    assert cfg.graph == GraphSettings()
    assert cfg.audit == AuditSettings()
    assert (cfg.graph.n_intervals, cfg.graph.overlap, cfg.graph.clusterer) == ("auto",) * 3
    assert cfg.graph.resamples == 50
    assert cfg.graph.filter == "pca"
    assert cfg.audit.fdr == 0.05
    assert cfg.audit.stability_intervals == (-2, 0, 2)
    assert cfg.data.task == "binary"
    assert cfg.data.features is None
    assert cfg.data.exclude == ()
    assert dict(cfg.data.categorical) == {}
    assert cfg.data.on_missing == "refuse"
    assert cfg.releases[0].threshold == 0.5


def test_every_section_is_read(tmp_path: Path) -> None:
    text = MINIMAL.replace('model = "meter-failure"\n', 'model = "m"\nseed = 7\n') + (
        """
        [[release]]
        name = "2026.2"
        score = "score_2026_2"
        threshold = 0.3

        [graph]
        filter = "eccentricity"
        n_intervals = 12
        overlap = 0.25
        clusterer = "dbscan"
        standardize = false

        [audit]
        fdr = 0.1
        folds = 3
        stability_intervals = [-1, 1]
        stability_overlaps = [0, 0.05]
        """
    )
    text = text.replace(
        'target = "failed_90d"\n',
        'target = "failed_90d"\nfeatures = ["a", "b"]\nexclude = ["c"]\n'
        'categorical = { b = "onehot" }\non_missing = "drop"\n',
    )
    cfg = load_config(write(tmp_path, textwrap.dedent(text)))
    assert cfg.seed == 7
    assert cfg.data.features == ("a", "b")
    assert cfg.data.exclude == ("c",)
    assert dict(cfg.data.categorical) == {"b": "onehot"}
    assert cfg.data.on_missing == "drop"
    assert [r.name for r in cfg.releases] == ["2026.1", "2026.2"]
    assert cfg.release("2026.2").threshold == 0.3
    assert cfg.graph.filter == "eccentricity"
    assert cfg.graph.n_intervals == 12
    assert cfg.graph.standardize is False
    assert cfg.graph.components == 1
    assert cfg.audit.fdr == 0.1
    assert cfg.audit.stability_intervals == (-1, 1)
    assert cfg.audit.stability_overlaps == (0, 0.05)
    assert cfg.audit.min_rows == AuditSettings().min_rows


def test_a_relative_data_path_is_read_from_the_config_folder(tmp_path: Path) -> None:
    path = write(tmp_path / "audits" / "q1", MINIMAL.replace("validation.csv", "data/v.csv"))
    cfg = load_config(path)
    assert cfg.data.path == tmp_path / "audits" / "q1" / "data" / "v.csv"


def test_an_absolute_data_path_is_kept(tmp_path: Path) -> None:
    target = (tmp_path / "elsewhere" / "v.parquet").as_posix()
    cfg = load_config(write(tmp_path / "cfg", MINIMAL.replace("validation.csv", target)))
    assert cfg.data.path == Path(target)


def test_parse_config_without_a_source_keeps_the_path_relative() -> None:
    cfg = parse_config(doc())
    assert cfg.data.path == Path("rows.csv")
    assert cfg.source is None


def test_parse_config_reads_paths_against_the_source_folder(tmp_path: Path) -> None:
    cfg = parse_config(doc(), source=tmp_path / "a.toml")
    assert cfg.data.path == tmp_path / "rows.csv"


def test_config_release_finds_a_release_by_name() -> None:
    cfg = parse_config(doc(release=[{"name": "a", "score": "sa"}, {"name": "b", "score": "sb"}]))
    assert cfg.release("b") == Release(name="b", score="sb")


def test_to_dict_is_json_serialisable(tmp_path: Path) -> None:
    text = MINIMAL.replace(
        'target = "failed_90d"\n',
        'target = "failed_90d"\nfeatures = ["a"]\ncategorical = { a = "ordinal" }\n',
    )
    cfg = load_config(write(tmp_path, text))
    out = cfg.to_dict()
    round_trip = json.loads(json.dumps(out))
    assert round_trip == out
    assert "source" not in out
    assert out["model"] == "meter-failure"
    assert out["data"]["path"] == str(tmp_path / "validation.csv")
    assert out["data"]["features"] == ["a"]
    assert out["data"]["categorical"] == {"a": "ordinal"}
    assert out["releases"] == [{"name": "2026.1", "score": "score_2026_1", "threshold": 0.5}]
    assert out["graph"]["n_intervals"] == "auto"
    assert out["audit"]["stability_overlaps"] == [-0.1, 0.0, 0.1]


def test_the_compute_section_is_read_and_left_out_of_the_record(tmp_path: Path) -> None:
    text = MINIMAL + '\n[compute]\nscheduler = "tcp://10.0.0.5:8786"\nworkers = 3\n'
    cfg = load_config(write(tmp_path, text))
    assert cfg.compute == ComputeSettings(scheduler="tcp://10.0.0.5:8786", workers=3)
    assert load_config(write(tmp_path, MINIMAL, "plain.toml")).compute == ComputeSettings(
        scheduler=None, workers="auto"
    )
    # where an audit runs is no part of what it found: the bundle's copy has no [compute]
    assert "compute" not in cfg.to_dict()
    assert cfg.to_dict() == load_config(tmp_path / "plain.toml").to_dict()


@pytest.mark.parametrize(
    ("key", "value", "expected"),
    [
        ("scheduler", '"10.0.0.5:8786"', "a Dask scheduler address tcp://HOST:PORT"),
        ("scheduler", '"tcp://10.0.0.5:99999"', "got 'tcp://10.0.0.5:99999'."),
        ("scheduler", "8786", "got 8786."),
        ("workers", "0", "'auto' or an int in the range [1, 256]; got 0."),
        ("workers", '"all"', "one of 'auto' or an int in the range [1, 256]; got 'all'."),
    ],
)
def test_bad_compute_values_name_the_key_and_what_is_accepted(
    tmp_path: Path, key: str, value: str, expected: str
) -> None:
    path = write(tmp_path, MINIMAL + f"\n[compute]\n{key} = {value}\n")
    with pytest.raises(
        ConfigError, match=message(str(path), f"key 'compute.{key}' must be ", expected)
    ):
        load_config(path)


def test_an_unknown_compute_key_suggests_the_closest(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + '\n[compute]\nschedular = "tcp://h:8786"\n')
    with pytest.raises(
        ConfigError,
        match=message(
            "unknown key 'compute.schedular'; the known keys here are 'compute.scheduler', "
            "'compute.workers'.",
            "Did you mean 'compute.scheduler'?",
        ),
    ):
        load_config(path)


def test_settings_are_frozen(tmp_path: Path) -> None:
    cfg = load_config(write(tmp_path, MINIMAL))
    with pytest.raises(AttributeError):
        cfg.model = "other"  # type: ignore[misc]
    with pytest.raises(AttributeError):
        cfg.data.id = "other"  # type: ignore[misc]
    assert isinstance(cfg.data, DataSettings)


@pytest.mark.parametrize("name", ["a", "A.b-c_1", "2026.1", "x" * 64])
def test_safe_names_are_accepted(name: str) -> None:
    cfg = parse_config(doc(model=name, release=[{"name": name, "score": "s"}]))
    assert cfg.model == name
    assert cfg.releases[0].name == name


# ---------------------------------------------------------------- refusals


def test_a_missing_file_is_named(tmp_path: Path) -> None:
    path = tmp_path / "nope.toml"
    with pytest.raises(ConfigError, match=message(str(path), ": no such config file.")):
        load_config(path)


def test_invalid_toml_is_named(tmp_path: Path) -> None:
    path = write(tmp_path, 'model = "m"\n[data\npath = 1\n')
    with pytest.raises(ConfigError, match=message(str(path), ": not valid TOML (")):
        load_config(path)


def test_a_file_that_is_not_utf8_is_named(tmp_path: Path) -> None:
    path = tmp_path / "latin.toml"
    path.write_bytes(b'model = "caf\xe9"\n')
    with pytest.raises(ConfigError, match=message(str(path), ": cannot be read (")):
        load_config(path)


def test_an_unknown_top_level_key_is_named_with_a_suggestion(tmp_path: Path) -> None:
    path = write(tmp_path, 'modle = "x"\n' + MINIMAL)
    with pytest.raises(
        ConfigError,
        match=message(
            str(path),
            ": unknown key 'modle'; the known keys here are 'model', 'seed', 'data', 'release', "
            "'graph', 'audit', 'gate', 'compute'.",
            " Did you mean 'model'?",
        ),
    ):
        load_config(path)


def test_an_unknown_key_in_graph_suggests_the_closest(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "\n[graph]\nn_interval = 8\n")
    with pytest.raises(
        ConfigError,
        match=message(
            "unknown key 'graph.n_interval'; the known keys here are 'graph.filter'",
            "Did you mean 'graph.n_intervals'?",
        ),
    ):
        load_config(path)


def test_an_unknown_key_without_a_near_name_has_no_suggestion() -> None:
    with pytest.raises(ConfigError, match=r"unknown key 'data\.zzzzzz'[^?]*\.$"):
        parse_config(doc(data={"path": "p", "id": "i", "target": "t", "zzzzzz": 1}))


def test_an_unknown_key_in_a_release_suggests_the_closest() -> None:
    with pytest.raises(
        ConfigError,
        match=message("unknown key 'release[0].scor'", "Did you mean 'release[0].score'?"),
    ):
        parse_config(doc(release=[{"name": "r", "scor": "s"}]))


@pytest.mark.parametrize(
    ("section", "key", "value", "expected"),
    [
        ("graph", "n_intervals", "0", "an int in the range [1, 1000]; got 0."),
        ("graph", "n_intervals", "2.5", "an int in the range [1, 1000]; got 2.5."),
        ("graph", "overlap", "1.0", "a number in the range [0, 1); got 1.0."),
        ("graph", "filter", '"umap"', "one of 'pca', 'eccentricity', 'density'"),
        ("graph", "standardize", '"yes"', "true or false; got 'yes'."),
        ("graph", "components", "3", "an int in the range [1, 2]; got 3."),
        ("data", "task", '"multiclass"', "one of 'binary', 'regression'; got 'multiclass'."),
        ("data", "on_missing", '"impute"', "one of 'refuse', 'drop'; got 'impute'."),
        ("data", "features", '"a"', "a list of column names; got 'a'."),
        ("data", "categorical", '{ a = "hash" }', 'column = "onehot" or "ordinal"'),
        ("audit", "fdr", "0.0", "a number in the range (0, 1); got 0.0."),
        ("audit", "folds", "1", "an int in the range [2, 50]; got 1."),
        ("audit", "min_rows", "true", "an int in the range [10, inf); got True."),
    ],
)
def test_wrong_values_name_the_key_and_what_is_accepted(
    tmp_path: Path, section: str, key: str, value: str, expected: str
) -> None:
    text = MINIMAL + f"\n[{section}]\n{key} = {value}\n"
    if section == "data":
        text = MINIMAL.replace("[data]\n", f"[data]\n{key} = {value}\n")
    path = write(tmp_path, text)
    with pytest.raises(ConfigError, match=message(str(path), f"key '{section}.{key}' must be ")):
        load_config(path)
    with pytest.raises(ConfigError, match=message(expected)):
        load_config(path)


def test_a_threshold_outside_the_open_unit_interval_is_refused(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + "threshold = 1.5\n")
    with pytest.raises(
        ConfigError,
        match=message(
            str(path), ": key 'release[0].threshold' must be a number in the range (0, 1); got 1.5."
        ),
    ):
        load_config(path)


@pytest.mark.parametrize("seed", [-1, 2**32, True, "1"])
def test_a_bad_seed_is_refused(seed: Any) -> None:
    with pytest.raises(ConfigError, match=message("key 'seed' must be an int in the range")):
        parse_config(doc(seed=seed))


@pytest.mark.parametrize("missing", ["path", "id", "target"])
def test_a_missing_required_data_key_is_named(missing: str) -> None:
    data = {"path": "p.csv", "id": "i", "target": "t"}
    del data[missing]
    with pytest.raises(
        ConfigError, match=message(f"<config>: the required key 'data.{missing}' is missing.")
    ):
        parse_config(doc(data=data))


def test_a_missing_data_id_in_a_file_names_the_file(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL.replace('id = "meter_id"\n', ""))
    with pytest.raises(
        ConfigError, match=message(str(path), ": the required key 'data.id' is missing.")
    ):
        load_config(path)


def test_a_missing_release_score_is_named() -> None:
    with pytest.raises(
        ConfigError, match=message("the required key 'release[0].score' is missing.")
    ):
        parse_config(doc(release=[{"name": "r"}]))


def test_a_missing_model_is_named() -> None:
    with pytest.raises(ConfigError, match=message("the required key 'model' is missing")):
        parse_config(doc(model=None))


def test_a_missing_data_table_is_named() -> None:
    with pytest.raises(ConfigError, match=message("the required table [data] is missing.")):
        parse_config(doc(data=None))


def test_a_data_key_that_is_not_a_table_is_named() -> None:
    with pytest.raises(ConfigError, match=message("'data' must be a table; got 'rows.csv'.")):
        parse_config(doc(data="rows.csv"))


@pytest.mark.parametrize("releases", [None, [], {"name": "r", "score": "s"}])
def test_at_least_one_release_is_needed(releases: Any) -> None:
    with pytest.raises(
        ConfigError, match=message("at least one [[release]] table (name, score) is needed.")
    ):
        parse_config(doc(release=releases))


def test_no_release_in_a_file_is_named(tmp_path: Path) -> None:
    text = MINIMAL.split("[[release]]")[0]
    path = write(tmp_path, text)
    with pytest.raises(ConfigError, match=message(str(path), ": at least one [[release]]")):
        load_config(path)


def test_duplicated_release_names_are_refused(tmp_path: Path) -> None:
    path = write(tmp_path, MINIMAL + '\n[[release]]\nname = "2026.1"\nscore = "other"\n')
    with pytest.raises(
        ConfigError,
        match=message(
            str(path), ": release names must be unique; ['2026.1'] appear more than once."
        ),
    ):
        load_config(path)


BAD_NAMES = ["../x", "a/b", "", "x" * 100, "a..b", ".hidden", "-x", "a b", "a\n", "é"]


@pytest.mark.parametrize("name", BAD_NAMES)
def test_a_model_name_that_is_not_safe_is_refused(name: str) -> None:
    with pytest.raises(
        ConfigError,
        match=message(
            "key 'model' must be a name matching ^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$",
            f"got {name!r}.",
        ),
    ):
        parse_config(doc(model=name))


@pytest.mark.parametrize("name", BAD_NAMES)
def test_a_release_name_that_is_not_safe_is_refused(name: str) -> None:
    with pytest.raises(
        ConfigError, match=message("key 'release[0].name' must be a name matching", "no '..'")
    ):
        parse_config(doc(release=[{"name": name, "score": "s"}]))


def test_a_release_that_is_not_a_table_is_named() -> None:
    with pytest.raises(ConfigError, match=message("'release[1]' must be a table; got 3.")):
        parse_config(doc(release=[{"name": "r", "score": "s"}, 3]))


def test_an_unknown_release_name_lists_the_releases() -> None:
    cfg = parse_config(doc(release=[{"name": "a", "score": "sa"}, {"name": "b", "score": "sb"}]))
    with pytest.raises(
        ConfigError, match=message("No release 'c' in the config; its releases are 'a', 'b'.")
    ):
        cfg.release("c")


@pytest.mark.parametrize(
    ("graph", "message"),
    [
        ('n_intervals = "automatic"', "key 'graph.n_intervals' must be one of 'auto' or an int"),
        ("overlap = 1.0", "key 'graph.overlap' must be one of 'auto' or a number in the range"),
        ('clusterer = "Auto"', "key 'graph.clusterer' must be one of 'auto', 'single_linkage'"),
        ("resamples = -1", "key 'graph.resamples' must be an int in the range [0, 1000]"),
    ],
    ids=["intervals-word", "overlap-one", "clusterer-case", "negative-resamples"],
)
def test_graph_settings_take_auto_or_a_number_and_say_so(tmp_path: Path, graph, message) -> None:
    with pytest.raises(ConfigError, match=re.escape(message)):
        load_config(write(tmp_path, MINIMAL + f"\n[graph]\n{graph}\n"))


def test_graph_settings_keep_given_numbers(tmp_path: Path) -> None:
    cfg = load_config(write(tmp_path, MINIMAL + "\n[graph]\nn_intervals = 12\noverlap = 0.25\n"))
    assert (cfg.graph.n_intervals, cfg.graph.overlap, cfg.graph.clusterer) == (12, 0.25, "auto")
