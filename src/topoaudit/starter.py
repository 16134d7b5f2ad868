"""A starter audit config guessed from a data file (``topoaudit init``).

The guess reads the file with the audit's own loader (:func:`topoaudit.data.read_table`)
and gives each column one role, with the reason it was chosen:

* **id**: a column with a value on every row and no value twice, of text, or of whole
  numbers that count the rows or whose name says id (``id``, ``key``, ``uuid``...);
* **target**: a column of 0 and 1 only, both present (binary task); when several are,
  the one the score columns predict best;
* **release**: a column of numbers in [0, 1] (more than two values) that predicts the
  target better than its base rate does (Brier skill score above 0; Brier, 1950), and
  either has a name that says score, probability or prediction, or has a skill of at
  least :data:`UNNAMED_SCORE_SKILL`; releases keep the file's column order, oldest first;
* **categorical**: text (or true/false) of at most :data:`MAX_STARTER_LEVELS` levels,
  one-hot encoded;
* **exclude**: columns the audit should not use: a second id, text of more levels than
  that, dates, constant or mostly missing columns, and near-duplicates of the target (a
  column of few levels, with at least 10 rows a level, whose value alone gives the target
  on at least 99% of rows; or a numeric column whose correlation with it is at least
  0.98): a copy or a consequence of the outcome would hide every weakness of the model;
* every other numeric column is a **feature**.

With no 0/1 column, the task is regression when some numeric columns are named as
predictions (``pred``, ``forecast``, ``estimate``...): each is a release, and the
target is the other numeric column they correlate with most.

Nothing is asked: the guess is written with its reasons as comments, and a file that
would not audit as written is refused with the reason.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import textwrap
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from topoaudit.config import NAME_PATTERN, Config, parse_config
from topoaudit.data import prepare_dataset, read_table
from topoaudit.errors import ConfigError, DataError

__all__ = [
    "MAX_STARTER_LEVELS",
    "UNNAMED_SCORE_SKILL",
    "Guess",
    "Starter",
    "guess_starter",
    "starter_toml",
    "write_starter",
]

#: text columns of at most this many levels are encoded one-hot; more are excluded
MAX_STARTER_LEVELS = 20
#: a [0, 1] column whose name does not say score needs at least this Brier skill
UNNAMED_SCORE_SKILL = 0.2
#: share of rows on which a column's value alone gives the target: a near-duplicate
LEAK_AGREEMENT = 0.99
#: correlation with the target from which a numeric column is a near-duplicate
LEAK_CORRELATION = 0.98
#: columns missing on more than this share of rows are excluded
MAX_MISSING_SHARE = 0.5

_ID_WORDS = {"id", "ids", "key", "uuid", "guid", "identifier"}
_SCORE_WORDS = {"score", "scores", "prob", "proba", "probability", "pred", "prediction", "risk"}
_PREDICTION_WORDS = {"pred", "prediction", "predicted", "forecast", "estimate", "fitted", "yhat"}
_TARGET_WORDS = {"target", "label", "outcome", "y", "class", "event", "response"}


@dataclass(frozen=True)
class Guess:
    """The role given to one column and why."""

    role: str
    column: str
    why: str


@dataclass(frozen=True)
class Starter:
    """A guessed config: the columns' roles, and each guess with its reason."""

    model: str
    task: str
    id: str
    target: str
    releases: tuple[tuple[str, str], ...]
    categorical: tuple[str, ...]
    exclude: tuple[str, ...]
    features: tuple[str, ...]
    on_missing: str
    guesses: tuple[Guess, ...]
    rows: int


def _words(name: str) -> set[str]:
    """Lower-case words of a column name: split at non-letters and at camelCase."""
    spaced = re.sub(r"([a-z0-9])([A-Z])", r"\1 \2", name)
    return {w for w in re.split(r"[^A-Za-z]+", spaced.lower()) if w}


def _listed(names: list[str], most: int = 6) -> str:
    """Up to ``most`` names, quoted and comma-separated, and how many more."""
    shown = ", ".join(_show(n) for n in names[:most])
    return shown + (f" and {len(names) - most} more" if len(names) > most else "")


