"""Value rules for workflow keys: each accepts a TOML value or says what it expected.

A rule is a callable `rule(value, base_dir) -> converted value` that raises
`RuleBroken(expected)` when the value does not fit; the parser turns that into one
`InputError` line naming the key.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Callable

Rule = Callable[[object, Path], object]


class RuleBroken(Exception):
    """A value does not fit its rule; the argument says what was expected."""


def _is_integer(value: object) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def _is_number(value: object) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


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

    def rule(value: object, base_dir: Path) -> int:
        if not _is_integer(value) or not _within(value, minimum, maximum, None):
            raise RuleBroken(expected)
        return int(value)

    return rule


def number(minimum: float | None = None, maximum: float | None = None, above: float | None = None) -> Rule:
    """A real number within the bounds (integers accepted)."""
    expected = "a number" + _bounds_text(minimum, maximum, above)

    def rule(value: object, base_dir: Path) -> float:
        if not _is_number(value) or not _within(float(value), minimum, maximum, above):
            raise RuleBroken(expected)
        return float(value)

    return rule


def text(pattern: str | None = None, describe: str = "a text string") -> Rule:
    """A non-empty string, optionally matching a full regular expression."""
    compiled = re.compile(pattern) if pattern else None

    def rule(value: object, base_dir: Path) -> str:
        if not isinstance(value, str) or not value.strip():
            raise RuleBroken(describe)
        if compiled is not None and not compiled.fullmatch(value):
            raise RuleBroken(describe)
        return value

    return rule


def choice(*options: str) -> Rule:
    """One of the listed words."""
    expected = "one of " + ", ".join(repr(o) for o in options)

    def rule(value: object, base_dir: Path) -> str:
        if value not in options:
            raise RuleBroken(expected)
        return str(value)

    return rule


def flag() -> Rule:
    """true or false."""

    def rule(value: object, base_dir: Path) -> bool:
        if not isinstance(value, bool):
            raise RuleBroken("true or false")
        return value

    return rule


def list_of(item: Rule, describe: str, allow_single: bool = False, unique: bool = True) -> Rule:
    """A list whose items all follow `item` (a single value too if `allow_single`), as a tuple."""

    def rule(value: object, base_dir: Path) -> tuple:
        values = [value] if allow_single and not isinstance(value, list) else value
        if not isinstance(values, list):
            raise RuleBroken(describe)
        try:
            converted = tuple(item(v, base_dir) for v in values)
        except RuleBroken:
            raise RuleBroken(describe) from None
        if unique and len(set(converted)) != len(converted):
            raise RuleBroken(describe + " without repeats")
        return converted

    return rule


def either(first: Rule, second: Rule, describe: str) -> Rule:
    """A value that fits `first`, else `second`."""

    def rule(value: object, base_dir: Path) -> object:
        for candidate in (first, second):
            try:
                return candidate(value, base_dir)
            except RuleBroken:
                continue
        raise RuleBroken(describe)

    return rule


def existing_file() -> Rule:
    """A path to an existing file, relative paths taken against the workflow file's folder."""

    def rule(value: object, base_dir: Path) -> Path:
        if not isinstance(value, str) or not value.strip():
            raise RuleBroken("a file path as a text string")
        path = Path(value).expanduser()
        resolved = (path if path.is_absolute() else base_dir / path).resolve()
        if not resolved.is_file():
            raise RuleBroken(f"an existing file (looked for {resolved})")
        return resolved

    return rule
