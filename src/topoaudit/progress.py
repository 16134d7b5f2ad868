"""A progress line a person can read while a long command runs.

The stages of topoaudit report progress through a plain hook, a callable taking one
message (``Progress``). :class:`ProgressLine` is such a hook that draws each message with
the time elapsed since the command started and, where the message counts items, an
estimate of the time left::

    [1:23 elapsed, about 2:10 left] step 5 of 7: stability run 4 of 12: intervals 20

Messages follow two conventions:

* ``step K of N: ...`` names the step of the command; it is shown, never extrapolated,
  because the steps of one command take very different times;
* any other ``I of M`` (the last one in the message) counts items of one kind, which take
  about the same time each. From the second item of a run of such messages on, the time
  left in that run is the mean time per finished item times the items left (the
  current one included), as ``about M:SS left``. Messages that differ only in their
  numbers belong to the same run.

On a terminal (``line``) the line is redrawn in place (``\\r``) and its clock ticks once a
second; elsewhere (``plain``) each message is one line of its own, so a log file reads
top to bottom; ``quiet`` writes nothing.
"""

from __future__ import annotations

import re
import shutil
import sys
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import TextIO

from topoaudit.errors import ParameterError

__all__ = ["PROGRESS_MODES", "Progress", "ProgressLine", "format_duration"]

Progress = Callable[[str], None]

#: ``auto`` is ``line`` when the stream is a terminal and ``plain`` otherwise
PROGRESS_MODES = ("auto", "line", "plain", "quiet")

_COUNT = re.compile(r"(\bstep )?(\d[\d,]*) of (\d[\d,]*)")


def format_duration(seconds: float) -> str:
    """``M:SS`` below an hour, ``H:MM:SS`` from an hour on.

    Examples
    --------
    >>> format_duration(83.4), format_duration(3725)
    ('1:23', '1:02:05')
    """
    s = max(0, round(seconds))
    h, rest = divmod(s, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m}:{s:02d}"


def _item_counts(message: str) -> list[tuple[str, int, int]]:
    """(run key, item, of) for each count of ``message`` that is not a step, outermost first."""
    out = []
    for m in _COUNT.finditer(message):
        if m.group(1) is None:
            item, total = (int(g.replace(",", "")) for g in m.group(2, 3))
            out.append((re.sub(r"\d+", "#", message[: m.start()]), item, total))
    return out


@dataclass
class _Run:
    """A run of counted items: where it started, and the item now under way."""

    first: int
    started: float
    item: int
    item_started: float
    left_at_item: float | None = None


class ProgressLine:
    """A ``Progress`` hook that draws messages with elapsed time and time left.

    Parameters
    ----------
    mode : {"auto", "line", "plain", "quiet"}, default="auto"
        ``line`` redraws one line in place, ``plain`` writes one line per message,
        ``quiet`` writes nothing; ``auto`` is ``line`` on a terminal, else ``plain``.
    stream : text stream, default=sys.stderr
    clock : callable, default=time.monotonic
        Seconds, for tests.
    tick : float, default=1.0
        Seconds between redraws of the clock in ``line`` mode; 0 for none.

    Use it as a context manager, or call :meth:`close` at the end, so that the line is
    finished with a newline and the clock stops.

    Examples
    --------
    >>> import io
    >>> now = iter([0.0, 10.0, 20.0, 50.0])
    >>> out = io.StringIO()
    >>> with ProgressLine("plain", stream=out, clock=lambda: next(now)) as say:
    ...     say("step 1 of 2: run 1 of 4")
    ...     say("step 1 of 2: run 2 of 4")
    ...     say("step 2 of 2: writing")
    >>> print(out.getvalue(), end="")
    [0:10 elapsed] step 1 of 2: run 1 of 4
    [0:20 elapsed, about 0:30 left] step 1 of 2: run 2 of 4
    [0:50 elapsed] step 2 of 2: writing
    """

    def __init__(
        self,
        mode: str = "auto",
        *,
        stream: TextIO | None = None,
        clock: Callable[[], float] = time.monotonic,
        tick: float = 1.0,
    ) -> None:
        if mode not in PROGRESS_MODES:
            msg = (
                f"Unknown progress mode {mode!r}; the known modes are {', '.join(PROGRESS_MODES)}."
            )
            raise ParameterError(msg)
        self.stream = sys.stderr if stream is None else stream
        if mode == "auto":
            isatty = getattr(self.stream, "isatty", None)
            mode = "line" if isatty is not None and isatty() else "plain"
        self.mode = mode
        self._clock = clock
        self._start = clock()
        self._runs: dict[str, _Run] = {}
        self._message = ""
        self._left: tuple[float, float] | None = None  # seconds left, as of this time
        self._drawn = False
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._ticker: threading.Thread | None = None
        if self.mode == "line" and tick > 0:
            self._ticker = threading.Thread(target=self._tick, args=(tick,), daemon=True)
            self._ticker.start()

    def __call__(self, message: str) -> None:
        if self.mode == "quiet":
            return
        now = self._clock()
        with self._lock:
            self._message = message
            self._left = self._estimate(message, now)
            self._draw(now, newline=self.mode == "plain")

    def _estimate(self, message: str, now: float) -> tuple[float, float] | None:
        """Seconds left as of a time, from the outermost counted run that has an estimate."""
        best = None
        for key, item, total in _item_counts(message):
            run = self._runs.get(key)
            if run is None or item < run.item:
                self._runs[key] = run = _Run(item, now, item, now)
            elif item > run.item:
                per_item = (now - run.started) / (item - run.first)
                run.item, run.item_started = item, now
                run.left_at_item = per_item * max(0, total - item + 1)
            if best is None and run.left_at_item is not None:
                best = (run.left_at_item, run.item_started)
        return best

    def _text(self, now: float) -> str:
        head = f"{format_duration(now - self._start)} elapsed"
        if self._left is not None:
            left, since = self._left
            head += f", about {format_duration(max(0.0, left - (now - since)))} left"
        return f"[{head}] {self._message}"

    def _draw(self, now: float, *, newline: bool) -> None:
        text = self._text(now)
        if newline:
            self.stream.write(text + "\n")
        else:
            width = shutil.get_terminal_size((100, 24)).columns - 1
            if len(text) > width:
                text = text[: max(0, width - 3)] + "..."
            self.stream.write("\r" + text + "\x1b[K")
        self.stream.flush()
        self._drawn = True

    def _tick(self, every: float) -> None:
        while not self._stop.wait(every):
            with self._lock:
                if self._message:
                    self._draw(self._clock(), newline=False)

    def close(self) -> None:
        """Stop the clock and end a line drawn in place with a newline."""
        self._stop.set()
        if self._ticker is not None:
            self._ticker.join()
            self._ticker = None
        with self._lock:
            if self.mode == "line" and self._drawn:
                self.stream.write("\n")
                self.stream.flush()
                self._drawn = False

    def __enter__(self) -> ProgressLine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
