"""The report of the discovery-power grid: tables per family, size and strength, the null
settings, and two charts of recall (Altair, written as SVG)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

METHODS = ("ours", "tree", "bin")
NAMES = {"ours": "topoaudit", "tree": "depth-3 tree", "bin": "worst bin"}


def _pockets(results: list[dict[str, Any]]) -> pd.DataFrame:
    """One row per planted pocket and method: recovered or not."""
    rows = []
    for r in results:
        if r["size"] == 0.0:
            continue
        oracle = r.get("oracle") or [float("nan")] * len(r["ours"]["recovered"])
        for m in METHODS:
            for k, ok in enumerate(r[m]["recovered"]):
                rows.append(dict(family=r["family"], size=r["size"], strength=r["strength"],
                                 rows=r["rows"], features=r["features"], method=m, pocket=k,
                                 recovered=bool(ok), oracle=oracle[k]))  # fmt: skip
    return pd.DataFrame(rows)


def _table(frame: pd.DataFrame, by: str, title: str) -> list[str]:
    wide = frame.pivot_table(index=by, columns="method", values="recovered", aggfunc="mean")
    counts = frame[frame.method == "ours"].groupby(by).size()
    lines = [f"### Recall by {title}", "", f"| {title} | pockets | " + " | ".join(
        NAMES[m] for m in METHODS) + " |", "|---|---|" + "---|" * len(METHODS)]  # fmt: skip
    for key in wide.index:
        cells = " | ".join(f"{wide.loc[key, m]:.2f}" for m in METHODS)
        label = f"{key:.0%}" if by == "size" else (f"{key:g}x" if by == "strength" else key)
        lines.append(f"| {label} | {counts[key]} | {cells} |")
    return [*lines, ""]


def _misses(frame: pd.DataFrame) -> list[str]:
    """The pockets topoaudit missed, per family, and how many of them the confirmation
    test would confirm on its own were the pocket itself the candidate."""
    ours = frame[frame.method == "ours"]
    if ours.oracle.isna().all():
        return []
    missed = ours[~ours.recovered]
    lines = ["### What the search misses", "",
             "Each pocket was also tested as if the search had proposed exactly it: the exact "
             "conditional binomial test of the confirmation half, as for every candidate.", "",
             "| family | pockets missed | of them, p ≤ 0.05 as the candidate | p ≤ 1e-6 |",
             "|---|---|---|---|"]  # fmt: skip
    for family, group in missed.groupby("family"):
        lines.append(f"| {family} | {len(group)} | {(group.oracle <= 0.05).sum()} | "
                     f"{(group.oracle <= 1e-6).sum()} |")  # fmt: skip
    lines.append(f"| all | {len(missed)} | {(missed.oracle <= 0.05).sum()} | "
                 f"{(missed.oracle <= 1e-6).sum()} |")  # fmt: skip
    confirmable = int((ours.oracle <= 0.05).sum())
    lines += ["", f"{confirmable} of the {len(ours)} pockets would be confirmed had the search "
              "proposed them exactly (at 0.05, before any adjustment for other candidates): "
              "that bounds the recall here, and a pocket missed with a small p-value is one the "
              "search did not find, not one the test could not confirm.", ""]  # fmt: skip
    return lines


def _nulls(results: list[dict[str, Any]]) -> list[str]:
    nulls = [r for r in results if r["size"] == 0.0]
    header = " | ".join(f"{NAMES[m]}: with a finding" for m in METHODS)
    lines = ["### Null settings (no pocket)", "", f"| null | settings | {header} |",
             "|---|---|" + "---|" * len(METHODS)]  # fmt: skip
    for kind in ("calibrated", "inflated"):
        some = [r for r in nulls if r["family"] == kind]
        if some:
            cells = " | ".join(f"{sum(r[m]['found'] > 0 for r in some)}" for m in METHODS)
            lines.append(f"| {kind} | {len(some)} | {cells} |")
    total = len(nulls)
    rate = sum(r["ours"]["found"] > 0 for r in nulls) / total if total else float("nan")
    return [*lines, "", f"False-finding rate of topoaudit over the {total} null settings: "
            f"{rate:.3f}.", ""]  # fmt: skip


def _precision(results: list[dict[str, Any]]) -> float:
    """The share of topoaudit's confirmed regions with at least half of their rows in a
    pocket, over the settings with pockets."""
    precise = [p for r in results if r["size"] > 0 for p in r["ours"]["precise"]]
    return sum(precise) / len(precise) if precise else float("nan")


def _timed(theirs: list[dict[str, Any]], mine: list[dict[str, Any]]) -> str:
    """The search's time in two runs over the same settings, against the baselines' time
    in each: the baselines' code is the same in every run, so their ratio measures the
    machines, and the search's ratio over theirs its own cost on an equal machine."""
    ours = [sum(r["seconds"] for r in rs) for rs in (theirs, mine)]
    base = [sum(r[m]["seconds"] for r in rs for m in ("tree", "bin")) for rs in (theirs, mine)]
    if min(ours + base) <= 0:
        return "No time was recorded in one of the runs."
    mine_ratio, base_ratio = ours[1] / ours[0], base[1] / base[0]
    return (
        f"Search time: {ours[0] / 60:.0f} min in that run, {ours[1] / 60:.0f} in this one "
        f"({mine_ratio:.2f} times); the two baselines, the same code in both runs, took "
        f"{base[0]:.0f} s and {base[1]:.0f} s ({base_ratio:.2f} times), so on an equal "
        f"machine the search took {mine_ratio / base_ratio:.2f} times as long."
    )


