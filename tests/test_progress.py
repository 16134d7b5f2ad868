"""The progress line: steps and counts, elapsed time, time left; in place, plain or quiet."""

from __future__ import annotations

import io
import re
import time

import pytest

from tests.conftest import light
from topoaudit.audit.run import run_audit
from topoaudit.cli import main
from topoaudit.config import load_config
from topoaudit.demo import write_demo_project
from topoaudit.errors import ParameterError
from topoaudit.progress import ProgressLine, format_duration


class _Clock:
    def __init__(self, *times: float) -> None:
        self.times = iter(times)

    def __call__(self) -> float:
        return next(self.times)


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.mark.parametrize(
    ("seconds", "text"),
    [(0, "0:00"), (59.4, "0:59"), (61, "1:01"), (3599.6, "1:00:00"), (-3, "0:00")],
    ids=["zero", "under_a_minute", "minutes", "an_hour", "negative"],
)
def test_durations_read_as_minutes_and_seconds(seconds, text):
    assert format_duration(seconds) == text


def test_time_left_comes_from_the_finished_items_of_a_run():
    out = io.StringIO()
    say = ProgressLine("plain", stream=out, clock=_Clock(0, 5, 10, 30, 50, 60, 100))
    say("step 1 of 3: reading")
    say("step 2 of 3: run 1 of 4: a")
    say("step 2 of 3: run 2 of 4: b")  # 20 s for one item: 3 items left, current one included
    say("step 2 of 3: run 3 of 4: c")  # (50 - 10) / 2 = 20 s an item, 2 left
    say("step 2 of 3: run 3 of 4: c, half done")  # the estimate counts down
    say("step 3 of 3: writing")
    say.close()
    assert out.getvalue().splitlines() == [
        "[0:05 elapsed] step 1 of 3: reading",
        "[0:10 elapsed] step 2 of 3: run 1 of 4: a",
        "[0:30 elapsed, about 1:00 left] step 2 of 3: run 2 of 4: b",
        "[0:50 elapsed, about 0:40 left] step 2 of 3: run 3 of 4: c",
        "[1:00 elapsed, about 0:30 left] step 2 of 3: run 3 of 4: c, half done",
        "[1:40 elapsed] step 3 of 3: writing",
    ]


def test_steps_alone_are_shown_but_not_extrapolated():
    out = io.StringIO()
    say = ProgressLine("plain", stream=out, clock=_Clock(0, 1, 2, 3))
    say("step 1 of 8: a")
    say("step 2 of 8: b")
    say("step 3 of 8: c")
    assert "left" not in out.getvalue()


def test_an_outer_count_gives_the_broader_estimate():
    out = io.StringIO()
    say = ProgressLine("plain", stream=out, clock=_Clock(0, 0, 10, 60, 70))
    say("release 1 of 2 (a): step 1 of 2: x")
    say("release 1 of 2 (a): step 2 of 2: run 1 of 3")
    say("release 2 of 2 (b): step 1 of 2: x")  # one release took 60 s: one left
    say("release 2 of 2 (b): step 2 of 2: run 1 of 3")
    assert out.getvalue().splitlines()[2:] == [
        "[1:00 elapsed, about 1:00 left] release 2 of 2 (b): step 1 of 2: x",
        "[1:10 elapsed, about 0:50 left] release 2 of 2 (b): step 2 of 2: run 1 of 3",
    ]


def test_a_run_that_starts_again_is_estimated_afresh():
    out = io.StringIO()
    say = ProgressLine("plain", stream=out, clock=_Clock(0, 0, 10, 100, 101))
    say("run 1 of 3")
    say("run 2 of 3")
    say("run 1 of 3")
    say("run 2 of 3")
    assert out.getvalue().splitlines()[-2:] == [
        "[1:40 elapsed] run 1 of 3",
        "[1:41 elapsed, about 0:02 left] run 2 of 3",
    ]


def test_on_a_terminal_the_line_is_redrawn_in_place_and_cut_to_its_width(monkeypatch):
    monkeypatch.setenv("COLUMNS", "40")
    out = _Terminal()
    with ProgressLine(stream=out, clock=_Clock(0, 1, 2), tick=0) as say:
        assert say.mode == "line"
        say("step 1 of 2: short")
        say("step 2 of 2: a message much longer than the terminal is wide")
    assert out.getvalue() == (
        "\r[0:01 elapsed] step 1 of 2: short\x1b[K\r[0:02 elapsed] step 2 of 2: a messag...\x1b[K\n"
    )


def test_on_a_terminal_the_clock_ticks_between_messages():
    out = _Terminal()
    with ProgressLine("line", stream=out, tick=0.01) as say:
        say("waiting")
        deadline = time.monotonic() + 5
        while out.getvalue().count("\r") < 3 and time.monotonic() < deadline:
            time.sleep(0.01)
    assert out.getvalue().count("\r[0:00 elapsed] waiting\x1b[K") >= 3
    assert out.getvalue().endswith("\n")


@pytest.mark.parametrize(
    ("mode", "stream", "expected"),
    [("auto", io.StringIO, "plain"), ("auto", _Terminal, "line"), ("quiet", _Terminal, "quiet")],
    ids=["file_is_plain", "terminal_is_line", "quiet"],
)
def test_auto_is_plain_lines_unless_the_stream_is_a_terminal(mode, stream, expected):
    out = stream()
    with ProgressLine(mode, stream=out, tick=0) as say:
        say("step 1 of 1: x")
    assert say.mode == expected
    assert (out.getvalue() == "") == (expected == "quiet")


def test_an_unknown_mode_is_named():
    expected = "Unknown progress mode 'fancy'; the known modes are auto, line, plain, quiet."
    with pytest.raises(ParameterError, match=f"^{re.escape(expected)}$"):
        ProgressLine("fancy")


def test_an_audit_reports_numbered_steps_and_counted_runs(tmp_path):
    config_path = write_demo_project(tmp_path, 800, seed=7)
    config_path.write_text(light(config_path.read_text(encoding="utf-8")))
    messages: list[str] = []
    run_audit(load_config(config_path), progress=messages.append)
    steps = [int(m.split()[1]) for m in messages]
    assert steps == sorted(steps)
    assert all(re.match(r"step \d of 8: ", m) for m in messages)
    assert messages[0].startswith("step 1 of 8: building the graph of 800 rows")
    assert messages[-1] == "step 8 of 8: comparing release 2026.2 with 2026.1"


def test_site_build_writes_plain_progress_lines_when_not_a_terminal(
    fixture_archive, tmp_path, capsys
):
    archive = fixture_archive[2]
    site = tmp_path / "site"
    args = ["site", "build", "--archive", str(archive), "--out", str(site), "--progress", "plain"]
    assert main(args) == 0
    lines = capsys.readouterr().err.splitlines()
    pattern = r"\[\d+:\d\d elapsed(, about \d+:\d\d left)?\] step \d of 3: .+"
    assert all(re.fullmatch(pattern, line) for line in lines), lines
    assert [line.split("] ", 1)[1] for line in lines] == [
        "step 1 of 3: pages of model 1 of 1 (meter-failure)",
        "step 2 of 3: running mkdocs build",
        "step 3 of 3: writing the built site to disk and moving it into place",
    ]


def test_quiet_writes_no_progress(fixture_archive, tmp_path, capsys):
    args = ["site", "build", "--archive", str(fixture_archive[2]), "--out", str(tmp_path / "s")]
    assert main([*args, "--quiet"]) == 0
    assert capsys.readouterr().err == ""
