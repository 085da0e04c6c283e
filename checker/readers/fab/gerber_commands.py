"""Splitting a Gerber byte stream into commands, chunk by chunk.

Gerber Layer Format Specification 2021.02, 3.3: a file is a stream of
commands built from *words*, each a run of characters other than ``*`` and
``%`` ended by ``*``. A *word command* is one word; an *extended command* is
``%`` followed by one or more words and a closing ``%``. CR and LF only aid
reading and may appear anywhere (3.1), so a command may span lines and a
line may hold several commands. Every command is reported with the line it
starts on.

Tolerated deviations, documented: a ``G04`` comment may contain ``%`` (some
exporters write it there); the last word of an extended command may omit
its ``*`` before the closing ``%``.
"""

from __future__ import annotations

import re

#: Longest command accepted (bytes); a longer one means a broken file.
MAX_COMMAND_BYTES = 1 << 20
#: Longest extended command (all its words, bytes).
MAX_EXTENDED_BYTES = 8 << 20

_WHITESPACE = re.compile(rb"[ \t\r\n]*")
_COMMENT_START = re.compile(rb"G0*4(?![0-9])")


class SplitError(ValueError):
    """Bytes that cannot be a command; ``line`` is where it starts."""

    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line


class CommandSplitter:
    """Collects bytes into commands. :meth:`feed` returns the commands
    completed by a chunk as ``("word", bytes, line)`` or
    ``("ext", [(bytes, line), ...], line)`` tuples (word bytes without their
    ``*``); :meth:`idle` says whether nothing is pending, so a caller may read
    a whole line itself."""

    def __init__(self) -> None:
        self.pending = bytearray()
        self.pending_line = 0
        self.in_extended = False
        self.extended_line = 0
        self.extended_words: list[tuple[bytes, int]] = []
        self.extended_size = 0

    def idle(self) -> bool:
        return not self.pending and not self.in_extended

    def _hold(self, data: bytes, line: int) -> None:
        if not self.pending:
            self.pending_line = line
        self.pending += data
        if len(self.pending) > MAX_COMMAND_BYTES:
            raise SplitError(self.pending_line, f"a command runs over {MAX_COMMAND_BYTES} bytes without its "
                             "closing '*': this is not a Gerber file or it is damaged")

    def _take(self, data: bytes, line: int) -> tuple[bytes, int]:
        if self.pending:
            word, start = bytes(self.pending) + data, self.pending_line
            self.pending.clear()
            return word, start
        return data, line

    def feed(self, data: bytes, line: int) -> list[tuple]:
        out: list[tuple] = []
        i, n = 0, len(data)
        while i < n:
            if not self.pending:
                i = _WHITESPACE.match(data, i).end()  # type: ignore[union-attr]  # \s* always matches
                if i >= n:
                    break
            star = data.find(b"*", i)
            if self.in_extended:
                pct = data.find(b"%", i)
                if pct != -1 and (star == -1 or pct < star):
                    word, start = self._take(data[i:pct], line)
                    if word.strip():
                        self.extended_words.append((word, start))
                    i = pct + 1
                    self.in_extended = False
                    out.append(("ext", self.extended_words, self.extended_line))
                    self.extended_words = []
                    continue
                if star == -1:
                    self._hold(data[i:], line)
                    break
                word, start = self._take(data[i:star], line)
                self.extended_size += len(word)
                if self.extended_size > MAX_EXTENDED_BYTES:
                    raise SplitError(self.extended_line, f"an extended command runs over {MAX_EXTENDED_BYTES} "
                                     "bytes without its closing '%': this is not a Gerber file or it is damaged")
                self.extended_words.append((word, start))
                i = star + 1
                continue
            if not self.pending and data[i] == 0x25:  # '%'
                self.in_extended = True
                self.extended_line = line
                self.extended_words = []
                self.extended_size = 0
                i += 1
                continue
            head = bytes(self.pending[:8]) if self.pending else data[i:i + 8]
            if not _COMMENT_START.match(head):
                pct = data.find(b"%", i)
                if pct != -1 and (star == -1 or pct < star):
                    start = self.pending_line if self.pending else line
                    text = (bytes(self.pending) + data[i:pct]).strip()
                    raise SplitError(start, f"the command {_show(text)} has no closing '*' before '%'")
            if star == -1:
                self._hold(data[i:], line)
                break
            word, start = self._take(data[i:star], line)
            out.append(("word", word, start))
            i = star + 1
        return out

    def finish(self, last_line: int) -> None:
        """Raise if the stream ended inside a command."""
        if self.in_extended:
            raise SplitError(self.extended_line, "the file ends inside an extended command: the '%' opened "
                             "here is never closed (truncated file?)")
        if bytes(self.pending).strip():
            raise SplitError(self.pending_line, f"the file ends inside the command {_show(bytes(self.pending))}: "
                             "no closing '*' (truncated file?)")


def _show(text: bytes, limit: int = 40) -> str:
    """A command quoted for a message, shortened and with odd bytes escaped."""
    text = text.strip()
    shown = text[:limit].decode("ascii", errors="backslashreplace")
    return repr(shown + ("..." if len(text) > limit else ""))


show_command = _show
