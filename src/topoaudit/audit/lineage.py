"""Weak regions followed across the releases of one model: identity, fate and origin.

Each audit names its weak regions ``W1``, ``W2``... afresh. Across the releases of a
model (in publication order) a weak region is followed by its rows:

**Identity.** A weak region of a release that covers the rows of a region followed so far
(Jaccard index at least the config's ``match_jaccard`` on the rows of this release) keeps
that region's tracked id ``T<n>``; pairs are taken greedily, the largest Jaccard first,
each id and region used once. A weak region with no match gets the next number; numbers
are never reused, so the ids depend only on the releases and their order, and rebuilding
an archive gives the same ids.

**Rows across data files.** When a release is validated on the same rows as the one
before it (the same data fingerprint), a region's rows are the same row ids. When it
brings its own data file, its audit placed each new row on the earlier release's graph
(:mod:`topoaudit.audit.drift`) and recorded the earlier row it landed nearest to
(``placed_on`` in ``members.parquet``); a region followed so far then holds the new rows
placed on its rows.

**Fate of each weak region of the earlier release** under the new one, on the new
release's rows of that region:

* *still weak*: its observed loss exceeds what the new scores promise, rescaled so the
  totals agree, as in the audit's confirmation (conditional exact binomial test for
  counts, Kulldorff 1997; a permutation test of the mean for squared errors), adjusted by
  Benjamini–Hochberg (1995) across the earlier release's regions;
* *worse*: still weak, and its ratio of observed to rescaled promised loss is higher than
  under the earlier release (for counts, the exact conditional test of two Poisson rates,
  Przyborowski and Wilenski 1940: given both releases' observed counts, the new one's
  share is binomial with the share of the rescaled promised loss; for squared errors,
  Welch's t test of the losses in units of each release's mean), adjusted the same way;
* *fixed*: not still weak, and its ratio is lower than before by the same test, read the
  other way;
* *unclear*: neither shown.

**Origin of each new weak region**: the earlier release on the same rows (or, for a new
data file, on the earlier rows the new rows were placed on), tested as above and adjusted
across the new regions: *weak before but missed* when its excess is confirmed there,
*introduced by this release* otherwise. A new region that matches a region followed
earlier but not weak in the release just before it has *returned*.

Only bundles are read (their public view and ``members.parquet``): no data file is needed.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from topoaudit.audit.stats import (
    benjamini_hochberg_present,
    binomial_lower_test,
    binomial_upper_test,
    permutation_upper_test,
)
from topoaudit.bundle import public_view
from topoaudit.bundle.files import read_analysis, read_members
from topoaudit.bundle.records import Analysis
from topoaudit.errors import BundleError

__all__ = [
    "Excess",
    "Lineage",
    "ReleaseRows",
    "Tracked",
    "follow",
    "load_release",
]

#: fates of a region of the earlier release, and origins of a new one
FATES = ("fixed", "still weak", "worse", "unclear")
ORIGINS = ("introduced", "missed before", "returned", "found again")


@dataclass(frozen=True, eq=False)
class ReleaseRows:
    """What following regions needs of one audited release."""

    model: str
    release: str
    task: str
    fingerprint: str
    ids: np.ndarray
    loss: np.ndarray | None
    promised: np.ndarray | None
    weak: dict[str, np.ndarray]
    placed_on: np.ndarray | None = None
    fdr: float = 0.05
    match: float = 0.5
    analysis: Analysis | None = None
    folder: str = ""

    @property
    def counts(self) -> bool:
        return self.task != "regression"


def load_release(folder: str | Path) -> ReleaseRows:
    """Read one bundle's public view and row table for :func:`follow`."""
    folder = Path(folder)
    analysis = public_view(read_analysis(folder))
    members = read_members(folder)
    ids = members["id"].astype(str).to_numpy()
    weak: dict[str, np.ndarray] = {w.id: np.zeros(ids.size, bool) for w in analysis.weak_regions}
    for r, regions in enumerate(members["weak_regions"]):
        for w in regions:
            weak.setdefault(str(w), np.zeros(ids.size, bool))[r] = True
    has = set(members.columns)
    placed = None
    if "placed_on" in has:
        placed = members["placed_on"].astype(str).to_numpy()
    audit = analysis.config.get("audit", {})
    return ReleaseRows(
        model=analysis.model,
        release=analysis.release,
        task=analysis.task,
        fingerprint=analysis.provenance.fingerprint,
        ids=ids,
        loss=members["loss"].to_numpy(float) if "loss" in has else None,
        promised=members["promised"].to_numpy(float) if "promised" in has else None,
        weak=weak,
        placed_on=placed,
        fdr=float(audit.get("fdr", 0.05)),
        match=float(audit.get("match_jaccard", 0.5)),
        analysis=analysis,
        folder=str(folder),
    )


