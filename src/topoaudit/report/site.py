"""The static site built from an archive of published bundles (see :mod:`.archive`).

Building the site checks every current bundle against its checksums, writes a complete
mkdocs project into a temporary folder beside the output, runs ``mkdocs build`` in strict
mode, and only then swaps the result into the output folder with one atomic exchange; an
interrupted build leaves the previous site exactly as it was. The output folder must be
new, empty, or a site this function built (it holds ``.topoaudit-site``): a folder of
other files is never replaced.
"""

from __future__ import annotations

import html
import json
import logging
import shutil
from importlib import resources
from pathlib import Path
from typing import Any

from topoaudit.audit.changes import release_changes
from topoaudit.audit.lineage import Lineage, ReleaseRows, follow, load_release
from topoaudit.audit.tasks import task_named
from topoaudit.bundle.files import build_date, canonical_json, read_members
from topoaudit.bundle.records import SignOff
from topoaudit.errors import TopoauditError
from topoaudit.progress import Progress
from topoaudit.report.archive import (
    ArchiveError,
    PublishedRelease,
    Stage,
    check_name,
    list_releases,
    publish,
    refuse_changed,
    signoffs,
    staging,
)
from topoaudit.report.diff import diff_markdown
from topoaudit.report.figures import inline_specs, write_charts
from topoaudit.report.gate import review_sections
from topoaudit.report.history import history_charts, history_page
from topoaudit.report.text import count, escape, rate

__all__ = ["SITE_MARKER", "ArchiveError", "build_site", "list_releases", "publish", "signoff_words"]

SITE_MARKER = ".topoaudit-site"

log = logging.getLogger(__name__)


def _template_dir() -> Path:
    """The mkdocs template folder: ``topoaudit/_site_template`` in an installed wheel (the
    top-level ``site_template/`` shipped as package data), else, in an editable install,
    ``site_template/`` of the checkout that holds ``src/topoaudit``."""
    package = Path(str(resources.files("topoaudit")))
    candidates = (package / "_site_template", package.parent.parent / "site_template")
    for candidate in candidates:
        if (candidate / "mkdocs.yml").is_file():
            return candidate
    raise FileNotFoundError(
        f"the site template (mkdocs.yml) is in neither {candidates[0]} nor {candidates[1]}; "
        "reinstall topoaudit."
    )


def _models(archive: Path) -> list[str]:
    out = []
    for p in sorted(archive.iterdir()):
        if p.name.startswith(".") or not p.is_dir():
            continue
        if p.is_symlink():
            raise ArchiveError(f"{p}: is a symbolic link; archives may not hold links.")
        out.append(check_name("model", p.name))
    return out


def _check_output(out: Path, archive: Path) -> None:
    """Refuse an output folder that is not ours to replace."""
    if out.is_symlink():
        raise ArchiveError(f"{out}: the site folder is a symbolic link; give the real folder.")
    o, a = out.resolve(), archive.resolve()
    if o == a or a in o.parents or o in a.parents:
        msg = f"{out}: the site folder may not be, hold or lie inside the archive {archive}."
        raise ArchiveError(msg)
    if out.exists() and (
        not out.is_dir() or (any(out.iterdir()) and not (out / SITE_MARKER).is_file())
    ):
        msg = (
            f"{out}: exists and is not a site built by topoaudit (it has no {SITE_MARKER} "
            "file); choose a new or empty folder, so that nothing else is replaced."
        )
        raise ArchiveError(msg)


def signoff_words(records: list[SignOff]) -> str:
    """The latest of a release's sign-offs (:func:`~topoaudit.report.archive.signoffs`,
    newest last) in words, escaped for Markdown: ``approved with conditions by A. Reviewer,
    2026-01-02``, or ``not signed off``."""
    if not records:
        return "not signed off"
    s = records[-1]
    return f"{escape(s.decision_words)} by {escape(s.reviewer)}, {escape(s.date)}"


