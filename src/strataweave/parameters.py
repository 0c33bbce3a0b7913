"""Parameter tables: each estimator's parameters with a value rule, a default and one line of help.

One table per estimator (`factorize.joint_nmf.PARAMETERS`, `subtypes.settings.PARAMETERS`,
`graph.fusion.PARAMETERS`) is read by the estimator, which checks its values once with
`check_parameters`, by the workflow file's reader, whose keys are the parameter names and
whose rules and defaults come from the table, and by the generated reference of the keys
(workflows/REFERENCE.md), whose help is the table's. A rule is a callable
`rule(value, base_dir=None) -> converted value` that raises `RuleBroken(expected)` when the
value does not fit; `rule.expected` says what it accepts.
"""

from __future__ import annotations

import numbers
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from strataweave.errors import InputError

Rule = Callable[..., object]


class RuleBroken(Exception):
    """A value does not fit its rule; the argument says what was expected."""


def described(check: Rule, expected: str) -> Rule:
    """`check` as a rule that also says what it accepts (`rule.expected`, for the reference)."""
    check.expected = expected
    return check


def _is_integer(value: object) -> bool:
    """A whole number (numpy's too: an estimator's count may come from np.arange), never a bool."""
    return isinstance(value, numbers.Integral) and not isinstance(value, (bool, np.bool_))


def _is_number(value: object) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, (bool, np.bool_))


def _bound(value: float) -> str:
    """A bound as a reader expects it: integers in full (no 4.29497e+09), other numbers short."""
    return str(value) if _is_integer(value) else f"{value:g}"


def _bounds_text(minimum: float | None, maximum: float | None, above: float | None) -> str:
    parts = []
    if above is not None:
        parts.append(f"> {_bound(above)}")
    if minimum is not None:
        parts.append(f">= {_bound(minimum)}")
    if maximum is not None:
        parts.append(f"<= {_bound(maximum)}")
    return (" " + " and ".join(parts)) if parts else ""


def _within(value: float, minimum: float | None, maximum: float | None, above: float | None) -> bool:
    return (
        (minimum is None or value >= minimum)
        and (maximum is None or value <= maximum)
        and (above is None or value > above)
    )


def integer(minimum: int | None = None, maximum: int | None = None) -> Rule:
    """A whole number within the bounds."""
    expected = "an integer" + _bounds_text(minimum, maximum, None)

    def rule(value: object, base_dir: Path | None = None) -> int:
        if not _is_integer(value) or not _within(value, minimum, maximum, None):
            raise RuleBroken(expected)
        return int(value)

    return described(rule, expected)


def number(minimum: float | None = None, maximum: float | None = None, above: float | None = None) -> Rule:
    """A real number within the bounds (integers accepted)."""
    expected = "a number" + _bounds_text(minimum, maximum, above)

    def rule(value: object, base_dir: Path | None = None) -> float:
        if not _is_number(value) or not _within(float(value), minimum, maximum, above):
            raise RuleBroken(expected)
        return float(value)

    return described(rule, expected)


def text(pattern: str | None = None, describe: str = "a text string") -> Rule:
    """A non-empty string, optionally matching a full regular expression."""
    compiled = re.compile(pattern) if pattern else None

    def rule(value: object, base_dir: Path | None = None) -> str:
        if not isinstance(value, str) or not value.strip():
            raise RuleBroken(describe)
        if compiled is not None and not compiled.fullmatch(value):
            raise RuleBroken(describe)
        return value

    return described(rule, describe)


def choice(*options: str) -> Rule:
    """One of the listed words."""
    expected = "one of " + ", ".join(repr(o) for o in options)

    def rule(value: object, base_dir: Path | None = None) -> str:
        if value not in options:
            raise RuleBroken(expected)
        return str(value)

    return described(rule, expected)


def flag() -> Rule:
    """true or false."""

    def rule(value: object, base_dir: Path | None = None) -> bool:
        if not isinstance(value, bool):
            raise RuleBroken("true or false")
        return value

    return described(rule, "true or false")


def list_of(item: Rule, describe: str, allow_single: bool = False, unique: bool = True) -> Rule:
    """A list (or tuple) whose items all follow `item` (a single value too if `allow_single`), as a tuple."""

    def rule(value: object, base_dir: Path | None = None) -> tuple:
        values = [value] if allow_single and not isinstance(value, (list, tuple)) else value
        if not isinstance(values, (list, tuple)):
            raise RuleBroken(describe)
        try:
            converted = tuple(item(v, base_dir) for v in values)
        except RuleBroken:
            raise RuleBroken(describe) from None
        if unique and len(set(converted)) != len(converted):
            raise RuleBroken(describe + " without repeats")
        return converted

    return described(rule, describe)


def either(first: Rule, second: Rule, describe: str) -> Rule:
    """A value that fits `first`, else `second`."""

    def rule(value: object, base_dir: Path | None = None) -> object:
        for candidate in (first, second):
            try:
                return candidate(value, base_dir)
            except RuleBroken:
                continue
        raise RuleBroken(describe)

    return described(rule, describe)


@dataclass(frozen=True)
class Parameter:
    """One row of a parameter table: its value rule, its default and one line of help."""

    rule: Rule
    default: object
    help: str


def check_parameters(table: Mapping[str, Parameter], values: Mapping[str, object]) -> None:
    """InputError naming the first parameter of `table` whose value in `values` breaks its rule
    (None is accepted where None is the default; values without a row are not the table's)."""
    for name, parameter in table.items():
        if name not in values:
            continue
        value = values[name]
        if value is None and parameter.default is None:
            continue
        try:
            parameter.rule(value)
        except RuleBroken as broken:
            raise InputError(f"{name}: found {value!r}; expected {broken}") from None
