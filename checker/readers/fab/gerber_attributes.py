"""Gerber X2 attribute commands (TF, TA, TO, TD) and the attribute
dictionaries they maintain.

Gerber Layer Format Specification 2021.02, chapter 5: an attribute command
is ``TF|TA|TO <name>{,<field>}`` or ``TD [<name>]`` (5.1); fields are
strings without ``*``, ``%`` and ``,``, in which ``\\uXXXX`` and
``\\UXXXXXXXX`` stand for a Unicode character (3.4.3, 3.4.4). One dictionary
holds the current aperture attributes (TA), attached to an aperture when AD
or AB creates it and to a region when G36/G37 creates it (5.3, 5.3.1);
another the object attributes (TO), attached to every draw, arc, flash and
region created while they are set (5.4). ``TD <name>`` deletes one entry,
``TD`` alone empties both dictionaries (5.5). File attributes (TF, 5.2)
are kept separately and never deleted.

The older comment form ``G04 #@! TF.FileFunction,...*`` carries the same
commands inside a comment; :func:`attribute_in_comment` extracts them.
"""

from __future__ import annotations

import re

_ESCAPE = re.compile(r"\\u([0-9A-Fa-f]{4})|\\U([0-9A-Fa-f]{8})")
_NAME = re.compile(r"[._a-zA-Z$][._a-zA-Z0-9$]*")


class AttributeSyntaxError(ValueError):
    """A malformed attribute command; the reader adds file and line."""


def unescape(field: str) -> str:
    """A field with its ``\\uXXXX`` / ``\\UXXXXXXXX`` escapes decoded (3.4.3);
    any other backslash is kept as it is."""
    if "\\" not in field:
        return field

    def one(m: re.Match) -> str:
        code = int(m[1] or m[2], 16)
        if code > 0x10FFFF or 0xD800 <= code <= 0xDFFF:
            return m[0]
        return chr(code)

    return _ESCAPE.sub(one, field)


def parse_attribute(text: str) -> tuple[str, str | None, tuple[str, ...]]:
    """``'TO.N,GND'`` -> ``('TO', '.N', ('GND',))``; ``'TD'`` ->
    ``('TD', None, ())``. Raises :class:`AttributeSyntaxError` for a bad name."""
    code, rest = text[:2], text[2:]
    if not rest:
        if code == "TD":
            return code, None, ()
        raise AttributeSyntaxError(f"the {code} attribute command has no attribute name")
    name, _, value = rest.partition(",")
    if not _NAME.fullmatch(name):
        raise AttributeSyntaxError(f"{name[:40]!r} is not a valid attribute name (letters, digits, '.', '_', '$'; "
                              "not starting with a digit; spec 3.4.5)")
    if code == "TD":
        if value or "," in rest:
            raise AttributeSyntaxError("TD takes only an attribute name, no values")
        return code, name, ()
    fields = tuple(unescape(f) for f in value.split(",")) if "," in rest else ()
    return code, name, fields


def attribute_in_comment(comment: str) -> str | None:
    """The attribute command inside a ``G04 #@! TF...`` style comment
    (``comment`` is the text after ``G04``), or ``None``."""
    text = comment.strip()
    if not text.startswith("#@!"):
        return None
    text = text[3:].strip()
    if text[:2] in ("TF", "TA", "TO", "TD"):
        return text
    return None
