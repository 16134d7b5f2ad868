"""Benchmark of the settings chosen from the data and of the bootstrap confidence of a
graph's features, on seeded synthetic data of known shape.

Run ``python -m tests.benchmarks.shape`` from the repository root (``make bench``). Each
row count runs in a fresh subprocess of this module, so that its peak memory is its own.
The subprocess generates the data (:func:`make_shape_data`: a noisy loop with a flare and
a separate group, in 10 columns), then measures, in this order:

1. the graph at fixed settings (``n_intervals=10, overlap=0.3,
   clusterer="single_linkage"``) and at the default ``"auto"`` settings, serially,
   ``--repeats`` times each with a new builder (the fastest build is reported);
2. :func:`topoaudit.mapper.auto.choose_settings` on its own, on the filter values of
   the auto build, ``--repeats`` times (the fastest is reported);
3. :func:`topoaudit.mapper.features.feature_confidence` of the auto graph with
   ``--resamples`` resamples: serially, then twice with ``executor=2`` (the first call
   starts the two worker processes, the second finds them running);
4. both graphs again with ``n_jobs=2``.

It prints one JSON line; the parent writes a Markdown report. All figures are measured
once on the machine at hand, with ratios taken within the same run; nothing here asserts
a time.
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

from tests.benchmarks.measure import (
    ROOT,
    current_rss_mb,
    environment,
    fmt,
    load_average,
    rss_mb,
    spawn,
    wait_until_quiet,
)

DEFAULT_SIZES = (100_000, 1_000_000)
QUICK_SIZES = (10_000, 50_000)
N_FEATURES = 10
N_JOBS = 2
SEED = 0
FIXED = {"n_intervals": 10, "overlap": 0.3, "clusterer": "single_linkage"}
AUTO_TARGET_S = 60.0
TARGET_ROWS = 1_000_000
CONFIDENT = 0.9

# The shape, in the plane of the first two columns: a loop of radius _RADIUS around the
# origin, a flare from its leftmost point straight out to x = -2 _RADIUS, and a round
# group centred at x = _GROUP_X, away from both; the other eight columns are noise.
_SHARES = (0.70, 0.15, 0.15)  # loop, flare, group
_RADIUS = 5.0
_GROUP_X = 14.0
_GROUP_SD = 0.75
_PLANE_NOISE = 0.2
_COLUMN_NOISE = 0.1


def make_shape_data(n_rows: int, seed: int = SEED) -> tuple[np.ndarray, np.ndarray]:
    """Seeded rows of a noisy loop with one flare and a separate group, in 10 columns.

    Parameters
    ----------
    n_rows : int
        Rows to generate.
    seed : int, default=0
        Seed of the generator; the same arguments always give the same arrays.

    Returns
    -------
    X : ndarray of shape (n_rows, 10)
        Float64 rows. Columns 0 and 1 hold the shape: 70% of rows on the circle of
        radius 5 around the origin, 15% on the segment from (-5, 0) to (-10, 0) (a flare
        from the loop's leftmost point), both with Gaussian noise of standard deviation
        0.2 per column, and 15% in a round Gaussian group of standard deviation 0.75
        centred at (14, 0). Columns 2 to 9 are Gaussian noise of standard deviation 0.1.
    part : ndarray of shape (n_rows,)
        0 for the loop, 1 for the flare, 2 for the group.

    Examples
    --------
    >>> X, part = make_shape_data(1000)
    >>> X.shape, sorted(set(part.tolist())), bool(np.array_equal(X, make_shape_data(1000)[0]))
    ((1000, 10), [0, 1, 2], True)
    """
    rng = np.random.default_rng(seed)
    X = np.empty((n_rows, N_FEATURES), dtype=np.float64)
    part = np.empty(n_rows, dtype=np.int8)
    chunk = 100_000
    for start in range(0, n_rows, chunk):
        stop = min(n_rows, start + chunk)
        k = stop - start
        which = rng.choice(len(_SHARES), size=k, p=_SHARES)
        angle = rng.uniform(0.0, 2.0 * np.pi, k)
        along = rng.uniform(0.0, 1.0, k)
        x = np.where(
            which == 0,
            _RADIUS * np.cos(angle),
            np.where(which == 1, -_RADIUS * (1.0 + along), _GROUP_X),
        )
        y = np.where(which == 0, _RADIUS * np.sin(angle), 0.0)
        spread = np.where(which == 2, _GROUP_SD, _PLANE_NOISE)
        X[start:stop, 0] = x + spread * rng.standard_normal(k)
        X[start:stop, 1] = y + spread * rng.standard_normal(k)
        X[start:stop, 2:] = _COLUMN_NOISE * rng.standard_normal((k, N_FEATURES - 2))
        part[start:stop] = which
    return X, part


def _build(X: np.ndarray, params: dict[str, Any], repeats: int) -> dict[str, Any]:
    """Fit a new builder ``repeats`` times; the fastest build's figures and the graph."""
    from topoaudit.mapper.graph import MapperBuilder
    from topoaudit.mapper.topology import invariants

    walls, best, builder = [], None, None
    for _ in range(repeats):
        builder = MapperBuilder(**params)
        start = time.perf_counter()
        builder.fit(X)
        walls.append(time.perf_counter() - start)
        if best is None or walls[-1] <= min(walls):
            best = dict(builder.timings_)
    assert builder is not None and best is not None
    inv = invariants(builder.graph_)
    return {
        "wall": min(walls),
        "first": walls[0],
        "timings": best,
        "invariants": {k: int(v) for k, v in vars(inv).items()},
        "n_intervals": list(builder.n_intervals_),
        "overlap": list(builder.overlap_),
        "auto": builder.auto_.as_dict() if builder.auto_ is not None else None,
        "builder": builder,
    }


def _confidence(builder: Any, X: np.ndarray, resamples: int, executor: Any) -> dict[str, Any]:
    from topoaudit.mapper.features import feature_confidence

    start = time.perf_counter()
    summary = feature_confidence(builder, X, n_resamples=resamples, executor=executor)
    return {
        "wall": time.perf_counter() - start,
        "per_resample": summary.seconds_per_resample,
        "resample_rows": summary.resample_rows,
        "distances": list(summary.distances),
        "features": [
            {"kind": f.kind, "extent": f.extent, "confidence": f.confidence}
            for f in summary.features
        ],
    }


def _run_child(config: dict[str, Any]) -> dict[str, Any]:
    """Measure one row count in this process and return the figures."""
    from topoaudit.mapper.auto import choose_settings
    from topoaudit.mapper.executor import ProcessExecutor

    rows, repeats, resamples = config["rows"], config["repeats"], config["resamples"]
    X, _ = make_shape_data(rows)
    rss_data = current_rss_mb()
    fixed = _build(X, FIXED, repeats)
    auto = _build(X, {}, repeats)
    builder = auto.pop("builder")
    fixed.pop("builder")

    rule_walls, choice = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        choice = choose_settings(
            X,
            builder.filter_values_,
            max_rows=builder.auto_rows,
            random_state=builder.random_state,
        )
        rule_walls.append(time.perf_counter() - start)
    assert choice is not None
    rss_serial_builds = rss_mb(resource.getrusage(resource.RUSAGE_SELF))

    serial = _confidence(builder, X, resamples, None)
    rss_serial = rss_mb(resource.getrusage(resource.RUSAGE_SELF))
    first = _confidence(builder, X, resamples, N_JOBS)
    warm = _confidence(builder, X, resamples, N_JOBS)

    fixed_par = _build(X, {**FIXED, "n_jobs": N_JOBS}, repeats)
    auto_par = _build(X, {"n_jobs": N_JOBS}, repeats)
    fixed_par.pop("builder")
    auto_par.pop("builder")
    ProcessExecutor.shutdown()
    return {
        **config,
        "fixed": fixed,
        "auto": auto,
        "fixed_par": fixed_par,
        "auto_par": auto_par,
        "rule": min(rule_walls),
        "rule_same": choice.as_dict() == auto["auto"],
        "conf_serial": serial,
        "conf_first": first,
        "conf_warm": warm,
        "conf_same": serial["distances"] == first["distances"] == warm["distances"],
        "rss_data_mb": rss_data,
        "rss_serial_builds_mb": rss_serial_builds,
        "rss_serial_mb": rss_serial,
        "rss_self_mb": rss_mb(resource.getrusage(resource.RUSAGE_SELF)),
        "rss_children_mb": rss_mb(resource.getrusage(resource.RUSAGE_CHILDREN)),
    }


def _load(value: tuple[float, float, float] | None) -> str:
    return "n/a" if value is None else " / ".join(f"{v:.2f}" for v in value)


def _shape(inv: dict[str, int]) -> str:
    return (
        f"{inv['n_nodes']} / {inv['n_edges']} / {inv['n_components']} / {inv['cycle_rank']} / "
        f"{inv['n_leaves']} / {inv['n_branch_points']}"
    )


def _features(conf: dict[str, Any]) -> str:
    parts = []
    for kind in ("component", "loop", "flare"):
        scores = [f["confidence"] for f in conf["features"] if f["kind"] == kind]
        if scores:
            parts.append(f"{kind}s " + ", ".join(f"{s:.1f}" for s in scores))
    return "; ".join(parts) or "none"


def _tables(results: list[dict[str, Any]]) -> list[str]:
    ok = [r for r in results if "error" not in r]
    lines = [
        "## Graphs: fixed against auto settings",
        "",
        "| rows | settings | processes | build s | first build s | filter + rule s | "
        "cover s | clustering s | nodes + nerve s | intervals | nodes / edges / components / "
        "cycle rank / leaves / branch points |",
        "|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in ok:
        for key, name, procs in (
            ("fixed", "fixed", "serial"),
            ("auto", "auto", "serial"),
            ("fixed_par", "fixed", str(N_JOBS)),
            ("auto_par", "auto", str(N_JOBS)),
        ):
            b = r[key]
            t = b["timings"]
            lines.append(
                f"| {r['rows']:,} | {name} | {procs} | {fmt(b['wall'])} | {fmt(b['first'])} | "
                f"{fmt(t['filter'])} | {fmt(t['cover'])} | {fmt(t['clustering'])} | "
                f"{fmt(t['nodes_and_nerve'])} | {', '.join(map(str, b['n_intervals']))} | "
                f"{_shape(b['invariants'])} |"
            )
    lines += [
        "",
        "## What auto chose, and what it costs",
        "",
        "| rows | rule s | auto - fixed s, serial | auto / fixed, serial | auto - fixed s, "
        f"{N_JOBS} processes | auto / fixed, {N_JOBS} processes | scale | interval length | "
        "gain | intervals | sample rows | subsample rows |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in ok:
        a = r["auto"]["auto"]
        lines.append(
            f"| {r['rows']:,} | {fmt(r['rule'])} | {fmt(r['auto']['wall'] - r['fixed']['wall'])} "
            f"| {fmt(r['auto']['wall'] / r['fixed']['wall'])} | "
            f"{fmt(r['auto_par']['wall'] - r['fixed_par']['wall'])} | "
            f"{fmt(r['auto_par']['wall'] / r['fixed_par']['wall'])} | {fmt(a['scale'], 3)} | "
            f"{fmt(a['interval_length'][0], 3)} | {fmt(a['gain'][0])} | {a['n_intervals'][0]} | "
            f"{a['sample_rows']:,} | {a['subsample_rows']:,} |"
        )
    lines += [
        "",
        "## Bootstrap confidence of the auto graph's features",
        "",
        f"| rows | resamples | rows per resample | s per resample, serial | s per resample, "
        f"{N_JOBS} processes (starting) | s per resample, {N_JOBS} processes (running) | "
        f"speed-up (running) | call s, serial | same distances | features: confidence |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in ok:
        s, f, w = r["conf_serial"], r["conf_first"], r["conf_warm"]
        lines.append(
            f"| {r['rows']:,} | {r['resamples']} | {s['resample_rows']:,} | "
            f"{fmt(s['per_resample'])} | {fmt(f['per_resample'])} | {fmt(w['per_resample'])} | "
            f"{fmt(s['per_resample'] / w['per_resample'])} | {fmt(s['wall'])} | "
            f"{'yes' if r['conf_same'] else 'NO'} | {_features(s)} |"
        )
    lines += [
        "",
        "## Memory and load",
        "",
        "| rows | data MiB | peak RSS after serial builds MiB | peak RSS after serial "
        "bootstrap MiB | peak RSS main MiB | peak RSS worker MiB | memory bound MiB | "
        "load average before | load average after | other load during |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in ok:
        bound = r["rss_self_mb"] + N_JOBS * r["rss_children_mb"]
        lines.append(
            f"| {r['rows']:,} | {fmt(r['rss_data_mb'], 0)} | "
            f"{fmt(r['rss_serial_builds_mb'], 0)} | {fmt(r['rss_serial_mb'], 0)} | "
            f"{fmt(r['rss_self_mb'], 0)} | {fmt(r['rss_children_mb'], 0)} | {fmt(bound, 0)} | "
            f"{_load(r['load_before'])} | {_load(r['load_after'])} | "
            f"{fmt(r.get('others_during'))} |"
        )
    for r in results:
        if "error" in r:
            lines += ["", f"- {r['rows']:,} rows FAILED: {r['error']}"]
    return lines


def _targets(results: list[dict[str, Any]]) -> list[str]:
    at = [r for r in results if "error" not in r and r["rows"] == TARGET_ROWS]
    if not at:
        return [f"- Auto selection at {TARGET_ROWS:,} rows: not measured (size not run)."]
    r = at[0]
    added = max(
        r["rule"],
        r["auto"]["wall"] - r["fixed"]["wall"],
        r["auto_par"]["wall"] - r["fixed_par"]["wall"],
    )
    verdict = "met" if added <= AUTO_TARGET_S else "MISSED"
    return [
        f"- Auto selection adds at most {AUTO_TARGET_S:.0f} s at {TARGET_ROWS:,} rows on "
        f"{N_JOBS} cores: {verdict} (the rule {r['rule']:.2f} s; the auto build less the fixed "
        f"one {r['auto']['wall'] - r['fixed']['wall']:.2f} s serially, "
        f"{r['auto_par']['wall'] - r['fixed_par']['wall']:.2f} s with {N_JOBS} processes).",
        f"- The rule run on its own chose what the auto build chose: "
        f"{'yes' if r['rule_same'] else 'NO'}. Bootstrap distances the same serially and "
        f"in {N_JOBS} processes: {'yes' if r['conf_same'] else 'NO'}.",
        f"- Bootstrap cost per resample at {TARGET_ROWS:,} rows: "
        f"{r['conf_serial']['per_resample']:.2f} s serially, "
        f"{r['conf_warm']['per_resample']:.2f} s in {N_JOBS} running processes.",
    ]


def _report(
    results: list[dict[str, Any]], elapsed: float, quick: bool, loads: tuple[Any, Any]
) -> str:
    repeats = results[0].get("repeats", 3)
    lines = [
        "# Auto settings and feature confidence benchmark",
        "",
        f"Generated by `python -m tests.benchmarks.shape{' --quick' if quick else ''}` in "
        f"{elapsed / 60:.1f} min on: {environment()}. Load average (1 / 5 / 15 min) at the "
        f"start {_load(loads[0])}, at the end {_load(loads[1])}.",
        "",
        f"Data (`make_shape_data`): seeded rows x {N_FEATURES} columns; in the first two a "
        f"loop of radius {_RADIUS:g} (70% of rows), a flare from its leftmost point out to "
        f"x = {-2 * _RADIUS:g} (15%), both with noise of s.d. {_PLANE_NOISE:g}, and a "
        f"separate round group at x = {_GROUP_X:g} of s.d. {_GROUP_SD:g} (15%); eight more "
        f"columns of noise of s.d. {_COLUMN_NOISE:g}. The expected graph: two components "
        "(loop with flare, group), cycle rank 1, at least one flare. Filter: the default "
        '(`pca`). Fixed settings: `n_intervals=10, overlap=0.3, clusterer="single_linkage"`; '
        "auto: the builder's defaults.",
        "",
        *_tables(results),
        "",
        "## Targets",
        "",
        *_targets(results),
        "",
        "## What is measured",
        "",
        f"- Each row count is a fresh subprocess. Every graph is built {repeats} times, each "
        "with a new builder; *build s* is the fastest `fit()`, *first build s* the first "
        "(with 2 processes, the first build of fixed settings finds the workers already "
        "started by the bootstrap). The step columns are `timings_` of the fastest build: "
        "*filter + rule* is the filter and, for auto, `choose_settings` (the builder times "
        "them together); *clustering* is handing out the cover elements and clustering them.",
        f"- *rule s* is the fastest of {repeats} direct calls of `choose_settings` on the "
        "auto build's filter values with the builder's `auto_rows` and seed (the same "
        "choice, checked). *auto - fixed* is the difference of the fastest builds: the rule "
        "plus whatever the chosen settings cost more or less than the fixed ones (more "
        "intervals, the automatic clusterer's sample share).",
        "- *intervals* and the shape columns describe the graph built: nodes, edges, "
        "connected components, cycle rank (independent loops), leaves (degree 1) and "
        "branch points (degree 3 or more).",
        "- *s per resample* is `ShapeSummary.seconds_per_resample`: the wall time of the "
        "resamples (each draws its rows, chooses the settings again, rebuilds the graph and "
        "compares diagrams) over their number. *starting* is the first call with "
        f"`executor={N_JOBS}`, which starts the worker processes; *running* is a second call "
        "that finds them running. *call s* is the whole serial call (with the features and "
        "the reference diagram). The confidence of a feature is a multiple of 1 / resamples. "
        "*same distances*: the bootstrap distances of the three calls are equal.",
        "- *peak RSS* is `getrusage(RUSAGE_SELF).ru_maxrss` of the subprocess at three "
        "points; *peak RSS worker* is `RUSAGE_CHILDREN` after the workers were stopped (the "
        f"largest peak of one worker); *memory bound* is main + {N_JOBS} x worker.",
        "- *load average* is `/proc/loadavg` (1 / 5 / 15 min) just before and after the "
        "subprocess; *other load during* is the machine's CPU time less the subprocess's "
        "own (workers included) over its wall time: cores other processes took from it. "
        "Figures measured under such load are slower than on an idle machine; compare "
        "ratios within a row count, not seconds across runs.",
        "",
    ]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and write the Markdown report.

    Parameters
    ----------
    argv : list of str or None, default=None
        Command-line arguments (``sys.argv[1:]`` when None): ``--sizes``, ``--quick``,
        ``--out``, ``--repeats``, ``--resamples``, ``--max-wait``.

    Returns
    -------
    int
        0 when every row count ran, 1 when one failed.
    """
    parser = argparse.ArgumentParser(prog="python -m tests.benchmarks.shape", description=__doc__)
    parser.add_argument("--sizes", default=None, help="comma-separated row counts")
    parser.add_argument("--quick", action="store_true", help="small sizes for a smoke run")
    parser.add_argument("--out", default=str(ROOT / "tests" / "benchmarks" / "SHAPE_RESULTS.md"))
    parser.add_argument("--repeats", type=int, default=3, help="builds per graph")
    parser.add_argument("--resamples", type=int, default=10, help="bootstrap resamples")
    parser.add_argument(
        "--max-wait", type=float, default=30.0, help="seconds to wait for idle cores per size"
    )
    parser.add_argument("--child", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child is not None:
        import json

        print(json.dumps(_run_child(json.loads(args.child))), flush=True)
        return 0
    if args.sizes:
        sizes = [int(s.replace("_", "")) for s in args.sizes.split(",") if s.strip()]
    else:
        sizes = list(QUICK_SIZES if args.quick else DEFAULT_SIZES)
    start = time.perf_counter()
    loads_start = load_average()
    results = []
    for rows in sizes:
        t = time.perf_counter()
        config = {"rows": rows, "repeats": max(1, args.repeats), "resamples": args.resamples}
        busy = wait_until_quiet(args.max_wait)
        before = load_average()
        result = spawn("tests.benchmarks.shape", config)
        results.append(
            {**result, "busy_before": busy, "load_before": before, "load_after": load_average()}
        )
        print(
            f"{rows:>9,} rows: {time.perf_counter() - t:6.1f} s ({result.get('error', 'ok')}; "
            f"busy cores before {fmt(busy)}, other load during "
            f"{fmt(result.get('others_during'))})",
            file=sys.stderr,
            flush=True,
        )
    text = _report(results, time.perf_counter() - start, args.quick, (loads_start, load_average()))
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(text, encoding="utf-8")
    print(text)
    return 1 if any("error" in r for r in results) else 0


if __name__ == "__main__":
    sys.exit(main())