@dataclass(frozen=True)
class Excess:
    """A set of rows under one release: observed and rescaled promised loss."""

    rows: int
    observed: float
    expected: float
    ratio: float | None
    p_value: float | None


def excess(rel: ReleaseRows, mask: np.ndarray, seed: int = 0) -> Excess | None:
    """Observed against promised loss of ``rel`` on ``mask`` (None without losses)."""
    if rel.loss is None or rel.promised is None:
        return None
    n = int(mask.sum())
    if n == 0:
        return Excess(0, 0.0, 0.0, None, None)
    loss = rel.loss
    if rel.counts:
        total, share = float(loss.sum()), float(rel.promised[mask].sum() / rel.promised.sum())
        observed, expected = float(loss[mask].sum()), share * total
        p = binomial_upper_test(round(observed), round(total), min(1.0, share))
    else:
        observed, expected = float(loss[mask].sum()), float(n * loss.mean())
        p = (
            permutation_upper_test(loss[mask], loss[~mask], random_state=seed)
            if n < loss.size
            else 1.0
        )
    ratio = observed / expected if expected > 0 else None
    return Excess(n, observed, expected, ratio, p)


def change_tests(
    before: Excess, after: Excess, rel_a: ReleaseRows, rel_b: ReleaseRows, masks
) -> tuple[float, float]:
    """One-sided p-values that the ratio rose (worse) and that it fell (better)."""
    if rel_a.counts:
        k, n = round(after.observed), round(before.observed + after.observed)
        total = before.expected + after.expected
        if n == 0 or total <= 0:
            return 1.0, 1.0
        share = after.expected / total
        return binomial_upper_test(k, n, share), binomial_lower_test(k, n, share)
    from scipy import stats as st

    a = rel_a.loss[masks[0]] / rel_a.loss.mean()
    b = rel_b.loss[masks[1]] / rel_b.loss.mean()
    if a.size < 2 or b.size < 2:
        return 1.0, 1.0
    worse = st.ttest_ind(b, a, equal_var=False, alternative="greater").pvalue
    better = st.ttest_ind(b, a, equal_var=False, alternative="less").pvalue
    return float(np.nan_to_num(worse, nan=1.0)), float(np.nan_to_num(better, nan=1.0))


def carry(mask: np.ndarray, source: ReleaseRows, target: ReleaseRows) -> np.ndarray | None:
    """``mask`` over ``source``'s rows, as a mask over ``target``'s rows: by row id when
    both ran on the same data file, through ``target``'s placement when ``target`` was
    placed on ``source``; None when neither holds."""
    if source.fingerprint == target.fingerprint:
        if source.ids.size == target.ids.size and np.array_equal(source.ids, target.ids):
            return mask.copy()
        return np.isin(target.ids, source.ids[mask])
    if target.placed_on is not None:
        return np.isin(target.placed_on, source.ids[mask])
    return None


def back(mask: np.ndarray, earlier: ReleaseRows, later: ReleaseRows) -> np.ndarray | None:
    """The rows of ``earlier`` that ``later``'s rows in ``mask`` stand on: the same ids on
    the same data, the rows they were placed on otherwise."""
    if earlier.fingerprint == later.fingerprint:
        return np.isin(earlier.ids, later.ids[mask])
    if later.placed_on is not None:
        return np.isin(earlier.ids, later.placed_on[mask])
    return None


