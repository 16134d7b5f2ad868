"""Run the reference cases and print the table: case, expected, got, pass."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from reference_checks import CASES
from reference_checks._case import CaseResult, run_case
from topoaudit.errors import unknown_name

__all__ = ["failures", "format_table", "main", "print_report", "run_cases"]


def run_cases(
    names: Sequence[str] | None = None, *, neighbourhood: bool = True
) -> list[CaseResult]:
    """Run the named cases (all when ``names`` is empty or None)."""
    by_name = {c.name: c for c in CASES}
    chosen = list(CASES)
    if names:
        for n in names:
            if n not in by_name:
                raise unknown_name("reference case", n, by_name)
        chosen = [by_name[n] for n in names]
    return [run_case(c, neighbourhood=neighbourhood) for c in chosen]


def _cell(text: str) -> str:
    return text.replace("|", "/").replace("\n", " ")


def format_table(results: Sequence[CaseResult]) -> str:
    """A Markdown table with one row per case."""
    lines = [
        "| case | expected | got (stated settings) | neighbourhood | pass |",
        "|---|---|---|---|---|",
    ]
    for r in results:
        extra = "; ".join(f"{name}: {'yes' if ok else 'NO'}" for name, ok in r.data_checks)
        got = r.stated.got + (f"; {extra}" if extra else "")
        if not r.stated.networkx_agrees:
            got += "; networkx DISAGREES"
        hood = f"{r.neighbours_passed}/{len(r.neighbours)}" if r.neighbours else "not run"
        lines.append(
            f"| {r.case.name} | {_cell(r.case.expected)} | {_cell(got)} | {hood} | "
            f"{'pass' if r.passed else 'FAIL'} |"
        )
    n_pass = sum(r.passed for r in results)
    lines.append("")
    lines.append(f"{n_pass} of {len(results)} reference cases pass.")
    return "\n".join(lines)


def failures(results: Sequence[CaseResult]) -> list[str]:
    """One line per failing setting, for a failure message."""
    out = []
    for r in results:
        for s in [r.stated, *r.neighbours]:
            if not (s.passed and s.networkx_agrees):
                changed = {k: v for k, v in s.setting.items() if r.case.params.get(k) != v}
                out.append(f"{r.case.name} {changed or 'stated'}: {s.got}")
        out += [f"{r.case.name}: data check failed: {n}" for n, ok in r.data_checks if not ok]
    return out


def print_report(results: Sequence[CaseResult]) -> int:
    """Print the table and one line per failing setting; the exit status (0: all pass)."""
    print(format_table(results))
    for line in failures(results):
        print("  failed:", line)
    return 0 if all(r.passed for r in results) else 1


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m reference_checks.runner")
    parser.add_argument("cases", nargs="*", help="case names (default: all)")
    parser.add_argument("--stated-only", action="store_true", help="skip the neighbourhood")
    args = parser.parse_args(argv)
    return print_report(run_cases(args.cases, neighbourhood=not args.stated_only))


if __name__ == "__main__":
    sys.exit(main())
