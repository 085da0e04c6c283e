"""Option schema shared by every rule kind.

A rule kind declares its options as ``{name: Option(...)}``; the rule-file
loader reads each value with :func:`checker.units.parse_quantity` for the
option's ``kind`` and checks it against ``minimum`` / ``maximum`` /
``choices``. ``default=None`` with ``required=True`` means the user must give
it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Option:
    """One option of a rule kind.

    ``kind`` is a unit kind from :data:`checker.units.UNITS` (``length``,
    ``angle``, ``ratio`` ...), or ``choice`` (one of ``choices``), or
    ``table`` (a list of mappings whose keys are given by ``columns``:
    ``{column: unit kind}``), or ``bool``.
    """

    kind: str
    default: Any = None
    required: bool = False
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple[str, ...] = ()
    columns: tuple[tuple[str, str], ...] = ()
    help: str = ""
