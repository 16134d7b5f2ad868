"""The audit configuration: a TOML file read into frozen dataclasses.

Every error names the file and the key, says what is accepted and, for an unknown key,
suggests the closest known one. A minimal file::

    model = "meter-failure"

    [data]
    path = "validation.csv"
    id = "meter_id"
    target = "failed_90d"

    [[release]]
    name = "2026.1"
    score = "score_2026_1"
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from topoaudit._validation import Choice, Interval, Kind
from topoaudit.errors import ConfigError, closest_names

__all__ = [
    "AuditSettings",
    "Config",
    "DataSettings",
    "GraphSettings",
    "Release",
    "load_config",
    "parse_config",
]

NAME_PATTERN = r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$"
_NAME = Kind(
    lambda v: isinstance(v, str) and re.fullmatch(NAME_PATTERN, v) is not None and ".." not in v,
    f"a name matching {NAME_PATTERN} (letters, digits, '.', '-', '_'; no '..')",
)
_STR = Kind(lambda v: isinstance(v, str) and v != "", "a non-empty string")
_STRS = Kind(
    lambda v: isinstance(v, list) and all(isinstance(s, str) and s for s in v),
    "a list of column names",
)
_BOOL = Kind(lambda v: isinstance(v, bool), "true or false")
_CATEGORICAL = Kind(
    lambda v: isinstance(v, dict) and all(e in ("onehot", "ordinal") for e in v.values()),
    'a table of column = "onehot" or "ordinal"',
)


@dataclass(frozen=True)
class DataSettings:
    """Where the validation rows are and what their columns mean."""

    path: Path
    id: str
    target: str
    task: str = "binary"
    features: tuple[str, ...] | None = None
    exclude: tuple[str, ...] = ()
    categorical: Mapping[str, str] = field(default_factory=dict)
    on_missing: str = "refuse"

    _checks = {
        "path": [_STR],
        "id": [_STR],
        "target": [_STR],
        "task": [Choice(("binary", "regression"))],
        "features": [_STRS],
        "exclude": [_STRS],
        "categorical": [_CATEGORICAL],
        "on_missing": [Choice(("refuse", "drop"))],
    }
    _required = ("path", "id", "target")


@dataclass(frozen=True)
class Release:
    """One model release: the column holding its scores and its decision threshold."""

    name: str
    score: str
    threshold: float = 0.5

    _checks = {
        "name": [_NAME],
        "score": [_STR],
        "threshold": [Interval(float, 0.0, 1.0, closed="neither")],
    }
    _required = ("name", "score")


@dataclass(frozen=True)
class GraphSettings:
    """The Mapper graph shown for the data's shape."""

    filter: str = "pca"
    components: int = 1
    cover: str = "uniform"
    n_intervals: int = 10
    overlap: float = 0.3
    clusterer: str = "single_linkage"
    standardize: bool = True

    _checks = {
        "filter": [Choice(("pca", "eccentricity", "density", "knn_distance", "score"))],
        "components": [Interval(int, 1, 2)],
        "cover": [Choice(("uniform", "balanced"))],
        "n_intervals": [Interval(int, 1, 1000)],
        "overlap": [Interval(float, 0.0, 1.0, closed="left")],
        "clusterer": [Choice(("single_linkage", "dbscan", "kmedoids", "hdbscan"))],
        "standardize": [_BOOL],
    }
    _required = ()


@dataclass(frozen=True)
class AuditSettings:
    """How weak regions are searched for, confirmed, described and re-checked."""

    fdr: float = 0.05
    min_rows: int = 30
    node_rows: int = 150
    search_intervals: int = 8
    local_model: str = "logistic"
    folds: int = 5
    stability_intervals: tuple[int, ...] = (-2, 0, 2)
    stability_overlaps: tuple[float, ...] = (-0.1, 0.0, 0.1)
    bootstrap_resamples: int = 3
    match_jaccard: float = 0.5

    _checks = {
        "fdr": [Interval(float, 0.0, 1.0, closed="neither")],
        "min_rows": [Interval(int, 1, None)],
        "node_rows": [Interval(int, 10, None)],
        "search_intervals": [Interval(int, 1, 1000)],
        "local_model": [Choice(("logistic", "tree", "boosting", "ridge"))],
        "folds": [Interval(int, 2, 50)],
        "stability_intervals": [
            Kind(
                lambda v: isinstance(v, list) and all(isinstance(i, int) for i in v),
                "a list of interval-count offsets",
            )
        ],
        "stability_overlaps": [
            Kind(
                lambda v: isinstance(v, list) and all(isinstance(i, int | float) for i in v),
                "a list of overlap offsets",
            )
        ],
        "bootstrap_resamples": [Interval(int, 0, 100)],
        "match_jaccard": [Interval(float, 0.0, 1.0, closed="right")],
    }
    _required = ()


