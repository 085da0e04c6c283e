"""Opening a fabrication file by path: the one place that turns the
operating system's errors into a :class:`FabError` naming the file."""

from __future__ import annotations

import os
import re
import zipfile
import zlib
from typing import BinaryIO, Callable, TypeVar, cast

from ... import limits, progress
from ...describe import shorten
from ...errors import FabError

T = TypeVar("T")


def read_path(path: str | os.PathLike[str], reader: Callable[[BinaryIO, str], T], what: str) -> T:
    """``reader(stream, name)`` on the file at ``path``; ``what`` names the
    kind of file in the message for a folder (``"a drill file"``). The
    stream is :class:`Metered`: the per-file cap and progress lines apply."""
    file = os.fspath(path)
    try:
        with open(file, "rb") as stream:
            # Metered reads like a binary stream (read, readline, iteration): what every reader uses
            return reader(cast(BinaryIO, Metered(stream, file, os.fstat(stream.fileno()).st_size)), file)
    except FileNotFoundError:
        raise FabError(file, None, "no such file") from None
    except IsADirectoryError:
        raise FabError(file, None, f"is a folder, not {what}") from None
    except OSError as exc:
        raise FabError(file, None, f"cannot read the file: {exc.strerror or exc}") from None


def describe_exception(exc: BaseException) -> str:
    """An OS or archive error in a few words (its own text, bounded)."""
    return shorten(" ".join(str(getattr(exc, "strerror", None) or exc).split()), 200)


class PackageBudget:
    """Bytes read from the files of one package so far, against the
    package cap (``--limit package-mb``); shared by the package's streams."""

    def __init__(self, name: str) -> None:
        self.name = name
        self.limit = limits.current().package_bytes
        self.used = 0

    def spend(self, n: int) -> None:
        self.used += n
        if self.used > self.limit:
            raise FabError(self.name, None, f"over the cap of {self.limit // limits.MB:,} MB read from one package "
                                            f"(after decompression); {limits.hint('package-mb')}")


class Metered:
    """A binary stream that counts what is read from it: past the per-file
    cap (``--limit file-mb``, counted after decompression, so a zip bomb
    stops at the cap) it raises one FabError naming the file; a
    :class:`PackageBudget` also counts the bytes; a long read prints
    progress lines (:mod:`checker.progress`). ``size``: the expected size
    for those lines, if known."""

    def __init__(self, stream: BinaryIO, name: str, size: int | None = None,
                 budget: PackageBudget | None = None) -> None:
        self.stream = stream
        self.name = name
        self.budget = budget
        self.limit = limits.current().file_bytes
        self.done = 0
        self.stage = progress.Stage(f"reading {os.path.basename(name) or name}", size)

    def read(self, n: int | None = -1) -> bytes:
        room = self.limit + 1 - self.done  # one byte past the cap tells "over" from "at"
        n = room if n is None or n < 0 else min(n, room)
        try:
            data = self.stream.read(max(n, 0))
        except (OSError, EOFError, zipfile.BadZipFile, zlib.error, NotImplementedError, RuntimeError,
                ValueError) as exc:  # a damaged archive member, an unsupported compression
            raise FabError(self.name, None, f"cannot read the file: {describe_exception(exc)}") from None
        self.done += len(data)
        if self.done > self.limit:
            raise FabError(self.name, None, f"over the cap of {self.limit // limits.MB:,} MB read per file "
                                            f"(after decompression); {limits.hint('file-mb')}")
        if self.budget is not None:
            self.budget.spend(len(data))
        self.stage.at(self.done)
        return data

    def close(self) -> None:
        self.stream.close()

    def __enter__(self) -> "Metered":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def read_text(stream: BinaryIO, name: str, what: str = "not read", format_limit: int | None = None) -> str:
    """The stream as text (UTF-8, a byte-order mark allowed): at most the
    per-file cap of bytes (``--limit file-mb``), or ``format_limit`` if the
    format is never that large (a stackup file); beyond: an error ending in
    ``what``. The line of a byte that is not UTF-8 is reported."""
    cap = limits.current().file_bytes
    limit = cap if format_limit is None else min(cap, format_limit)
    try:
        raw = stream.read(limit + 1)
    except (OSError, EOFError, zipfile.BadZipFile, zlib.error) as exc:
        raise FabError(name, None, f"cannot read the file: {exc}") from None
    if len(raw) > limit:
        if limit < cap:
            raise FabError(name, None, f"over the size limit of {limit:,} bytes: {what}")
        raise FabError(name, None, f"over the cap of {limit // limits.MB:,} MB read per file: {what}; "
                                   f"{limits.hint('file-mb')}")
    try:
        return bytes(raw).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        raise FabError(name, line, f"not UTF-8 text (bad byte at offset {exc.start})") from None


def read_lines(stream: BinaryIO, name: str) -> list[str]:
    """:func:`read_text` split into lines (CR LF, CR or LF)."""
    return re.split(r"\r\n|\r|\n", read_text(stream, name))
