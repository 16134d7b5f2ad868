"""The staging helper: a folder appears whole or not at all, and leftovers are swept.

A leftover's lock is free once its holder has finished or died: flock(2) locks belong to
an open file and the kernel releases them when it is closed, so a lock held here through
another open file of the same process stands for a run that is still alive.
"""

from __future__ import annotations

import pytest

from topoaudit.report.archive import LOCK, ArchiveError, locked, staging


def _listing(folder):
    return sorted(p.name for p in folder.iterdir())


def _leftover(parent, name, files=("half-written",)):
    work = parent / name
    (work / "staged").mkdir(parents=True)
    for f in files:
        (work / "staged" / f).write_text("x")
    (work / LOCK).touch()
    return work


def _old_target(parent):
    target = parent / "out"
    target.mkdir()
    (target / "old.txt").write_text("old")
    return target


class _StopError(Exception):
    pass


@pytest.mark.parametrize("existing", [False, True], ids=["new target", "existing target"])
def test_a_failure_inside_the_block_leaves_no_work_folder_and_the_target_untouched(
    tmp_path, existing
):
    target = _old_target(tmp_path) if existing else tmp_path / "out"
    with pytest.raises(_StopError), staging(target) as stage:
        stage.path.mkdir()
        (stage.path / "new.txt").write_text("new")
        raise _StopError
    assert _listing(tmp_path) == (["out"] if existing else [])
    if existing:
        assert _listing(target) == ["old.txt"]
        assert (target / "old.txt").read_text() == "old"


@pytest.mark.parametrize("existing", [False, True], ids=["new target", "existing target"])
def test_a_block_that_ends_puts_the_new_folder_in_place_and_removes_the_work_folder(
    tmp_path, existing
):
    target = _old_target(tmp_path) if existing else tmp_path / "out"
    with staging(target) as stage:
        assert stage.work.parent == tmp_path and stage.work.name.startswith(".out.partial-")
        assert (stage.work / LOCK).is_file()
        stage.path.mkdir()
        (stage.path / "new.txt").write_text("new")
    assert _listing(tmp_path) == ["out"]
    assert _listing(target) == ["new.txt"]


def test_commit_inside_the_block_hands_back_the_replaced_folder(tmp_path):
    target = _old_target(tmp_path)
    with staging(target) as stage:
        stage.path.mkdir()
        old = stage.commit()
        assert old is not None and _listing(old) == ["old.txt"]
        with pytest.raises(ArchiveError, match=r"out: this staged folder is already committed\."):
            stage.commit()
    assert _listing(tmp_path) == ["out"]


def test_a_failure_after_the_commit_leaves_the_replaced_folder_for_the_next_run(tmp_path):
    target = _old_target(tmp_path)
    with pytest.raises(_StopError), staging(target) as stage:
        stage.path.mkdir()
        stage.commit()
        raise _StopError
    assert (stage.path / "old.txt").read_text() == "old"
    with staging(target) as stage:
        stage.path.mkdir()
    assert _listing(tmp_path) == ["out"]


def test_a_leftover_whose_lock_is_free_is_swept(tmp_path):
    _leftover(tmp_path, ".out.partial-dead")
    _leftover(tmp_path, ".other.partial-dead")  # another target's: not this run's to sweep
    with staging(tmp_path / "out") as stage:
        stage.path.mkdir()
        assert _listing(tmp_path) == [".other.partial-dead", stage.work.name]
    assert _listing(tmp_path) == [".other.partial-dead", "out"]


def test_a_leftover_whose_lock_is_held_is_not_swept(tmp_path):
    alive = _leftover(tmp_path, ".out.partial-alive")
    with locked(alive / LOCK), staging(tmp_path / "out") as stage:
        stage.path.mkdir()
    assert _listing(tmp_path) == [".out.partial-alive", "out"]
    assert _listing(alive / "staged") == ["half-written"]


def test_a_target_parked_by_an_interrupted_fallback_exchange_is_put_back(tmp_path):
    target = tmp_path / "out"
    work = _leftover(tmp_path, ".out.partial-dead")
    parked = work / "staged.swap"  # the old target, moved aside by the first rename
    parked.mkdir()
    (parked / "old.txt").write_text("old")
    with pytest.raises(_StopError), staging(target):
        assert _listing(target) == ["old.txt"]
        raise _StopError
    assert _listing(tmp_path) == ["out"]
