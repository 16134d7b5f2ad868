"""The full audit at scale: time, peak memory and share per step against rows, and the
same audit on a two-worker Dask cluster on this machine against local processes.

Run ``python -m tests.benchmarks.scale`` from the repository root (``make bench`` does).
Each audit runs in a fresh subprocess of this module (``--child``) on the planted-pocket
simulation's curved pocket (``reference_checks.planted_pockets``), 12 features, the
config's default settings, and prints one JSON line: the wall time of each of the
audit's steps (from its progress messages) and in all. The parent samples the resident
memory of the child and of every process under it (and of the cluster's processes, for
the Dask run) every 0.2 s; peak memory is the largest sum seen (pages shared between
processes, such as the rows mapped by the local workers, count once per process, so it
is an upper bound).

Two tables:

1. the audit at each ``--rows`` on local processes (the default: one per core), with
   the exponent ``b`` of ``time = a * rows^b`` fitted by least squares on the logarithms;
2. at ``--cluster-rows`` rows, in one run: serially (``[compute] workers = 1``), on local
   processes and on a Dask cluster of two workers of one thread each started here with
   ``dask scheduler`` and ``dask worker``; the stability reruns' stage is compared with
   the serial run's.

Figures are measured once on the machine at hand and reported as they are, with ratios
taken within the same run; nothing here asserts a time. ``--rows 20000 50000
--cluster-rows 20000`` is a quick run.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import re
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

import numpy as np

from tests.benchmarks.measure import ROOT, environment, load_average

DEFAULT_ROWS = (100_000, 300_000, 1_000_000)
CLUSTER_ROWS = 100_000
N_FEATURES = 12
STEP_NAMES = {
    1: "graph",
    2: "shape resamples",
    3: "metrics",
    4: "search",
    5: "weak regions",
    6: "stability reruns",
    7: "settings grid",
    8: "comparison",
}
BIN = Path(sys.executable).parent


# -- the child: one audit --------------------------------------------------------------------


def _child(spec: dict[str, Any]) -> None:
    import pandas as pd

    from reference_checks.planted_pockets import simulate
    from topoaudit.audit.run import run_audit
    from topoaudit.config import parse_config
    from topoaudit.mapper.executor import ProcessExecutor

    n_rows = int(spec["rows"])
    sim = simulate("curved", n_rows, n_features=N_FEATURES, seed=11)
    frame = pd.DataFrame(sim.X, columns=[f"x{i}" for i in range(N_FEATURES)])
    frame.insert(0, "row", np.arange(n_rows))
    frame["y"] = sim.y
    frame["score"] = sim.score
    path = Path(spec["folder"]) / "rows.parquet"
    frame.to_parquet(path)
    del frame, sim
    config = parse_config(
        {
            "model": "bench",
            "data": {"path": str(path), "id": "row", "target": "y"},
            "release": [{"name": "r1", "score": "score"}],
        }
    )
    marks: list[tuple[float, int]] = []
    start = time.perf_counter()

    def say(message: str) -> None:
        found = re.match(r"step (\d+) of", message)
        if found:
            marks.append((time.perf_counter() - start, int(found.group(1))))
        print(f"  {time.perf_counter() - start:7.1f} s  {message}", file=sys.stderr, flush=True)

    audit = run_audit(config, progress=say, executor=spec["executor"])
    took = time.perf_counter() - start
    ProcessExecutor.shutdown()
    steps: dict[int, float] = {}
    firsts = sorted({k: t for t, k in reversed(marks)}.items(), key=lambda kv: kv[1])
    for i, (k, t) in enumerate(firsts):
        end = firsts[i + 1][1] if i + 1 < len(firsts) else took
        steps[k] = steps.get(k, 0.0) + end - t
    doc = {
        "seconds": took,
        "steps": {STEP_NAMES[k]: s for k, s in sorted(steps.items())},
        "weak": len(audit.analysis.weak_regions),
        "reruns": len(audit.analysis.stability.runs),
    }
    print(json.dumps(doc))


# -- the parent: memory, the cluster, the tables -------------------------------------------


class PeakMemory:
    """The largest sum of resident memory of some processes and all under them, sampled
    every ``interval`` seconds in a thread."""

    def __init__(self, pids: list[int], interval: float = 0.2) -> None:
        self.pids = pids
        self.interval = interval
        self.peak_mib = 0.0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _total(self) -> float:
        import psutil

        total = 0
        for pid in self.pids:
            try:
                root = psutil.Process(pid)
                for proc in [root, *root.children(recursive=True)]:
                    with contextlib.suppress(psutil.Error):
                        total += proc.memory_info().rss
            except psutil.Error:
                continue
        return total / 2**20

    def _run(self) -> None:
        while not self._stop.is_set():
            self.peak_mib = max(self.peak_mib, self._total())
            self._stop.wait(self.interval)

    def __enter__(self) -> PeakMemory:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join(timeout=5)


def run_child(rows: int, executor: Any, watch: list[int] = ()) -> dict[str, Any]:
    """One audit in a fresh subprocess; its figures with ``peak_mib``."""
    with tempfile.TemporaryDirectory() as folder:
        spec = {"rows": rows, "executor": executor, "folder": folder}
        cmd = [sys.executable, "-m", "tests.benchmarks.scale", "--child", json.dumps(spec)]
        proc = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.PIPE, stderr=sys.stderr, text=True)
        with PeakMemory([proc.pid, *watch]) as memory:
            out, _ = proc.communicate()
    lines = [line for line in out.splitlines() if line.startswith("{")]
    if proc.returncode != 0 or not lines:
        raise RuntimeError(f"the audit of {rows} rows on {executor} failed ({proc.returncode})")
    return {**json.loads(lines[-1]), "peak_mib": memory.peak_mib, "rows": rows}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def local_cluster(folder: Path, n_workers: int = 2):
    """``dask scheduler`` and ``n_workers`` ``dask worker`` processes of one thread each on
    127.0.0.1, as the README starts them; yields (address, their pids); stops them all."""
    address = f"tcp://127.0.0.1:{_free_port()}"
    port = address.rsplit(":", 1)[1]
    commands = [["scheduler", "--host", "127.0.0.1", "--port", port]]
    commands += [
        ["worker", address, "--nthreads", "1", "--host", "127.0.0.1", "--local-directory",
         str(folder / f"w{i}")]
        for i in range(n_workers)
    ]  # fmt: skip
    procs = []
    try:
        for args in commands:
            log = (folder / f"{args[0]}-{len(procs)}.log").open("ab")
            procs.append(
                subprocess.Popen(
                    [str(BIN / "dask"), *args, "--no-dashboard"],
                    stdout=log,
                    stderr=subprocess.STDOUT,
                    start_new_session=True,
                )
            )
            log.close()
        from distributed import Client

        with Client(address, timeout=60, set_as_default=False) as client:
            client.wait_for_workers(n_workers, timeout=120)
        yield address, [p.pid for p in procs]
    finally:
        for proc in reversed(procs):
            with contextlib.suppress(ProcessLookupError):
                os.killpg(proc.pid, signal.SIGTERM)
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=10)


def exponent(rows: list[int], seconds: list[float]) -> float | None:
    """``b`` of ``seconds = a * rows^b``, least squares on the logarithms."""
    if len(rows) < 2:
        return None
    return float(np.polyfit(np.log(rows), np.log(seconds), 1)[0])


def _steps_table(results: list[dict[str, Any]], label) -> list[str]:
    names = [n for n in STEP_NAMES.values() if any(n in r["steps"] for r in results)]
    lines = [
        "| " + " | ".join(["run", "wall s", "peak MiB", *(f"{n} s (share)" for n in names)]) + " |",
        "|" + "---|" * (3 + len(names)),
    ]
    for r in results:
        cells = [label(r), f"{r['seconds']:.1f}", f"{r['peak_mib']:.0f}"]
        for n in names:
            s = r["steps"].get(n)
            cells.append("" if s is None else f"{s:.1f} ({s / r['seconds']:.0%})")
        lines.append("| " + " | ".join(cells) + " |")
    return lines


def scaling(rows: list[int]) -> list[str]:
    results = []
    for n in rows:
        print(f"audit of {n:,} rows on local processes", file=sys.stderr, flush=True)
        results.append(run_child(n, None))
    b = exponent([r["rows"] for r in results], [r["seconds"] for r in results])
    lines = [
        f"### Full audit, default settings, {N_FEATURES} features, local processes",
        "",
        *_steps_table(results, lambda r: f"{r['rows']:,} rows"),
        "",
        f"Weak regions found: {', '.join(str(r['weak']) for r in results)}; stability "
        f"reruns: {', '.join(str(r['reruns']) for r in results)}.",
    ]
    if b is not None:
        lo, hi = min(rows), max(rows)
        lines += ["", f"Fitted exponent of time against rows, {lo:,} to {hi:,}: **{b:.2f}**."]
    return lines


def on_cluster(rows: int) -> list[str]:
    runs = []
    for label, executor in (("serial", "serial"), ("local processes", None)):
        print(f"audit of {rows:,} rows, {label}", file=sys.stderr, flush=True)
        runs.append({**run_child(rows, executor), "label": label})
    with tempfile.TemporaryDirectory() as folder, local_cluster(Path(folder)) as (address, pids):
        print(f"audit of {rows:,} rows on the cluster at {address}", file=sys.stderr, flush=True)
        runs.append({**run_child(rows, address, pids), "label": "Dask, 2 workers"})
    serial = runs[0]["steps"].get("stability reruns")
    lines = [
        f"### The same audit of {rows:,} rows: serially, on local processes, on Dask",
        "",
        *_steps_table(runs, lambda r: r["label"]),
        "",
        "| run | stability reruns s | speed-up of the reruns against serial |",
        "|---|---|---|",
    ]
    for r in runs:
        s = r["steps"].get("stability reruns")
        ratio = f"{serial / s:.2f}x" if serial and s else "n/a"
        lines.append(f"| {r['label']} | {'' if s is None else f'{s:.1f}'} | {ratio} |")
    lines += [
        "",
        "The Dask run's peak memory counts the scheduler and both workers (their imports "
        "included) besides the audit's own process.",
    ]
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.benchmarks.scale")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    parser.add_argument("--rows", type=int, nargs="+", default=list(DEFAULT_ROWS))
    parser.add_argument("--cluster-rows", type=int, default=CLUSTER_ROWS)
    parser.add_argument("--out", default="tests/benchmarks/SCALE_RESULTS.md")
    args = parser.parse_args(argv)
    if args.child:
        _child(json.loads(args.child))
        return 0
    start = time.perf_counter()
    load = load_average()
    lines = [
        "# The audit at scale",
        "",
        f"Machine: {environment()}. Load average at the start: "
        f"{'n/a' if load is None else ', '.join(f'{v:.2f}' for v in load)}.",
        "",
        "Command: `python -m tests.benchmarks.scale "
        + " ".join(sys.argv[1:] if argv is None else argv)
        + "`",
        "",
        *scaling(sorted(args.rows)),
        "",
        *(on_cluster(args.cluster_rows) if args.cluster_rows else []),
        "",
        f"Benchmark run time: {(time.perf_counter() - start) / 60:.1f} min.",
    ]
    Path(args.out).write_text("\n".join(lines) + "\n", encoding="utf-8")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())
