"""Property-based tests of the config parser: whatever the document, parsing ends in a
:class:`Config` or in a :class:`TopoauditError` that names the file and the key, never in
another exception; an accepted config holds exactly the values given."""

from __future__ import annotations

import math
from datetime import timedelta
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from topoaudit._validation import is_scheduler_address
from topoaudit.config import (
    AuditSettings,
    ComputeSettings,
    Config,
    GraphSettings,
    load_config,
    parse_config,
)
from topoaudit.errors import ConfigError, TopoauditError
from topoaudit.limits import MAX_INTERVALS, MAX_WORKERS

FUZZ = settings(
    max_examples=150,
    deadline=timedelta(seconds=10),
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow],
)

# ---------------------------------------------------------------- a small TOML writer


def toml_string(s: str) -> str:
    """A TOML basic string: quote, backslash and control characters escaped."""
    out = []
    for ch in s:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return toml_string(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{toml_string(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(doc: dict[str, Any]) -> str:
    """Scalars and arrays first, then [tables] and [[arrays of tables]], as a person writes."""
    lines = [f"{toml_string(k)} = {toml_value(v)}" for k, v in doc.items() if not _is_table(v)]
    for key, value in doc.items():
        if isinstance(value, dict):
            lines.append(f"\n[{toml_string(key)}]")
            lines.extend(f"{toml_string(k)} = {toml_value(x)}" for k, x in value.items())
        elif _is_table(value):
            for item in value:
                lines.append(f"\n[[{toml_string(key)}]]")
                lines.extend(f"{toml_string(k)} = {toml_value(x)}" for k, x in item.items())
    return "\n".join(lines) + "\n"


def _is_table(v: Any) -> bool:
    return isinstance(v, dict) or (
        isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)
    )


# ---------------------------------------------------------------- strategies

TEXT = st.text(max_size=12)
FLOATS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1.0, 0.5, 1e-308, -1e-308, 5e-324, 1e308, -1e308, 0.999999]),
)
INTS = st.one_of(
    st.integers(-5, 1100),
    st.sampled_from([-(2**63), 2**63 - 1, 2**32, 2**32 - 1, 10**6]),
)
SCALARS = st.one_of(
    st.booleans(), INTS, FLOATS, TEXT, st.sampled_from(["", " ", "\x00", "..", "a/b"])
)
VALUES = st.recursive(
    SCALARS,
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(TEXT, inner, max_size=3)),
    max_leaves=8,
)
KEY_NAMES = st.one_of(
    TEXT,
    st.sampled_from(["model", "seed", "data", "release", "graph", "audit", "path", "name"]),
)

BASE: dict[str, Any] = {
    "model": "m1",
    "seed": 7,
    "data": {"path": "rows.csv", "id": "id", "target": "y"},
    "release": [{"name": "r1", "score": "s1", "threshold": 0.4}],
    "graph": {"n_intervals": 12, "overlap": 0.25},
    "audit": {"fdr": 0.1},
    "compute": {"workers": 2},
}

COLUMNS = st.sampled_from(["id", "y", "s1", "x1", "x2", "", " ", "\x00", "a" * 70, "..", "r1"])
NUMBERS = st.one_of(
    FLOATS,
    INTS,
    st.sampled_from([0, 1, 2, 10, 30, 50, 51, 100, 101, 1000, 1001, 0.05, 0.3, 1.5, -0.1]),
)
MIXED_LISTS = st.lists(st.one_of(INTS, FLOATS, st.booleans(), COLUMNS), max_size=4)
ANY = st.one_of(SCALARS, VALUES)


def choices(*options: str) -> st.SearchStrategy[Any]:
    near = [o.upper() for o in options] + [f" {o}" for o in options] + [o[:-1] for o in options]
    return st.one_of(st.sampled_from(options), st.sampled_from(near), ANY)


