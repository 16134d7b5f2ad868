"""Measuring helpers shared by the benchmarks: peak memory, the machine's other load, one
configuration per fresh subprocess, and the line that names the machine.

Linux figures come from ``/proc``; elsewhere the functions that need it return None.
"""

from __future__ import annotations

import json
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np

ROOT = Path(__file__).resolve().parents[2]


def rss_mb(usage: resource.struct_rusage) -> float:
    """``ru_maxrss`` in MiB (Linux reports KiB, macOS bytes)."""
    scale = 2**20 if sys.platform == "darwin" else 2**10
    return usage.ru_maxrss / scale


def current_rss_mb() -> float | None:
    """Resident memory of this process now, in MiB (Linux only, else None)."""
    try:
        pages = int(Path("/proc/self/statm").read_text().split()[1])
    except (OSError, IndexError, ValueError):
        return None
    return pages * os.sysconf("SC_PAGE_SIZE") / 2**20


def cpu_seconds() -> float | None:
    """CPU seconds all processes of the machine have used (Linux ``/proc/stat``, else None)."""
    try:
        fields = [int(v) for v in Path("/proc/stat").read_text().split("\n")[0].split()[1:]]
    except (OSError, ValueError, IndexError):
        return None
    busy = sum(fields[:8]) - fields[3] - fields[4]  # all but idle and iowait; no guest time
    return busy / os.sysconf("SC_CLK_TCK")


def busy_cores(seconds: float = 0.5) -> float | None:
    """Cores kept busy by all processes over the next ``seconds``."""
    start = cpu_seconds()
    time.sleep(seconds)
    stop = cpu_seconds()
    return None if start is None or stop is None else (stop - start) / seconds


def wait_until_quiet(max_wait: float, threshold: float = 0.25) -> float | None:
    """Wait (at most ``max_wait`` s) until other processes keep under ``threshold`` cores
    busy; return the last figure measured."""
    deadline = time.monotonic() + max_wait
    busy = busy_cores()
    while busy is not None and busy > threshold and time.monotonic() < deadline:
        time.sleep(2.0)
        busy = busy_cores()
    return busy


def children_cpu_seconds() -> float:
    """CPU seconds of this process's reaped children."""
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def load_average() -> tuple[float, float, float] | None:
    """The 1, 5 and 15 minute load averages of ``/proc/loadavg`` (None where absent)."""
    try:
        one, five, fifteen = Path("/proc/loadavg").read_text().split()[:3]
    except (OSError, ValueError):
        return None
    return float(one), float(five), float(fifteen)


def spawn(module: str, config: dict[str, Any]) -> dict[str, Any]:
    """Run ``python -m module --child <config as JSON>`` in a fresh subprocess.

    The child prints its measurements as one JSON line (the last line starting with
    ``{`` is read). Besides those, records how many cores other processes of the machine
    kept busy meanwhile: machine CPU time less the subprocess's (and its reaped
    workers'), over the wall time, as ``others_during``. A failed child gives
    ``{**config, "error": <last line of its stderr>}``.
    """
    cmd = [sys.executable, "-m", module, "--child", json.dumps(config)]
    cpu0, own0, t0 = cpu_seconds(), children_cpu_seconds(), time.perf_counter()
    proc = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, check=False)
    cpu1, own1, t1 = cpu_seconds(), children_cpu_seconds(), time.perf_counter()
    others = None
    if cpu0 is not None and cpu1 is not None:
        others = max(0.0, ((cpu1 - cpu0) - (own1 - own0)) / max(t1 - t0, 1e-9))
    lines = [line for line in proc.stdout.splitlines() if line.startswith("{")]
    if proc.returncode != 0 or not lines:
        return {**config, "error": (proc.stderr.strip().splitlines() or ["no output"])[-1]}
    return {**json.loads(lines[-1]), "others_during": others}


def fmt(value: float | None, digits: int = 2) -> str:
    """``value`` with ``digits`` decimals, or ``n/a``."""
    return "n/a" if value is None else f"{value:.{digits}f}"


def environment() -> str:
    """One line naming the platform, the usable cores and the numeric libraries."""
    import scipy
    import sklearn

    try:
        cores = len(os.sched_getaffinity(0))
    except AttributeError:
        cores = os.cpu_count()
    return (
        f"{platform.platform()}, {platform.processor() or platform.machine()}, {cores} cores "
        f"usable; Python {platform.python_version()}, numpy {np.__version__}, "
        f"scipy {scipy.__version__}, scikit-learn {sklearn.__version__}"
    )
