"""The typed records of a bundle: what one audit produces, as it is stored and read.

Every file of a bundle that holds aggregates is one record here:

* ``analysis.json`` is an :class:`Analysis` (global metrics, the outcome table, regions,
  weak regions with their local-model tests, candidates, stability, the release
  comparison, the declared segments, provenance);
* ``graph.json`` is a :class:`GraphDocument` (nodes with their statistics, links).

Producers build records and write them; consumers read records, never raw JSON, so a
renamed or missing key fails when a bundle is read, with the file and the key path in
the message (:class:`~topoaudit.errors.BundleError`), not when a page is rendered.

A field's name is its JSON key. A number that is undefined (NaN) or withheld (a small
cell of the public view, see :mod:`topoaudit.bundle.view`) is stored as ``null`` and
read as ``None``; sizes, names and places are never ``None``. A field marked
``omit_when_none`` is left out of the JSON when it is ``None`` or NaN (``calibration`` of
a regression region, ``positive_rate`` of a regression node), as the schema has always
done; fields added to a record after bundles were written are marked so, and a bundle
without them reads with ``None`` there.
"""

from __future__ import annotations

import dataclasses
import functools
import types
import typing
from dataclasses import dataclass, field
from typing import Any, TypeVar

from topoaudit.errors import BundleError

__all__ = [
    "DECISIONS",
    "SCHEMA",
    "Analysis",
    "CalibrationBin",
    "Candidate",
    "CategoryContrast",
    "Comparison",
    "Description",
    "Drift",
    "ErrorMix",
    "Estimate",
    "FeatureContrast",
    "FoldDifference",
    "GraphDocument",
    "GraphSummary",
    "GridPoint",
    "HalfEstimate",
    "Invariants",
    "Link",
    "LocalModelTest",
    "MetricChange",
    "Metrics",
    "NoSkill",
    "Node",
    "OnFeature",
    "Outcomes",
    "Provenance",
    "RegionBrief",
    "RegionChange",
    "RegionMatch",
    "RegionRecord",
    "RegionShare",
    "ReleaseChanges",
    "ScoreChange",
    "SearchGraphRecord",
    "Segment",
    "SegmentLevel",
    "ShapeColumn",
    "ShapeFeatureRecord",
    "ShapeRecord",
    "ShiftRecord",
    "SignOff",
    "SlabBand",
    "SlabTerm",
    "Stability",
    "StabilityRun",
    "Summary",
    "SurrogateRule",
    "ThresholdRow",
    "WeakRegion",
    "from_dict",
    "to_dict",
]

#: the version of the layout of analysis.json and graph.json that this code writes and reads
SCHEMA = 1

#: a statistic: ``None`` when undefined or withheld
Stat = float | None

R = TypeVar("R")


def omit_when_none(default: Any = None) -> Any:
    """A field left out of the JSON when it is ``None``."""
    return field(default=default, metadata={"omit_when_none": True})


# -- encoding and decoding ----------------------------------------------------------------


def to_dict(record: Any) -> Any:
    """The JSON-ready form of a record (nested records, tuples and dicts converted)."""
    if dataclasses.is_dataclass(record) and not isinstance(record, type):
        out = {}
        for f in dataclasses.fields(record):
            value = getattr(record, f.name)
            if f.metadata.get("omit_when_none") and _none_or_nan(value):
                continue
            out[f.name] = to_dict(value)
        return out
    if isinstance(record, list | tuple):
        return [to_dict(v) for v in record]
    if isinstance(record, dict):
        return {k: to_dict(v) for k, v in record.items()}
    return record


def _none_or_nan(value: Any) -> bool:
    """``None``, or an undefined number (stored as ``null``, so read back as ``None``)."""
    return value is None or (isinstance(value, float) and value != value)


def from_dict(cls: type[R], data: Any, where: str) -> R:
    """Read ``data`` (parsed JSON) as a record of type ``cls``.

    ``where`` names the file (``"analysis.json:"``) or the key path under it
    (``"analysis.json: weak_regions[0]"``) for the message of the
    :class:`~topoaudit.errors.BundleError` raised when a key is missing or unknown or a
    value is of the wrong kind.
    """
    at = where.rstrip(":")
    if not isinstance(data, dict):
        raise BundleError(f"{at}: expected a table of {_name(cls)}, found {_kind(data)}.")
    hints, fields = _layout(cls)
    unknown = sorted(set(data) - set(fields))
    if unknown:
        msg = (
            f"{at}: unknown key {unknown[0]!r}; a {_name(cls)} of schema {SCHEMA} has "
            f"{', '.join(sorted(fields))}."
        )
        raise BundleError(msg)
    values = {}
    for name, f in fields.items():
        if name in data:
            values[name] = _decode(hints[name], data[name], _child(where, name))
        elif f.metadata.get("omit_when_none"):
            values[name] = None
        else:
            msg = f"{at}: missing key {name!r}; a {_name(cls)} of schema {SCHEMA} has it."
            raise BundleError(msg)
    return cls(**values)


