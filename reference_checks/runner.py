"""Run the reference cases and print the table: case, expected, what the stated settings
show, the neighbourhood, the settings chosen from the data, and the verdict."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from reference_checks import CASES
from reference_checks._case import CaseResult, run_case
from topoaudit.errors import unknown_name

__all__ = ["auto_cell", "failures", "format_table", "main", "print_report", "run_cases"]


def run_cases(
    names: Sequence[str] | None = None, *, neighbourhood: bool = True, auto: bool = True
) -> list[CaseResult]:
    """Run the named cases (all when ``names`` is empty or None), each at its stated
    settings, over their neighbourhood (unless ``neighbourhood`` is false) and at the
    settings chosen from the data (unless ``auto`` is false)."""
    by_name = {c.name: c for c in CASES}
    chosen = list(CASES)
    if names:
        for n in names:
            if n not in by_name:
                raise unknown_name("reference case", n, by_name)
        chosen = [by_name[n] for n in names]
    return [run_case(c, neighbourhood=neighbourhood, auto=auto) for c in chosen]


def _cell(text: str) -> str:
    return text.replace("|", "/").replace("\n", " ")


def auto_cell(result: CaseResult) -> str:
    """What the settings chosen from the data gave: the verdict, the interval count and
    the scale chosen, and what the graph showed when it failed."""
    a = result.auto
    if a is None:
        return "not run"
    chosen = ""
    if a.auto is not None:
        k = a.auto.n_intervals
        count = str(k[0]) if len(k) == 1 else " x ".join(str(c) for c in k)
        rule = " by the histogram rule" if "histogram" in a.auto.resolution else ""
        chosen = f"{count} interval{'s' if k != (1,) else ''}{rule}, scale {a.auto.scale:.3g}"
    if result.auto_passed:
        return f"pass ({chosen})"
    seen = a.got + ("" if a.networkx_agrees else "; networkx DISAGREES")
    return f"FAIL ({chosen}): {seen}"


def format_table(results: Sequence[CaseResult]) -> str:
    """A Markdown table with one row per case."""
    lines = [
        "| case | expected | got (stated settings) | neighbourhood | auto settings | pass |",
        "|---|---|---|---|---|---|",
    ]
    for r in results:
        extra = "; ".join(f"{name}: {'yes' if ok else 'NO'}" for name, ok in r.data_checks)
        got = r.stated.got + (f"; {extra}" if extra else "")
        if not r.stated.networkx_agrees:
            got += "; networkx DISAGREES"
        hood = f"{r.neighbours_passed}/{len(r.neighbours)}" if r.neighbours else "not run"
        lines.append(
            f"| {r.case.name} | {_cell(r.case.expected)} | {_cell(got)} | {hood} | "
            f"{_cell(auto_cell(r))} | {'pass' if r.passed else 'FAIL'} |"
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
        if r.auto_passed is False:
            out.append(f"{r.case.name} auto: {auto_cell(r)}")
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
    parser.add_argument(
        "--no-auto", action="store_true", help="skip the settings chosen from the data"
    )
    args = parser.parse_args(argv)
    results = run_cases(args.cases, neighbourhood=not args.stated_only, auto=not args.no_auto)
    return print_report(results)


if __name__ == "__main__":
    sys.exit(main())