# every known key, with values near and far from what it accepts
STR_KEY = st.one_of(COLUMNS, TEXT, ANY)
NUM_KEY = st.one_of(NUMBERS, ANY)
LIST_KEY = st.one_of(MIXED_LISTS, st.lists(COLUMNS, max_size=4), st.lists(FLOATS), ANY)
KEY_VALUES: dict[tuple[str, str], st.SearchStrategy[Any]] = {
    ("", "model"): st.one_of(STR_KEY, st.sampled_from(["m-2", "a.b", "a..b", "-m", "m" * 65])),
    ("", "seed"): NUM_KEY,
    ("data", "path"): st.one_of(STR_KEY, st.sampled_from(["/abs/rows.csv", "sub/r.csv"])),
    ("data", "id"): STR_KEY,
    ("data", "target"): STR_KEY,
    ("data", "task"): choices("binary", "regression"),
    ("data", "features"): LIST_KEY,
    ("data", "exclude"): LIST_KEY,
    ("data", "categorical"): st.one_of(
        st.dictionaries(COLUMNS, choices("onehot", "ordinal"), max_size=3), ANY
    ),
    ("data", "on_missing"): choices("refuse", "drop"),
    ("release", "name"): st.one_of(STR_KEY, st.sampled_from(["2026.1", "r_2", "a..b"])),
    ("release", "score"): STR_KEY,
    ("release", "threshold"): NUM_KEY,
    ("graph", "filter"): choices("pca", "eccentricity", "density", "knn_distance", "score"),
    ("graph", "components"): NUM_KEY,
    ("graph", "cover"): choices("uniform", "balanced"),
    ("graph", "n_intervals"): st.one_of(st.just("auto"), NUM_KEY),
    ("graph", "overlap"): st.one_of(st.just("auto"), NUM_KEY),
    ("graph", "clusterer"): choices("auto", "single_linkage", "dbscan", "kmedoids", "hdbscan"),
    ("graph", "standardize"): st.one_of(st.booleans(), ANY),
    ("graph", "resamples"): NUM_KEY,
    ("audit", "local_model"): choices("logistic", "tree", "boosting", "ridge"),
    ("audit", "stability_intervals"): LIST_KEY,
    ("audit", "stability_overlaps"): LIST_KEY,
    ("audit", "segments"): LIST_KEY,
    **{
        ("audit", k): NUM_KEY
        for k in AuditSettings._checks
        if k not in ("local_model", "stability_intervals", "stability_overlaps", "segments")
    },
    ("compute", "scheduler"): st.one_of(
        STR_KEY,
        st.sampled_from(
            ["tcp://127.0.0.1:8786", "tls://[::1]:8786", "tcp://h:0", "tcp://h:65536", "h:8786"]
        ),
    ),
    ("compute", "workers"): st.one_of(st.just("auto"), NUM_KEY),
}
KNOWN_KEYS = sorted(KEY_VALUES)
KNOWN_NAMES = {k for _, k in KNOWN_KEYS}
assert {k for s, k in KNOWN_KEYS if s == "graph"} == set(GraphSettings._checks)
assert {k for s, k in KNOWN_KEYS if s == "compute"} == set(ComputeSettings._checks)


def set_key(doc: dict[str, Any], section: str, key: str, value: Any) -> dict[str, Any]:
    out = {k: (dict(v) if isinstance(v, dict) else v) for k, v in doc.items()}
    out["release"] = [dict(r) for r in doc["release"]]
    if section == "":
        out[key] = value
    elif section == "release":
        out["release"][0][key] = value
    else:
        out[section][key] = value
    return out


def dotted(section: str, key: str) -> str:
    return {"": key, "release": f"release[0].{key}"}.get(section, f"{section}.{key}")


def stored(cfg: Config, section: str, key: str) -> Any:
    if section == "compute":  # kept in the config, never in its record (to_dict)
        return getattr(cfg.compute, key)
    plain = cfg.to_dict()
    if section == "":
        return plain[key]
    if section == "release":
        return plain["releases"][0][key]
    return plain[section][key]


def same(a: Any, b: Any) -> bool:
    """Equal values of equal kinds (a tuple read back as a list), NaN never equal."""
    if isinstance(a, list | tuple) and isinstance(b, list | tuple):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same(a[k], b[k]) for k in a)
    return type(a) is type(b) and a == b


# ---------------------------------------------------------------- properties