def _show(name: str) -> str:
    """A column name as it reads in a message or a comment (quoted, control characters escaped)."""
    return repr(name)


def _is_text(s: pd.Series) -> bool:
    return pd.api.types.is_object_dtype(s) or pd.api.types.is_string_dtype(s)


def _is_number(s: pd.Series) -> bool:
    return pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s)


def _numbers(s: pd.Series) -> np.ndarray:
    return s.to_numpy(dtype=float, na_value=np.nan)


def _is_id(s: pd.Series, name: str) -> str | None:
    """Why ``s`` looks like a row id, or None."""
    if s.isna().any() or not s.is_unique or s.size < 2:
        return None
    if _is_text(s):
        return "text with a different value on every row"
    if not _is_number(s):
        return None
    values = _numbers(s)
    if not np.all(values == np.round(values)):
        return None
    if _words(name) & _ID_WORDS:
        return "whole numbers, a different one on every row, and its name says id"
    ordered = np.sort(values)
    if np.all(np.diff(ordered) == 1):
        return "whole numbers counting the rows, a different one on every row"
    return None


def _binary(s: pd.Series) -> bool:
    if not _is_number(s):
        return False
    values = _numbers(s)
    values = values[~np.isnan(values)]
    return values.size > 0 and set(np.unique(values).tolist()) == {0.0, 1.0}


def _unit(s: pd.Series) -> bool:
    if not _is_number(s):
        return False
    values = _numbers(s)
    values = values[np.isfinite(values)]
    return (
        values.size > 0 and values.min() >= 0 and values.max() <= 1 and np.unique(values).size > 2
    )


def _brier_skill(score: np.ndarray, y: np.ndarray) -> float:
    """1 - Brier(score) / Brier(base rate), over the rows where both are known."""
    ok = np.isfinite(score) & np.isfinite(y)
    if ok.sum() < 2:
        return float("-inf")
    s, t = score[ok], y[ok]
    base = float(np.mean((t - t.mean()) ** 2))
    if base == 0:
        return float("-inf")
    return 1.0 - float(np.mean((t - s) ** 2)) / base


def _correlation(a: np.ndarray, b: np.ndarray) -> float:
    ok = np.isfinite(a) & np.isfinite(b)
    if ok.sum() < 3 or np.std(a[ok]) == 0 or np.std(b[ok]) == 0:
        return 0.0
    return float(np.corrcoef(a[ok], b[ok])[0, 1])


def _agreement(s: pd.Series, y: np.ndarray) -> float:
    """Share of rows whose target is the majority target of their value of ``s``."""
    ok = s.notna().to_numpy() & np.isfinite(y)
    if ok.sum() == 0:
        return 0.0
    frame = pd.DataFrame({"v": s[ok].astype(str).to_numpy(), "y": y[ok]})
    majority = frame.groupby("v")["y"].agg(lambda t: t.value_counts().iloc[0]).sum()
    return float(majority) / float(ok.sum())


def _name(column: str, kind: str) -> str:
    """A release or model name from a column or file name, matching NAME_PATTERN."""
    text = re.sub(r"[^A-Za-z0-9._-]+", "-", column).strip("-._")
    text = re.sub(r"\.{2,}", ".", text)[:64].rstrip("-._")
    if not text or not re.fullmatch(NAME_PATTERN, text):
        text = kind
    return text


def _unique_names(columns: list[str]) -> list[str]:
    out: list[str] = []
    for c in columns:
        base = _name(c, "release")
        name, n = base, 1
        while name in out:
            n += 1
            name = f"{base[:60]}-{n}"
        out.append(name)
    return out


