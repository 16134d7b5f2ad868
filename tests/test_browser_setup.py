"""``.ci/browser.py``: make test finds Chromium, installs it, or stops with one line.

A machine without Chromium is stood for by pointing the script at paths that do not
exist (``TOPOAUDIT_BROWSER_SEARCH``) and by taking apt-get off ``PATH`` or turning
installs off (``TOPOAUDIT_BROWSER_INSTALL``); nothing here installs anything.
"""

from __future__ import annotations

import importlib.util
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / ".ci" / "browser.py"
PLAYWRIGHT = f"{sys.executable} -m playwright install chromium"


@pytest.fixture
def setup(monkeypatch, tmp_path):
    """The script as a module, run in ``tmp_path``, with no apt-get on ``PATH``."""
    spec = importlib.util.spec_from_file_location("browser_setup", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("PATH", str(tmp_path / "no-bin"))
    for name in ("TOPOAUDIT_BROWSER_SEARCH", "TOPOAUDIT_BROWSER_INSTALL"):
        monkeypatch.delenv(name, raising=False)
    return module


def _fake_chromium(path: Path) -> str:
    """An executable that answers --version as Chromium does."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("#!/bin/sh\necho 'Chromium 120.0.0.0 built on Debian'\n", encoding="utf-8")
    path.chmod(0o755)
    return str(path)


def _run(env: dict[str, str], *command: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        list(command), cwd=ROOT, env=env, capture_output=True, text=True, timeout=300, check=False
    )


def _no_chromium_env(tmp_path: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTEST_", "TOPOAUDIT_"))}
    env["TOPOAUDIT_BROWSER_SEARCH"] = str(tmp_path / "no-such" / "chromium")
    env["TOPOAUDIT_BROWSER_INSTALL"] = "download"
    # python and make stay reachable by their full paths; apt-get does not
    env["PATH"] = str(tmp_path / "no-bin")
    env["PYTHONDONTWRITEBYTECODE"] = "1"
    return env


def test_without_chromium_the_script_prints_one_line_and_exits_1(tmp_path):
    env = _no_chromium_env(tmp_path)
    env["TOPOAUDIT_BROWSER_INSTALL"] = ""
    done = _run(env, sys.executable, str(SCRIPT))
    assert done.returncode == 1
    assert done.stdout == ""
    assert done.stderr == (
        "make test needs Chromium for its browser tests and found none (installing is turned "
        f"off (TOPOAUDIT_BROWSER_INSTALL)); run: {PLAYWRIGHT}\n"
    )


@pytest.mark.skipif(
    not (Path("/usr/bin/make").exists() and (ROOT / ".venv" / "bin" / "python").exists()),
    reason="needs make and the project's .venv, as make test has",
)
def test_make_test_stops_before_any_test_runs_when_no_chromium_can_be_had(tmp_path):
    env = _no_chromium_env(tmp_path)
    env["TOPOAUDIT_BROWSER_INSTALL"] = ""
    # should the script let make go on, pytest would only collect (no recursion into the suite)
    env["PYTEST_ADDOPTS"] = "--collect-only -q"
    # -o: take the venv as it is, whatever the dates of pyproject.toml and the stamp
    done = _run(env, "/usr/bin/make", "-o", ".venv/.installed", "test")
    assert done.returncode != 0
    assert "test session starts" not in done.stdout and "collected" not in done.stdout
    assert "All checks passed" not in done.stdout  # not even ruff ran
    ours = [line for line in done.stderr.splitlines() if not line.startswith(("make: ", "make["))]
    assert ours == [
        "make test needs Chromium for its browser tests and found none (installing is turned "
        f"off (TOPOAUDIT_BROWSER_INSTALL)); run: {PLAYWRIGHT}"
    ]


def test_a_chromium_that_runs_is_used_and_nothing_is_installed(setup, monkeypatch, tmp_path):
    found = _fake_chromium(tmp_path / "bin" / "chromium")
    monkeypatch.setenv("TOPOAUDIT_BROWSER_SEARCH", f"{tmp_path}/missing:{found}")
    monkeypatch.setattr(setup, "has_font", lambda: True)
    monkeypatch.setattr(setup, "_apt_install", lambda: pytest.fail("nothing to install"))
    assert setup.find_browser() == found


def test_a_file_that_is_not_a_browser_is_passed_over(setup, monkeypatch, tmp_path):
    junk = tmp_path / "bin" / "chromium"
    junk.parent.mkdir()
    junk.write_text("#!/bin/sh\nexit 3\n", encoding="utf-8")
    junk.chmod(0o755)
    assert not setup.runs(str(junk))
    assert not setup.runs(str(tmp_path / "missing"))


def test_apt_as_root_installs_and_the_installed_browser_is_used(setup, monkeypatch, tmp_path):
    target = tmp_path / "usr" / "bin" / "chromium"
    monkeypatch.setenv("TOPOAUDIT_BROWSER_SEARCH", str(target))
    monkeypatch.setenv("TOPOAUDIT_BROWSER_INSTALL", "apt")
    monkeypatch.setattr(setup, "has_font", lambda: target.exists())
    monkeypatch.setattr(setup, "_apt_install", lambda: _fake_chromium(target) and None)
    assert setup.find_browser() == str(target)


def test_apt_without_root_names_the_sudo_command(setup, monkeypatch, tmp_path):
    (tmp_path / "no-bin").mkdir()
    _fake_chromium(tmp_path / "no-bin" / "apt-get")  # apt-get present, but not root
    monkeypatch.setattr(setup.os, "geteuid", lambda: 1000)
    monkeypatch.setenv("TOPOAUDIT_BROWSER_SEARCH", str(tmp_path / "missing"))
    monkeypatch.setenv("TOPOAUDIT_BROWSER_INSTALL", "apt")
    with pytest.raises(setup.SetupError) as caught:
        setup.find_browser()
    assert str(caught.value) == (
        "make test needs Chromium for its browser tests and found none (apt: apt-get needs "
        "root); run: sudo apt-get update && sudo apt-get install -y chromium fonts-dejavu-core"
    )


def test_each_failed_install_is_named_in_the_line(setup, monkeypatch, tmp_path):
    monkeypatch.setenv("TOPOAUDIT_BROWSER_SEARCH", str(tmp_path / "missing"))
    monkeypatch.setenv("TOPOAUDIT_BROWSER_INSTALL", "apt,download")
    monkeypatch.setenv("PLAYWRIGHT_BROWSERS_PATH", str(tmp_path / "browsers"))
    monkeypatch.setattr(setup, "_download", lambda: "the download failed with exit status 1")
    with pytest.raises(setup.SetupError) as caught:
        setup.find_browser()
    assert str(caught.value) == (
        "make test needs Chromium for its browser tests and found none (apt: apt-get is not "
        "on this machine; download: the download failed with exit status 1); run: "
        f"{PLAYWRIGHT}"
    )


def test_a_browser_without_the_baseline_font_is_still_used(setup, monkeypatch, tmp_path, capsys):
    found = _fake_chromium(tmp_path / "bin" / "chromium")
    monkeypatch.setenv("TOPOAUDIT_BROWSER_SEARCH", found)
    monkeypatch.setattr(setup, "has_font", lambda: False)
    assert setup.find_browser() == found
    assert capsys.readouterr().err == (
        f"browser setup: using {found}, although the DejaVuSans.ttf font of the screenshot "
        "baselines is missing\n"
    )


def test_an_unknown_install_method_is_named(setup, monkeypatch):
    monkeypatch.setenv("TOPOAUDIT_BROWSER_INSTALL", "apt,brew")
    with pytest.raises(setup.SetupError) as caught:
        setup.find_browser()
    assert str(caught.value) == (
        "TOPOAUDIT_BROWSER_INSTALL names ['brew']; accepted are ['apt', 'download'], "
        "comma-separated, or empty for none."
    )
