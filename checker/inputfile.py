"""Reading one input file (a board, a rule file, a waiver file, a baseline
report) with every way it can fail worded once, naming the file.

Each door calls :func:`read_bytes` or :func:`read_text` with its own error
class (:class:`~checker.errors.BoardError`, ``RuleError``, ``WaiverError``,
``BaselineError``) and what the file should be ("a rule file"), so a missing
file, a folder, a file over the size cap (:mod:`checker.limits`), an OS
error and text that is not UTF-8 read the same from every door.
"""

from __future__ import annotations

import os

from . import limits
from .errors import InputError


def read_bytes(path: str | os.PathLike[str], error: type[InputError], what: str) -> bytes:
    """The bytes of the file, within the per-file cap; ``error(file, None,
    message)`` for anything that keeps them from being read."""
    file = os.fspath(path)
    try:
        return limits.read_file(file)
    except limits.TooLarge as exc:
        raise error(file, None, str(exc)) from None
    except FileNotFoundError:
        raise error(file, None, "no such file") from None
    except IsADirectoryError:
        raise error(file, None, f"is a folder, not {what}") from None
    except OSError as exc:
        raise error(file, None, f"cannot read the file: {exc.strerror or exc}") from None


def decode_utf8(raw: bytes, file: str, error: type[InputError], bom: bool = False) -> str:
    """``raw`` as UTF-8 text (with ``bom``, a leading byte-order mark is
    dropped); ``error`` naming the offset of the first bad byte."""
    try:
        return raw.decode("utf-8-sig" if bom else "utf-8")
    except UnicodeDecodeError as exc:
        raise error(file, None, f"not UTF-8 text (bad byte at offset {exc.start})") from None


def read_text(path: str | os.PathLike[str], error: type[InputError], what: str, bom: bool = False) -> str:
    """:func:`read_bytes` then :func:`decode_utf8`: the file's text exactly
    (no newline translation).

    >>> from checker.errors import RuleError
    >>> read_text("/no/such/rules.yaml", RuleError, "a rule file")
    Traceback (most recent call last):
    ...
    checker.errors.RuleError: /no/such/rules.yaml: no such file
    """
    file = os.fspath(path)
    return decode_utf8(read_bytes(file, error, what), file, error, bom)
