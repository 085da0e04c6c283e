"""One base exception; subclasses carry the file and the place in it.

The CLI prints ``str(error)`` on one line to stderr and exits 2. The message
always names the file and the place (JSON path, line, rule key), so a user can
go straight to the bad spot.
"""

from __future__ import annotations

from .describe import shorten

#: Longest file name or place (JSON path, key path) a message shows, and
#: longest line of a message; longer ones keep their head and tail.
PLACE_CHARS = 160
LINE_CHARS = 400
#: Most lines a message shows (a table of a package's files may be long).
MESSAGE_LINES = 80


def bounded(text: str, limit: int = LINE_CHARS) -> str:
    """``text`` with every line shortened to ``limit`` characters (head
    ``...`` tail) and at most :data:`MESSAGE_LINES` lines: a hostile input
    cannot make a message of megabytes.

    >>> bounded("a" * 10 + "b" * 10, 9)
    'aaa...bbb'
    """
    lines = [shorten(line, limit) for line in text.split("\n")]
    if len(lines) > MESSAGE_LINES:
        lines = lines[:MESSAGE_LINES - 1] + [f"... ({len(lines) - MESSAGE_LINES + 1} more lines)"]
    return "\n".join(lines)


class CouplintError(Exception):
    """Base of every error couplint reports to a user."""


class InputError(CouplintError):
    """Bad input: ``file: place: what is wrong``."""

    def __init__(self, file: str, place: str | None, message: str) -> None:
        self.file = file
        self.place = place
        self.message = message
        where = f"{bounded(file, PLACE_CHARS)}: {bounded(place, PLACE_CHARS)}" if place else bounded(file, PLACE_CHARS)
        super().__init__(f"{where}: {bounded(message)}")


class BoardError(InputError):
    """A board file (geometry) is missing, malformed or inconsistent."""


class RuleError(InputError):
    """A rule file is missing, malformed or names something unknown."""


class UsageError(CouplintError):
    """The command line itself is wrong."""


class WaiverError(InputError):
    """A waiver file is missing, malformed or cannot take a new entry.

    ``place`` is the key path (``waivers[3].date``); ``line``, when known,
    is the YAML line and is shown after the key path.
    """

    def __init__(self, file: str, place: str | None, message: str, line: int | None = None) -> None:
        self.key_path = place
        self.line = line
        if line is not None:
            place = f"{place} (line {line})" if place else f"line {line}"
        super().__init__(file, place, message)


class BaselineError(InputError):
    """A baseline report is missing or is not a couplint JSON report."""


class FabError(BoardError):
    """A fabrication export (Gerber, Excellon, IPC-D-356, Gerber job file,
    stackup YAML) is missing, malformed or inconsistent.

    ``place`` is ``line N`` for the line-oriented formats (the line the bad
    command starts on) or a JSON path for the job file.
    """

    def __init__(self, file: str, line: int | None, message: str, place: str | None = None) -> None:
        self.line = line
        if place is None and line is not None:
            place = f"line {line}"
        super().__init__(file, place, message)


class SolveError(CouplintError, ValueError):
    """A cross-section the field solver cannot take (conductors that touch,
    a layer of no thickness). The sanity bounds of :mod:`checker.bounds`
    keep such input out; this is the solver's own refusal, so a case they
    miss still ends in one message, not an internal error."""
