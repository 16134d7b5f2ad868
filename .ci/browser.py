"""Find the Chromium that the browser tests drive, installing it when it is missing.

Run by ``make test`` before any test (``.venv/bin/python .ci/browser.py``). On success it
prints the browser's path on stdout, which the Makefile hands to the tests as
``TOPOAUDIT_CHROMIUM``, and exits 0. When no browser is found it tries, in order:

* ``apt``: Debian's ``chromium`` and ``fonts-dejavu-core`` (the fonts the screenshot
  baselines were made with), with ``apt-get update`` first; only as root with apt-get;
* ``download``: Playwright's own browser download (``python -m playwright install
  chromium``); only where the network allows it.

When none of them gives a browser it prints one line naming the command to run and exits
1, so ``make test`` stops before pytest starts. Messages go to stderr.

Two environment variables change where it looks and what it may do (the tests of this
script use them to stand for a machine without Chromium):

``TOPOAUDIT_BROWSER_SEARCH``
    colon-separated paths tried in order (default: the usual places of Debian's Chromium
    and of Playwright's downloads).
``TOPOAUDIT_BROWSER_INSTALL``
    comma-separated install methods tried in order, from ``apt`` and ``download``
    (default ``apt,download``; empty: install nothing).
"""

from __future__ import annotations

import glob
import os
import shutil
import subprocess
import sys
from collections.abc import Callable, Sequence
from pathlib import Path

__all__ = ["find_browser", "main"]

APT_PACKAGES = ("chromium", "fonts-dejavu-core")
APT_COMMAND = "apt-get update && apt-get install -y " + " ".join(APT_PACKAGES)
DEFAULT_SEARCH = ("/usr/bin/chromium", "/usr/bin/chromium-browser", "/usr/lib/chromium/chromium")
METHODS = ("apt", "download")
#: the font the screenshot baselines were drawn with
FONT_NAME = "DejaVuSans.ttf"
FONT_DIRS = ("/usr/share/fonts", "/usr/local/share/fonts", "~/.local/share/fonts", "~/.fonts")
LOG = Path("build") / "browser-install.log"


class SetupError(Exception):
    """No browser and no way to install one; the message is the one line to print."""


def _say(message: str) -> None:
    print(f"browser setup: {message}", file=sys.stderr, flush=True)


def _playwright_downloads() -> list[str]:
    default = os.path.expanduser("~/.cache/ms-playwright")
    root = os.environ.get("PLAYWRIGHT_BROWSERS_PATH") or default
    found = []
    for pattern in ("chromium-*/chrome-linux/chrome", "chromium-*/chrome-linux64/chrome"):
        found += sorted(glob.glob(os.path.join(root, pattern)), reverse=True)
    return found


def search_paths() -> list[str]:
    """The paths tried, in order (see the module docstring)."""
    given = os.environ.get("TOPOAUDIT_BROWSER_SEARCH")
    if given is not None:
        return [p for p in given.split(":") if p]
    return [*DEFAULT_SEARCH, *_playwright_downloads()]


def install_methods() -> list[str]:
    """The install methods allowed, in order (see the module docstring)."""
    given = os.environ.get("TOPOAUDIT_BROWSER_INSTALL")
    if given is None:
        return list(METHODS)
    methods = [m.strip() for m in given.split(",") if m.strip()]
    unknown = [m for m in methods if m not in METHODS]
    if unknown:
        msg = (
            f"TOPOAUDIT_BROWSER_INSTALL names {unknown}; accepted are {list(METHODS)}, "
            "comma-separated, or empty for none."
        )
        raise SetupError(msg)
    return methods


def runs(path: str) -> bool:
    """Whether ``path`` is an executable that answers ``--version`` as a Chromium."""
    if not (os.path.isfile(path) and os.access(path, os.X_OK)):
        return False
    try:
        done = subprocess.run(
            [path, "--version"], capture_output=True, text=True, timeout=60, check=False
        )
    except (OSError, subprocess.TimeoutExpired):
        return False
    return done.returncode == 0 and "chrom" in done.stdout.lower()


