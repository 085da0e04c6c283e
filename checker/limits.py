"""Resource caps: how much one run may read and build, checked before and
while the work is done, so a hostile or broken input ends in a message
instead of minutes of work and gigabytes of memory.

Each cap has a name the command line takes (``--limit NAME=VALUE``,
repeatable) and a default large enough for real boards:

| name           | default   | what it bounds                                                       |
|----------------|-----------|----------------------------------------------------------------------|
| ``file-mb``    | 512       | megabytes read from one input file (after decompression, counted as  |
|                |           | it is read)                                                          |
| ``package-mb`` | 2048      | megabytes read from all files of one fabrication package together    |
|                |           | (after decompression, counted while inflating a .zip)                |
| ``draws``      | 5000000   | draw and arc points of one Gerber layer                              |
| ``shapes``     | 1000000   | pads, regions and other shapes of one Gerber layer                   |
| ``track-points`` | 1000000 | points of one track, or of one region outline or hole, of a board    |
|                |           | JSON file                                                            |

Nesting depth is bounded by the formats themselves (JSON board: 16
levels, YAML: 32), not by a cap: no real file comes near either.

The caps in force are a context variable: the command line sets them with
:func:`using` around a run; a library caller gets the defaults.
"""

from __future__ import annotations

import contextlib
import contextvars
import dataclasses
import os
from collections.abc import Iterator
from dataclasses import dataclass

from .errors import UsageError

MB = 1_000_000


@dataclass(frozen=True)
class Limits:
    """The caps of one run (see the module docstring)."""

    file_mb: int = 512
    package_mb: int = 2048
    draws: int = 5_000_000
    shapes: int = 1_000_000
    track_points: int = 1_000_000

    @property
    def file_bytes(self) -> int:
        return self.file_mb * MB

    @property
    def package_bytes(self) -> int:
        return self.package_mb * MB


#: option name -> Limits field
NAMES = {"file-mb": "file_mb", "package-mb": "package_mb", "draws": "draws", "shapes": "shapes",
         "track-points": "track_points"}

_CURRENT: contextvars.ContextVar[Limits | None] = contextvars.ContextVar("couplint_limits", default=None)
_DEFAULTS = Limits()


def current() -> Limits:
    """The caps in force."""
    return _CURRENT.get() or _DEFAULTS


@contextlib.contextmanager
def using(limits: Limits | None) -> Iterator[Limits | None]:
    """Put ``limits`` in force inside the ``with`` block."""
    token = _CURRENT.set(limits)
    try:
        yield limits
    finally:
        _CURRENT.reset(token)


def hint(name: str) -> str:
    """How a message tells the user to raise cap ``name``."""
    return f"raise it with --limit {name}=N if the input is genuine"


def parse(items: list[str]) -> Limits:
    """``["file-mb=2048", "draws=50000000"]`` -> Limits; a UsageError names
    the item that cannot be read.

    >>> parse(["draws=5e7", "file-mb=1024"]).draws
    50000000
    """
    values: dict[str, int] = {}
    for item in items:
        name, sep, text = item.partition("=")
        name = name.strip()
        if not sep or name not in NAMES:
            raise UsageError(f"--limit {item[:60]!r}: expected NAME=VALUE with NAME one of {', '.join(NAMES)}")
        try:
            number = float(text.strip().replace("_", ""))
        except ValueError:
            number = float("nan")
        if not (number >= 1 and number < 1e15 and number == int(number)):
            raise UsageError(f"--limit {name}: expected a whole number of at least 1, got {text.strip()[:40]!r}")
        values[NAMES[name]] = int(number)
    return dataclasses.replace(Limits(), **values)


class TooLarge(Exception):
    """A file over the per-file cap; the message says which cap and how to
    raise it (callers add the file name in their own error class)."""


def read_file(path: str) -> bytes:
    """The bytes of the file at ``path``, refused (:class:`TooLarge`) before
    reading if its size is over the per-file cap, and cut off past it if the
    size was not known (a pipe). OS errors pass through to the caller."""
    cap = current().file_bytes
    with open(path, "rb") as stream:
        size = os.fstat(stream.fileno()).st_size
        if size > cap:
            raise TooLarge(f"the file is {size / MB:,.0f} MB, over the cap of {cap // MB:,} MB per file; "
                           f"{hint('file-mb')}")
        data = stream.read(cap + 1)
    if len(data) > cap:
        raise TooLarge(f"over the cap of {cap // MB:,} MB read per file; {hint('file-mb')}")
    return data
