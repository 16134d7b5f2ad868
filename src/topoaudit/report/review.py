"""The parts of a release page that a reviewer signs against: the decisions at the
threshold beside rules that use no information, the promise every weak region is judged
against, the error mix and home region of a weak region, and every candidate with what
became of it.

Like the rest of the report layer, these functions format numbers the audit stored in
the public view; they compute none.
"""

from __future__ import annotations

from topoaudit.bundle import MIN_CELL_ROWS, is_small
from topoaudit.bundle.records import (
    Analysis,
    Candidate,
    ErrorMix,
    HalfEstimate,
    NoSkill,
    Outcomes,
    RegionShare,
    WeakRegion,
)
from topoaudit.report.text import count, escape, plural, pvalue, rate
from topoaudit.wording import is_missing, join_words

__all__ = [
    "BROAD_SHARE",
    "GRAPH_WORDS",
    "KIND_WORDS",
    "candidates_section",
    "drift_section",
    "error_mix_sentence",
    "graph_words",
    "half_table",
    "kind_words",
    "outcomes_section",
    "promise_factor",
    "promise_sentence",
    "regions_sentence",
]

#: what a kind of loss is called on a page
KIND_WORDS = {
    "error": "errors",
    "false_positive": "false positives",
    "false_negative": "false negatives",
    "squared_error": "squared errors",
}
#: what a search graph is called on a page
GRAPH_WORDS = {
    "features": "feature graph",
    "error_aware": "error-aware graph",
    "slab": "graph along one direction across the features",
    "set_aside": "error-aware graph with its strongest region set aside",
}
#: a weak region holding at least this share of all rows is called broad
BROAD_SHARE = 0.25


def kind_words(kind: str) -> str:
    return KIND_WORDS.get(kind, escape(kind))


def graph_words(name: str) -> str:
    return GRAPH_WORDS.get(name, escape(name) + " graph")


# -- the promise --------------------------------------------------------------------------


def promise_factor(a: Analysis) -> float | None:
    """The factor the confirmation half's promised errors were rescaled by (observed over
    promised errors on every row of that half), as stored with the candidates."""
    for c in a.candidates:
        if c.kind in ("error", "squared_error") and c.confirmation.scale is not None:
            return c.confirmation.scale
    return None


def promise_sentence(a: Analysis, counts: bool) -> list[str]:
    """What the rescaling factor means, for the at-a-glance part of a classification."""
    factor = promise_factor(a)
    if factor is None or not counts:
        return []
    more = "more" if factor >= 1 else "fewer"
    return [
        f"On the confirmation half the release makes {factor:.2f} times as many wrong "
        "decisions as its own scores promise (the factor is observed errors over the "
        f"errors the scores promise, on all {count(a.provenance.confirmation_rows)} rows "
        f"of that half: about {abs(factor - 1) * 100:.0f}% {more}). A weak region is "
        "judged against the promise times that factor: it is a place where the release "
        "does worse than it does elsewhere, not merely worse than its scores say.",
        "",
    ]


def half_table(w: WeakRegion, counts: bool) -> list[str]:
    """The two halves of a weak region, every row labelled with what its number is."""
    d, c = w.discovery, w.confirmation

    def cell(h: HalfEstimate, value: float | None, digits: int = 3) -> str:
        return "not shown" if is_small(h.rows) else rate(value, digits)

    def scaled(h: HalfEstimate) -> str:
        if is_small(h.rows) or h.scale is None:
            return cell(h, h.expected_rate)
        return f"{rate(h.expected_rate)} (× {h.scale:.2f})"

    lines = ["| | discovery half | confirmation half |", "|---|---|---|"]
    lines.append(f"| rows | {count(d.rows)} | {count(c.rows)} |")
    if counts:
        lines += [
            f"| observed error rate | {cell(d, d.observed_rate)} | {cell(c, c.observed_rate)} |",
            f"| error rate its scores promise | {cell(d, d.promised_rate)} | "
            f"{cell(c, c.promised_rate)} |",
            f"| that promise times the half's factor | {scaled(d)} | {scaled(c)} |",
            f"| observed / promise times factor | {cell(d, d.ratio, 2)} | {cell(c, c.ratio, 2)} |",
        ]
    else:
        lines += [
            f"| mean squared error | {cell(d, d.observed_rate)} | {cell(c, c.observed_rate)} |",
            f"| mean squared error of all rows of the half | {cell(d, d.expected_rate)} | "
            f"{cell(c, c.expected_rate)} |",
            f"| ratio of the two | {cell(d, d.ratio, 2)} | {cell(c, c.ratio, 2)} |",
        ]
    return [*lines, ""]


# -- who is in a weak region --------------------------------------------------------------


