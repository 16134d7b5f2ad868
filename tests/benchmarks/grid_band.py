"""Why the thin oblique band is the grid's weakest family: a diagnosis, per band setting.

Run ``python -m tests.benchmarks.grid_band`` from the repository root (after the grid;
part of ``make bench``). For each band setting of :mod:`tests.benchmarks.grid` it reports:

* the features the band mixes, and how many of them the error lens keeps (step 1 of
  :mod:`topoaudit.audit.search`, on the discovery half, as the audit runs it);
* the band's own scan statistic on the discovery half, ``(O - E) / sqrt(E)`` of its rows'
  errors against the rescaled promise (common practice, no source): what a search that
  knew the band's direction could see;
* the same for the rows the lens ranks highest, as many as the band holds (the best the
  error-aware lens offers), and their Jaccard index with the band;
* the slab statistic (:func:`~topoaudit.audit.oblique.slab_statistic`, on the discovery
  rows the climb works on) along the band's own direction, along the direction the
  audit's climb reaches (and that direction's cosine with the band's), and the largest
  reached by the same climb from :data:`RANDOM_STARTS` random directions (with its
  cosine): when climbs that never come near the band score as high as the band's own
  direction, no direction search scored on the discovery half can tell the band from
  noise.

Nothing here asserts anything; the figures go to ``BAND_RESULTS.md``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPORT = HERE / "BAND_RESULTS.md"
#: random starting directions of the climb, per band setting
RANDOM_STARTS = 8


def _directions(X, loss, discovery, band, found, seed: int) -> dict:
    """The slab statistics of the band's direction, of the audit's (``found``) and of the
    best climb from random starts, with the cosines of the last two with the band's."""
    from topoaudit.audit.oblique import _refine, slab_inputs, slab_statistic

    Xd, observed, expected = slab_inputs(X, loss, discovery, 50_000, seed)
    true = np.zeros(X.shape[1])
    true[band[0]] = band[1]
    rng = np.random.default_rng([seed, 53])
    best, best_cos = -1.0, 0.0
    for _ in range(RANDOM_STARTS):
        start = rng.normal(size=X.shape[1])
        w, value = _refine(Xd, observed, expected, start / np.linalg.norm(start))
        if value > best:
            best, best_cos = value, abs(float(w @ true))
    return dict(
        slab_band=slab_statistic(Xd @ true, observed, expected),
        slab_found=slab_statistic(Xd @ found, observed, expected),
        cos_found=abs(float(found @ true)),
        slab_random=best,
        cos_random=best_cos,
    )


def diagnose(s: dict) -> dict:
    """One band setting: features mixed and kept, and the scan figures above."""
    from tests.benchmarks.grid_sim import plant
    from topoaudit.audit.search import SearchSettings, error_lens
    from topoaudit.audit.weak import _scaled, binary_losses, split_halves

    sim = plant("band", s["rows"], s["features"], s["size"], s["strength"], s["seed"])
    sd = sim.X.std(axis=0)
    X = (sim.X - sim.X.mean(axis=0)) / np.where(sd > 0, sd, 1.0)
    discovery = split_halves(sim.y.size, sim.y, s["seed"])
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    lens = error_lens(X, losses, discovery, SearchSettings(), random_state=s["seed"])
    obs, exp, _ = _scaled(losses[0], discovery)
    band = sim.pockets[0]

    def z(mask: np.ndarray) -> float:
        e = exp[mask & discovery].sum()
        return float((obs[mask & discovery].sum() - e) / np.sqrt(e)) if e > 0 else 0.0

    d = np.flatnonzero(discovery)
    top = np.zeros_like(band)
    order = d[np.argsort(-lens.values[d], kind="stable")]
    top[order[: int((band & discovery).sum())]] = True
    top_all = top | (~discovery & (lens.values >= lens.values[order[int(top.sum()) - 1]]))
    cols, weights = sim.band
    kept = set(np.flatnonzero(lens.weights).tolist())
    return dict(
        s,
        mixed=len(cols),
        kept_of_mixed=len(kept & set(cols.tolist())),
        kept_other=len(kept - set(cols.tolist())),
        largest_weight_kept=bool(int(cols[np.argmax(np.abs(weights))]) in kept),
        z_band=z(band),
        z_lens=z(top),
        jaccard_lens=float((top_all & band).sum() / (top_all | band).sum()),
        **_directions(X, losses[0], discovery, sim.band, lens.direction, s["seed"]),
    )


def main() -> None:
    from joblib import Parallel, delayed

    from tests.benchmarks.grid import settings

    todo = [s for s in settings() if s["family"] == "band"]
    rows = Parallel(n_jobs=2)(delayed(diagnose)(s) for s in todo)
    lines = [
        "# The band family: what the lens keeps and what a known direction would show",
        "",
        "Measured by `python -m tests.benchmarks.grid_band` (see its docstring). z: the "
        "band's errors against the rescaled promise on the discovery half, (O - E) / "
        "sqrt(E); for the lens, the same number of discovery rows ranked highest by it.",
        "",
        "| size | strength | rows | features | band mixes | of them kept | others kept "
        "| z of the band | z of the lens's top rows | Jaccard of those rows "
        "| slab statistic: band's direction | audit's climb (cosine) "
        f"| best of {RANDOM_STARTS} random starts (cosine) |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in rows:
        lines.append(
            f"| {r['size']:.0%} | {r['strength']:g}x | {r['rows']:,} | {r['features']} | "
            f"{r['mixed']} | {r['kept_of_mixed']} | {r['kept_other']} | {r['z_band']:.1f} | "
            f"{r['z_lens']:.1f} | {r['jaccard_lens']:.2f} | {r['slab_band']:.1f} | "
            f"{r['slab_found']:.1f} ({r['cos_found']:.2f}) | "
            f"{r['slab_random']:.1f} ({r['cos_random']:.2f}) |"
        )
    below = sum(r["slab_random"] >= r["slab_band"] and r["cos_random"] < 0.5 for r in rows)
    all_kept = sum(r["kept_of_mixed"] == r["mixed"] for r in rows)
    lines += [
        "",
        f"The lens kept every feature of the band in {all_kept} of {len(rows)} settings; "
        f"the band's z was {min(r['z_band'] for r in rows):.1f} at least and "
        f"{np.median([r['z_band'] for r in rows]):.1f} in the median, its top rows' "
        f"{np.median([r['z_lens'] for r in rows]):.1f} in the median. In {below} of "
        f"{len(rows)} settings a climb from a random start that ended far from the band "
        "(cosine below 0.5) scored at least as high as the band's own direction: there "
        "the band is within the noise of a direction search on the discovery half.",
        "",
    ]
    REPORT.write_text("\n".join(lines), encoding="utf-8")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
