"""Declarative parameter checks: one constraint table per class or public function.

A constraint table maps each parameter name to a list of accepted forms; a value is
accepted when it matches any of them. :func:`check_params` enforces a table and raises
one :class:`~topoaudit.errors.ParameterError` whose message names the owner, the
parameter, what is allowed and the value received.
"""

from __future__ import annotations

import numbers
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from topoaudit.errors import ParameterError

__all__ = [
    "NONE",
    "SCHEDULER_ADDRESS",
    "Choice",
    "Interval",
    "Kind",
    "check_params",
    "is_scheduler_address",
    "random_generator",
]


@dataclass(frozen=True)
class Interval:
    """Numbers of ``type`` between ``low`` and ``high`` (``None`` means unbounded).

    ``closed`` is one of ``"both"``, ``"left"``, ``"right"``, ``"neither"``.
    """

    type: type
    low: float | None
    high: float | None
    closed: str = "both"

    def accepts(self, value: Any) -> bool:
        if isinstance(value, bool):
            return False
        if self.type is numbers.Integral or self.type is int:
            if not isinstance(value, numbers.Integral):
                return False
        elif not isinstance(value, numbers.Real):
            return False
        if not isinstance(value, numbers.Integral) and not np.isfinite(float(value)):
            return False  # NaN and infinities of every float type (numpy's float32 too)
        left = self.closed in ("both", "left")
        right = self.closed in ("both", "right")
        if self.low is not None and (value < self.low or (value == self.low and not left)):
            return False
        return not (
            self.high is not None and (value > self.high or (value == self.high and not right))
        )

    def describe(self) -> str:
        integral = self.type in (int, numbers.Integral)
        kind = "an int" if integral else "a number"

        def bound(v: float) -> str:  # 4294967295, not 4.29497e+09
            return str(int(v)) if integral or float(v).is_integer() else f"{v:g}"

        lo = "-inf" if self.low is None else bound(self.low)
        hi = "inf" if self.high is None else bound(self.high)
        lb = "[" if self.closed in ("both", "left") and self.low is not None else "("
        rb = "]" if self.closed in ("both", "right") and self.high is not None else ")"
        return f"{kind} in the range {lb}{lo}, {hi}{rb}"


@dataclass(frozen=True)
class Choice:
    """One of a fixed set of values (strings, usually)."""

    options: tuple[Any, ...]

    def accepts(self, value: Any) -> bool:
        return any(value == o and type(value) is type(o) for o in self.options)

    def describe(self) -> str:
        return "one of " + ", ".join(repr(o) for o in self.options)


@dataclass(frozen=True)
class Kind:
    """Any value for which ``test`` is true; ``label`` says what that means."""

    test: Callable[[Any], bool]
    label: str

    def accepts(self, value: Any) -> bool:
        return bool(self.test(value))

    def describe(self) -> str:
        return self.label


NONE = Kind(lambda v: v is None, "None")

#: a Dask scheduler's address: tcp:// or tls://, a host name, IPv4 or [IPv6], and a port
_ADDRESS = re.compile(r"(tcp|tls)://(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9][A-Za-z0-9._-]*):([0-9]{1,5})")


def is_scheduler_address(value: Any) -> bool:
    """Whether ``value`` is a scheduler address ``tcp://HOST:PORT`` (or ``tls://``) with
    a port from 1 to 65535.

    >>> is_scheduler_address("tcp://10.0.0.5:8786"), is_scheduler_address("10.0.0.5:8786")
    (True, False)
    """
    match = _ADDRESS.fullmatch(value) if isinstance(value, str) else None
    return match is not None and 1 <= int(match.group(3)) <= 65535


SCHEDULER_ADDRESS = Kind(
    is_scheduler_address,
    "a Dask scheduler address tcp://HOST:PORT (or tls://HOST:PORT), as `dask scheduler` prints it",
)


def check_params(owner: str, table: Mapping[str, list[Any]], params: Mapping[str, Any]) -> None:
    """Raise :class:`ParameterError` for the first parameter that no constraint accepts.

    Examples
    --------
    >>> check_params("Cover", {"n_intervals": [Interval(int, 1, None)]}, {"n_intervals": 0})
    Traceback (most recent call last):
    ...
    topoaudit.errors.ParameterError: The 'n_intervals' parameter of Cover must be an int in \
the range [1, inf); got 0.
    """
    for name, constraints in table.items():
        if name not in params:
            continue
        value = params[name]
        if any(c.accepts(value) for c in constraints):
            continue
        allowed = " or ".join(c.describe() for c in constraints)
        msg = f"The {name!r} parameter of {owner} must be {allowed}; got {value!r}."
        raise ParameterError(msg)


def random_generator(random_state: int | np.random.Generator | None) -> np.random.Generator:
    """Turn ``random_state`` (an int seed, a Generator or None) into a Generator."""
    if isinstance(random_state, np.random.Generator):
        return random_state
    if random_state is None or isinstance(random_state, numbers.Integral):
        return np.random.default_rng(None if random_state is None else int(random_state))
    msg = f"random_state must be an int, a numpy Generator or None; got {random_state!r}."
    raise ParameterError(msg)
