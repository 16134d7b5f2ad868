"""The archive of published bundles and the static site built from it.

Archive layout::

    <archive>/<model>/<release>/        one published bundle (never changed in place)
    <archive>/<model>/.history/<release>/<n>/   bundles replaced with --replace

Publishing copies a bundle into a temporary folder of the archive and renames it into
place, so an interrupted publish leaves the archive as it was. Building the site writes a
complete mkdocs project into a temporary folder, runs ``mkdocs build`` in strict mode, and
only then swaps the result into the output folder.
"""

from __future__ import annotations

import json
import logging
import os
import re
import shutil
import tempfile
from importlib import resources
from pathlib import Path
from typing import Any

from topoaudit.audit.diff import bundle_diff
from topoaudit.audit.result import build_date, canonical_json
from topoaudit.config import NAME_PATTERN
from topoaudit.errors import TopoauditError
from topoaudit.report.diff import diff_markdown
from topoaudit.report.page import render_bundle
from topoaudit.report.text import count, escape, rate

__all__ = ["ArchiveError", "build_site", "list_releases", "publish"]

log = logging.getLogger(__name__)


class ArchiveError(TopoauditError, OSError):
    """The archive refused an operation (a name, an existing release, a broken bundle)."""


def _template_dir() -> Path:
    here = Path(__file__).resolve()
    for parent in here.parents:
        candidate = parent / "site_template"
        if (candidate / "mkdocs.yml").exists():
            return candidate
    packaged = resources.files("topoaudit").joinpath("site_template")
    return Path(str(packaged))


def _check_name(kind: str, name: str) -> str:
    if not isinstance(name, str) or not re.fullmatch(NAME_PATTERN, name) or ".." in name:
        msg = (
            f"The {kind} name {name!r} is not allowed; names must match {NAME_PATTERN} "
            "(letters, digits, '.', '-', '_', at most 64 characters, no '..')."
        )
        raise ArchiveError(msg)
    return name


def _read_analysis(folder: Path) -> dict[str, Any]:
    path = folder / "analysis.json"
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ArchiveError(f"{folder}: not a bundle (no analysis.json).") from None
    except (OSError, ValueError) as exc:
        raise ArchiveError(f"{path}: cannot be read ({exc}).") from exc


def publish(bundle: str | Path, archive: str | Path, *, replace: bool = False) -> Path:
    """Add ``bundle`` to ``archive`` as ``<model>/<release>/``.

    A published release is never overwritten: without ``replace`` an existing release is
    refused and nothing changes; with it, the old bundle moves to the model's history.
    """
    bundle, archive = Path(bundle), Path(archive)
    a = _read_analysis(bundle)
    model = _check_name("model", a.get("model", ""))
    release = _check_name("release", a.get("release", ""))
    dest = archive / model / release
    if dest.exists() and not replace:
        msg = (
            f"{dest}: release {release!r} of model {model!r} is already published; pass "
            "--replace to replace it (the old bundle is kept in the archive's history)."
        )
        raise ArchiveError(msg)
    (archive / model).mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".incoming-{release}-", dir=archive / model))
    try:
        staged = tmp / "bundle"
        shutil.copytree(bundle, staged)
        if not (staged / "page.md").exists():
            render_bundle(staged)
        sequence = 1 + max((r["sequence"] for r in list_releases(archive, model)), default=0)
        (staged / "published.json").write_text(
            canonical_json({"sequence": sequence, "published": build_date()}), encoding="utf-8"
        )
        if dest.exists():
            history = archive / model / ".history" / release
            history.mkdir(parents=True, exist_ok=True)
            n = 1 + max((int(p.name) for p in history.iterdir() if p.name.isdigit()), default=0)
            dest.rename(history / str(n))
        staged.rename(dest)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return dest


def list_releases(archive: str | Path, model: str) -> list[dict[str, Any]]:
    """Published releases of ``model``, newest first, with their analysis and sequence."""
    folder = Path(archive) / model
    out = []
    if not folder.is_dir():
        return out
    for child in sorted(folder.iterdir()):
        if child.name.startswith(".") or not (child / "published.json").exists():
            continue
        meta = json.loads((child / "published.json").read_text(encoding="utf-8"))
        out.append(
            {
                "release": child.name,
                "folder": child,
                "sequence": meta["sequence"],
                "published": meta["published"],
                "analysis": _read_analysis(child),
            }
        )
    out.sort(key=lambda r: -r["sequence"])
    return out