def _compared(other: list[dict[str, Any]], results: list[dict[str, Any]], label: str) -> list[str]:
    """topoaudit's recall per family and its null findings in another run of the grid
    (``other``, labelled ``label``) and in this one, over the settings both ran."""
    key = lambda r: (r["family"], r["size"], r["strength"], r["rows"], r["features"], r["seed"])  # noqa: E731
    both = {key(r) for r in other} & {key(r) for r in results}
    mine = [r for r in results if key(r) in both]
    theirs = [r for r in other if key(r) in both]
    old, new = _pockets(theirs), _pockets(mine)
    old, new = old[old.method == "ours"], new[new.method == "ours"]
    by_old = old.groupby("family")["recovered"].mean()
    by_new = new.groupby("family")["recovered"].mean()
    lines = [f"### This run against {label}", "",
             f"Over the {len(both)} settings both ran.", "",
             "| family | pockets | that run | this run |", "|---|---|---|---|"]  # fmt: skip
    for family in by_new.index:
        n = int((new.family == family).sum())
        lines.append(f"| {family} | {n} | {by_old[family]:.2f} | {by_new[family]:.2f} |")
    lines.append(f"| all | {len(new)} | {old.recovered.mean():.2f} | {new.recovered.mean():.2f} |")
    precision = [_precision(rs) for rs in (theirs, mine)]
    lines += ["", f"Precision: {precision[0]:.2f} in that run, {precision[1]:.2f} in this one."]
    lines += ["", _timed(theirs, mine)]
    nulls = [sum(r["ours"]["found"] > 0 for r in rs if r["size"] == 0.0) for rs in (theirs, mine)]
    n_null = sum(r["size"] == 0.0 for r in mine)
    lines += [
        "",
        f"Null settings with a finding: {nulls[0]} in that run, {nulls[1]} in this one, "
        f"of {n_null}."
        if n_null
        else "No null setting is among them.",
        "",
    ]
    return lines


def _charts(frame: pd.DataFrame, folder: Path) -> list[str]:
    import altair as alt
    import vl_convert as vlc

    out = []
    for by, title in (
        ("size", "pocket size (share of rows)"),
        ("strength", "error inside / outside"),
    ):
        data = frame.groupby([by, "method"], as_index=False)["recovered"].mean()
        data["method"] = data["method"].map(NAMES)
        chart = (
            alt.Chart(data)
            .mark_line(point=True)
            .encode(
                x=alt.X(f"{by}:Q", title=title),
                y=alt.Y("recovered:Q", title="recall", scale=alt.Scale(domain=[0, 1])),
                color=alt.Color("method:N", title="method"),
            )
            .properties(width=420, height=220, title=f"Recall against {title}")
        )
        name = f"grid_recall_{by}.svg"
        (folder / name).write_text(vlc.vegalite_to_svg(chart.to_dict()), encoding="utf-8")
        out.append(f"![Recall against {title}]({name})")
    return [*out, ""]


def write_report(
    results: list[dict[str, Any]],
    path: Path,
    folder: Path,
    *,
    wall_seconds: float,
    jobs: int,
    others: list[tuple[list[dict[str, Any]], str]] = (),
) -> None:
    """Write the report to ``path`` and its charts to ``folder``; ``others``: the results
    and labels of other runs to compare with, over the settings each shares with this."""
    frame = _pockets(results)
    planted = [r for r in results if r["size"] > 0]
    n_regions = sum(len(r["ours"]["precise"]) for r in planted)
    seconds = pd.Series([r["seconds"] for r in results])
    overall = frame.groupby("method")["recovered"].mean()
    lines = [
        "# Discovery power on a grid of planted pockets",
        "",
        f"{len(planted)} settings with pockets ({len(frame[frame.method == 'ours'])} pockets) "
        f"and {len(results) - len(planted)} null settings; measured by `python -m "
        "tests.benchmarks.grid` (see its docstring for the methods and measures).",
        "",
        "Recall over all pockets: "
        + ", ".join(f"{NAMES[m]} {overall[m]:.2f}" for m in METHODS)
        + ". "
        f"Precision of topoaudit: {_precision(results):.2f} of {n_regions} "
        "confirmed regions have at least half of their rows in a pocket. "
        f"topoaudit's search and confirmation took {seconds.median():.1f} s per setting "
        f"(median; {seconds.max():.0f} s at most), {seconds.sum() / 60:.0f} min in all; the "
        f"grid's wall time was {wall_seconds / 60:.0f} min with {jobs} settings at once.",
        "",
        *_table(frame, "family", "family"),
        *[line for other, label in others for line in _compared(other, results, label)],
        *_table(frame, "size", "size"),
        *_table(frame, "strength", "strength"),
        *_misses(frame),
        *_nulls(results),
        *_charts(frame, folder),
    ]
    path.write_text("\n".join(lines), encoding="utf-8")