def _pick_id(frame: pd.DataFrame, source: str, given: str | None) -> tuple[str, str, list[str]]:
    """(id column, why, other id-like columns)."""
    found = {c: why for c in frame.columns if (why := _is_id(frame[c], c)) is not None}
    if given is not None:
        if given not in frame.columns:
            raise DataError(f"{source}: --id names {given!r}, which is not a column of the file.")
        if not (frame[given].notna().all() and frame[given].is_unique):
            msg = (
                f"{source}: --id names {given!r}, whose values are missing or repeated on some "
                "rows; the id needs a different value on every row."
            )
            raise DataError(msg)
        return given, "given with --id", [c for c in found if c != given]
    if not found:
        msg = (
            f"{source}: no column has a different value on every row, so none can be the id; "
            "add a column of row ids (text or whole numbers) and run init again."
        )
        raise DataError(msg)
    named = [c for c in found if _words(c) & _ID_WORDS]
    if len(found) == 1:
        (col,) = found
    elif len(named) == 1:
        col = named[0]
    else:
        both = sorted(named or found)
        listed = " and ".join(_show(c) for c in both)
        msg = (
            f"{source}: columns {listed} could each be the id (a different value on every "
            "row); name the one that identifies a row with --id."
        )
        raise DataError(msg)
    return col, found[col], [c for c in found if c != col]


def _score_guesses(
    frame: pd.DataFrame, units: list[str], y: np.ndarray
) -> tuple[list[str], dict[str, str]]:
    """The [0, 1] columns that count as a release's scores for target ``y``, with reasons."""
    chosen, why = [], {}
    for c in units:
        skill = _brier_skill(_numbers(frame[c]), y)
        named = bool(_words(c) & _SCORE_WORDS)
        if skill > 0 and (named or skill >= UNNAMED_SCORE_SKILL):
            chosen.append(c)
            said = "its name says score" if named else f"skill at least {UNNAMED_SCORE_SKILL}"
            why[c] = (
                f"numbers in [0, 1] that predict the target better than its base rate "
                f"(Brier skill {skill:.2f}); {said}"
            )
    return chosen, why


def _binary_roles(
    frame: pd.DataFrame, source: str, binaries: list[str], units: list[str], given: str | None
) -> tuple[str, str, list[str], dict[str, str]]:
    """(target, why, score columns, why each) for a binary task."""
    options = {}
    for t in binaries:
        y = _numbers(frame[t])
        scores, why = _score_guesses(frame, units, y)
        best = max((_brier_skill(_numbers(frame[s]), y) for s in scores), default=-math.inf)
        options[t] = (scores, why, best)
    if given is not None:
        target = given
        reason = "given with --target"
    elif len(binaries) == 1:
        target = binaries[0]
        reason = "the only column of 0 and 1"
    else:
        ranked = sorted(binaries, key=lambda t: -options[t][2])
        named = [t for t in binaries if _words(t) & _TARGET_WORDS]
        if options[ranked[0]][2] > options[ranked[1]][2]:
            target = ranked[0]
            reason = "the column of 0 and 1 that the score columns predict best"
        elif len(named) == 1:
            target = named[0]
            reason = "a column of 0 and 1 whose name says target"
        else:
            listed = ", ".join(_show(c) for c in binaries)
            msg = (
                f"{source}: columns {listed} each hold 0 and 1 only and no score column tells "
                "which is the outcome; name the target with --target."
            )
            raise DataError(msg)
    scores, why, _best = options[target]
    if not scores:
        near = [c for c in units if not (_words(c) & _SCORE_WORDS)]
        hint = f" (the [0, 1] columns {near} predict it too weakly)" if near else ""
        msg = (
            f"{source}: no column holds a release's scores for the target {target!r}: "
            f"numbers in [0, 1] that predict it better than its base rate{hint}; add the "
            "model's predicted probabilities as a column, for example 'score'."
        )
        raise DataError(msg)
    return target, reason, scores, why


