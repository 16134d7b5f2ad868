"""Regenerate the fixture bundles of the visual suite (run by hand, rarely).

``python -m tests.visual.make_fixture`` audits a small invented demo project (two
releases) and keeps analysis.json, graph.json and members.parquet of each release under
tests/visual/fixture/. The visual tests render these fixed files, so their baselines do
not move when the audit's numerics change.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

from topoaudit.audit.run import run_audit
from topoaudit.cli import audit_command
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project

HERE = Path(__file__).parent / "fixture"


def main() -> int:
    os.environ["SOURCE_DATE_EPOCH"] = "1767225600"
    with tempfile.TemporaryDirectory() as tmp:
        path = write_demo_project(Path(tmp), 3000, seed=7)
        text = path.read_text(encoding="utf-8")
        light = "[audit]\nstability_intervals = [0, 2]\nstability_overlaps = [0.0]\n"
        light += "bootstrap_resamples = 1\n"
        path.write_text(text.replace("[audit]\n", light, 1), encoding="utf-8")
        config = load_config(path)
        for release in config.releases:
            audit = run_audit(
                config,
                release=release.name,
                command=audit_command("audit.toml", f"bundles/{release.name}", release.name),
            )
            target = HERE / release.name
            if target.exists():
                shutil.rmtree(target)
            audit.write(target)
    print(f"fixture bundles written under {HERE}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
