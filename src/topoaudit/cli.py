"""The ``topoaudit`` command: thin subcommands over the library's stages."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

from topoaudit.errors import TopoauditError

__all__ = ["main"]


def _check(args: argparse.Namespace) -> int:
    from reference_checks.runner import failures, format_table, run_cases

    results = run_cases(args.cases, neighbourhood=not args.stated_only)
    print(format_table(results))
    for line in failures(results):
        print("  failed:", line)
    return 0 if all(r.passed for r in results) else 1


def _demo(args: argparse.Namespace) -> int:
    import numpy as np
    from sklearn.preprocessing import StandardScaler

    from topoaudit.demo import FEATURES, make_meters
    from topoaudit.mapper.graph import MapperBuilder
    from topoaudit.mapper.topology import invariants

    out = Path(args.out)
    print(f"generating {args.rows} invented water-meter readings (seed {args.seed}) ...")
    frame = make_meters(args.rows, random_state=args.seed)
    X = StandardScaler().fit_transform(frame[list(FEATURES)].to_numpy())
    print("building the Mapper graph (eccentricity filter, 12 intervals, 30% overlap) ...")
    builder = MapperBuilder("eccentricity", n_intervals=12, overlap=0.3, random_state=args.seed)
    graph = builder.fit(X).graph_
    inv = invariants(graph)
    out.mkdir(parents=True, exist_ok=True)
    path = graph.write_node_link(out / "graph.json")
    covered = int(np.count_nonzero(graph.covered_rows()))
    print()
    print(f"rows            {graph.n_rows} ({covered} in at least one node)")
    print(f"cover elements  {builder.n_elements_}")
    print(f"nodes           {inv.n_nodes}")
    print(f"edges           {inv.n_edges}")
    print(f"components      {inv.n_components}")
    print(f"cycle rank      {inv.cycle_rank}")
    print(f"leaves          {inv.n_leaves}")
    print(f"branch points   {inv.n_branch_points}")
    print(f"build time      {builder.timings_['total']:.2f} s")
    print()
    print(f"node-link JSON written to {path}")
    return 0


def _audit(args: argparse.Namespace) -> int:
    import shutil
    import tempfile
    import time

    from topoaudit.audit.run import run_audit
    from topoaudit.config import load_config

    out = Path(args.out)
    if out.exists() and any(out.iterdir()):
        msg = f"{out}: the output folder exists and is not empty; choose a new folder."
        raise TopoauditError(msg)
    config = load_config(args.config)
    start = time.perf_counter()

    def say(message: str) -> None:
        if not args.quiet:
            print(f"[{time.perf_counter() - start:6.1f} s] {message}", file=sys.stderr)

    command = " ".join(
        ["topoaudit", "audit", str(args.config), "--out", str(args.out)]
        + (["--release", args.release] if args.release else [])
    )
    audit = run_audit(config, release=args.release, progress=say, command=command)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent))
    try:
        audit.write(tmp)
        if out.exists():
            out.rmdir()
        tmp.rename(out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    r = audit.result
    print(
        f"{r.model} {r.release}: {r.provenance['rows']} rows, "
        f"{len(r.weak_regions)} weak region{'s' if len(r.weak_regions) != 1 else ''} confirmed; "
        f"bundle written to {out}"
    )
    return 0


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="topoaudit",
        description="Show where a predictive model falls short, organised by the shape of "
        "the data.",
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("check", help="run the graph builder's reference checks and print a table")
    p.add_argument("cases", nargs="*", help="names of the cases to run (default: all)")
    p.add_argument(
        "--stated-only",
        action="store_true",
        help="check the stated settings only, not their neighbourhood",
    )
    p.set_defaults(run=_check)

    p = sub.add_parser("audit", help="audit one release and write its bundle")
    p.add_argument("config", help="the audit's TOML config file")
    p.add_argument("--out", required=True, help="folder for the bundle (must be new or empty)")
    p.add_argument("--release", help="release to audit (default: the last in the config)")
    p.add_argument("--quiet", action="store_true", help="no progress messages")
    p.set_defaults(run=_audit)

    p = sub.add_parser("demo", help="build the graph of the invented water-meter data set")
    p.add_argument(
        "--out", default="build/demo", help="folder for the outputs (default: %(default)s)"
    )
    p.add_argument("--rows", type=int, default=6000, help="rows to generate (default: %(default)s)")
    p.add_argument("--seed", type=int, default=7, help="random seed (default: %(default)s)")
    p.set_defaults(run=_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``topoaudit`` command; returns the exit status."""
    args = _parser().parse_args(argv)
    try:
        return int(args.run(args))
    except TopoauditError as exc:
        print(f"topoaudit: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