@functools.cache
def _layout(cls: type) -> tuple[dict[str, Any], dict[str, dataclasses.Field]]:
    """A record class's resolved field types and its fields by name (resolved once per
    class: resolving the annotations is most of the cost of reading a bundle)."""
    fields = {f.name: f for f in dataclasses.fields(cls)}  # type: ignore[arg-type]
    return typing.get_type_hints(cls), fields


def _child(where: str, key: str) -> str:
    """The path of ``key`` under ``where`` (``"analysis.json:"`` is a file's top level)."""
    return f"{where} {key}" if where.endswith(":") else f"{where}.{key}"


def _name(cls: Any) -> str:
    return getattr(cls, "__name__", str(cls))


def _kind(value: Any) -> str:
    if value is None:
        return "null"
    return {dict: "a table", list: "a list", str: "text", bool: "true/false"}.get(
        type(value), f"the number {value!r}" if isinstance(value, int | float) else "a value"
    )


def _decode(tp: Any, value: Any, where: str) -> Any:
    origin = typing.get_origin(tp)
    args = typing.get_args(tp)
    if tp is Any:
        return value
    if origin in (typing.Union, types.UnionType):
        if value is None and type(None) in args:
            return None
        members = [a for a in args if a is not type(None)]
        if len(members) == 1:
            return _decode(members[0], value, where)
        for m in members:
            try:
                return _decode(m, value, where)
            except BundleError:
                continue
        raise BundleError(f"{where}: {_kind(value)} is none of {', '.join(map(_name, members))}.")
    if dataclasses.is_dataclass(tp):
        return from_dict(tp, value, where)
    if origin is tuple:
        if not isinstance(value, list):
            raise BundleError(f"{where}: expected a list, found {_kind(value)}.")
        return tuple(_decode(args[0], v, f"{where}[{i}]") for i, v in enumerate(value))
    if origin is dict:
        if not isinstance(value, dict):
            raise BundleError(f"{where}: expected a table, found {_kind(value)}.")
        return {k: _decode(args[1], v, _child(where, k)) for k, v in value.items()}
    if tp is float:
        if value is None or (isinstance(value, int | float) and not isinstance(value, bool)):
            return value
        raise BundleError(f"{where}: expected a number or null, found {_kind(value)}.")
    if tp is int:
        if isinstance(value, int) and not isinstance(value, bool):
            return value
        raise BundleError(f"{where}: expected a whole number, found {_kind(value)}.")
    if tp in (str, bool):
        if isinstance(value, tp):
            return value
        expected = "text" if tp is str else "true or false"
        raise BundleError(f"{where}: expected {expected}, found {_kind(value)}.")
    raise TypeError(f"no decoder for {tp!r}")  # a record declared with a type not handled


class _Record:
    """Methods common to every record."""

    def to_dict(self) -> dict[str, Any]:
        return to_dict(self)

    @classmethod
    def from_dict(cls, data: Any, where: str = "") -> Any:
        return from_dict(cls, data, where or f"{cls.__name__}:")


record = dataclass(frozen=True)
#: a record that extends one whose last fields have defaults: its own fields are keywords
record_kw = dataclass(frozen=True, kw_only=True)

# -- metrics -------------------------------------------------------------------------------


@record
class Estimate(_Record):
    """A metric with its 95% bootstrap interval (``low``/``high`` None when not computed)."""

    value: Stat
    low: Stat = None
    high: Stat = None


#: metric name -> estimate (the names of :mod:`topoaudit.audit.tasks`)
Metrics = dict[str, Estimate]


@record
class CalibrationBin(_Record):
    """One bin of a reliability diagram."""

    low: float
    high: float
    rows: int
    mean_score: Stat
    observed_rate: Stat


