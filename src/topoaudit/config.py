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

and, to report on declared groups of rows as well (see :class:`AuditSettings`)::

    [audit]
    segments = ["district", "material"]
"""

from __future__ import annotations

import dataclasses
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from topoaudit._validation import SCHEDULER_ADDRESS, Choice, Interval, Kind
from topoaudit.errors import ConfigError, LimitError, closest_names
from topoaudit.limits import (
    MAX_CONFIG_BYTES,
    MAX_INTERVALS,
    MAX_RELEASES,
    MAX_STABILITY_OFFSETS,
    MAX_WORKERS,
    MIN_CELL_ROWS,
)

__all__ = [
    "AuditSettings",
    "ComputeSettings",
    "Config",
    "DataSettings",
    "GatePolicy",
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
_STR = Kind(
    lambda v: isinstance(v, str) and v != "" and "\x00" not in v,
    "a non-empty string (without NUL characters)",
)
_STRS = Kind(
    lambda v: isinstance(v, list) and all(_STR.accepts(s) for s in v),
    "a list of column names",
)
_BOOL = Kind(lambda v: isinstance(v, bool), "true or false")
_CATEGORICAL = Kind(
    lambda v: (
        isinstance(v, dict)
        and all(_STR.accepts(c) for c in v)
        and all(isinstance(e, str) and e in ("onehot", "ordinal") for e in v.values())
    ),
    'a table of column = "onehot" or "ordinal"',
)
_OFFSETS = Kind(
    lambda v: (
        isinstance(v, list)
        and len(v) <= MAX_STABILITY_OFFSETS
        and all(isinstance(i, int) and not isinstance(i, bool) for i in v)
        and all(abs(i) < MAX_INTERVALS for i in v)
    ),
    f"a list of at most {MAX_STABILITY_OFFSETS} interval-count offsets (ints between "
    f"-{MAX_INTERVALS - 1} and {MAX_INTERVALS - 1})",
)
_OVERLAP_OFFSETS = Kind(
    lambda v: (
        isinstance(v, list)
        and len(v) <= MAX_STABILITY_OFFSETS
        and all(isinstance(g, int | float) and not isinstance(g, bool) for g in v)
        and all(math.isfinite(g) and -1 < g < 1 for g in v)
    ),
    f"a list of at most {MAX_STABILITY_OFFSETS} overlap offsets (finite numbers strictly "
    "between -1 and 1)",
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
    """One model release: the column holding its scores and its decision threshold, and
    the data file it is validated on when not the ``[data]`` one (a newer window, say)."""

    name: str
    score: str
    threshold: float = 0.5
    data: Path | None = None

    _checks = {
        "name": [_NAME],
        "score": [_STR],
        "threshold": [Interval(float, 0.0, 1.0, closed="neither")],
        "data": [_STR],
    }
    _required = ("name", "score")


_AUTO = Choice(("auto",))


@dataclass(frozen=True)
class GraphSettings:
    """The Mapper graph shown for the data's shape.

    ``n_intervals``, ``overlap`` and ``clusterer`` default to ``"auto"``: chosen from the
    data (:mod:`topoaudit.mapper.auto`). ``resamples`` is the number of resamples behind
    the confidence of each feature of the shape (0: none computed).
    """

    filter: str = "pca"
    components: int = 1
    cover: str = "uniform"
    n_intervals: int | str = "auto"
    overlap: float | str = "auto"
    clusterer: str = "auto"
    standardize: bool = True
    resamples: int = 50

    _checks = {
        "filter": [Choice(("pca", "eccentricity", "density", "knn_distance", "score"))],
        "components": [Interval(int, 1, 2)],
        "cover": [Choice(("uniform", "balanced"))],
        "n_intervals": [_AUTO, Interval(int, 1, MAX_INTERVALS)],
        "overlap": [_AUTO, Interval(float, 0.0, 1.0, closed="left")],
        "clusterer": [Choice(("auto", "single_linkage", "dbscan", "kmedoids", "hdbscan"))],
        "standardize": [_BOOL],
        "resamples": [Interval(int, 0, 1000)],
    }
    _required = ()


@dataclass(frozen=True)
class AuditSettings:
    """How weak regions are searched for, confirmed, described and re-checked, and which
    groups of rows the page reports on whatever the search finds.

    ``segments`` lists columns of the data file whose values group the rows the reviewer
    asks about (a district, a material): any column of the file, a feature or not
    (columns left out by ``data.exclude`` too). For each value of each column the page
    shows its rows, the release's metrics there and a test against the other rows (a
    Benjamini-Hochberg level of ``fdr`` across every value of every column). A missing
    value is a value of its own; a column of more than
    :data:`~topoaudit.limits.MAX_SEGMENT_LEVELS` values is refused (bin it in the data
    file). Empty by default: no segments.
    """

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
    segments: tuple[str, ...] = ()

    _checks = {
        "fdr": [Interval(float, 0.0, 1.0, closed="neither")],
        "min_rows": [Interval(int, MIN_CELL_ROWS, None)],
        "node_rows": [Interval(int, 10, None)],
        "search_intervals": [Interval(int, 1, MAX_INTERVALS)],
        "local_model": [Choice(("logistic", "tree", "boosting", "ridge"))],
        "folds": [Interval(int, 2, 50)],
        "stability_intervals": [_OFFSETS],
        "stability_overlaps": [_OVERLAP_OFFSETS],
        "bootstrap_resamples": [Interval(int, 0, 100)],
        "match_jaccard": [Interval(float, 0.0, 1.0, closed="right")],
        "segments": [_STRS],
    }
    _required = ()


GATE_RULES = ("introduced", "returned", "worse", "still weak", "missed before", "metric")
_RULES = Kind(
    lambda v: isinstance(v, list) and all(isinstance(r, str) and r in GATE_RULES for r in v),
    "a list of rules from " + ", ".join(repr(r) for r in GATE_RULES),
)


@dataclass(frozen=True)
class GatePolicy:
    """What fails a release at ``topoaudit gate`` (:mod:`topoaudit.report.gate`).

    ``fail_on``: the outcomes that fail it: a weak region ``"introduced"`` by the release,
    one that ``"returned"``, an earlier one that got ``"worse"`` or is ``"still weak"``,
    a new one that was weak before too (``"missed before"``), and ``"metric"``: the main
    metric rose by more than ``metric_tolerance`` with a one-sided test at ``alpha``.
    """

    fail_on: tuple[str, ...] = ("introduced", "returned", "worse", "metric")
    metric_tolerance: float = 0.01
    alpha: float = 0.05

    _checks = {
        "fail_on": [_RULES],
        "metric_tolerance": [Interval(float, 0.0, None)],
        "alpha": [Interval(float, 0.0, 1.0, closed="neither")],
    }
    _required = ()


def gate_policy(table: Any, where: str) -> GatePolicy:
    """The :class:`GatePolicy` of a ``[gate]`` table (plain data, as analysis.json records
    it); an unknown key or a bad value names it and what is accepted."""
    return _section(where, "gate", GatePolicy, table)


@dataclass(frozen=True)
class ComputeSettings:
    """Where the audit's independent tasks run (the stability reruns, the resamples behind
    the shape's confidence, the graphs at other cover settings).

    ``scheduler``: the address of a Dask scheduler, ``"tcp://HOST:PORT"`` as ``dask
    scheduler`` prints it; the tasks then run on its workers. Without it they run on this
    machine, in ``workers`` local processes: ``"auto"`` (the default) is one per usable
    core, ``1`` runs everything in the audit's own process. ``topoaudit audit
    --scheduler`` overrides the key. Where an audit ran never changes its bundle: these
    settings are not recorded in it, and the result is the same everywhere.
    """

    scheduler: str | None = None
    workers: int | str = "auto"

    _checks = {
        "scheduler": [SCHEDULER_ADDRESS],
        "workers": [_AUTO, Interval(int, 1, MAX_WORKERS)],
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
    gate: GatePolicy = field(default_factory=GatePolicy)
    compute: ComputeSettings = field(default_factory=ComputeSettings)
    seed: int = 0
    source: Path | None = None

    def data_path(self, release: Release) -> Path:
        """The data file ``release`` is validated on."""
        return Path(release.data) if release.data is not None else Path(self.data.path)

    def release(self, name: str) -> Release:
        for r in self.releases:
            if r.name == name:
                return r
        names = ", ".join(repr(r.name) for r in self.releases)
        msg = f"No release {name!r} in the config; its releases are {names}."
        raise ConfigError(msg)

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready copy (paths as strings, tuples as lists), without the
        ``[compute]`` settings: where an audit runs is no part of what it found."""

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
        out.pop("compute", None)
        for r in out["releases"]:  # a release on the [data] file names no file of its own
            if r.get("data") is None:
                r.pop("data", None)
        return out


