"""Run the ``topoaudit`` command and SIGKILL it just before its N-th write to the disk.

Usage: ``python killer.py N LOG ROOT -- topoaudit-arguments...``

Writes are counted with a Python audit hook (PEP 578): file opens for writing, renames,
folder creation and removal, copies, metadata changes and topoaudit's own
``topoaudit.exchange`` event, each counted only when its path lies under ROOT, so the
count does not depend on caches elsewhere. With N = 0 nothing is killed and every write
is logged to LOG, one ``index<TAB>event<TAB>path`` line each; the tests pick their kill
points from that log.
"""

from __future__ import annotations

import os
import signal
import sys

WRITE_FLAGS = os.O_WRONLY | os.O_RDWR | os.O_CREAT | os.O_TRUNC | os.O_APPEND
EVENTS = {
    "os.rename",
    "os.mkdir",
    "os.remove",
    "os.rmdir",
    "os.chmod",
    "os.utime",
    "os.truncate",
    "os.link",
    "os.symlink",
    "shutil.rmtree",
    "shutil.copyfile",
    "shutil.copytree",
    "topoaudit.exchange",
}


def install(kill_at: int, log_fd: int, root: str) -> None:
    count = 0

    def hook(event: str, args: tuple) -> None:
        nonlocal count
        if event == "open":
            path, _mode, flags = args
            if not isinstance(path, str | bytes) or not (flags or 0) & WRITE_FLAGS:
                return
        elif event in EVENTS:
            path = args[0]
        else:
            return
        path = os.fsdecode(path) if isinstance(path, str | bytes) else ""
        if not os.path.abspath(path).startswith(root):
            return
        count += 1
        if kill_at == 0:
            os.write(log_fd, f"{count}\t{event}\t{path}\n".encode())
        elif count == kill_at:
            os.kill(os.getpid(), signal.SIGKILL)

    sys.addaudithook(hook)


if __name__ == "__main__":
    kill_at, log, root, sep, *argv = sys.argv[1:]
    assert sep == "--"
    fd = os.open(log, os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o644) if log != "-" else -1
    from topoaudit.cli import main

    install(int(kill_at), fd, os.path.abspath(root))
    sys.exit(main(argv))