@record
class ErrorMix(_Record):
    """What a set of rows' wrong decisions are (classification): false positives (flagged,
    no event) and false negatives (not flagged, an event), as counts and as shares of the
    errors (``None`` when there is no error)."""

    errors: int | None
    false_positives: int | None
    false_negatives: int | None
    false_positive_share: Stat
    false_negative_share: Stat


@record
class NoSkill(_Record):
    """A rule that uses no information about a row, beside the release: its decisions
    (share flagged, error rate, precision, recall) and, for a constant score, its Brier
    score and log loss (``None`` for a rule that only decides)."""

    name: str
    flagged_share: Stat
    error_rate: Stat
    precision: Stat
    recall: Stat
    brier: Stat
    log_loss: Stat


@record
class ThresholdRow(_Record):
    """The release's decisions had it flagged at ``threshold`` (``release``: the release's
    own threshold)."""

    threshold: float
    release: bool
    flagged: int | None
    flagged_share: Stat
    precision: Stat
    recall: Stat
    error_rate: Stat


@record
class Outcomes(_Record):
    """The outcome table of a classification audit, on every row: the base rate, the
    release's decisions at its threshold (confusion counts and rates), its Brier score and
    log loss, the no-skill rules beside it, and its decisions at other thresholds."""

    rows: int
    threshold: float
    base_rate: Stat
    flagged_share: Stat
    true_positives: int | None
    false_positives: int | None
    false_negatives: int | None
    true_negatives: int | None
    precision: Stat
    recall: Stat
    error_rate: Stat
    brier: Stat
    log_loss: Stat
    no_skill: tuple[NoSkill, ...]
    thresholds: tuple[ThresholdRow, ...]


# -- regions, candidates and weak regions ---------------------------------------------------


@record
class RegionRecord(_Record):
    """One region of the graph's partition with its metrics (and, for classification,
    the mix of its errors)."""

    id: int
    rows: int
    nodes: int
    metrics: Metrics
    calibration: tuple[CalibrationBin, ...] | None = omit_when_none()
    error_mix: ErrorMix | None = omit_when_none()
    #: classification: the error rate its rows' scores promise (mean of each row's
    #: chance of a wrong decision at the threshold)
    promised_error_rate: Stat = omit_when_none()


@record
class RegionShare(_Record):
    """How much of a set of rows lies in one region of the shown graph's partition."""

    region: int
    rows: int
    region_rows: int


@record
class HalfEstimate(_Record):
    """A region on one half of the rows: its size, observed and expected loss and rates.

    ``expected`` is the loss the scores promise *rescaled* by ``scale``, the half's
    observed total over its promised total (every row of the half, not the region's
    alone), so that the expected total of the half equals the observed one;
    ``promised_rate`` is the promise before rescaling, per row of the region on this half.
    Both are absent from bundles written before they were recorded.
    """

    rows: int
    observed: Stat
    expected: Stat
    observed_rate: Stat
    expected_rate: Stat
    ratio: Stat
    scale: Stat = omit_when_none()
    promised_rate: Stat = omit_when_none()

    @classmethod
    def of(
        cls,
        rows: int,
        observed: float,
        expected: float,
        *,
        scale: float | None = None,
        promised: float | None = None,
    ) -> HalfEstimate:
        """From the region's observed and rescaled expected totals on the half; ``scale``
        and ``promised`` (the unscaled expected total) when known."""
        nan = float("nan")
        return cls(
            rows=rows,
            observed=observed,
            expected=expected,
            observed_rate=observed / rows if rows else nan,
            expected_rate=expected / rows if rows else nan,
            ratio=observed / expected if expected > 0 else nan,
            scale=scale,
            promised_rate=None if promised is None else (promised / rows if rows else nan),
        )


@record
class Candidate(_Record):
    """A candidate weak region as stored: where it was found and its two halves."""

    graph: str
    kind: str
    nodes: tuple[int, ...]
    rows: int
    scan_llr: Stat
    lens_threshold: Stat
    discovery: HalfEstimate
    confirmation: HalfEstimate
    tested: bool
    p_value: Stat
    p_adjusted: Stat
    confirmed: bool
    effect: Stat
    note: str
    also_found: tuple[str, ...]
    #: the regions of the shown graph that hold its rows, most first (absent in bundles
    #: written before it was recorded)
    regions: tuple[RegionShare, ...] | None = omit_when_none()


@record
class FeatureContrast(_Record):
    feature: str
    region_mean: Stat
    rest_mean: Stat
    smd: Stat