@FUZZ
@given(data=st.one_of(st.binary(max_size=300), st.text(max_size=300).map(str.encode)))
def test_random_bytes_give_a_config_or_a_config_error(
    data: bytes, tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = tmp_path_factory.getbasetemp() / "random.toml"
    path.write_bytes(data)
    try:
        load_config(path)
    except TopoauditError as exc:
        assert str(path) in str(exc)


@FUZZ
@given(
    doc=st.dictionaries(KEY_NAMES, VALUES, max_size=6),
    prefix=st.sampled_from([b"", b"\xef\xbb\xbf", b"\xff\xfe", b'model = "m"\n']),
)
def test_random_toml_documents_give_a_config_or_a_config_error(
    doc: dict[str, Any], prefix: bytes, tmp_path_factory: pytest.TempPathFactory
) -> None:
    path = tmp_path_factory.getbasetemp() / "doc.toml"
    path.write_bytes(prefix + to_toml(doc).encode("utf-8"))
    try:
        cfg = load_config(path)
    except TopoauditError as exc:
        assert str(path) in str(exc)
    else:
        assert cfg.model == doc.get("model", "m")
        assert cfg.source == path


CHANGES = st.lists(
    st.sampled_from(KNOWN_KEYS).flatmap(lambda w: st.tuples(st.just(w), KEY_VALUES[w])),
    min_size=1,
    max_size=3,
    unique_by=lambda change: change[0],
)


@settings(FUZZ, max_examples=600)
@given(changes=CHANGES, through_file=st.booleans())
def test_random_values_for_known_keys_are_kept_or_refused_by_name(
    changes: list[tuple[tuple[str, str], Any]],
    through_file: bool,
    tmp_path_factory: pytest.TempPathFactory,
) -> None:
    doc = BASE
    for (section, key), value in changes:
        doc = set_key(doc, section, key, value)
    if through_file:
        source: Path | str = tmp_path_factory.getbasetemp() / "known.toml"
        source.write_text(to_toml(doc), encoding="utf-8")
    else:
        source = "<config>"
    try:
        cfg = load_config(source) if through_file else parse_config(doc)
    except ConfigError as exc:
        message = str(exc)
        assert message.startswith(f"{source}: ")
        assert any(repr(dotted(*where)) in message for where, _ in changes), message
        return
    for (section, key), value in changes:
        got = stored(cfg, section, key)
        if key == "path":
            base = Path(source).parent if through_file else Path(".")
            assert got == str(base / value)
        else:
            assert same(got, value), (section, key, got, value)
    check_invariants(cfg)


@FUZZ
@given(
    section=st.sampled_from(["data", "graph", "audit", "release", "compute"]),
    key=TEXT.filter(lambda k: k not in KNOWN_NAMES),
    value=SCALARS,
)
def test_an_unknown_key_is_named(section: str, key: str, value: Any) -> None:
    doc = set_key(BASE, section, key, value)
    with pytest.raises(ConfigError, match="unknown key") as info:
        parse_config(doc)
    assert repr(dotted(section, key)) in str(info.value)


@FUZZ
@given(section=st.sampled_from(["data", "graph", "audit", "release", "compute"]), value=VALUES)
def test_a_section_of_the_wrong_kind_is_refused(section: str, value: Any) -> None:
    assume(not isinstance(value, dict) and not (section == "release" and value == []))
    doc = {**BASE, section: value}
    try:
        parse_config(doc)
    except ConfigError as exc:
        assert section in str(exc)
    else:
        # only a list of release tables may stand in for [[release]]
        assert section == "release"


def check_invariants(cfg: Config) -> None:
    """What every accepted config satisfies, whatever was written."""
    g, a = cfg.graph, cfg.audit
    assert g.n_intervals == "auto" or 1 <= g.n_intervals <= MAX_INTERVALS
    assert g.overlap == "auto" or 0 <= g.overlap < 1
    assert all(0 < r.threshold < 1 for r in cfg.releases)
    assert 0 < a.fdr < 1 and 0 < a.match_jaccard <= 1
    assert all(math.isfinite(o) and -1 < o < 1 for o in a.stability_overlaps)
    assert all(abs(i) < MAX_INTERVALS for i in a.stability_intervals)
    assert cfg.data.id != cfg.data.target
    assert cfg.compute.scheduler is None or is_scheduler_address(cfg.compute.scheduler)
    assert cfg.compute.workers == "auto" or 1 <= cfg.compute.workers <= MAX_WORKERS
    assert all(r.score not in (cfg.data.id, cfg.data.target) for r in cfg.releases)
    assert 0 <= cfg.seed < 2**32


@FUZZ
@given(
    depth=st.one_of(st.integers(1, 40), st.integers(500, 3000)),
    opener=st.sampled_from(["[", "{a = "]),
)
def test_deeply_nested_values_are_refused_not_crashed_on(
    depth: int, opener: str, tmp_path_factory: pytest.TempPathFactory
) -> None:
    closer = "]" if opener == "[" else "}"
    path = tmp_path_factory.getbasetemp() / "deep.toml"
    path.write_text(f"x = {opener * depth}1{closer * depth}\n", encoding="utf-8")
    with pytest.raises(ConfigError) as info:  # a valid document, or not, but "x" is unknown
        load_config(path)
    assert str(info.value).startswith(f"{path}: ")


@FUZZ
@given(
    doc=st.one_of(
        VALUES,
        st.dictionaries(st.one_of(INTS, st.none(), st.booleans()), VALUES, min_size=1, max_size=3),
        st.builds(lambda extra: {**BASE, **extra}, st.dictionaries(INTS, SCALARS, max_size=2)),
    )
)
def test_parse_config_takes_any_object(doc: Any) -> None:
    try:
        cfg = parse_config(doc)
    except TopoauditError as exc:
        assert str(exc).startswith("<config>: ")
    else:
        check_invariants(cfg)
