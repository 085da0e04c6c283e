"""Safe writes: a report appears whole or not at all."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable, TextIO

from .errors import UsageError


def write_atomically(path: str | os.PathLike, emit: Callable[[TextIO], None]) -> None:
    """Call ``emit(handle)`` on a temporary file beside ``path``, then rename
    it into place: an interrupted run leaves the old file intact and never a
    half-written one."""
    target = Path(path)
    directory = target.parent if str(target.parent) else Path(".")
    if not directory.is_dir():
        raise UsageError(f"{path}: the folder {directory} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            emit(handle)
        os.chmod(tmp, _mode_for(target))
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def refuse_overwriting_inputs(out: str | os.PathLike, inputs: list[str | os.PathLike]) -> None:
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