@record
class CategoryContrast(_Record):
    feature: str
    category: str
    region_share: Stat
    rest_share: Stat


@record
class SurrogateRule(_Record):
    text: str
    precision: Stat
    recall: Stat
    depth: int


@record
class SlabTerm(_Record):
    """One feature of a direction across the features, and its weight."""

    feature: str
    weight: float


@record
class SlabBand(_Record):
    """Where a region found along one direction lies: the direction as weights on the
    standardised features (value minus mean, over standard deviation), largest first,
    and the band its rows fill along it (5th to 95th percentile of the weighted sum)."""

    terms: tuple[SlabTerm, ...]
    low: float
    high: float


@record
class Description(_Record):
    """Who is in a region, in feature terms (with the band along the slab graph's
    direction, for a region found there)."""

    contrasts: tuple[FeatureContrast, ...]
    categories: tuple[CategoryContrast, ...]
    rule: SurrogateRule
    band: SlabBand | None = omit_when_none()


@record
class FoldDifference(_Record):
    """The mean over cross-validation folds of a per-fold difference of held-out losses,
    with its Student t interval (folds - 1 degrees of freedom)."""

    difference: Stat
    low: Stat
    high: Stat


@record
class LocalModelTest(_Record):
    """Whether a model fitted on a region alone does better there than the release.

    Held-out losses on the same folds: the release's scores (``release_loss``), a
    constant (the training folds' rate or mean, ``constant_loss``), the release
    recalibrated on the region (``recalibrated_loss``, by ``recalibration``) and the local
    model (``local_loss``; ``model`` is the model that ran). ``difference``, ``low`` and
    ``high`` are local minus release; ``local_vs_recalibrated`` (which the verdict reads)
    and ``recalibrated_vs_release`` the other two differences. The fields after
    ``verdict`` are absent from bundles written before they were recorded.
    """

    rows: int
    folds: int
    model: str
    release_loss: Stat
    local_loss: Stat
    difference: Stat
    low: Stat
    high: Stat
    verdict: str
    constant_loss: Stat = omit_when_none()
    recalibrated_loss: Stat = omit_when_none()
    recalibration: str | None = omit_when_none()
    local_vs_recalibrated: FoldDifference | None = omit_when_none()
    recalibrated_vs_release: FoldDifference | None = omit_when_none()


@record
class OnFeature(_Record):
    """The feature of the shape a weak region lies on."""

    feature: str
    kind: str
    share: Stat
    at_tip: bool


@record_kw
class WeakRegion(Candidate):
    """A confirmed weak region: a candidate with its name, metrics, description, local
    model test, place on the shape and stability."""

    id: str
    share_of_rows: Stat
    error_interval_points: Stat
    metrics: Metrics
    description: Description | None
    local_model: LocalModelTest
    on_feature: OnFeature | None
    stability: Stat
    #: classification: the error rate on the confirmation half, with its Wilson interval,
    #: and the interval's width in points (``error_interval_points`` is of all its rows)
    confirmation_error_rate: Estimate | None = omit_when_none()
    confirmation_interval_points: Stat = omit_when_none()
    error_mix: ErrorMix | None = omit_when_none()


# -- declared segments ------------------------------------------------------------------------


@record
class SegmentLevel(_Record):
    """One value of a declared segment column: its rows, the release's metrics there, and
    its rows' mean loss (error rate, or mean squared error) tested against the other rows'
    (``p_value``, two-sided; ``p_adjusted`` by Benjamini–Hochberg across every level of
    every declared column). ``verdict`` is ``"worse"``, ``"better"``, ``"no clear
    difference"`` or ``"not tested"`` (``note`` says why)."""

    level: str
    rows: int
    metrics: Metrics
    loss: Stat
    rest_rows: int
    rest_loss: Stat
    p_value: Stat
    p_adjusted: Stat
    verdict: str
    note: str


@record
class Segment(_Record):
    """A column named in ``audit.segments`` and each of its levels, in the column's order
    (numbers by value, text alphabetically, the missing level last); ``test`` names the
    test of each level against the other rows."""

    column: str
    test: str
    levels: tuple[SegmentLevel, ...]


# -- new rows on an earlier graph -------------------------------------------------------------


@record
class ShiftRecord(_Record):
    """One region or node of the earlier graph: its rows then (the earlier release's) and
    now (this release's rows placed there), their shares and the chi-square test of the two
    shares, adjusted by Benjamini–Hochberg across the regions (or nodes)."""

    part: int
    rows_before: int
    rows_after: int
    share_before: float
    share_after: float
    p_value: Stat
    p_adjusted: Stat


