"""Audit benchmarks: the tool against the usual error-analysis slicing on planted
pockets, null calibration on larger data, and one full audit of 200k rows x 12 features.

Run with ``python -m tests.benchmarks.audit`` (``make bench`` runs it after the graph
benchmark). Results are written to ``tests/benchmarks/AUDIT_RESULTS.md``. These are
measurements from one run on this machine, never assertions.
"""

from __future__ import annotations

import argparse
import json
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.tree import DecisionTreeClassifier

from reference_checks.planted_pockets import simulate
from topoaudit.audit.search import SearchSettings, search_graphs
from topoaudit.audit.weak import binary_losses, find_weak_regions, merge_confirmed, split_halves


def _jaccard(rows: np.ndarray, pocket: np.ndarray) -> float:
    inter = int(pocket[rows].sum())
    return inter / (rows.size + int(pocket.sum()) - inter) if rows.size else 0.0


def tree_baseline(X: np.ndarray, errors: np.ndarray, *, min_share: float = 0.02) -> np.ndarray:
    """Rows of the worst leaf of a depth-3 tree fitted to the error indicator, leaves of
    at least ``min_share`` of the rows (the usual error-analysis slicing)."""
    tree = DecisionTreeClassifier(
        max_depth=3, min_samples_leaf=max(1, int(min_share * X.shape[0])), random_state=0
    ).fit(X, errors)
    leaf = tree.apply(X)
    rates = {lf: errors[leaf == lf].mean() for lf in np.unique(leaf)}
    worst = max(rates, key=lambda lf: (rates[lf], -lf))
    return np.flatnonzero(leaf == worst)


def _tool(sim, seed: int) -> tuple[float, int, float]:
    X = (sim.X - sim.X.mean(axis=0)) / sim.X.std(axis=0)
    losses = binary_losses(sim.y, sim.score, sim.threshold)
    disc = split_halves(sim.y.size, sim.y, seed)
    start = time.perf_counter()
    graphs = search_graphs(X, losses, disc, SearchSettings(), random_state=seed)
    candidates = find_weak_regions(graphs, losses, disc, random_state=seed)
    found = merge_confirmed(candidates, losses=losses, discovery=disc)
    took = time.perf_counter() - start
    best = max((_jaccard(f.rows, sim.pocket) for f in found), default=0.0)
    return best, len(found), took


def pockets(n_rows: int, seeds: int) -> list[str]:
    lines = [
        f"### Planted pockets ({n_rows:,} rows, 8 features, seeds 0-{seeds - 1})",
        "",
        "| pocket | tool: mean Jaccard | tool: seeds with Jaccard >= 0.5 | depth-3 tree, worst "
        "leaf: mean Jaccard | tree: seeds >= 0.5 | search time per run s |",
        "|---|---|---|---|---|---|",
    ]
    for shape in ("curved", "island", "flare"):
        tool, tree, times = [], [], []
        for seed in range(seeds):
            sim = simulate(shape, n_rows, seed=seed)
            j, _, took = _tool(sim, seed)
            tool.append(j)
            times.append(took)
            errors = (sim.y != (sim.score >= sim.threshold)).astype(int)
            tree.append(_jaccard(tree_baseline(sim.X, errors), sim.pocket))
        lines.append(
            f"| {shape} | {np.mean(tool):.2f} | {sum(j >= 0.5 for j in tool)}/{seeds} | "
            f"{np.mean(tree):.2f} | {sum(j >= 0.5 for j in tree)}/{seeds} | "
            f"{np.mean(times):.1f} |"
        )
        print(lines[-1], flush=True)
    return lines


def nulls(n_rows: int, seeds: int) -> list[str]:
    lines = [
        "",
        f"### No pocket ({n_rows:,} rows, {seeds} seeds each)",
        "",
        "| simulation | runs with any confirmed region |",
        "|---|---|",
    ]
    for shape in ("calibrated", "inflated"):
        hits = sum(_tool(simulate(shape, n_rows, seed=500 + s), s)[1] > 0 for s in range(seeds))
        lines.append(f"| {shape} | {hits}/{seeds} |")
        print(lines[-1], flush=True)
    return lines


def _child(n_rows: int, n_features: int, folder: str) -> None:
    from topoaudit.audit.run import run_audit
    from topoaudit.config import parse_config

    sim = simulate("curved", n_rows, n_features=n_features, seed=11)
    frame = pd.DataFrame(sim.X, columns=[f"x{i}" for i in range(n_features)])
    frame.insert(0, "row", np.arange(n_rows))
    frame["y"] = sim.y
    frame["score"] = sim.score
    path = Path(folder) / "rows.parquet"
    frame.to_parquet(path)
    config = parse_config(
        {
            "model": "bench",
            "data": {"path": str(path), "id": "row", "target": "y"},
            "release": [{"name": "r1", "score": "score"}],
        }
    )
    start = time.perf_counter()
    audit = run_audit(
        config,
        progress=lambda m: print(
            f"  {time.perf_counter() - start:7.1f} s  {m}", file=sys.stderr, flush=True
        ),
    )
    took = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(
        json.dumps(
            {
                "seconds": took,
                "peak_mib": peak,
                "weak": len(audit.analysis.weak_regions),
                "stability_runs": len(audit.analysis.stability.runs),
            }
        )
    )


def full_audit(n_rows: int, n_features: int) -> list[str]:
    with tempfile.TemporaryDirectory() as folder:
        out = subprocess.run(
            [
                sys.executable,
                "-m",
                "tests.benchmarks.audit",
                "--child",
                str(n_rows),
                str(n_features),
                folder,
            ],
            check=True,
            capture_output=True,
            text=True,
        )
    sys.stderr.write(out.stderr)
    doc = json.loads(out.stdout.strip().splitlines()[-1])
    return [
        "",
        f"### Full audit, {n_rows:,} rows x {n_features} features, default settings",
        "",
        "| wall time s | peak memory MiB | weak regions | stability reruns |",
        "|---|---|---|---|",
        f"| {doc['seconds']:.0f} | {doc['peak_mib']:.0f} | {doc['weak']} | "
        f"{doc['stability_runs']} |",
    ]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.benchmarks.audit")
    parser.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    parser.add_argument("--quick", action="store_true", help="small sizes for a smoke run")
    parser.add_argument("--out", default="tests/benchmarks/AUDIT_RESULTS.md")
    args = parser.parse_args(argv)
    if args.child:
        _child(int(args.child[0]), int(args.child[1]), args.child[2])
        return 0
    start = time.perf_counter()
    n, seeds, null_n, full_n = (
        (4000, 2, 4000, 20_000) if args.quick else (20_000, 5, 20_000, 200_000)
    )
    lines = [
        "# Audit benchmark",
        "",
        f"Machine: {platform.platform()}, Python {platform.python_version()}.",
        "",
    ]
    lines += pockets(n, seeds)
    lines += nulls(null_n, seeds * 2)
    lines += full_audit(full_n, 12)
    lines += ["", f"Benchmark run time: {(time.perf_counter() - start) / 60:.1f} min."]
    Path(args.out).write_text("\n".join(lines) + "\n", encoding="utf-8")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())