def error_mix_sentence(mix: ErrorMix | None, rows: int) -> list[str]:
    """What a set of rows' wrong decisions are (classification)."""
    if mix is None or is_small(rows) or not mix.errors:
        return []
    fp, fn = mix.false_positives or 0, mix.false_negatives or 0
    n = plural(mix.errors, "wrong decision")
    if mix.errors == 1:
        kind = "a false negative (an event not flagged)" if fn else "a false positive"
        text = f"Its one wrong decision is {kind}."
    elif fn == mix.errors:
        text = f"All {n} in it are false negatives: events the release did not flag."
    elif fp == mix.errors:
        text = f"All {n} in it are false positives: rows flagged with no event."
    else:
        text = (
            f"Its {n}: {plural(fn, 'false negative')} (events not flagged) and "
            f"{plural(fp, 'false positive')} (flagged with no event)."
        )
    return [text, ""]


def regions_sentence(w: WeakRegion) -> list[str]:
    """Where a weak region sits in the partition of the shown graph, and whether it is
    broad rather than a pocket."""
    out = []
    if w.regions:
        parts = [_share_words(s) for s in w.regions]
        out.append(f"It holds {join_words(parts)}.")
    if w.share_of_rows is not None and w.share_of_rows >= BROAD_SHARE:
        out.append(
            f"It holds {w.share_of_rows * 100:.0f}% of all rows: a broad part of the data, "
            "not a pocket; read it as a general weakness of the release there."
        )
    return [" ".join(out), ""] if out else []


def _share_words(s: RegionShare) -> str:
    share = f" ({s.rows / s.region_rows * 100:.0f}%)" if s.region_rows else ""
    return f"{count(s.rows)} of the {count(s.region_rows)} rows of region {s.region}{share}"


# -- decisions at the threshold ----------------------------------------------------------


def outcomes_section(o: Outcomes | None) -> list[str]:
    """The release's decisions beside rules that use no information, and at other
    thresholds (classification)."""
    if o is None:
        return []
    lines = [
        "## Decisions at the threshold",
        "",
        f"Base rate (share of rows with the event): {rate(o.base_rate)}. At its threshold "
        f"{o.threshold} the release flags {rate(o.flagged_share)} of the rows: "
        f"{count(o.true_positives)} events flagged, {count(o.false_positives)} flagged "
        f"with no event, {count(o.false_negatives)} events missed, "
        f"{count(o.true_negatives)} rows rightly not flagged.",
        "",
        "| rule | share flagged | error rate | precision | recall | Brier score | log loss |",
        "|---|---|---|---|---|---|---|",
        f"| the release | {rate(o.flagged_share)} | {rate(o.error_rate)} | "
        f"{rate(o.precision)} | {rate(o.recall)} | {rate(o.brier)} | {rate(o.log_loss)} |",
        *(_no_skill_row(n) for n in o.no_skill),
        "",
        *_no_skill_sentence(o),
        "The release's decisions at other thresholds (its own marked):",
        "",
        "| threshold | rows flagged | share flagged | precision | recall | error rate |",
        "|---|---|---|---|---|---|",
    ]
    for t in o.thresholds:
        mark = f"**{t.threshold:.2f} (the release's)**" if t.release else f"{t.threshold:.2f}"
        precision = "not shown" if is_small(t.flagged) and t.precision is None else t.precision
        lines.append(
            f"| {mark} | {count(t.flagged)} | {rate(t.flagged_share)} | "
            f"{precision if isinstance(precision, str) else rate(precision)} | "
            f"{rate(t.recall)} | {rate(t.error_rate)} |"
        )
    lines += [
        "",
        f"Precision is not shown at a threshold that flags fewer than {MIN_CELL_ROWS} rows.",
        "",
    ]
    return lines


_NO_SKILL_WORDS = {
    "never flag": "never flag (no row flagged)",
    "always flag": "always flag (every row flagged)",
    "base rate as the score": "the base rate as every row's score",
}


def _no_skill_row(n: NoSkill) -> str:
    name = _NO_SKILL_WORDS.get(n.name, escape(n.name))
    return (
        f"| {name} | {rate(n.flagged_share)} | {rate(n.error_rate)} | {rate(n.precision)} | "
        f"{rate(n.recall)} | {rate(n.brier)} | {rate(n.log_loss)} |"
    )


def _no_skill_sentence(o: Outcomes) -> list[str]:
    never = next((n for n in o.no_skill if n.name == "never flag"), None)
    if never is None or is_missing(never.error_rate) or is_missing(o.error_rate):
        return []
    return [
        f"Never flagging anything would err on {rate(never.error_rate)} of the rows; the "
        f"release errs on {rate(o.error_rate)}. The error rate alone says "
        "little when events are rare: read recall and precision, and the Brier score and "
        "log loss against the base rate as a score.",
        "",
    ]


# -- every candidate -----------------------------------------------------------------------