@record
class Drift(_Record):
    """This release's rows placed on the graph of the release before it
    (:mod:`topoaudit.audit.newdata`): how many, how many lie beyond every cover element's
    span, and the shift per region and per node."""

    previous: str
    rows_before: int
    rows_after: int
    outside: int
    regions: tuple[ShiftRecord, ...]
    nodes: tuple[ShiftRecord, ...]


# -- the graph -------------------------------------------------------------------------------


@record
class Invariants(_Record):
    """The shape of a graph in numbers (as :class:`topoaudit.mapper.topology.Invariants`
    computes them; declared here so that reading a bundle needs no graph engine)."""

    n_nodes: int
    n_edges: int
    n_components: int
    cycle_rank: int
    n_leaves: int
    n_branch_points: int
    n_isolated: int


@record
class GridPoint(Invariants):
    """The shown graph's invariants at one other cover setting."""

    n_intervals: int
    overlap: float


@record
class ShapeColumn(_Record):
    """A column that sets a feature apart: by its standardised mean difference and
    direction (a component or a flare), or by the share of its variance that lies
    between the nodes of a loop (``eta_squared``)."""

    column: str
    smd: Stat = omit_when_none()
    direction: str | None = omit_when_none()
    eta_squared: Stat = omit_when_none()


@record
class ShapeFeatureRecord(_Record):
    """One feature of the shape (component, loop or flare) as stored."""

    name: str
    kind: str
    confidence: Stat
    extent: Stat
    filter_low: Stat
    filter_high: Stat
    nodes: tuple[int, ...]
    rows: int
    tip_node: int | None
    columns: tuple[ShapeColumn, ...]
    main: bool = False


@record
class ShapeRecord(_Record):
    """The settings the shown graph was built at and the features of its shape."""

    chosen: dict[str, Any] | None
    n_intervals: tuple[int, ...]
    overlap: tuple[float, ...]
    resamples: int
    resample_rows: int
    features: tuple[ShapeFeatureRecord, ...]
    two_d: bool | None = omit_when_none()


@record
class GraphSummary(_Record):
    settings: dict[str, Any]
    invariants: Invariants
    regions: int
    grid: tuple[GridPoint, ...]
    shape: ShapeRecord


@record
class SearchGraphRecord(_Record):
    """One of the graphs searched for weak regions."""

    name: str
    method: str
    nodes: int
    edges: int
    settings: dict[str, Any]
    features_used: tuple[str, ...]


@record
class Node(_Record):
    """One node of graph.json: its size, place and statistics."""

    id: int
    rows: int
    region: int
    filter: Stat
    mean_score: Stat
    loss: Stat
    expected_loss: Stat
    weak_regions: tuple[str, ...]
    positive_rate: Stat = omit_when_none()
    #: observed less promised loss (absent in bundles written before it was recorded)
    excess: Stat = omit_when_none()


@record
class Link(_Record):
    source: int
    target: int
    shared: int
    jaccard: Stat


@record
class GraphDocument(_Record):
    """graph.json: the shown graph's nodes and links, no row-level data."""

    n_rows: int
    settings: dict[str, Any]
    nodes: tuple[Node, ...]
    links: tuple[Link, ...]


# -- stability and comparison ------------------------------------------------------------


@record
class StabilityRun(_Record):
    label: str
    kind: str
    confirmed: int
    found: dict[str, bool]


@record
class Stability(_Record):
    runs: tuple[StabilityRun, ...]


@record
class ScoreChange(_Record):
    """A score metric (``roc_auc`` or ``brier``) of two releases on the same rows: the
    paired change (after minus before), its interval and two-sided p-value, the
    Benjamini–Hochberg adjusted p-value across regions and a verdict; when the test is not
    defined (one class only), the numbers are ``None`` and ``note`` says why."""

    metric: str
    before: Stat
    after: Stat
    change: Stat
    low: Stat
    high: Stat
    p_value: Stat
    p_adjusted: Stat
    verdict: str
    note: str


