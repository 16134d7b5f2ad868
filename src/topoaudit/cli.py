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
