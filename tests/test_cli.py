"""The ``topoaudit`` command as a user runs it."""

from __future__ import annotations

import json

from topoaudit.cli import main


def test_check_prints_the_table_and_exits_zero(capsys):
    assert main(["check", "circle", "--stated-only"]) == 0
    out = capsys.readouterr().out
    assert "| circle |" in out
    assert "1 of 1 reference cases pass." in out


def test_check_unknown_case_is_a_clear_error(capsys):
    assert main(["check", "circel"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("topoaudit: error: Unknown reference case 'circel'")


def test_demo_prints_a_summary_and_writes_node_link_json(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--rows", "1500"]) == 0
    out = capsys.readouterr().out
    assert "nodes" in out and "cycle rank" in out
    assert f"node-link JSON written to {tmp_path / 'graph.json'}" in out
    doc = json.loads((tmp_path / "graph.json").read_text())
    assert doc["n_rows"] == 1500
    assert doc["nodes"] and "members" not in doc["nodes"][0]
