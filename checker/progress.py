"""Progress lines for work that runs long (reading a large file, a
step of a check).

A reader opens a :class:`Stage` and tells it how far it got; the stage
prints nothing for work that finishes within :data:`QUIET_SECONDS`, then a
plain line at most every :data:`EVERY_SECONDS` (``couplint: reading
L1.gbr: 120 of 512 MB (23 %), 10 s``). Plain lines, no colour and no
cursor movement, read the same on a terminal and in a CI log, so
``NO_COLOR`` has nothing to turn off here.

The sink is a context variable: the command line routes it to stderr with
:func:`to`; a library caller gets silence. Inside a step of a check, the
work says how far it got with :func:`detail` (or a :class:`Counter`); the
command line routes that with :func:`details_to`.
"""

from __future__ import annotations

import contextlib
import contextvars
import threading
import time
from collections.abc import Callable, Iterator

#: A stage that ends within this many seconds prints nothing.
QUIET_SECONDS = 3.0
#: Seconds between two lines of one stage.
EVERY_SECONDS = 5.0

_SINK: contextvars.ContextVar[Callable[[str], None] | None] = contextvars.ContextVar("couplint_progress",
                                                                                    default=None)


@contextlib.contextmanager
def to(sink: Callable[[str], None]) -> Iterator[None]:
    """Send progress lines to ``sink`` (a function taking one line) inside the block."""
    token = _SINK.set(sink)
    try:
        yield
    finally:
        _SINK.reset(token)


class Stage:
    """One piece of long work: ``what`` (``reading L1.gbr``), its ``total``
    in ``unit`` (None if unknown), ``scale`` dividing counts for display."""

    def __init__(self, what: str, total: float | None = None, unit: str = "MB", scale: float = 1e6,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self.what, self.total, self.unit, self.scale = what, total, unit, scale
        self.sink = _SINK.get()
        self.clock = clock
        self.start = clock()
        self.next_line = self.start + QUIET_SECONDS

    def at(self, done: float, detail: str | None = None) -> None:
        """The work has reached ``done`` (in counts, e.g. bytes); ``detail``
        says what it is doing now (shown after the figures)."""
        if self.sink is None:
            return
        now = self.clock()
        if now < self.next_line:
            return
        self.next_line = now + EVERY_SECONDS
        shown = f"{done / self.scale:,.0f}"
        if self.total:
            share = min(100.0, 100.0 * done / self.total)
            shown += f" of {self.total / self.scale:,.0f} {self.unit} ({share:.0f} %)"
        else:
            shown += f" {self.unit}"
        self.sink(f"couplint: {self.what}: {shown}, {now - self.start:.0f} s" + (f" ({detail})" if detail else ""))


_DETAIL: contextvars.ContextVar[Callable[[str], None] | None] = contextvars.ContextVar("couplint_detail",
                                                                                      default=None)


@contextlib.contextmanager
def details_to(sink: Callable[[str], None]) -> Iterator[None]:
    """Inside the block, :func:`detail` hands its text to ``sink``: the
    command line shows it beside the step a check is on (in the bar on a
    terminal, in the periodic plain line otherwise)."""
    token = _DETAIL.set(sink)
    try:
        yield
    finally:
        _DETAIL.reset(token)


def detail(text: str) -> None:
    """Say how far the current step of a check has got (``1,200,000 pairs
    measured``, ``field solves 3 of 14``). Cheap when nobody listens; the
    listener decides how often to show it. Safe from worker threads (the
    maps of :mod:`checker.cores` pass the listener on)."""
    sink = _DETAIL.get()
    if sink is not None:
        sink(text)


class Counter:
    """Counts finished parts of a step from any thread and reports
    ``label`` with the count (and the total, if known) through
    :func:`detail`."""

    def __init__(self, label: str, total: int | None = None) -> None:
        self.label, self.total, self.done = label, total, 0
        self.sink = _DETAIL.get()
        self._lock = threading.Lock()

    def add(self, n: int = 1) -> None:
        if self.sink is None:
            return
        with self._lock:
            self.done += n
            done = self.done
        of = f" of {self.total:,}" if self.total else ""
        self.sink(f"{self.label} {done:,}{of}")
