"""Comparison helpers of the visual suite: normalised specs and images with a tolerance.

Set ``TOPOAUDIT_UPDATE_BASELINES=1`` (``make baselines``) to rewrite the baselines instead
of comparing; review the changed files in the diff before committing them.

Image tolerance: a pixel counts as changed when any of its channels differs by more than
``PIXEL_THRESHOLD`` (out of 255); an image passes when at most ``MAX_CHANGED_SHARE`` of
its pixels changed and its size is the same.
"""

from __future__ import annotations

import difflib
import io
import json
import os
import re
from pathlib import Path
from typing import Any

import numpy as np
from PIL import Image

HERE = Path(__file__).parent
BASELINES = HERE / "baselines"
FAILURES = Path(
    os.environ.get("TOPOAUDIT_VISUAL_FAILURES", HERE.parent.parent / "build" / "visual-failures")
)
PIXEL_THRESHOLD = 24
MAX_CHANGED_SHARE = 0.002


def updating() -> bool:
    return os.environ.get("TOPOAUDIT_UPDATE_BASELINES") == "1"


def normalise_spec(spec: dict[str, Any]) -> dict[str, Any]:
    """The spec with generated dataset names replaced by ``data-0``, ``data-1``... in
    order of first appearance, so a snapshot changes only when the chart does."""
    text = json.dumps(spec, sort_keys=True)
    names: dict[str, str] = {}
    for found in re.findall(r'"(data-[0-9a-f]{32})"', text):
        names.setdefault(found, f"data-{len(names)}")
    for old, new in names.items():
        text = text.replace(old, new)
    return json.loads(text)


def check_spec(name: str, spec: dict[str, Any]) -> None:
    """Compare a spec with its snapshot; the failure message is the JSON diff."""
    path = BASELINES / "specs" / f"{name}.json"
    text = json.dumps(normalise_spec(spec), sort_keys=True, indent=1) + "\n"
    if updating() or not path.exists():
        if not updating():
            raise AssertionError(f"no snapshot {path}; run `make baselines` and review it")
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        return
    expected = path.read_text(encoding="utf-8")
    if text != expected:
        diff = "".join(
            difflib.unified_diff(
                expected.splitlines(True),
                text.splitlines(True),
                f"snapshot {name}",
                f"current {name}",
                n=2,
            )
        )
        raise AssertionError(f"spec of {name} differs from {path}:\n{diff[:6000]}")


def changed_share(a: Image.Image, b: Image.Image) -> float:
    """Share of pixels whose largest channel difference exceeds the threshold."""
    x = np.asarray(a.convert("RGBA"), dtype=np.int16)
    y = np.asarray(b.convert("RGBA"), dtype=np.int16)
    if x.shape != y.shape:
        return 1.0
    return float(np.mean(np.abs(x - y).max(axis=2) > PIXEL_THRESHOLD))


def check_image(kind: str, name: str, png: bytes) -> float:
    """Compare PNG bytes with the baseline ``baselines/<kind>/<name>.png``; on failure,
    write the actual image and a diff image to a folder that the message names."""
    path = BASELINES / kind / f"{name}.png"
    actual = Image.open(io.BytesIO(png))
    if updating() or not path.exists():
        if not updating():
            raise AssertionError(f"no baseline {path}; run `make baselines` and review it")
        path.parent.mkdir(parents=True, exist_ok=True)
        actual.save(path)
        return 0.0
    expected = Image.open(path)
    share = changed_share(actual, expected)
    if share > MAX_CHANGED_SHARE:
        out = FAILURES / kind
        out.mkdir(parents=True, exist_ok=True)
        actual.save(out / f"{name}.actual.png")
        if actual.size == expected.size:
            x = np.asarray(actual.convert("RGB"), dtype=np.int16)
            y = np.asarray(expected.convert("RGB"), dtype=np.int16)
            mask = np.abs(x - y).max(axis=2) > PIXEL_THRESHOLD
            diff = np.asarray(expected.convert("RGB")).copy() // 3 + 170
            diff[mask] = [200, 0, 90]
            Image.fromarray(diff.astype(np.uint8)).save(out / f"{name}.diff.png")
        size = (
            ""
            if actual.size == expected.size
            else (f" (size {actual.size} against {expected.size})")
        )
        raise AssertionError(
            f"{kind}/{name}: {share:.2%} of pixels changed{size}, more than "
            f"{MAX_CHANGED_SHARE:.2%}; actual and diff images written to {out}"
        )
    return share