@record
class RegionChange(_Record):
    """A region's loss before and after a release, with McNemar's or a paired test (and,
    for classification, the paired tests of ROC AUC and Brier score; absent from bundles
    written before they were recorded)."""

    region: int
    rows: int
    before: Stat
    after: Stat
    change: Stat
    low: Stat
    high: Stat
    worse_only_after: int | None
    worse_only_before: int | None
    p_value: Stat
    p_adjusted: Stat
    verdict: str
    roc_auc: ScoreChange | None = omit_when_none()
    brier: ScoreChange | None = omit_when_none()


@record
class Comparison(_Record):
    baseline: str
    candidate: str
    overall: RegionChange
    regions: tuple[RegionChange, ...]
    worse: tuple[int, ...]
    better: tuple[int, ...]
    baseline_overall: Metrics


# -- what changed between two bundles ---------------------------------------------------------


@record
class MetricChange(_Record):
    metric: str
    before: Stat
    after: Stat
    change: Stat


@record
class RegionBrief(_Record):
    """A weak region gained or lost, as a diff shows it (statistics None when small)."""

    id: str
    rows: int
    kind: str
    ratio: Stat
    p_adjusted: Stat


@record
class RegionMatch(_Record):
    """A weak region of the earlier audit seen again in the later one."""

    before: str
    after: str
    jaccard: float


@record
class ReleaseChanges(_Record):
    """What changed between two bundles of one model (both read as public views)."""

    model: str
    task: str
    before: str
    after: str
    same_rows: bool
    metrics: tuple[MetricChange, ...]
    kept: tuple[RegionMatch, ...]
    gained: tuple[RegionBrief, ...]
    lost: tuple[RegionBrief, ...]


# -- the whole analysis ----------------------------------------------------------------------


@record
class Provenance(_Record):
    fingerprint: str
    data_file: str
    rows: int
    rows_dropped: int
    features: tuple[str, ...]
    encoding: dict[str, Any]
    seed: int
    versions: dict[str, str]
    command: str
    threshold: float | None
    score_column: str
    discovery_rows: int
    confirmation_rows: int


@record
class Summary(_Record):
    candidates: int
    candidates_tested: int
    candidates_untested: int
    weak_regions: int
    regions: int
    confidence: float


@record
class Analysis(_Record):
    """analysis.json: everything one audit of one release found."""

    model: str
    release: str
    task: str
    created: str
    config: dict[str, Any]
    provenance: Provenance
    overall: Metrics
    graph: GraphSummary
    search: tuple[SearchGraphRecord, ...]
    regions: tuple[RegionRecord, ...]
    weak_regions: tuple[WeakRegion, ...]
    candidates: tuple[Candidate, ...]
    stability: Stability
    summary: Summary
    comparison: Comparison | None = None
    schema: int = SCHEMA
    extra: dict[str, Any] = field(default_factory=dict)
    #: classification: the outcome table (absent from bundles written before it was)
    outcomes: Outcomes | None = omit_when_none()
    #: the columns of ``audit.segments`` (absent when none is declared, and from bundles
    #: written before segments were)
    segments: tuple[Segment, ...] | None = omit_when_none()
    #: a release on a data file of its own: its rows on the earlier release's graph
    #: (absent when it ran on the earlier release's rows, or had no release before)
    drift: Drift | None = omit_when_none()


# -- sign-offs of a published release ---------------------------------------------------


#: what a reviewer may decide about a release, and how a page says it
DECISIONS = {
    "approved": "approved",
    "approved-with-conditions": "approved with conditions",
    "rejected": "rejected",
}


@record
class SignOff(_Record):
    """One reviewer's decision on a published release: ``signoffs/<number>.json`` in the
    release's folder of the archive, beside the bundle's own files (not one of them).

    ``time`` is UTC in RFC 3339 (``2026-01-02T09:30:00Z``); ``bundle`` the SHA-256 of the
    bundle's checksums.json when it was signed; ``previous`` the ``digest`` of the
    release's sign-off numbered one less (``None`` for number 1); ``digest`` the SHA-256 of
    this record's canonical JSON without ``digest`` (see
    :func:`topoaudit.report.archive.signoffs`).
    """

    number: int
    model: str
    release: str
    reviewer: str
    decision: str
    note: str
    time: str
    bundle: str
    previous: str | None
    digest: str
    version: int = 1

    @property
    def decision_words(self) -> str:
        """The decision as a page says it: ``approved with conditions``."""
        return DECISIONS.get(self.decision, self.decision)

    @property
    def date(self) -> str:
        """The day of the sign-off, ``YYYY-MM-DD`` (UTC)."""
        return self.time[:10]