def signoff_section(records: list[SignOff]) -> str:
    """The sign-off section added to a release page when the site is built (the bundle's
    own page.md is checksummed and written before any sign-off exists): every decision,
    newest first, with reviewer, date and note, escaped."""
    lines = ["", "## Sign-off", ""]
    if not records:
        lines += [
            "Not signed off yet. A reviewer records a decision with topoaudit signoff; the "
            "record sits beside the published bundle and never changes it.",
            "",
        ]
        return "\n".join(lines)
    lines += [
        "Decisions recorded on this release, newest first (each record is checksummed and "
        "chained to the one before; topoaudit archive verify checks them):",
        "",
        "| date | reviewer | decision | note |",
        "|---|---|---|---|",
    ]
    for s in reversed(records):
        lines.append(
            f"| {escape(s.date)} | {escape(s.reviewer)} | {escape(s.decision_words)} | "
            f"{escape(s.note)} |"
        )
    return "\n".join([*lines, ""])


def _release_table(rels: list[PublishedRelease]) -> list[str]:
    headline_key, headline = task_named(rels[0].analysis.task).headline
    lines = [
        "Newest first. Each release links to its audit page; the sign-off is the latest "
        "reviewer's decision on it.",
        "",
        f"| release | audited | rows | {headline} | ROC AUC | weak regions | sign-off | "
        "compared with the release before |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for i, r in enumerate(rels):
        a = r.analysis
        main, auc = a.overall.get(headline_key), a.overall.get("roc_auc")
        prev = rels[i + 1].release if i + 1 < len(rels) else None
        compare = f"[against {escape(prev)}](compare/{prev}-to-{r.release}.md)" if prev else ""
        lines.append(
            f"| [{escape(r.release)}]({r.release}/index.md) | {escape(a.created)} | "
            f"{count(a.provenance.rows)} | {rate(main and main.value)} | "
            f"{rate(auc and auc.value)} | {a.summary.weak_regions} | "
            f"{signoff_words(signoffs(r.folder))} | {compare} |"
        )
    return lines


def _follow(rels: list[PublishedRelease]) -> tuple[Lineage | None, dict[str, ReleaseRows]]:
    """The weak regions of ``rels`` (newest first) followed from the oldest, and each
    release's rows; (None, {}) when they cannot be (a bundle without its row table)."""
    try:
        rows = {r.release: load_release(r.folder) for r in rels}
        return follow([rows[r.release] for r in reversed(rels)]), rows
    except TopoauditError as exc:
        log.warning("weak regions of %s not followed: %s", rels[0].analysis.model, exc)
        return None, {}


def _history(docs: Path, model: str, rels: list[PublishedRelease], lineage) -> None:
    charts = history_charts(lineage, [r.analysis for r in reversed(rels)])
    write_charts(docs / model / "charts", {name: spec for name, (_alt, spec) in charts.items()})
    text = history_page(model, _release_table(rels), lineage, charts)
    _write(docs / model / "index.md", inline_specs(text, docs / model / "charts"))


def _compare_page(prev: PublishedRelease, r: PublishedRelease, lineage, rows) -> str:
    d = release_changes(prev.folder, r.folder)
    step = lineage.step_to(r.release) if lineage is not None else None
    regions = None
    if step is not None:
        regions = review_sections(step, rows[prev.release], rows[r.release])
    return diff_markdown(d, heading="#", regions=regions)


def _write(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def vega_bundle() -> str:
    """The Vega, Vega-Lite and Vega-Embed scripts every page loads, as vl-convert bundles
    them for its version (offline: the site fetches nothing).

    Bundling takes about two seconds, and the result depends on vl-convert's version
    alone, so it is kept in the user's cache folder (``$XDG_CACHE_HOME/topoaudit``, else
    ``~/.cache/topoaudit``), one file per version, written whole or not at all; a cache
    that cannot be read or written is passed over."""
    import os

    import vl_convert as vlc

    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    cached = Path(base) / "topoaudit" / f"vega-bundle-{vlc.__version__}.js"
    try:
        return cached.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        pass
    text = vlc.javascript_bundle()
    try:
        cached.parent.mkdir(parents=True, exist_ok=True)
        part = cached.with_name(f".{cached.name}.{os.getpid()}")
        part.write_text(text, encoding="utf-8")
        os.replace(part, cached)
    except OSError:
        pass
    return text


def build_site(
    archive: str | Path,
    out: str | Path,
    *,
    site_name: str = "Model audits",
    row_ids: bool = False,
    progress: Progress | None = None,
) -> Path:
    """Build the static site of ``archive`` into ``out`` (replaced only when complete).

    The site holds aggregates only. With ``row_ids`` (an explicit opt-in) each release page
    also links a CSV of the ids of the rows in its weak regions, under a caution.
    ``progress`` is called with a message at each step (see :mod:`topoaudit.progress`).
    """
    archive, out = Path(archive), Path(out)
    if (
        not isinstance(site_name, str)
        or not 0 < len(site_name) <= 200
        or not site_name.isprintable()
    ):
        msg = f"The site name {site_name!r} is not allowed; give 1 to 200 printable characters."
        raise ArchiveError(msg)
    if archive.is_symlink() or not archive.is_dir():
        raise ArchiveError(f"{archive}: no such archive folder (or it is a symbolic link).")
    template = _template_dir()
    _check_output(out, archive)
    # the staged folder is named after the template's site_dir, where mkdocs writes
    with staging(out, prefix=f".{out.name}-build-", name="site") as stage:
        _build_into(stage, archive, template, site_name, row_ids, progress or (lambda _m: None))
    return out


def _build_into(
    stage: Stage,
    archive: Path,
    template: Path,
    site_name: str,
    row_ids: bool,
    say: Progress,
) -> None:
    """Write the mkdocs project into the work folder and build the site into ``stage.path``."""
    from mkdocs.commands.build import build
    from mkdocs.config import load_config

    work = stage.work
    docs = work / "docs"
    nav: list[Any] = [{"Home": "index.md"}]
    listing = []
    models = _models(archive)
    for k, model in enumerate(models, start=1):
        say(f"step 1 of 3: pages of model {k} of {len(models)} ({model})")
        rels = list_releases(archive, model)
        for r in rels:
            refuse_changed(r.folder)
        if not rels:
            continue
        log.info("building pages of model %s (%d releases)", model, len(rels))
        lineage, rows = _follow(rels)
        _history(docs, model, rels, lineage)
        section: list[Any] = [{"Release history": f"{model}/index.md"}]
        for i, r in enumerate(rels):
            page_dir = docs / model / r.release
            page = (r.folder / "page.md").read_text(encoding="utf-8")
            text = inline_specs(page, r.folder / "charts")  # the interactive charts' specs
            text += signoff_section(signoffs(r.folder))
            if row_ids:
                text += _row_list(r.folder, page_dir)
            _write(page_dir / "index.md", text)
            shutil.copytree(r.folder / "charts", page_dir / "charts")
            section.append({f"Release {r.release}": f"{model}/{r.release}/index.md"})
            if i + 1 < len(rels):
                prev = rels[i + 1]
                name = f"{prev.release}-to-{r.release}.md"
                _write(docs / model / "compare" / name, _compare_page(prev, r, lineage, rows))
                section.append({f"{r.release} against {prev.release}": f"{model}/compare/{name}"})
        nav.append({model: section})
        latest = rels[0].analysis
        listing.append(
            f"| [{escape(model)}]({model}/index.md) | {len(rels)} | "
            f"[{escape(latest.release)}]({model}/{latest.release}/index.md) | "
            f"{latest.summary.weak_regions} |"
        )
    table = (
        "| model | releases | latest release | weak regions in the latest |\n"
        "|---|---|---|---|\n" + "\n".join(listing) + "\n"
        if listing
        else "No release has been published yet.\n"
    )
    home = (template / "home.md").read_text(encoding="utf-8").replace("{models}", table)
    _write(docs / "index.md", home)
    assets = docs / "assets"
    assets.mkdir(parents=True, exist_ok=True)
    (assets / "vega-bundle.js").write_text(vega_bundle(), encoding="utf-8")
    for name in ("charts.js", "topoaudit.css"):
        shutil.copyfile(template / "assets" / name, assets / name)
    _write_mkdocs_config(template, work, Path(archive), site_name, nav)
    log.info("running mkdocs build")
    say("step 2 of 3: running mkdocs build")
    try:
        build(load_config(str(work / "mkdocs.yml")))
    except Exception as exc:
        msg = f"mkdocs could not build the site from {archive}: {exc}"
        raise ArchiveError(msg) from exc
    say("step 3 of 3: writing the built site to disk and moving it into place")
    (stage.path / SITE_MARKER).write_text(
        canonical_json({"built": build_date(), "by": "topoaudit site build"}), encoding="utf-8"
    )


def _write_mkdocs_config(
    template: Path, work: Path, archive: Path, site_name: str, nav: list[Any]
) -> None:
    """The site's mkdocs.yml and theme in the work folder, with the site's name, the
    archive's name, the version and the build date filled in."""
    yml = (template / "mkdocs.yml").read_text(encoding="utf-8")
    # mkdocs' theme templates put these into the HTML as they are: escape them here
    for key, value in (
        ("site_name", site_name),
        ("archive", archive.resolve().name),
        ("version", _version()),
        ("built", build_date()),
    ):
        yml = yml.replace(f'"{{{key}}}"', json.dumps(html.escape(value)))
    shutil.copytree(template / "theme", work / "theme")
    yml += "nav:\n" + _nav_yaml(nav, 1)
    (work / "mkdocs.yml").write_text(yml, encoding="utf-8")


def _version() -> str:
    from importlib import metadata

    try:
        return metadata.version("topoaudit")
    except metadata.PackageNotFoundError:  # pragma: no cover - run from a bare checkout
        return "(version unknown)"


ROW_LIST = "weak-region-rows.csv"


def _csv_cell(value: object) -> str:
    """A CSV cell that a spreadsheet will not run as a formula (OWASP, CSV injection)."""
    text = str(value)
    if text[:1] in ("=", "+", "-", "@", "\t", "\r"):
        text = "'" + text
    return text


def _row_list(bundle: Path, page_dir: Path) -> str:
    """Write the ids of the weak regions' rows beside the page; the section that links it."""
    import pandas as pd

    members = read_members(bundle, ["id", "weak_regions"])
    rows = members[members["weak_regions"].map(len) > 0]
    table = pd.DataFrame(
        {
            "id": rows["id"].map(_csv_cell),
            "weak_regions": rows["weak_regions"].map(lambda w: " ".join(map(str, w))),
        }
    )
    page_dir.mkdir(parents=True, exist_ok=True)
    table.to_csv(page_dir / ROW_LIST, index=False, lineterminator="\n")
    return (
        "\n## Rows of the weak regions (row-level data, opted in)\n\n"
        f"This site was built with row ids included: [{ROW_LIST}]({ROW_LIST}) lists the ids "
        f"of the {count(len(table))} rows that lie in a weak region of this release. Ids are "
        "row-level data and may identify people or households: share this site only where "
        "the organisation's data policy allows it. Being in a weak region says where the "
        "model was worse, not that a row was handled wrongly or why.\n"
    )


def _nav_yaml(items: list[Any], depth: int) -> str:
    pad = "  " * depth
    text = ""
    for item in items:
        for title, target in item.items():
            if isinstance(target, list):
                text += f"{pad}- {json.dumps(title)}:\n" + _nav_yaml(target, depth + 1)
            else:
                text += f"{pad}- {json.dumps(title)}: {json.dumps(target)}\n"
    return text