def _regression_roles(
    frame: pd.DataFrame, source: str, numeric: list[str], given: str | None
) -> tuple[str, str, list[str], dict[str, str]]:
    """(target, why, prediction columns, why each) for a regression."""
    predictions = [c for c in numeric if _words(c) & _PREDICTION_WORDS and c != given]
    if not predictions:
        msg = (
            f"{source}: no column holds 0 and 1 only, so there is no binary target, and no "
            "numeric column is named as a prediction (pred, forecast, estimate...) for a "
            "regression; accepted are a 0/1 target with score columns in [0, 1], or a "
            "numeric target with prediction columns."
        )
        raise DataError(msg)
    others = [c for c in numeric if c not in predictions]
    if given is not None:
        target, reason = given, "given with --target"
    elif not others:
        msg = (
            f"{source}: every numeric column is named as a prediction, so none is left to be "
            "the target; name it with --target."
        )
        raise DataError(msg)
    else:

        def closeness(c: str) -> float:
            y = _numbers(frame[c])
            return float(np.mean([abs(_correlation(_numbers(frame[p]), y)) for p in predictions]))

        target = max(others, key=closeness)
        reason = (
            "no column holds 0 and 1 only; the numeric column the predictions follow most "
            f"closely (mean correlation {closeness(target):.2f})"
        )
    why = {p: "numeric, and its name says prediction" for p in predictions}
    return target, reason, predictions, why


def guess_starter(
    frame: pd.DataFrame,
    *,
    source: str = "<frame>",
    id: str | None = None,
    target: str | None = None,
) -> Starter:
    """Guess the role of every column of ``frame`` (see the module docstring).

    Parameters
    ----------
    frame : DataFrame
        The rows, as :func:`topoaudit.data.read_table` reads them.
    source : str, default="<frame>"
        The file's name, for messages and the model's name.
    id, target : str, optional
        Columns to use as the id and the target instead of guessing them.

    Returns
    -------
    Starter

    Raises
    ------
    DataError
        When the file has no rows, no numeric column, no id, no target or no scores; the
        message names the file and what would be accepted.
    """
    columns = [str(c) for c in frame.columns]
    frame = frame.set_axis(columns, axis=1)
    if frame.shape[0] == 0:
        msg = (
            f"{source}: the file has a header but no rows; init guesses from the values, so "
            "it needs the validation rows."
        )
        raise DataError(msg)
    numeric = [c for c in columns if _is_number(frame[c])]
    if not numeric:
        msg = (
            f"{source}: no column holds numbers (columns {_listed(columns)}); an audit needs "
            "a 0/1 target column and a score column of numbers in [0, 1]."
        )
        raise DataError(msg)
    if target is not None and target not in columns:
        raise DataError(f"{source}: --target names {target!r}, which is not a column of the file.")
    if target is not None and not _is_number(frame[target]):
        msg = f"{source}: --target names {target!r}, which is not numeric; the target is numbers."
        raise DataError(msg)
    id_col, id_why, other_ids = _pick_id(frame, source, id)
    if target == id_col:
        raise DataError(f"{source}: the id and the target are both {target!r}; give two columns.")
    candidates = [c for c in numeric if c != id_col]
    binaries = [c for c in candidates if _binary(frame[c])]
    units = [c for c in candidates if _unit(frame[c])]
    if binaries and (target is None or target in binaries):
        task = "binary"
        target_col, target_why, scores, score_why = _binary_roles(
            frame, source, binaries, units, target
        )
    else:
        if target is None and not any(_words(c) & _PREDICTION_WORDS for c in candidates):
            msg = (
                f"{source}: no column holds only 0 and 1 (numeric columns "
                f"{_listed(candidates)}), so none can be the target; accepted are a 0/1 "
                "target with score columns in [0, 1], or a numeric target with columns named "
                "as predictions (pred, forecast, estimate)."
            )
            raise DataError(msg)
        task = "regression"
        target_col, target_why, scores, score_why = _regression_roles(
            frame, source, candidates, target
        )

    guesses = [Guess("id", id_col, id_why), Guess("target", target_col, target_why)]
    guesses += [Guess("release", c, score_why[c]) for c in scores]
    rest = [c for c in columns if c not in {id_col, target_col, *scores}]
    categorical, exclude, features, more = _other_roles(
        frame, rest, _numbers(frame[target_col]), other_ids, task
    )
    guesses += more
    if not features:
        msg = (
            f"{source}: no column is left to describe the rows once the id, target and scores "
            "are set aside; an audit needs at least one numeric or few-level text feature."
        )
        raise DataError(msg)
    used = [id_col, target_col, *scores, *features]
    missing = int(frame[used].isna().any(axis=1).sum())
    on_missing = "drop" if missing else "refuse"
    if missing == frame.shape[0]:
        msg = (
            f"{source}: every row has a missing value in a column the audit would use; "
            "an audit needs complete rows."
        )
        raise DataError(msg)
    numeric_features = [c for c in features if c not in categorical]
    if numeric_features:
        n = len(numeric_features)
        shown = ", ".join(numeric_features[:8]) + (f" and {n - 8} more" if n > 8 else "")
        guesses.append(Guess("features", shown, f"{n} numeric column{'s' if n > 1 else ''}"))
    if missing:
        guesses.append(Guess("on_missing", "drop", f"{missing} rows lack a value in a used column"))
    return Starter(
        model=_name(Path(source).stem, "model"),
        task=task,
        id=id_col,
        target=target_col,
        releases=tuple(zip(scores, _unique_names(scores), strict=True)),
        categorical=tuple(categorical),
        exclude=tuple(exclude),
        features=tuple(features),
        on_missing=on_missing,
        guesses=tuple(guesses),
        rows=int(frame.shape[0]),
    )