def candidates_section(a: Analysis) -> list[str]:
    """Every candidate region the search found, tested or not, and what became of it."""
    if not a.candidates:
        return []
    tested = a.summary.candidates_tested
    lines = [
        "## Every candidate region",
        "",
        f"The search found {plural(len(a.candidates), 'candidate region')} on the discovery "
        f"half; {count(tested)} of them {'was' if tested == 1 else 'were'} large enough to "
        "test on the confirmation half. Candidates that passed the false discovery rate and "
        "share most of their rows are one weak region seen again: they are listed under "
        "its name. So is one that passed but overlaps a weak region and holds no excess "
        "of its own on its confirmation rows outside it: it is that region seen through a "
        'wider window. "In regions" names the regions of the shown graph that hold most '
        "of a candidate's rows.",
        "",
        "| candidate | found in | rows | in regions | confirmation rows | observed / "
        "promised | adjusted p-value | outcome |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for i, c in enumerate(a.candidates, start=1):
        lines.append(_candidate_row(i, c, a.weak_regions))
    return [*lines, ""]


def _weak_region_of(c: Candidate, weak: tuple[WeakRegion, ...]) -> str | None:
    """The weak region a confirmed candidate is, or is seen again in (when that is clear)."""
    for w in weak:
        if (w.graph, w.kind, tuple(w.nodes)) == (c.graph, c.kind, tuple(c.nodes)):
            return w.id
    label = f"{c.graph}/{c.kind}"
    holders = [w.id for w in weak if label in w.also_found]
    return holders[0] if len(holders) == 1 else None


def _candidate_row(i: int, c: Candidate, weak: tuple[WeakRegion, ...]) -> str:
    half = c.confirmation
    ratio = "not shown" if is_small(half.rows) else rate(half.ratio, 2)
    where = ", ".join(f"{s.region}" for s in c.regions) if c.regions else "n/a"
    if not c.tested:
        outcome = "not tested (too few confirmation rows)"
    elif c.confirmed:
        own = _weak_region_of(c, weak)
        outcome = f"confirmed: {own}" if own else "confirmed, part of a weak region above"
    else:
        outcome = "not confirmed"
    p = pvalue(c.p_adjusted) if c.tested else "n/a"
    return (
        f"| {i} | {graph_words(c.graph)}, {kind_words(c.kind)} | {count(c.rows)} | {where} | "
        f"{count(half.rows)} | {ratio} | {p} | {outcome} |"
    )


#: a part of the earlier graph whose share moved with an adjusted p-value at most this
SHIFT_LEVEL = 0.05


def _share(rows: int, share: float) -> str:
    return NOT_SHOWN_SHORT if is_small(rows) and rows else f"{share * 100:.1f}%"


NOT_SHOWN_SHORT = f"not shown (fewer than {MIN_CELL_ROWS} rows)"


def drift_section(a: Analysis) -> list[str]:
    """The population shift of a release validated on a data file of its own: its rows
    on the graph of the release before, region by region (none when it ran on the earlier
    release's rows)."""
    d = a.drift
    if d is None:
        return []
    prev = escape(d.previous)
    shifted = [s for s in d.regions if not is_missing(s.p_adjusted) and s.p_adjusted <= SHIFT_LEVEL]
    nodes = [s for s in d.nodes if not is_missing(s.p_adjusted) and s.p_adjusted <= SHIFT_LEVEL]
    lines = [
        f"## Population shift since release {prev}",
        "",
        f"This release was validated on a data file of its own. Its {count(d.rows_after)} "
        f"rows were placed on the graph of release {prev} ({count(d.rows_before)} rows): "
        "each took the filter value the earlier filter gives it, the cover elements whose "
        "rows span that value, and there the node of its nearest earlier row"
        + (
            f"; {plural(d.outside, 'row')} lay beyond every element's span and each took the "
            "nodes of its nearest earlier row"
            if d.outside
            else ""
        )
        + ". The share of rows in each region of that graph, then and now, is tested with "
        "the chi-square test of the two shares, adjusted by Benjamini–Hochberg across the "
        f"regions: {plural(len(shifted), 'region')} of {len(d.regions)} shifted "
        f"(adjusted p-value at most {SHIFT_LEVEL}), and {plural(len(nodes), 'node')} of "
        f"{len(d.nodes)}. A shift says where the population moved, not how the model does "
        "there.",
        "",
        f"| region of release {prev}'s graph | rows then | share then | rows now | "
        "share now | change (points) | adjusted p-value |",
        "|---|---|---|---|---|---|---|",
    ]
    for s in d.regions:
        small = (is_small(s.rows_before) and s.rows_before) or (
            is_small(s.rows_after) and s.rows_after
        )
        change = "not shown" if small else f"{(s.share_after - s.share_before) * 100:+.1f}"
        lines.append(
            f"| region {s.part} | {count(s.rows_before)} | {_share(s.rows_before, s.share_before)} "
            f"| {count(s.rows_after)} | {_share(s.rows_after, s.share_after)} | {change} | "
            f"{'not shown' if small else pvalue(s.p_adjusted)} |"
        )
    return [*lines, ""]