@dataclass
class Tracked:
    """One weak region followed across releases."""

    id: str
    found_in: str
    release: int  # index of the release whose rows ``mask`` covers
    mask: np.ndarray
    weak_in: list[str] = field(default_factory=list)
    local: dict[str, str] = field(default_factory=dict)  # release -> that audit's own id


@dataclass(frozen=True)
class Fate:
    """A weak region of the earlier release under the new one."""

    tracked: str
    before_id: str
    after_id: str | None
    fate: str
    before: Excess | None
    after: Excess | None
    p_worse: float | None
    p_better: float | None
    q_still: float | None
    q_worse: float | None
    q_better: float | None


@dataclass(frozen=True)
class Origin:
    """A weak region of the new release, and the earlier release on its rows."""

    tracked: str
    after_id: str
    origin: str
    jaccard: float | None
    before: Excess | None
    q_before: float | None


@dataclass(frozen=True)
class Step:
    """One release against the one before it."""

    before: str
    after: str
    same_rows: bool
    placed: bool
    fates: tuple[Fate, ...]
    origins: tuple[Origin, ...]
    note: str = ""


@dataclass
class Lineage:
    """Every release of a model in order, the regions followed and the steps between."""

    releases: list[str]
    tracked: dict[str, Tracked]
    steps: list[Step]

    def step_to(self, release: str) -> Step | None:
        return next((s for s in self.steps if s.after == release), None)

    def tracked_id(self, release: str, local: str) -> str | None:
        for t in self.tracked.values():
            if t.local.get(release) == local:
                return t.id
        return None


def _jaccard(a: np.ndarray, b: np.ndarray) -> float:
    union = int((a | b).sum())
    return int((a & b).sum()) / union if union else 0.0


def _match(
    rel: ReleaseRows, here: dict[str, np.ndarray], threshold: float
) -> dict[str, tuple[str, float]]:
    """Local weak-region id -> (tracked id, Jaccard), greedy by Jaccard."""
    pairs = sorted(
        ((_jaccard(m, here[t]), w, t) for w, m in rel.weak.items() for t in here),
        key=lambda x: (-x[0], x[1], int(x[2][1:])),
    )
    used_w: set[str] = set()
    used_t: set[str] = set()
    out = {}
    for j, w, t in pairs:
        if j >= threshold and w not in used_w and t not in used_t:
            out[w] = (t, j)
            used_w.add(w)
            used_t.add(t)
    return out


def _fates(prev: ReleaseRows, rel: ReleaseRows, followed, matched, fdr: float) -> list[Fate]:
    """Fates of ``prev``'s weak regions under ``rel``; ``followed``: tracked id ->
    (``prev``'s own id, its rows on ``rel`` or None)."""
    rows = []
    for t, (local, m_here) in followed.items():
        m_prev = prev.weak[local]
        ex_b = excess(prev, m_prev)
        ex_a = excess(rel, m_here) if m_here is not None else None
        tests = (None, None)
        if ex_a is not None and ex_b is not None and ex_a.rows:
            tests = change_tests(ex_b, ex_a, prev, rel, (m_prev, m_here))
        rows.append((t, local, ex_b, ex_a, ex_a.p_value if ex_a else None, *tests))
    q_still, q_worse, q_better = (
        benjamini_hochberg_present([r[i] for r in rows]) for i in (4, 5, 6)
    )
    after_ids = {t: w for w, (t, _j) in matched.items()}
    out = []
    for k, (t, local, ex_b, ex_a, _p, p_worse, p_better) in enumerate(rows):
        fate = "unclear"
        if q_still[k] is not None and q_still[k] <= fdr:
            fate = "worse" if q_worse[k] is not None and q_worse[k] <= fdr else "still weak"
        elif q_better[k] is not None and q_better[k] <= fdr:
            fate = "fixed"
        out.append(
            Fate(
                t,
                local,
                after_ids.get(t),
                fate,
                ex_b,
                ex_a,
                p_worse,
                p_better,
                q_still[k],
                q_worse[k],
                q_better[k],
            )
        )
    return out