_TOP = {"model": [_NAME], "seed": [Interval(int, 0, 2**32 - 1)]}
_SECTIONS = {
    "data": DataSettings,
    "graph": GraphSettings,
    "audit": AuditSettings,
    "gate": GatePolicy,
    "compute": ComputeSettings,
}
_TOP_KEYS = ("model", "seed", "data", "release", "graph", "audit", "gate", "compute")


def _fail(where: str, msg: str) -> ConfigError:
    return ConfigError(f"{where}: {msg}")


def _short(value: Any, limit: int = 200) -> str:
    """``repr(value)``, cut to ``limit`` characters so a huge value keeps the message short."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 5] + " ...)"


def _unknown(where: str, key: str, known: tuple[str, ...] | list[str]) -> ConfigError:
    near = closest_names(key, known, n=1)
    hint = f" Did you mean {near[0]!r}?" if near else ""
    known_s = ", ".join(repr(k) for k in known)
    return _fail(where, f"unknown key {key!r}; the known keys here are {known_s}.{hint}")


def _check_value(where: str, key: str, value: Any, constraints: list[Any]) -> None:
    if any(c.accepts(value) for c in constraints):
        return
    allowed = " or ".join(c.describe() for c in constraints)
    raise _fail(where, f"key {key!r} must be {allowed}; got {_short(value)}.")


def _section(where: str, prefix: str, cls: type, table: Any) -> Any:
    if not isinstance(table, Mapping):
        raise _fail(where, f"{prefix!r} must be a table; got {_short(table)}.")
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


def _resolved(path: str | Path, base: Path) -> Path:
    path = Path(path)
    return path if path.is_absolute() else base / path


def parse_config(doc: Mapping[str, Any], *, source: str | Path = "<config>") -> Config:
    """Build a :class:`Config` from a parsed TOML document; relative data paths are read
    relative to the config file's folder."""
    where = str(source)
    if not isinstance(doc, Mapping):
        raise _fail(where, f"a config is a table of keys; got {_short(doc)}.")
    for key in doc:
        if key not in _TOP_KEYS:
            raise _unknown(where, str(key), _TOP_KEYS)
    for key, constraints in _TOP.items():
        if key in doc:
            _check_value(where, key, doc[key], constraints)
    if "model" not in doc:
        raise _fail(where, "the required key 'model' is missing (the model's name).")
    if "data" not in doc:
        raise _fail(where, "the required table [data] is missing.")
    data = _section(where, "data", DataSettings, doc["data"])
    for key in ("features", "exclude"):
        names = getattr(data, key) or ()
        dup = sorted({c for c in names if names.count(c) > 1})
        if dup:
            raise _fail(where, f"'data.{key}' names {dup} more than once; list each column once.")
    base = Path(source).parent if source != "<config>" else Path(".")
    data = dataclasses.replace(data, path=_resolved(data.path, base))
    if data.id == data.target:
        raise _fail(
            where,
            f"'data.id' and 'data.target' both name the column {data.id!r}; the id and the "
            "target must be two different columns.",
        )
    releases_doc = doc.get("release")
    if not isinstance(releases_doc, list) or not releases_doc:
        raise _fail(where, "at least one [[release]] table (name, score) is needed.")
    if len(releases_doc) > MAX_RELEASES:
        msg = (
            f"{where}: {len(releases_doc)} [[release]] tables are listed; one config holds at "
            f"most {MAX_RELEASES} releases (MAX_RELEASES)."
        )
        raise LimitError(msg)
    releases = tuple(
        _section(where, f"release[{i}]", Release, r) for i, r in enumerate(releases_doc)
    )
    releases = tuple(
        r if r.data is None else dataclasses.replace(r, data=_resolved(r.data, base))
        for r in releases
    )
    names = [r.name for r in releases]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise _fail(where, f"release names must be unique; {dup} appear more than once.")
    for i, r in enumerate(releases):
        role = {data.id: "data.id", data.target: "data.target"}.get(r.score)
        if role is not None:
            raise _fail(
                where,
                f"'release[{i}].score' and '{role}' both name the column {r.score!r}; the "
                "scores of a release need a column of their own.",
            )
    extra = {
        k: _section(where, k, cls, doc[k])
        for k, cls in _SECTIONS.items()
        if k in doc and k != "data"
    }
    declared = extra["audit"].segments if "audit" in extra else ()
    dup = sorted({c for c in declared if declared.count(c) > 1})
    if dup:
        raise _fail(where, f"'audit.segments' names {dup} more than once; list each column once.")
    return Config(
        model=doc["model"],
        data=data,
        releases=releases,
        seed=int(doc.get("seed", 0)),
        source=Path(source) if source != "<config>" else None,
        **extra,
    )


