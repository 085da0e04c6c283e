"""Input shown back in a message, bounded: a bad value, a file name or a
JSON path from hostile input can be megabytes long; a message quotes at
most a head and a tail of it with ``...`` between."""

from __future__ import annotations

import json
from typing import Any

#: Longest value quoted in a message (characters).
VALUE_CHARS = 40


def shorten(text: str, limit: int) -> str:
    """``text`` if at most ``limit`` characters, else its head and tail
    joined by ``...`` (``limit`` characters in all).

    >>> shorten("abcdefghij", 7)
    'ab...ij'
    >>> shorten("short", 7)
    'short'
    """
    if len(text) <= limit:
        return text
    keep = max(limit - 3, 2)
    head = (keep + 1) // 2
    return f"{text[:head]}...{text[len(text) - (keep - head):]}"


def describe_value(value: Any, limit: int = VALUE_CHARS) -> str:
    """A parsed JSON/YAML value as a message shows it: ``null``, ``true``,
    a number or a quoted string (shortened to ``limit``), ``an array``,
    ``an object``.

    >>> describe_value("x" * 100, 11)
    '"xxx...xxx"'
    >>> describe_value(10 ** 60, 12)
    '10000...0000'
    """
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        digits = len(str(abs(value))) if abs(value) < 10 ** 4000 else None
        if digits is None:  # str() of a huge int is refused by Python itself
            return "an integer of more than 4000 digits"
        return shorten(str(value), limit)
    if isinstance(value, float):
        return shorten(repr(value), limit)
    if isinstance(value, str):
        return json.dumps(shorten(value, max(limit - 2, 5)))
    if isinstance(value, (list, tuple)):
        return "an array"
    if isinstance(value, dict):
        return "an object"
    return type(value).__name__


def describe_words(value: Any, json: bool = False) -> str:
    """A parsed value named in words, for "expected ..., got ..." messages:
    ``the number 3``, ``the text 'x'``, ``true (a boolean)``, ``a list``,
    ``a mapping`` (``an object`` and plain ``null`` with ``json``, for JSON
    files), ``null (nothing)``; long numbers and texts shortened.

    >>> describe_words(True), describe_words({}), describe_words({}, json=True)
    ('true (a boolean)', 'a mapping', 'an object')
    >>> describe_words("x" * 100)
    "the text 'xxxxxxxxxxxxxxxxxx...xxxxxxxxxxxxxxxxx'"
    """
    if value is None:
        return "null" if json else "null (nothing)"
    if isinstance(value, bool):
        return f"{str(value).lower()} (a boolean)"
    if isinstance(value, dict):
        return "an object" if json else "a mapping"
    if isinstance(value, (list, tuple)):
        return "a list"
    if isinstance(value, (int, float)):
        return f"the number {describe_value(value)}"
    if isinstance(value, str):
        return f"the text {shorten(repr(value), VALUE_CHARS)}"
    return f"{shorten(repr(value), VALUE_CHARS)} ({type(value).__name__})"
