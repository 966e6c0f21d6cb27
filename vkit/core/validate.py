"""Checks on values read from configs, specs and the command line, with one message shape.

Every failed check raises :class:`~vkit.core.errors.ConfigError` with one line::

    WHERE: KEY = VALUE is PROBLEM; FIX

``where`` names the file or table the user edits (``"vkit.toml [design.edge]"``, ``"spec [filter]"``),
``key`` the key as written there, and the fix says what to write instead. "Did you mean" comes from
:func:`suggest` only, with one cutoff for every caller.
"""

from __future__ import annotations

import difflib
from typing import Any, Iterable, Mapping, Sequence

from vkit.core.errors import ConfigError

__all__ = [
    "SUGGEST_CUTOFF",
    "closest",
    "suggest",
    "type_name",
    "fail",
    "check_keys",
    "want_table",
    "want_int",
    "want_number",
    "want_bool",
    "want_str",
    "want_choice",
    "want_str_list",
]

SUGGEST_CUTOFF = 0.5
"""Similarity (difflib ratio, 0..1) a known word needs to be offered as "did you mean"; below it the
message lists the valid words instead. 0.5 catches one or two slipped letters in short keys (common
practice, no source)."""


def closest(word: object, choices: Iterable[str]) -> str | None:
    """The one of ``choices`` most like ``word`` when it is at least :data:`SUGGEST_CUTOFF` alike, else None."""
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=SUGGEST_CUTOFF)
    return close[0] if close else None


def suggest(word: object, choices: Iterable[str]) -> str:
    """``did you mean 'x'?`` for the closest of ``choices``, else the list of valid ones."""
    options = [str(c) for c in choices]
    close = closest(word, options)
    if close is not None:
        return f"did you mean {close!r}?"
    return f"use one of {', '.join(options)}"


def type_name(value: Any) -> str:
    """The TOML word for the type of ``value`` (``a string``, ``an integer``, ``a table``, ...)."""
    if isinstance(value, bool):
        return "true/false"
    for kind, word in ((str, "a string"), (int, "an integer"), (float, "a number"), (list, "a list"),
                       (Mapping, "a table")):
        if isinstance(value, kind):
            return word
    return type(value).__name__


def fail(where: str, key: str, value: Any, problem: str, fix: str) -> ConfigError:
    """The error for ``key = value`` in ``where``: ``WHERE: KEY = VALUE is PROBLEM; FIX`` (raise it)."""
    return ConfigError(f"{where}: {key} = {value!r} is {problem}; {fix}")


def check_keys(where: str, table: Mapping[str, Any], allowed: Sequence[str]) -> None:
    """Every key of ``table`` is one of ``allowed``."""
    for key in table:
        if key not in allowed:
            raise ConfigError(f"{where}: unknown key {key!r}; {suggest(key, allowed)}")


def want_table(where: str, key: str, value: Any) -> Mapping[str, Any]:
    """``value`` is a TOML table."""
    if not isinstance(value, Mapping):
        raise fail(where, key, value, type_name(value), f"write it as a table: [{key}] or {key} = {{ ... }}")
    return value


def _is_int(value: Any) -> bool:
    return not isinstance(value, bool) and hasattr(value, "__index__")


def _span(lo: float | None, hi: float | None) -> str:
    """The allowed range in words: `` >= 1``, `` <= 9``, `` in 0..1`` or nothing."""
    if lo is None and hi is None:
        return ""
    if hi is None:
        return f" >= {lo}"
    if lo is None:
        return f" <= {hi}"
    return f" in {lo}..{hi}"


def want_int(where: str, key: str, value: Any, lo: int | None = None, hi: int | None = None) -> int:
    """``value`` is an integer (not true/false) in ``lo..hi`` (either end open when None)."""
    if not _is_int(value):
        raise fail(where, key, value, type_name(value), f"give an integer{_span(lo, hi)}")
    number = int(value)
    if (lo is not None and number < lo) or (hi is not None and number > hi):
        raise fail(where, key, number, "out of range", f"give an integer{_span(lo, hi)}")
    return number


def want_number(where: str, key: str, value: Any, lo: float | None = None, hi: float | None = None) -> float:
    """``value`` is an integer or a float in ``lo..hi``."""
    if isinstance(value, bool) or not isinstance(value, (int, float)) and not _is_int(value):
        raise fail(where, key, value, type_name(value), f"give a number{_span(lo, hi)}")
    number = float(value)
    if (lo is not None and number < lo) or (hi is not None and number > hi):
        raise fail(where, key, value, "out of range", f"give a number{_span(lo, hi)}")
    return number


def want_bool(where: str, key: str, value: Any) -> bool:
    """``value`` is true or false (numpy booleans count)."""
    if type(value).__name__ not in ("bool", "bool_"):
        raise fail(where, key, value, type_name(value), "write true or false")
    return bool(value)


def want_str(where: str, key: str, value: Any) -> str:
    """``value`` is a string."""
    if not isinstance(value, str):
        raise fail(where, key, value, type_name(value), "give a string in quotes")
    return value


def want_choice(where: str, key: str, value: Any, choices: Sequence[str]) -> str:
    """``value`` is one of ``choices``."""
    if not isinstance(value, str) or value not in choices:
        raise fail(where, key, value, "not known", suggest(value, choices))
    return value


def want_str_list(where: str, key: str, value: Any) -> list[str]:
    """A list of strings; a lone string counts as a list of one."""
    if isinstance(value, str):
        return [value]
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise fail(where, key, value, type_name(value), "give a list of strings")
    return list(value)