def _origins(
    prev: ReleaseRows, rel: ReleaseRows, new: dict[str, str], matched, tracked, fdr: float
) -> list[Origin]:
    """Origins of ``rel``'s weak regions: ``new`` maps the unmatched ones to their ids."""
    tested = []
    for w, t in new.items():
        m_prev = back(rel.weak[w], prev, rel)
        tested.append((w, t, excess(prev, m_prev) if m_prev is not None else None))
    q = benjamini_hochberg_present([e.p_value if e is not None else None for _w, _t, e in tested])
    out = []
    for k, (w, t, e) in enumerate(tested):
        origin = "missed before" if q[k] is not None and q[k] <= fdr else "introduced"
        out.append(Origin(t, w, origin, None, e, q[k]))
    for w, (t, j) in matched.items():
        was_weak = prev.release in tracked[t].weak_in
        out.append(Origin(t, w, "found again" if was_weak else "returned", j, None, None))
    return sorted(out, key=lambda o: int(o.tracked[1:]))


def follow(releases: Sequence[ReleaseRows], *, match: float | None = None) -> Lineage:
    """Follow the weak regions of ``releases`` (in publication order; see module doc)."""
    if not releases:
        raise BundleError("No releases to follow.")
    models = {r.model for r in releases}
    if len(models) > 1:
        names = ", ".join(sorted(models))
        raise BundleError(
            f"The bundles are of different models ({names}); compare releases of one model."
        )
    tracked: dict[str, Tracked] = {}
    steps: list[Step] = []
    for k, rel in enumerate(releases):
        threshold = match if match is not None else rel.match
        step = _step(releases, k, tracked, threshold, rel.fdr)
        if step is not None:
            steps.append(step)
    return Lineage([r.release for r in releases], tracked, steps)


def _step(
    releases, k: int, tracked: dict[str, Tracked], threshold: float, fdr: float
) -> Step | None:
    rel = releases[k]
    here: dict[str, np.ndarray] = {}
    for t in tracked.values():  # every region followed so far, on this release's rows
        if t.release == k - 1 or releases[t.release].fingerprint == rel.fingerprint:
            m = carry(t.mask, releases[t.release], rel)
            if m is not None:
                here[t.id] = m
    matched = _match(rel, here, threshold)
    new = {}
    for w in sorted(rel.weak, key=lambda s: (len(s), s)):
        if w not in matched:
            tid = f"T{len(tracked) + len(new) + 1}"
            new[w] = tid
    step = None
    if k > 0:
        prev = releases[k - 1]
        followed = {
            t.id: (t.local[prev.release], here.get(t.id))
            for t in tracked.values()
            if prev.release in t.weak_in
        }
        step = Step(
            before=prev.release,
            after=rel.release,
            same_rows=prev.fingerprint == rel.fingerprint,
            placed=rel.placed_on is not None,
            fates=tuple(_fates(prev, rel, followed, matched, fdr)),
            origins=tuple(_origins(prev, rel, new, matched, tracked, fdr)),
            note=_step_note(prev, rel),
        )
    for t, m in here.items():
        tracked[t].mask, tracked[t].release = m, k
    for w, (t, _j) in matched.items():
        tracked[t].mask = rel.weak[w]
        tracked[t].weak_in.append(rel.release)
        tracked[t].local[rel.release] = w
    for w, t in new.items():
        tracked[t] = Tracked(t, rel.release, k, rel.weak[w], [rel.release], {rel.release: w})
    return step


def _step_note(prev: ReleaseRows, rel: ReleaseRows) -> str:
    if prev.fingerprint == rel.fingerprint:
        return ""
    if rel.placed_on is None:
        return (
            f"Release {rel.release} ran on other rows than {prev.release} and its audit did "
            "not place them on the earlier graph: earlier regions cannot be followed."
        )
    if prev.loss is None or rel.loss is None:
        return "A bundle predates row losses: fates and origins are not tested."
    return ""
