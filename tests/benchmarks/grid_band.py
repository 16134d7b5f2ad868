"""Why the thin oblique band is the grid's weakest family: a diagnosis, per band setting.

Run ``python -m tests.benchmarks.grid_band`` from the repository root (after the grid;
part of ``make bench``). For each band setting of :mod:`tests.benchmarks.grid` it reports:

* the features the band mixes, and how many of them the error lens keeps (step 1 of
  :mod:`topoaudit.audit.search`, on the discovery half, as the audit runs it);
* the band's own scan statistic on the discovery half, ``(O - E) / sqrt(E)`` of its rows'
  errors against the rescaled promise (common practice, no source): what a search that
  knew the band's direction could see;
* the same for the rows the lens ranks highest, as many as the band holds (the best the
  error-aware lens offers), and their Jaccard index with the band.

Nothing here asserts anything; the figures go to ``BAND_RESULTS.md``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPORT = HERE / "BAND_RESULTS.md"


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
        "| z of the band | z of the lens's top rows | Jaccard of those rows |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in rows:
        lines.append(
            f"| {r['size']:.0%} | {r['strength']:g}x | {r['rows']:,} | {r['features']} | "
            f"{r['mixed']} | {r['kept_of_mixed']} | {r['kept_other']} | {r['z_band']:.1f} | "
            f"{r['z_lens']:.1f} | {r['jaccard_lens']:.2f} |"
        )
    all_kept = sum(r["kept_of_mixed"] == r["mixed"] for r in rows)
    lines += [
        "",
        f"The lens kept every feature of the band in {all_kept} of {len(rows)} settings; "
        f"the band's z was {min(r['z_band'] for r in rows):.1f} at least and "
        f"{np.median([r['z_band'] for r in rows]):.1f} in the median, its top rows' "
        f"{np.median([r['z_lens'] for r in rows]):.1f} in the median.",
        "",
    ]
    REPORT.write_text("\n".join(lines), encoding="utf-8")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