def _other_roles(
    frame: pd.DataFrame, columns: list[str], y: np.ndarray, other_ids: list[str], task: str
) -> tuple[list[str], list[str], list[str], list[Guess]]:
    """(categorical, excluded, features, guesses) for the columns left after the id, target
    and scores."""
    categorical, exclude, features, guesses = [], [], [], []
    for c in columns:
        s = frame[c]
        why = _exclusion(s, c, y, other_ids, task)
        if why is not None:
            exclude.append(c)
            guesses.append(Guess("exclude", c, why))
        elif _is_number(s):
            features.append(c)
        else:
            levels = s.dropna().astype(str).nunique()
            categorical.append(c)
            features.append(c)
            kind = "true/false" if pd.api.types.is_bool_dtype(s) else "text"
            guesses.append(Guess("categorical", c, f"{kind} of {levels} levels, one-hot encoded"))
    return categorical, exclude, features, guesses


def _exclusion(
    s: pd.Series, name: str, y: np.ndarray, other_ids: list[str], task: str
) -> str | None:
    """Why column ``s`` should be left out of the audit, or None."""
    if name in other_ids:
        return "a different value on every row, like an id"
    if s.isna().mean() > MAX_MISSING_SHARE:
        return f"missing on {s.isna().mean():.0%} of rows"
    if s.dropna().nunique() <= 1:
        return "one value on every row"
    if pd.api.types.is_datetime64_any_dtype(s) or pd.api.types.is_timedelta64_dtype(s):
        return "dates or times, which are not encoded; derive numbers from them to use them"
    if not (_is_number(s) or _is_text(s) or pd.api.types.is_bool_dtype(s)):
        return f"of type {s.dtype}, which is not encoded; derive numbers from it to use it"
    levels = s.dropna().astype(str).nunique()
    if not _is_number(s) and levels > MAX_STARTER_LEVELS:
        return f"text of {levels} levels, more than {MAX_STARTER_LEVELS} to one-hot encode"
    if task == "binary" and levels <= MAX_STARTER_LEVELS and 10 * levels <= s.notna().sum():
        share = _agreement(s, y)
        if share >= LEAK_AGREEMENT:
            return f"its value alone gives the target on {share:.1%} of rows: likely leakage"
    if _is_number(s):
        r = _correlation(_numbers(s), y)
        if abs(r) >= LEAK_CORRELATION:
            return f"correlation {r:.3f} with the target: a near-duplicate, likely leakage"
    return None


def _toml_string(text: str) -> str:
    """A TOML basic string (quotes, backslashes and control characters escaped)."""
    out = []
    for ch in text:
        if ch in ('"', "\\"):
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_list(items: tuple[str, ...] | list[str]) -> str:
    return "[" + ", ".join(_toml_string(i) for i in items) + "]"


def _comment(text: str, width: int = 88) -> str:
    """``text`` as TOML comment lines of at most ``width`` characters where words allow."""
    plain = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)
    return "\n".join(textwrap.wrap(plain, width - 2, initial_indent="# ", subsequent_indent="#   "))


