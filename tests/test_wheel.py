"""The wheel holds every package and the site template, and works outside the source tree.

``test_packaging_lists_every_package`` reads pyproject.toml only. The slow test builds the
wheel from a copy of the project's files, installs it with its dependencies into a new
virtual environment under ``tmp_path`` (scikit-learn-extra built from source against
numpy 2, as the Makefile does) and runs ``topoaudit check`` and ``topoaudit demo`` there,
from a folder outside the checkout and with no ``PYTHON*`` variables, so nothing can be
imported from src/. It needs the package index or pip's cache: the first run builds
scikit-learn-extra (about 70 s), later runs take it from pip's cache.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tomllib
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
TEMPLATE_PACKAGE = "topoaudit._site_template"
# what the build reads; the rest of the checkout (tests, build outputs) stays out of it
PROJECT_FILES = (
    "pyproject.toml",
    "README.md",
    "LICENSE",
    "src",
    "reference_checks",
    "site_template",
)


def _wheel_files(root: Path = ROOT) -> dict[str, Path]:
    """Path inside the wheel -> file under ``root``, for every module and template file."""
    files = {}
    for top in (root / "src" / "topoaudit", root / "reference_checks"):
        for module in top.rglob("*.py"):
            files[module.relative_to(top.parent).as_posix()] = module
    template = root / "site_template"
    for path in template.rglob("*"):
        if path.is_file():
            files[f"topoaudit/_site_template/{path.relative_to(template).as_posix()}"] = path
    return files


def _packages_on_disk() -> set[str]:
    """Dotted names of the packages the wheel must hold, from the folders on disk."""
    return {".".join(Path(name).parent.parts) for name in _wheel_files()}


def test_packaging_lists_every_package():
    setuptools = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"][
        "setuptools"
    ]
    assert set(setuptools["packages"]) == _packages_on_disk(), (
        "[tool.setuptools] packages in pyproject.toml must list every folder of modules "
        "under src/ and reference_checks/, and every folder of site_template/"
    )
    assert setuptools["package-dir"][TEMPLATE_PACKAGE] == "site_template"


def _run(command: list[str | Path], cwd: Path, timeout: float = 900) -> str:
    """Run ``command`` with no PYTHON* or VIRTUAL_ENV variables; fail with its output."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    env.pop("VIRTUAL_ENV", None)
    done = subprocess.run(
        [str(c) for c in command],
        cwd=cwd,
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
        check=False,
    )
    output = done.stdout + done.stderr
    assert done.returncode == 0, (
        f"{' '.join(map(str, command))} exited {done.returncode}:\n{output}"
    )
    return output


@pytest.mark.slow
def test_wheel_installs_and_runs_outside_the_source_tree(tmp_path):
    source = tmp_path / "source"
    source.mkdir()
    for name in PROJECT_FILES:
        if (ROOT / name).is_dir():
            ignore = shutil.ignore_patterns("__pycache__", "*.egg-info")
            shutil.copytree(ROOT / name, source / name, ignore=ignore)
        else:
            shutil.copy2(ROOT / name, source / name)
    # an isolated build: it gets the setuptools that pyproject.toml asks for
    _run(
        [sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "-w", "dist", source],
        tmp_path,
    )
    (wheel,) = (tmp_path / "dist").glob("topoaudit-*.whl")
    with zipfile.ZipFile(wheel) as archive:
        names = set(archive.namelist())
        expected = _wheel_files(source)  # the copy: others may edit the checkout meanwhile
        assert sorted(set(expected) - names) == []
        for name, path in expected.items():
            assert archive.read(name) == path.read_bytes(), name

    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", venv], tmp_path)
    python, work = venv / "bin" / "python", tmp_path / "work"
    work.mkdir()
    # this pip, installing into the new environment; no byte-compiling of every dependency
    pip = [sys.executable, "-m", "pip", "--python", python, "install", "--quiet", "--no-compile"]
    _run([*pip, "numpy>=2.0", "scikit-learn>=1.5", "cython", "setuptools", "wheel"], work)
    _run(
        [*pip, "--no-build-isolation", "--no-binary", "scikit-learn-extra", "scikit-learn-extra"],
        work,
    )
    _run([*pip, wheel], work)

    where = _run(
        [
            python,
            "-c",
            "import reference_checks, sklearn_extra.cluster, topoaudit\n"
            "from topoaudit.report.site import _template_dir\n"
            "print(topoaudit.__file__, reference_checks.__file__, _template_dir(), sep='\\n')",
        ],
        work,
    )
    for line in where.splitlines():
        assert Path(line).is_relative_to(venv), f"{line} is not inside the new environment"

    topoaudit = venv / "bin" / "topoaudit"
    assert "1 of 1 reference cases pass" in _run(
        [topoaudit, "check", "circle", "--stated-only"], work
    )
    _run([topoaudit, "demo", "--out", work / "demo", "--rows", "1500", "--quiet"], work)
    site = work / "demo" / "site"
    assert (site / "index.html").is_file()
    assert (site / "assets" / "topoaudit.css").read_bytes() == (
        source / "site_template" / "assets" / "topoaudit.css"
    ).read_bytes()
