"""Site build benchmark: an archive of 3 models x 20 releases.

One real bundle of the invented demo is audited once; its copies, renamed per model and
release (analysis.json and page title), make up the archive. Reports the wall time of
``build_site`` and the pages built. Run with ``python -m tests.benchmarks.site``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

from topoaudit.audit.run import run_audit
from topoaudit.cli import _write_bundle
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project
from topoaudit.report.site import build_site, publish


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.benchmarks.site")
    parser.add_argument("--models", type=int, default=3)
    parser.add_argument("--releases", type=int, default=20)
    parser.add_argument("--out", default="tests/benchmarks/SITE_RESULTS.md")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        config = load_config(write_demo_project(root / "project", 3000))
        bundle = root / "bundle"
        _write_bundle(run_audit(config), bundle)
        archive = root / "archive"
        for m in range(args.models):
            for r in range(args.releases):
                copy = root / f"copy-{m}-{r}"
                shutil.copytree(bundle, copy)
                doc = json.loads((copy / "analysis.json").read_text())
                doc["model"], doc["release"] = f"model-{m + 1}", f"2026.{r + 1}"
                (copy / "analysis.json").write_text(json.dumps(doc, sort_keys=True, indent=1))
                (copy / "page.md").unlink()  # publish renders the page again
                publish(copy, archive)
                shutil.rmtree(copy)
        start = time.perf_counter()
        site = build_site(archive, root / "site")
        took = time.perf_counter() - start
        pages = sum(1 for _ in site.rglob("index.html"))
    line = f"| {args.models} x {args.releases} | {pages} | {took:.1f} |"
    text = (
        "# Site build benchmark\n\n| archive (models x releases) | pages | build s |\n"
        f"|---|---|---|\n{line}\n"
    )
    Path(args.out).write_text(text, encoding="utf-8")
    print(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