def starter_toml(starter: Starter, data_path: str) -> str:
    """The commented TOML text of ``starter``, reading its rows from ``data_path``."""
    why = {(g.role, g.column): g.why for g in starter.guesses}
    lines = [
        _comment(f"Starter audit config written by topoaudit init from {data_path}."),
        "# Every choice below is a guess with its reason; check them, then run",
        "#   topoaudit audit THIS_FILE --out FOLDER",
        f"model = {_toml_string(starter.model)}",
        "seed = 0",
        "",
        "[data]",
        f"path = {_toml_string(data_path)}",
        _comment(f"{starter.id}: {why[('id', starter.id)]}"),
        f"id = {_toml_string(starter.id)}",
        _comment(f"{starter.target}: {why[('target', starter.target)]}"),
        f"target = {_toml_string(starter.target)}",
        f"task = {_toml_string(starter.task)}",
    ]
    for c in starter.exclude:
        lines.append(_comment(f"{c}: {why[('exclude', c)]}"))
    lines.append(f"exclude = {_toml_list(starter.exclude)}")
    if starter.categorical:
        for c in starter.categorical:
            lines.append(_comment(f"{c}: {why[('categorical', c)]}"))
        pairs = ", ".join(f'{_toml_string(c)} = "onehot"' for c in starter.categorical)
        lines.append(f"categorical = {{ {pairs} }}")
    if starter.on_missing == "drop":
        lines.append(_comment(f"{why[('on_missing', 'drop')]}: they are left out"))
    lines.append(f"on_missing = {_toml_string(starter.on_missing)}")
    threshold = starter.task == "binary"
    lines.append("")
    lines.append("# One [[release]] per model release, oldest first; the last is audited.")
    for column, name in starter.releases:
        lines += [
            "",
            "[[release]]",
            _comment(f"{column}: {why[('release', column)]}"),
            f"name = {_toml_string(name)}",
            f"score = {_toml_string(column)}",
        ]
        if threshold:
            lines.append("threshold = 0.5")
    lines += [
        "",
        "# [graph] (the graph shown for the data's shape) and [audit] (how weak regions are",
        "# searched and confirmed) keep their defaults; the README lists their keys.",
        "",
    ]
    return "\n".join(lines)


def _relative(data: Path, out: Path) -> str:
    try:
        text = os.path.relpath(data.resolve(), out.resolve().parent)
    except ValueError:  # another drive
        text = str(data.resolve())
    return text.replace(os.sep, "/")


def write_starter(
    data: str | Path,
    out: str | Path,
    *,
    id: str | None = None,
    target: str | None = None,
) -> tuple[Starter, Config]:
    """Guess a config from ``data`` and write it to ``out``, which must not exist.

    The text is checked before it is written: it parses as a config, and the data file
    loads under it as the audit will load it.

    Raises
    ------
    ConfigError
        When ``out`` exists.
    DataError
        When the file cannot be read or no config can be guessed from it.
    """
    data, out = Path(data), Path(out)
    if out.exists() or out.is_symlink():
        msg = f"{out}: already exists; init never overwrites a file, so give another --out."
        raise ConfigError(msg)
    if data.is_file() and data.stat().st_size == 0:
        msg = f"{data}: the file is empty; init needs a header row and the validation rows."
        raise DataError(msg)
    frame = read_table(data)
    starter = guess_starter(frame, source=str(data), id=id, target=target)
    text = starter_toml(starter, _relative(data, out))
    config = parse_config(tomllib.loads(text), source=out)
    config = dataclasses.replace(
        config, data=dataclasses.replace(config.data, path=data)
    )  # check against the file as read, wherever the config will be
    prepare_dataset(frame, config, source=str(data))
    out.parent.mkdir(parents=True, exist_ok=True)
    try:
        with out.open("x", encoding="utf-8") as fh:
            fh.write(text)
    except FileExistsError:
        msg = f"{out}: already exists; init never overwrites a file, so give another --out."
        raise ConfigError(msg) from None
    return starter, config
