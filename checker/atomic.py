"""Safe writes: a report appears whole or not at all, and no debris is left.

A report is written to a temporary file beside it and renamed into place.
The temporary file's name is recognisable (``.NAME.couplint-PID-XXXX.tmp``):

- an exception, Ctrl-C (SIGINT) or SIGTERM (what CI runners send on a
  timeout) removes it: :func:`removing_temporaries_on_signals` turns SIGTERM
  into an exit that runs the same clean-up;
- SIGKILL cannot be caught; the next write into the same folder sweeps a
  leftover whose process no longer runs (:func:`sweep_leftovers`), and only
  there: couplint never looks through folders it does not write to.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import tempfile
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

from .errors import UsageError

#: A temporary file of ours: ``.<name>.couplint-<pid>-<random>.tmp``.
TEMPORARY_NAME = re.compile(r"^\..*\.couplint-(\d+)-[A-Za-z0-9_]+\.tmp$", re.DOTALL)

#: Temporary files this process is writing now (removed on a signal).
_LIVE: set[str] = set()


def write_atomically(path: str | os.PathLike, emit: Callable[[Any], object], binary: bool = False) -> None:
    """Call ``emit(handle)`` on a temporary file beside ``path``, then rename
    it into place: an interrupted run leaves the old file intact and never a
    half-written one. ``binary``: the handle takes bytes (a PDF)."""
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    if not directory.is_dir():
        raise UsageError(f"{path}: the folder {directory} does not exist")
    sweep_leftovers(directory)
    # the name is cut so the temporary name stays within the usual 255-byte limit
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name[:150]}.couplint-{os.getpid()}-", suffix=".tmp", dir=directory)
    _LIVE.add(tmp)
    try:
        with (os.fdopen(fd, "wb") if binary else os.fdopen(fd, "w", encoding="utf-8", newline="\n")) as handle:
            emit(handle)
        os.chmod(tmp, _mode_for(target))
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    finally:
        _LIVE.discard(tmp)


def sweep_leftovers(directory: str | os.PathLike[str]) -> list[str]:
    """Remove our temporary files in ``directory`` whose writing process is
    gone (a run killed by SIGKILL); a live process's file is kept. Returns
    the names removed."""
    removed: list[str] = []
    try:
        entries = list(os.scandir(directory))
    except OSError:
        return removed
    for entry in entries:
        match = TEMPORARY_NAME.match(entry.name)
        if match is None or not entry.is_file(follow_symlinks=False):
            continue
        pid = int(match.group(1)) if len(match.group(1)) < 10 else -1
        if pid == os.getpid() or _running(pid):
            continue
        with contextlib.suppress(OSError):
            os.unlink(entry.path)
            removed.append(entry.name)
    return removed


def remove_live_temporaries() -> None:
    """Remove every temporary file this process is writing now."""
    for tmp in list(_LIVE):
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        _LIVE.discard(tmp)


class Stopped(SystemExit):
    """The run was stopped by SIGTERM or SIGHUP; ``code`` is 128 + the signal."""


@contextlib.contextmanager
def removing_temporaries_on_signals() -> Iterator[None]:
    """While inside, SIGTERM (and SIGHUP) remove the temporary files being
    written and end the run with exit status 128 + the signal number, as a
    shell reports a signalled process; SIGINT already arrives as
    KeyboardInterrupt, which :func:`write_atomically` cleans up after."""
    def handler(signum, frame) -> None:
        remove_live_temporaries()
        raise Stopped(128 + signum)

    caught = [s for s in (getattr(signal, "SIGTERM", None), getattr(signal, "SIGHUP", None)) if s is not None]
    try:
        previous = {s: signal.signal(s, handler) for s in caught}
    except ValueError:  # not the main thread: signals cannot be handled here
        yield
        return
    try:
        yield
    finally:
        for s, old in previous.items():
            signal.signal(s, old)


def _running(pid: int) -> bool:
    """Whether process ``pid`` exists (on this machine)."""
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True  # exists but is not ours, or cannot be asked: keep its file
    return True


def refuse_overwriting_inputs(out: str | os.PathLike, inputs: Sequence[str | os.PathLike]) -> None:
    """Raise :class:`UsageError` if ``out`` is one of ``inputs``, or an
    existing file inside an input folder (a fabrication package)."""
    target = os.path.realpath(out)
    for p in inputs:
        real = os.path.realpath(p)
        if real == target:
            raise UsageError(f"{out}: an output path names an input file; refusing to overwrite it")
        if os.path.isdir(real) and os.path.dirname(target) == real and os.path.exists(target):
            raise UsageError(f"{out}: an output path names a file of the input folder {p}; refusing to overwrite it")


def refuse_shared_outputs(named: list[tuple[str, str | os.PathLike | None]]) -> None:
    """Raise :class:`UsageError` if two options (``("--out", path)``, ...)
    name the same output file: the second write would replace the first."""
    seen: dict[str, str] = {}
    for option, path in named:
        if not path:
            continue
        real = os.path.realpath(path)
        if real in seen:
            raise UsageError(f"{path}: {seen[real]} and {option} name the same file; give each output its own path")
        seen[real] = option


def _mode_for(target: Path) -> int:
    """Keep an existing file's permissions; a new file gets the usual
    0o666 less the umask (mkstemp's private 0o600 is not wanted for reports)."""
    try:
        return target.stat().st_mode & 0o7777
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask
