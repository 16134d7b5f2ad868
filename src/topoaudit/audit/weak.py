"""Weak regions: found on one half of the rows, confirmed on the other.

The rows are split (seeded, stratified by outcome) into a discovery half and a
confirmation half. Each row carries, for each kind of loss, an observed loss and the loss
the release's own scores promise for it:

========================  ======================  ========================================
kind                      observed                expected (score ``p``, threshold ``t``)
========================  ======================  ========================================
``error``                 1 if the decision errs  ``p`` if ``p < t`` else ``1 - p``
``false_positive``        1 if a false positive   ``1 - p`` if ``p >= t`` else 0
``false_negative``        1 if a false negative   ``p`` if ``p < t`` else 0
``squared_error`` (reg.)  ``(y - f)²``            the same for every row
========================  ======================  ========================================

Every classifier errs more near its decision boundary, so excess is measured against
what the scores promise, and on each half the expected losses are rescaled so their total
equals the observed total there: the scan conditions on the total, as Kulldorff's scan
statistic does (Kulldorff, 1997). A release that errs as often as its scores say, or
more often by the same factor everywhere, then shows no excess anywhere. Each region's
half records that factor (``scale``: the half's observed total over its promised total)
and the rate its scores promise before it (``promised_rate``), beside the rescaled
``expected_rate``.

**Discovery.** On the discovery half, for a set ``S`` of nodes with observed loss ``O``
and rescaled expected loss ``E`` out of a total ``N``, the Poisson scan statistic is
``LLR(S) = O ln(O / E) + (N - O) ln((N - O) / (N - E))`` when ``O > E`` (else 0)
(Kulldorff, 1997). From each of the 30 nodes with the most excess, a connected set of
nodes is grown greedily, adding at each step the neighbouring node that raises the LLR
most, and the best set on that path is kept (bounded at ``max_share`` of the rows and
50 nodes). The strongest non-overlapping
sets become candidates.

**Confirmation.** Each candidate is tested once, on the confirmation half only, one-sided:
for counts, the exact conditional binomial test (given the ``N`` events observed on that
half, each falls in the region with probability ``E_region / E_total``); for squared
errors, a seeded permutation test of the region's mean. Candidates with fewer than
``min_rows`` confirmation rows are reported as too small and not tested. The
Benjamini–Hochberg procedure (1995) at ``fdr`` runs over all tested candidates, of every
graph and kind; a candidate is confirmed when its adjusted p-value is at most ``fdr``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from topoaudit.audit.stats import (
    benjamini_hochberg,
    binomial_upper_test,
    permutation_upper_test,
    poisson_lower_bound,
)
from topoaudit.bundle.records import HalfEstimate
from topoaudit.mapper.graph import MapperGraph

__all__ = [
    "CandidateRegion",
    "HalfEstimate",
    "Losses",
    "binary_losses",
    "find_weak_regions",
    "regression_losses",
    "rescaling_factor",
    "scan_statistic",
    "split_halves",
]


@dataclass(frozen=True, eq=False)
class Losses:
    """Observed and (unscaled) expected loss of every row, for one kind of loss."""

    kind: str
    observed: np.ndarray
    expected: np.ndarray
    counts: bool = True


def binary_losses(y: np.ndarray, p: np.ndarray, threshold: float) -> list[Losses]:
    """The three kinds of loss of a binary decision at ``threshold`` (see module doc).

    Examples
    --------
    >>> [(l.kind, l.observed.tolist(), l.expected.tolist())
    ...  for l in binary_losses(np.array([0, 1]), np.array([0.8, 0.3]), 0.5)][0]
    ('error', [1.0, 1.0], [0.19999999999999996, 0.3])
    """
    y = np.asarray(y, dtype=float)
    p = np.asarray(p, dtype=float)
    pos = p >= threshold
    err = (pos != (y == 1)).astype(float)
    fp = (pos & (y == 0)).astype(float)
    fn = (~pos & (y == 1)).astype(float)
    return [
        Losses("error", err, np.where(pos, 1 - p, p)),
        Losses("false_positive", fp, np.where(pos, 1 - p, 0.0)),
        Losses("false_negative", fn, np.where(pos, 0.0, p)),
    ]


def regression_losses(y: np.ndarray, prediction: np.ndarray) -> list[Losses]:
    """Squared error, against an expectation that is equal for every row."""
    r = np.asarray(y, dtype=float) - np.asarray(prediction, dtype=float)
    return [Losses("squared_error", r * r, np.ones_like(r), counts=False)]


def split_halves(
    n_rows: int, strata: np.ndarray | None, random_state: int, share: float = 0.5
) -> np.ndarray:
    """Boolean mask of the discovery half: a seeded split, stratified by ``strata``."""
    rng = np.random.default_rng([int(random_state), 17])
    mask = np.zeros(n_rows, dtype=bool)
    groups = (
        np.zeros(n_rows, dtype=np.int64)
        if strata is None
        else np.unique(strata, return_inverse=True)[1]
    )
    for g in np.unique(groups):
        idx = np.flatnonzero(groups == g)
        rng.shuffle(idx)
        mask[idx[: round(share * idx.size)]] = True
    return mask


def scan_statistic(observed: float, expected: float, total: float) -> float:
    """Kulldorff's Poisson log-likelihood ratio of a region (0 unless ``O > E``).

    The scalar form of :func:`_llr`, with the same guards.

    Examples
    --------
    >>> round(scan_statistic(30, 20, 100), 4)
    2.8168
    """
    if float(total) <= 0:
        return 0.0
    return float(_llr(np.array([float(observed)]), np.array([float(expected)]), float(total))[0])


def _llr(observed: np.ndarray, expected: np.ndarray, total: float) -> np.ndarray:
    """Kulldorff's Poisson log-likelihood ratio for arrays of (observed, expected) pairs:
    ``O log(O/E) + (N - O) log((N - O)/(N - E))`` where ``O > E > 0``, else 0; the second
    term is 0 when either rest is empty."""
    o = np.asarray(observed, dtype=float)
    e = np.asarray(expected, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = np.where(o > 0, o * np.log(o / e), 0.0)
        ro, re_ = total - o, total - e
        outside = np.where((ro > 0) & (re_ > 0), ro * np.log(ro / re_), 0.0)
    return np.where((o > e) & (e > 0), inside + outside, 0.0)


@dataclass(frozen=True, eq=False)
class Found:
    """A place found on the discovery half, before it is tested: its scan statistic, its
    nodes, its discovery rows and, for a level set, the lens level it was trimmed at."""

    llr: float
    nodes: tuple[int, ...]
    rows: np.ndarray
    lens_threshold: float = float("nan")


@dataclass(frozen=True, eq=False)
class CandidateRegion:
    """One candidate weak region, with its discovery and confirmation results (a weak
    region when confirmed)."""

    graph: str
    kind: str
    nodes: tuple[int, ...]
    rows: np.ndarray
    llr: float
    discovery: HalfEstimate
    confirmation: HalfEstimate
    tested: bool
    p_value: float = float("nan")
    p_adjusted: float = float("nan")
    confirmed: bool = False
    lens_threshold: float = float("nan")
    note: str = ""
    also_found: tuple[str, ...] = field(default_factory=tuple)

    @property
    def effect(self) -> float:
        """Confirmation-half excess rate: observed minus expected loss per row."""
        return self.confirmation.observed_rate - self.confirmation.expected_rate


def _scaled(losses: Losses, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Observed and rescaled expected loss on the rows of ``mask`` (zero elsewhere)."""
    obs = np.where(mask, losses.observed, 0.0)
    exp = np.where(mask, losses.expected, 0.0)
    factor = rescaling_factor(losses, mask)
    exp = exp * factor if np.isfinite(factor) else exp
    return obs, exp, float(obs.sum())


def rescaling_factor(losses: Losses, mask: np.ndarray) -> float:
    """The factor the promised losses of the rows of ``mask`` (a half) are multiplied by:
    their observed total over their promised total (NaN when nothing is promised there)."""
    total_o = np.where(mask, losses.observed, 0.0).sum()
    total_e = np.where(mask, losses.expected, 0.0).sum()
    return float(total_o / total_e) if total_e > 0 else float("nan")


def _grow(
    seed: int,
    node_rows: list[np.ndarray],
    neighbours: list[np.ndarray],
    obs: np.ndarray,
    exp: np.ndarray,
    total: float,
    max_rows: int,
    patience: int = 3,
    max_nodes: int = 50,
) -> tuple[float, tuple[int, ...]]:
    """Grow a connected node set from ``seed``, each step adding the neighbouring node
    that gives the highest LLR; stop after ``patience`` steps without a new best, at
    ``max_rows`` rows or at ``max_nodes`` nodes (which bounds the cost on large graphs).
    Returns the best (LLR, sorted nodes) seen on the way."""
    in_set = np.zeros(obs.size, dtype=bool)
    rows = node_rows[seed]
    in_set[rows] = True
    chosen = {seed}
    o, e, n = obs[rows].sum(), exp[rows].sum(), rows.size
    best = (scan_statistic(o, e, total), (seed,))
    frontier = set(neighbours[seed].tolist())
    stale = 0
    while frontier and stale < patience and len(chosen) < max_nodes:
        step = _best_step(sorted(frontier), node_rows, in_set, obs, exp, (o, e, n), total, max_rows)
        if step is None:
            break
        score, v, new = step
        chosen.add(v)
        in_set[new] = True
        o, e, n = o + obs[new].sum(), e + exp[new].sum(), n + new.size
        frontier.discard(v)
        frontier.update(int(u) for u in neighbours[v] if int(u) not in chosen)
        if score > best[0]:
            best, stale = (score, tuple(sorted(chosen))), 0
        else:
            stale += 1
    return best


def _best_step(
    candidates: list[int],
    node_rows: list[np.ndarray],
    in_set: np.ndarray,
    obs: np.ndarray,
    exp: np.ndarray,
    current: tuple[float, float, int],
    total: float,
    max_rows: int,
) -> tuple[float, int, np.ndarray] | None:
    """The candidate node whose new rows give the highest LLR (the first in ``candidates``
    among equals), as ``(LLR, node, new rows)``; ``None`` when every one would pass
    ``max_rows``. All candidates are scored in one call of :func:`_llr`."""
    o, e, n = current
    news = [node_rows[v][~in_set[node_rows[v]]] for v in candidates]
    sizes = np.array([a.size for a in news], dtype=np.int64)
    fits = n + sizes <= max_rows
    if not fits.any():
        return None
    where = np.repeat(np.arange(len(news)), sizes)
    idx = np.concatenate(news) if news else np.empty(0, dtype=np.int64)
    add_o = np.bincount(where, weights=obs[idx], minlength=len(news))
    add_e = np.bincount(where, weights=exp[idx], minlength=len(news))
    scores = _llr(o + add_o, e + add_e, total) if total > 0 else np.zeros(len(news))
    scores = np.where(fits, scores, -np.inf)
    k = int(np.argmax(scores))
    return float(scores[k]), candidates[k], news[k]


def _grown(
    graph: MapperGraph,
    obs: np.ndarray,
    exp: np.ndarray,
    total: float,
    half: np.ndarray,
    *,
    max_share: float,
    max_seeds: int = 30,
) -> list[Found]:
    node_rows = [m[half[m]] for m in graph.members]
    nbrs: list[list[int]] = [[] for _ in range(graph.n_nodes)]
    for a, b in graph.edges:
        nbrs[int(a)].append(int(b))
        nbrs[int(b)].append(int(a))
    neighbours = [np.array(sorted(v), dtype=np.int64) for v in nbrs]
    max_rows = int(max_share * half.sum())
    seeds = []
    for v, rows in enumerate(node_rows):
        if rows.size and obs[rows].sum() > exp[rows].sum():
            seeds.append((scan_statistic(obs[rows].sum(), exp[rows].sum(), total), v))
    seeds.sort(key=lambda s: (-s[0], s[1]))
    found = {}
    for _, v in seeds[:max_seeds]:
        score, nodes = _grow(v, node_rows, neighbours, obs, exp, total, max_rows)
        if score > 0:
            found[nodes] = score
    return [Found(score, nodes, _half_rows(graph, nodes, half)) for nodes, score in found.items()]


def _half_rows(graph: MapperGraph, nodes: tuple[int, ...], half: np.ndarray) -> np.ndarray:
    """The sorted rows of ``nodes`` that lie in ``half``."""
    rows = graph.rows_of(nodes)
    return rows[half[rows]]


def _level_sets(
    graph: MapperGraph,
    lens: np.ndarray,
    obs: np.ndarray,
    exp: np.ndarray,
    total: float,
    half: np.ndarray,
    *,
    max_share: float,
) -> list[Found]:
    """Upper level sets of ``lens`` on the graph: for each interval from the top, the
    components of the nodes at or above it, each trimmed to the lens level that
    maximises the LLR (one :class:`Found` per component)."""
    level = graph.node_element[:, 0]
    out = []
    limit = max_share * half.sum()
    for j in sorted(np.unique(level).tolist(), reverse=True):
        chosen = level >= j
        if sum(int(half[graph.members[v]].sum()) for v in np.flatnonzero(chosen)) > 2 * limit:
            break
        for nodes in _components(graph, chosen):
            rows = _half_rows(graph, nodes, half)
            if rows.size == 0:
                continue
            order = rows[np.argsort(-lens[rows], kind="stable")]
            o, e = np.cumsum(obs[order]), np.cumsum(exp[order])
            scores = _llr(o, e, total)
            scores[int(limit) :] = 0.0
            m = int(np.argmax(scores))
            if scores[m] > 0:
                out.append(
                    Found(float(scores[m]), nodes, np.sort(order[: m + 1]), float(lens[order[m]]))
                )
    return out


def _components(graph: MapperGraph, chosen: np.ndarray) -> list[tuple[int, ...]]:
    """Connected components (as sorted node tuples) of the subgraph on ``chosen`` nodes."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    e = graph.edges[chosen[graph.edges[:, 0]] & chosen[graph.edges[:, 1]]]
    n = graph.n_nodes
    adj = coo_matrix((np.ones(e.shape[0]), (e[:, 0], e[:, 1])), shape=(n, n))
    _, labels = connected_components(adj, directed=False)
    nodes = np.flatnonzero(chosen)
    return [tuple(int(v) for v in nodes[labels[nodes] == c]) for c in np.unique(labels[nodes])]


def _pick(candidates: list[Found], max_candidates: int) -> list[Found]:
    """The strongest candidates; one that shares more than half of its (or the other's)
    rows with a stronger pick is the same place seen again, and is dropped."""
    ranked = sorted(candidates, key=lambda c: (-c.llr, c.nodes))
    picked: list[Found] = []
    for cand in ranked:
        if any(_overlap(cand.rows, other.rows) > 0.5 for other in picked):
            continue
        picked.append(cand)
        if len(picked) == max_candidates:
            break
    return picked


def _overlap(a: np.ndarray, b: np.ndarray) -> float:
    """Share of the smaller row set that lies in the other (1 when one contains the other)."""
    small = min(a.size, b.size)
    return np.intersect1d(a, b, assume_unique=True).size / small if small else 0.0


def _jaccard(a: np.ndarray, b: np.ndarray) -> float:
    inter = np.intersect1d(a, b, assume_unique=True).size
    union = a.size + b.size - inter
    return inter / union if union else 0.0


def _count_p_value(obs: np.ndarray, exp: np.ndarray, total: float, rows: np.ndarray) -> float:
    """The confirmation test of a count region (module docstring): given the ``total``
    events of the half (``obs``, ``exp`` from :func:`_scaled`), the one-sided exact
    binomial p-value of the count in ``rows``, each event falling there with probability
    their share of the expected total."""
    e_total = float(exp.sum())
    share = min(1.0, float(exp[rows].sum()) / e_total) if e_total > 0 else 1.0
    return binomial_upper_test(round(float(obs[rows].sum())), round(total), share)


def _estimate(
    rows: np.ndarray, obs: np.ndarray, exp: np.ndarray, loss: Losses, half: np.ndarray
) -> HalfEstimate:
    """A region on one half: observed and rescaled expected totals, the half's rescaling
    factor and the promised (unscaled) total."""
    return HalfEstimate.of(
        int(rows.size),
        float(obs[rows].sum()),
        float(exp[rows].sum()),
        scale=rescaling_factor(loss, half),
        promised=float(loss.expected[rows].sum()),
    )


def find_weak_regions(
    graphs: Sequence[Any],
    losses: Sequence[Losses],
    discovery: np.ndarray,
    *,
    fdr: float = 0.05,
    min_rows: int = 30,
    max_share: float = 0.3,
    max_candidates: int = 5,
    n_permutations: int = 2000,
    random_state: int = 0,
) -> list[CandidateRegion]:
    """Search every graph for candidates on the discovery half and test them on the other.

    Returns every candidate (tested or too small), in a stable order: graph, kind, then
    discovery LLR descending. See the module docstring for the method.
    """
    confirmation = ~discovery
    out: list[CandidateRegion] = []
    for search in graphs:
        name, graph = search.name, search.graph
        for loss in losses:
            d_obs, d_exp, d_total = _scaled(loss, discovery)
            c_obs, c_exp, c_total = _scaled(loss, confirmation)
            if d_total <= 0:
                continue
            if search.method == "level":
                found = _level_sets(
                    graph, search.lens, d_obs, d_exp, d_total, discovery, max_share=max_share
                )
            else:
                found = _grown(graph, d_obs, d_exp, d_total, discovery, max_share=max_share)
            for place in _pick(found, max_candidates):
                nodes, d_rows, threshold = place.nodes, place.rows, place.lens_threshold
                all_rows = graph.rows_of(nodes)
                if np.isfinite(threshold):
                    all_rows = all_rows[search.lens[all_rows] >= threshold]
                c_rows = all_rows[confirmation[all_rows]]
                conf = _estimate(c_rows, c_obs, c_exp, loss, confirmation)
                tested = conf.rows >= min_rows
                p = float("nan")
                if tested and loss.counts:
                    p = _count_p_value(c_obs, c_exp, c_total, c_rows)
                elif tested:
                    rest = np.flatnonzero(confirmation)
                    rest = rest[~np.isin(rest, c_rows)]
                    p = permutation_upper_test(
                        c_obs[c_rows],
                        c_obs[rest],
                        n_permutations=n_permutations,
                        random_state=random_state,
                    )
                out.append(
                    CandidateRegion(
                        graph=name,
                        kind=loss.kind,
                        nodes=nodes,
                        rows=all_rows,
                        llr=place.llr,
                        lens_threshold=threshold,
                        discovery=_estimate(d_rows, d_obs, d_exp, loss, discovery),
                        confirmation=conf,
                        tested=tested,
                        p_value=p,
                        note=""
                        if tested
                        else (f"{conf.rows} confirmation rows, fewer than {min_rows}: not tested"),
                    )
                )
    tested_idx = [i for i, f in enumerate(out) if f.tested]
    adjusted = benjamini_hochberg([out[i].p_value for i in tested_idx])
    for i, adj in zip(tested_idx, adjusted, strict=True):
        f = out[i]
        out[i] = replace(f, p_adjusted=float(adj), confirmed=bool(adj <= fdr))
    return out


def _excess_bound(f: CandidateRegion) -> tuple[float, float]:
    """The one-sided 95% lower bounds of a confirmed region's excess loss on the
    confirmation half: in total and per row (observed count's Poisson bound, Garwood 1936,
    minus the expected count). NaN for losses that are not counts."""
    c = f.confirmation
    if f.kind == "squared_error" or not c.rows:
        return float("nan"), float("nan")
    total = poisson_lower_bound(float(c.observed)) - float(c.expected)
    return total, total / c.rows


def merge_confirmed(
    findings: Sequence[CandidateRegion],
    *,
    share: float = 0.5,
    carry: float = 0.5,
    losses: Sequence[Losses] | None = None,
    discovery: np.ndarray | None = None,
    level: float = 0.05,
) -> list[CandidateRegion]:
    """The confirmed findings with repeats merged into one weak region each.

    In order of adjusted p-value (then LLR), a finding that shares at least ``share`` of
    the smaller row set with a group's first finding joins that group; otherwise it starts
    one. The smallest p-value goes to the largest region, which may hold many rows that
    are not weak, so each group is named by its most concentrated member: among the
    members whose lower bound of excess in total is at least ``carry`` of the group's
    largest (so a small fragment of a weak region does not stand for it), the one with
    the largest lower bound of excess per row (see :func:`_excess_bound`). The others are
    named in ``also_found``. For squared errors, the group's first finding stands.

    With ``losses`` and the ``discovery`` half, a region that shares rows with a region
    before it (one with a smaller p-value) must also hold an excess on its confirmation
    rows outside those regions: the same one-sided exact binomial test at ``level``, on
    those rows alone. One that does not is the earlier region seen through a wider window,
    and is named as seen again in the region it shares most rows with (secondary regions
    judged with the primary's rows set aside, after Zhang, Assunção and Kulldorff, 2010,
    "Spatial scan statistics adjusted for multiple clusters", J. Probability and
    Statistics, 642379). Counts only; a region of squared errors stands as it is.
    """
    confirmed = sorted(
        (f for f in findings if f.confirmed), key=lambda f: (f.p_adjusted, -f.llr, f.graph, f.kind)
    )
    groups: list[list[CandidateRegion]] = []
    for f in confirmed:
        group = next((g for g in groups if _overlap(f.rows, g[0].rows) >= share), None)
        if group is None:
            groups.append([f])
        else:
            group.append(f)
    kept = []
    for group in groups:
        bounds = [_excess_bound(f) for f in group]
        top = max(b[0] for b in bounds)
        best = group[0]
        if np.isfinite(top):
            eligible = [i for i, b in enumerate(bounds) if b[0] >= carry * top]
            best = group[max(eligible, key=lambda i: (bounds[i][1], -i))]
        labels: list[str] = list(best.also_found)
        for f in group:
            label = f"{f.graph}/{f.kind}"
            if f is not best and label not in labels:
                labels.append(label)
        kept.append(replace(best, also_found=tuple(labels)))
    if losses is None or discovery is None:
        return kept
    return _beyond_earlier(kept, losses, discovery, level)


def _beyond_earlier(
    kept: list[CandidateRegion], losses: Sequence[Losses], discovery: np.ndarray, level: float
) -> list[CandidateRegion]:
    """The regions of :func:`merge_confirmed` less those with no excess of their own
    outside the regions before them (see there)."""
    by_kind = {loss.kind: loss for loss in losses}
    confirmation = ~discovery
    out: list[CandidateRegion] = []
    for f in kept:
        loss = by_kind.get(f.kind)
        if loss is None or not loss.counts or not out:
            out.append(f)
            continue
        before = np.unique(np.concatenate([g.rows for g in out]))
        rest = f.rows[~np.isin(f.rows, before)]
        if rest.size == f.rows.size:
            out.append(f)
            continue
        rows = rest[confirmation[rest]]
        if rows.size and _count_p_value(*_scaled(loss, confirmation), rows) <= level:
            out.append(f)
            continue
        host = max(range(len(out)), key=lambda i: (np.isin(f.rows, out[i].rows).sum(), -i))
        labels = list(out[host].also_found)
        for label in (f"{f.graph}/{f.kind}", *f.also_found):
            if label not in labels:
                labels.append(label)
        out[host] = replace(out[host], also_found=tuple(labels))
    return out
