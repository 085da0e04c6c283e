"""Opening a fabrication file by path: the one place that turns the
operating system's errors into a :class:`FabError` naming the file."""

from __future__ import annotations

import os
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