def has_font() -> bool:
    """Whether the DejaVu Sans font of the screenshot baselines is installed."""
    for folder in FONT_DIRS:
        root = os.path.expanduser(folder)
        for _dir, _subdirs, names in os.walk(root):
            if FONT_NAME in names:
                return True
    return False


def _first(paths: Sequence[str], check: Callable[[str], bool]) -> str | None:
    return next((p for p in paths if check(p)), None)


def _apt_install() -> str | None:
    """Install the Debian packages; return None, or why it could not be done."""
    if shutil.which("apt-get") is None:
        return "apt-get is not on this machine"
    if os.geteuid() != 0:
        return "apt-get needs root"
    LOG.parent.mkdir(parents=True, exist_ok=True)
    _say(f"installing Debian's {' and '.join(APT_PACKAGES)} with apt-get (log: {LOG})")
    env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
    with LOG.open("a", encoding="utf-8") as log:
        for cmd in (["apt-get", "update"], ["apt-get", "install", "-y", *APT_PACKAGES]):
            log.write(f"$ {' '.join(cmd)}\n")
            log.flush()
            code = subprocess.run(cmd, stdout=log, stderr=log, env=env, check=False).returncode
            if code != 0:
                return f"'{' '.join(cmd)}' failed with exit status {code} (see {LOG})"
    return None


def _download() -> str | None:
    """Playwright's own download of its Chromium; return None, or why it failed."""
    try:
        import playwright  # noqa: F401
    except ImportError:
        return "the Python package playwright is not installed"
    LOG.parent.mkdir(parents=True, exist_ok=True)
    _say(f"downloading Playwright's Chromium (log: {LOG})")
    cmd = [sys.executable, "-m", "playwright", "install", "chromium"]
    with LOG.open("a", encoding="utf-8") as log:
        log.write(f"$ {' '.join(cmd)}\n")
        log.flush()
        try:
            code = subprocess.run(cmd, stdout=log, stderr=log, timeout=600, check=False).returncode
        except (OSError, subprocess.TimeoutExpired) as exc:
            return f"the download could not run ({exc}; see {LOG})"
    return None if code == 0 else f"the download failed with exit status {code} (see {LOG})"


def _advice(why: list[str]) -> str:
    """The one command a person can run, given why each install method failed."""
    reasons = "; ".join(why) if why else "installing is turned off (TOPOAUDIT_BROWSER_INSTALL)"
    if shutil.which("apt-get") is not None:
        sudo = "" if os.geteuid() == 0 else "sudo "
        command = f"{sudo}apt-get update && {sudo}apt-get install -y " + " ".join(APT_PACKAGES)
    else:
        command = f"{sys.executable} -m playwright install chromium"
    return (
        f"make test needs Chromium for its browser tests and found none ({reasons}); run: {command}"
    )


def find_browser() -> str:
    """Return the path of a Chromium that runs, installing one if allowed and needed.

    Raises
    ------
    SetupError
        When none is found and none could be installed; the message is one line that
        names the command to run.
    """
    methods = install_methods()
    paths = search_paths()
    found = _first(paths, runs)
    if found is not None and (has_font() or "apt" not in methods):
        return found
    why = []
    for method in methods:
        if method == "download" and found is not None:
            continue  # a browser without the baseline font: only apt brings the font
        try:
            failed = _apt_install() if method == "apt" else _download()
        except OSError as exc:  # the log cannot be written, the command cannot start
            failed = f"{exc.strerror or exc}: {exc.filename or ''}".rstrip(": ")
        if method == "apt":
            extra = [p for p in (shutil.which("chromium"),) if p]
        else:
            extra = _playwright_downloads()
        if failed is not None:
            why.append(f"{method}: {failed}")
            continue
        found = _first([*paths, *extra], runs)
        if found is not None:
            return found
        why.append(f"{method}: it ran, but no Chromium that starts is at {paths + extra}")
    if found is not None:
        _say(f"using {found}, although the {FONT_NAME} font of the screenshot baselines is missing")
        return found
    raise SetupError(_advice(why))


def main() -> int:
    try:
        path = find_browser()
    except SetupError as exc:
        print(exc, file=sys.stderr, flush=True)
        return 1
    print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
