"""Opening a fabrication file by path: the one place that turns the
operating system's errors into a :class:`FabError` naming the file."""

from __future__ import annotations

import os
import re
import zipfile
import zlib
from typing import BinaryIO, Callable, TypeVar

from ...errors import FabError

T = TypeVar("T")


def read_path(path: str | os.PathLike[str], reader: Callable[[BinaryIO, str], T], what: str) -> T:
    """``reader(stream, name)`` on the file at ``path``; ``what`` names the
    kind of file in the message for a folder (``"a drill file"``)."""
    file = os.fspath(path)
    try:
        with open(file, "rb") as stream:
            return reader(stream, file)
    except FileNotFoundError:
        raise FabError(file, None, "no such file") from None
    except IsADirectoryError:
        raise FabError(file, None, f"is a folder, not {what}") from None
    except OSError as exc:
        raise FabError(file, None, f"cannot read the file: {exc.strerror or exc}") from None


def read_text(stream: BinaryIO, name: str, limit: int, what: str = "not read") -> str:
    """The stream as text (UTF-8, a byte-order mark allowed): at most
    ``limit`` bytes (beyond: an error ending in ``what``), and the line of a
    byte that is not UTF-8 reported."""
    try:
        raw = stream.read(limit + 1)
    except (OSError, EOFError, zipfile.BadZipFile, zlib.error) as exc:
        raise FabError(name, None, f"cannot read the file: {exc}") from None
    if len(raw) > limit:
        raise FabError(name, None, f"over the size limit of {limit:,} bytes: {what}")
    try:
        return bytes(raw).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        raise FabError(name, line, f"not UTF-8 text (bad byte at offset {exc.start})") from None


def read_lines(stream: BinaryIO, name: str, limit: int) -> list[str]:
    """:func:`read_text` split into lines (CR LF, CR or LF)."""
    return re.split(r"\r\n|\r|\n", read_text(stream, name, limit))