def _models(archive: Path) -> list[str]:
    return sorted(p.name for p in archive.iterdir() if p.is_dir() and not p.name.startswith("."))


def _history_page(model: str, rels: list[dict[str, Any]]) -> str:
    lines = [
        f"# {escape(model)}: release history",
        "",
        "Newest first. Each release links to its audit page.",
        "",
        "| release | audited | rows | error rate | ROC AUC | weak regions | compared with "
        "the release before |",
        "|---|---|---|---|---|---|---|",
    ]
    for i, r in enumerate(rels):
        a = r["analysis"]
        o = a["overall"]
        err = o.get("error_rate", o.get("mae", {})).get("value")
        auc = o.get("roc_auc", {}).get("value")
        prev = rels[i + 1]["release"] if i + 1 < len(rels) else None
        compare = f"[against {escape(prev)}](compare/{prev}-to-{r['release']}.md)" if prev else ""
        lines.append(
            f"| [{escape(r['release'])}]({r['release']}/index.md) | {escape(a['created'])} | "
            f"{count(a['provenance']['rows'])} | {rate(err)} | {rate(auc)} | "
            f"{a['summary']['weak_regions']} | {compare} |"
        )
    return "\n".join(lines) + "\n"


def _write(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def build_site(archive: str | Path, out: str | Path, *, site_name: str = "Model audits") -> Path:
    """Build the static site of ``archive`` into ``out`` (replaced only when complete)."""
    import vl_convert as vlc
    from mkdocs.commands.build import build
    from mkdocs.config import load_config

    archive, out = Path(archive), Path(out)
    if not archive.is_dir():
        raise ArchiveError(f"{archive}: no such archive folder.")
    template = _template_dir()
    out.parent.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix=f".{out.name}-build-", dir=out.parent))
    try:
        docs = work / "docs"
        nav: list[Any] = [{"Home": "index.md"}]
        listing = []
        for model in _models(archive):
            _check_name("model", model)
            rels = list_releases(archive, model)
            if not rels:
                continue
            log.info("building pages of model %s (%d releases)", model, len(rels))
            _write(docs / model / "index.md", _history_page(model, rels))
            section: list[Any] = [{"Release history": f"{model}/index.md"}]
            for i, r in enumerate(rels):
                page_dir = docs / model / r["release"]
                text = (r["folder"] / "page.md").read_text(encoding="utf-8")
                _write(page_dir / "index.md", text)
                shutil.copytree(r["folder"] / "charts", page_dir / "charts")
                section.append({f"Release {r['release']}": f"{model}/{r['release']}/index.md"})
                if i + 1 < len(rels):
                    prev = rels[i + 1]
                    d = bundle_diff(prev["folder"], r["folder"])
                    name = f"{prev['release']}-to-{r['release']}.md"
                    _write(docs / model / "compare" / name, diff_markdown(d, heading="#"))
                    section.append(
                        {f"{r['release']} against {prev['release']}": f"{model}/compare/{name}"}
                    )
            nav.append({model: section})
            latest = rels[0]["analysis"]
            listing.append(
                f"| [{escape(model)}]({model}/index.md) | {len(rels)} | "
                f"[{escape(latest['release'])}]({model}/{latest['release']}/index.md) | "
                f"{latest['summary']['weak_regions']} |"
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
        (assets / "vega-bundle.js").write_text(vlc.javascript_bundle(), encoding="utf-8")
        for name in ("charts.js", "topoaudit.css"):
            shutil.copyfile(template / "assets" / name, assets / name)
        yml = (template / "mkdocs.yml").read_text(encoding="utf-8")
        yml = yml.replace('"{site_name}"', json.dumps(site_name))
        yml += "nav:\n" + _nav_yaml(nav, 1)
        (work / "mkdocs.yml").write_text(yml, encoding="utf-8")
        log.info("running mkdocs build")
        try:
            build(load_config(str(work / "mkdocs.yml")))
        except Exception as exc:
            msg = f"mkdocs could not build the site from {archive}: {exc}"
            raise ArchiveError(msg) from exc
        built = work / "site"
        old = None
        if out.exists():
            old = out.parent / f".{out.name}-old-{os.getpid()}"
            out.rename(old)
        built.rename(out)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return out


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