def load_config(path: str | Path) -> Config:
    """Read and check the TOML config at ``path`` (UTF-8, at most
    :data:`~topoaudit.limits.MAX_CONFIG_BYTES` bytes)."""
    path = Path(path)
    try:
        with path.open("rb") as fh:
            raw = fh.read(MAX_CONFIG_BYTES + 1)  # never more, whatever the file's size
    except FileNotFoundError:
        raise ConfigError(f"{path}: no such config file.") from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL character in the path
        raise ConfigError(f"{path}: cannot be read ({exc}).") from exc
    if len(raw) > MAX_CONFIG_BYTES:
        msg = (
            f"{path}: the config file is larger than {MAX_CONFIG_BYTES} bytes "
            "(MAX_CONFIG_BYTES); an audit config is a few hundred bytes of TOML."
        )
        raise LimitError(msg)
    try:
        text = raw.decode("utf-8-sig")  # a byte-order mark, as some editors write, is read
    except UnicodeDecodeError as exc:
        msg = (
            f"{path}: cannot be read (not UTF-8: byte {exc.start} is "
            f"{raw[exc.start : exc.start + 1]!r}); save the config as UTF-8 text."
        )
        raise ConfigError(msg) from exc
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc}).") from exc
    except RecursionError as exc:
        msg = (
            f"{path}: not valid TOML here (arrays or inline tables nested too deeply to read); "
            "an audit config nests no deeper than a table of tables."
        )
        raise ConfigError(msg) from exc
    return parse_config(doc, source=path)
