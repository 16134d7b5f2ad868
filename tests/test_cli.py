"""The ``topoaudit`` command as a user runs it."""

from __future__ import annotations

import json

import pytest

from topoaudit.cli import main
from topoaudit.demo import write_demo_project


def test_check_prints_the_table_and_exits_zero(capsys):
    assert main(["check", "circle", "--stated-only"]) == 0
    out = capsys.readouterr().out
    assert "| circle |" in out
    assert "1 of 1 reference cases pass." in out


def test_check_unknown_case_is_a_clear_error(capsys):
    assert main(["check", "circel"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("topoaudit: error: Unknown reference case 'circel'")


def test_demo_audits_two_releases_publishes_them_and_builds_the_site(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--rows", "1500", "--quiet"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[-4].startswith("meter-failure 2026.1: 1,500 rows, error rate ")
    assert out[-3].startswith("meter-failure 2026.2: 1,500 rows, error rate ")
    assert out[-2].startswith("gate: release 2026.2 ")
    assert (tmp_path / "gate-2026.2.md").read_text().startswith("## Release gate")
    home = tmp_path / "site" / "index.html"
    assert out[-1] == f"home page: {home.resolve()}"
    assert (
        tmp_path / "site" / "meter-failure" / "compare" / "2026.1-to-2026.2" / "index.html"
    ).exists()
    assert (
        json.loads(
            (tmp_path / "archive" / "meter-failure" / "2026.2" / "analysis.json").read_text()
        )["release"]
        == "2026.2"
    )


@pytest.mark.parametrize("address", ["10.0.0.5:8786", "tcp://10.0.0.5", "http://10.0.0.5:8786"])
def test_audit_refuses_a_scheduler_address_it_cannot_use(tmp_path, capsys, address):
    config = write_demo_project(tmp_path / "project", 300, seed=7)
    argv = ["audit", str(config), "--out", str(tmp_path / "b"), "--scheduler", address, "--quiet"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "--scheduler must be a Dask scheduler address tcp://HOST:PORT" in err
    assert f"got {address!r}." in err
    assert not (tmp_path / "b").exists()