@dataclass(frozen=True)
class Config:
    """Everything one audit needs."""

    model: str
    data: DataSettings
    releases: tuple[Release, ...]
    graph: GraphSettings = field(default_factory=GraphSettings)
    audit: AuditSettings = field(default_factory=AuditSettings)
    seed: int = 0
    source: Path | None = None

    def release(self, name: str) -> Release:
        for r in self.releases:
            if r.name == name:
                return r
        names = ", ".join(repr(r.name) for r in self.releases)
        msg = f"No release {name!r} in the config; its releases are {names}."
        raise ConfigError(msg)

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready copy (paths as strings, tuples as lists)."""

        def plain(v: Any) -> Any:
            if dataclasses.is_dataclass(v):
                return {f.name: plain(getattr(v, f.name)) for f in dataclasses.fields(v)}
            if isinstance(v, Path):
                return str(v)
            if isinstance(v, tuple | list):
                return [plain(x) for x in v]
            if isinstance(v, Mapping):
                return {str(k): plain(x) for k, x in v.items()}
            return v

        out = plain(self)
        out.pop("source", None)
        return out


_TOP = {"model": [_NAME], "seed": [Interval(int, 0, 2**32 - 1)]}
_SECTIONS = {"data": DataSettings, "graph": GraphSettings, "audit": AuditSettings}
_TOP_KEYS = ("model", "seed", "data", "release", "graph", "audit")


def _fail(where: str, msg: str) -> ConfigError:
    return ConfigError(f"{where}: {msg}")


def _unknown(where: str, key: str, known: tuple[str, ...] | list[str]) -> ConfigError:
    near = closest_names(key, known, n=1)
    hint = f" Did you mean {near[0]!r}?" if near else ""
    known_s = ", ".join(repr(k) for k in known)
    return _fail(where, f"unknown key {key!r}; the known keys here are {known_s}.{hint}")


def _check_value(where: str, key: str, value: Any, constraints: list[Any]) -> None:
    if any(c.accepts(value) for c in constraints):
        return
    allowed = " or ".join(c.describe() for c in constraints)
    raise _fail(where, f"key {key!r} must be {allowed}; got {value!r}.")


def _section(where: str, prefix: str, cls: type, table: Any) -> Any:
    if not isinstance(table, dict):
        raise _fail(where, f"{prefix!r} must be a table; got {table!r}.")
    known = [f.name for f in dataclasses.fields(cls)]
    values: dict[str, Any] = {}
    for key, value in table.items():
        if key not in known:
            raise _unknown(where, f"{prefix}.{key}", [f"{prefix}.{k}" for k in known])
        _check_value(where, f"{prefix}.{key}", value, cls._checks[key])
        if isinstance(value, list):
            value = tuple(value)
        values[key] = value
    for key in cls._required:
        if key not in values:
            raise _fail(where, f"the required key {f'{prefix}.{key}'!r} is missing.")
    return cls(**values)


def parse_config(doc: Mapping[str, Any], *, source: str | Path = "<config>") -> Config:
    """Build a :class:`Config` from a parsed TOML document; relative data paths are read
    relative to the config file's folder."""
    where = str(source)
    for key in doc:
        if key not in _TOP_KEYS:
            raise _unknown(where, key, _TOP_KEYS)
    for key, constraints in _TOP.items():
        if key in doc:
            _check_value(where, key, doc[key], constraints)
    if "model" not in doc:
        raise _fail(where, "the required key 'model' is missing (the model's name).")
    if "data" not in doc:
        raise _fail(where, "the required table [data] is missing.")
    data = _section(where, "data", DataSettings, doc["data"])
    base = Path(source).parent if source != "<config>" else Path(".")
    path = Path(data.path)
    data = dataclasses.replace(data, path=path if path.is_absolute() else base / path)
    releases_doc = doc.get("release")
    if not isinstance(releases_doc, list) or not releases_doc:
        raise _fail(where, "at least one [[release]] table (name, score) is needed.")
    releases = tuple(
        _section(where, f"release[{i}]", Release, r) for i, r in enumerate(releases_doc)
    )
    names = [r.name for r in releases]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise _fail(where, f"release names must be unique; {dup} appear more than once.")
    extra = {
        k: _section(where, k, cls, doc[k])
        for k, cls in _SECTIONS.items()
        if k in doc and k != "data"
    }
    return Config(
        model=doc["model"],
        data=data,
        releases=releases,
        seed=int(doc.get("seed", 0)),
        source=Path(source) if source != "<config>" else None,
        **extra,
    )


def load_config(path: str | Path) -> Config:
    """Read and check the TOML config at ``path``."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(f"{path}: no such config file.") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot be read ({exc}).") from exc
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc}).") from exc
    return parse_config(doc, source=path)
