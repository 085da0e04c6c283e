"""IPC-D-356 / IPC-D-356A netlists: net names at test points, in mm.

``read_ipc356(stream, name)`` reads a binary stream (a zip member will do),
``load_ipc356(path)`` a file; both return a
:class:`~checker.readers.fab.layer.Netlist` of
:class:`~checker.readers.fab.layer.NetPoint` or raise one
:class:`~checker.errors.FabError` naming the file and the line.

Record layout: IPC-D-356A, "Bare Substrate Electrical Test Data Format",
the fixed-column test record (operation codes 317 / 327) and the
parameter records, cited from memory. Columns (1-based, inclusive):

====== ==========================================================
1-3    operation code: ``317`` through-hole, ``327`` surface point
4-17   net name (14 characters); ``N/C`` = not connected
18-20  blank
21-26  reference designator (``VIA`` for a via)
27     ``-``
28-31  pin (terminal) name
32     ``M`` = mid-point of a net (not used here)
33-38  ``D`` + hole diameter (4 digits) + ``P`` plated / ``U`` unplated
39-41  ``A`` + access code: ``00`` both sides, ``01`` top (primary
       side), ``nn`` copper layer nn
42-49  ``X`` + sign + 6 digits
50-57  ``Y`` + sign + 6 digits
58-    feature size X / Y, rotation, solder mask (not used here)
====== ==========================================================

Columns 1-32 are read by position. From column 33 on, the fields are
found by their letters in the standard's order (``D`` hole, ``A``
access, ``X`` then ``Y``), so a line cut after the coordinates, or a
number written one digit wider, still reads; a record without ``X`` and
``Y`` is refused.

Other records: ``C`` comment; ``P`` parameter (``P  JOB``, ``P  UNITS``,
``P  NNAMEnnnn <long name>`` ...); ``999`` end of file (required: a file
without it is refused as cut short; lines after it are not read). Other
operation codes (continuation, conductor, outline records ...) carry
nothing this reader needs and are skipped.

Units (``P  UNITS CUST n``): ``CUST 0`` inch, coordinates and hole sizes in
0.0001 in; ``CUST 1`` millimetre, in 0.001 mm; ``CUST 2`` inch in
0.0001 in with rotation in degrees. Those three are implemented; any
other ``UNITS`` value, or a test record before any ``UNITS`` record, is
refused (no default is assumed).

Net names: trailing blanks are removed; a name that equals an
``NNAMEnnnn`` key is replaced by that record's long name, wherever in the
file the ``P`` record stands; ``N/C`` and an empty net field give
``net = None``. Access ``A00`` gives ``access = None`` (both sides of a
through hole), ``Ann`` gives ``nn`` as written. ``refdes``, ``pin`` and
the hole's ``P`` / ``U`` flag (``plated``) are returned as written. A ``P`` record
repeating an ``NNAME`` key with another name, a tab in a test record, a
coordinate more than 10 m from the origin, a file over
the per-file cap (:mod:`checker.limits`) and bytes that are not UTF-8 are refused. The
input is never modified.
"""

from __future__ import annotations

import os
import re
from typing import BinaryIO, NoReturn

from ...errors import FabError
from .layer import Netlist, NetPoint
from .source import read_lines, read_path

#: A coordinate farther than this (10 m) is taken as a units mistake.
MAX_COORDINATE_MM = 10_000.0

#: ``P  UNITS CUST n`` -> (mm per unit, counts per unit): a coordinate
#: count c is c * mm / counts millimetres.
UNITS_CUST = {
    "0": (25.4, 10_000),  # inch, 0.0001 in
    "1": (1.0, 1_000),  # millimetre, 0.001 mm
    "2": (25.4, 10_000),  # inch, 0.0001 in; rotations in degrees
}

TEST_RECORDS = ("317", "327")

_TAIL = re.compile(
    r"\s*(?:D\s*([0-9]+)\s*([PU])?)?\s*(?:A\s*([0-9]{1,3}))?\s*"
    r"X\s*([+-]?)\s*([0-9]{1,12})\s*Y\s*([+-]?)\s*([0-9]{1,12})",
    re.ASCII,
)
_NNAME = re.compile(r"NNAME[0-9]+", re.ASCII)


def load_ipc356(path: str | os.PathLike[str]) -> Netlist:
    """Read the IPC-D-356 file at ``path`` (see the module docstring)."""
    return read_path(path, read_ipc356, "a netlist file")


def read_ipc356(stream: BinaryIO, name: str) -> Netlist:
    """Read an IPC-D-356 netlist from a binary stream; ``name`` is used in
    messages and as ``Netlist.path``."""
    lines = read_lines(stream, name)
    return _Reader(name).read(lines)


class _Reader:
    def __init__(self, name: str) -> None:
        self.name = name
        self.line = 0
        self.scale: tuple[float, int] | None = None  # (mm per unit, counts per unit)
        self.aliases: dict[str, tuple[str, int]] = {}  # NNAMEnnnn -> (long name, line)
        self.raw: list[tuple] = []

    def fail(self, message: str) -> NoReturn:
        raise FabError(self.name, self.line, message)

    def read(self, lines: list[str]) -> Netlist:
        if not any(s.strip() for s in lines):
            raise FabError(self.name, None, "the file is empty")
        for i, text in enumerate(lines):
            self.line = i + 1
            text = text.rstrip()
            if not text:
                continue
            head = text[0]
            if head == "C":
                continue
            if head == "P":
                self._parameter(text)
            elif text[:3] == "999":
                return self._result()
            elif text[:3] in TEST_RECORDS:
                self._test_record(text)
            elif re.fullmatch("[0-9]{3}", text[:3], re.ASCII):
                continue  # another record kind: nothing this reader needs
            else:
                self.fail(f"unknown record {_show(text)}: a line starts with C (comment), P (parameter) "
                          "or a three-digit operation code (317, 327, 999 ...)")
        self.line = len(lines)
        while self.line > 1 and not lines[self.line - 1].strip():
            self.line -= 1
        self.fail("no 999 end record: the file is cut short")

    def _parameter(self, text: str) -> None:
        words = text[1:].split(None, 1)
        if not words:
            return  # an empty P record
        key, value = words[0], (words[1].strip() if len(words) > 1 else "")
        if key == "UNITS":
            parts = value.split()
            if len(parts) == 2 and parts[0] == "CUST" and parts[1] in UNITS_CUST:
                self.scale = UNITS_CUST[parts[1]]
            else:
                self.fail(f"unsupported units {value!r} (supported: CUST 0 inch, CUST 1 mm, CUST 2 inch "
                          "with degrees)")
        elif _NNAME.fullmatch(key):
            if not value:
                self.fail(f"{key} gives no net name")
            known = self.aliases.get(key)
            if known is not None and known[0] != value:
                self.fail(f"{key} is already the net {known[0]!r} (line {known[1]}), now {value!r}")
            self.aliases[key] = (value, self.line)
        # other parameters (JOB, CODE, TITLE, NUM, REV, VER, IMAGE ...) describe the job: ignored

    def _test_record(self, text: str) -> None:
        if "\t" in text:
            self.fail("a tab in a fixed-column test record (columns must be spaces)")
        if self.scale is None:
            self.fail("a test record before the units are given (P  UNITS CUST 0, 1 or 2)")
        net = text[3:17].strip()
        if text[17:20].strip():
            self.fail(f"columns 18-20 must be blank, got {text[17:20]!r}: a net name longer than 14 "
                      "characters must be given by a P NNAME record")
        m = _TAIL.match(text, 32)
        if len(text) <= 32 or not m:
            self.fail("the test record has no X and Y coordinates from column 33 on "
                      "(expected D<hole>P/U, A<access>, X<+nnnnnn>Y<+nnnnnn>)")
        hole_digits, plating, access, xs, xd, ys, yd = m.groups()
        x = self._mm(int(xd), xs)
        y = self._mm(int(yd), ys)
        if max(abs(x), abs(y)) > MAX_COORDINATE_MM:
            self.fail("a coordinate more than 10 m from the origin (wrong units?)")
        hole = None
        if hole_digits is not None:
            if len(hole_digits) > 12:
                self.fail(f"hole diameter D{hole_digits[:12]}... has far too many digits")
            hole = self._mm(int(hole_digits), "")
            if hole > MAX_COORDINATE_MM:
                self.fail("a hole diameter over 10 m (wrong units?)")
        layer = None if access is None or int(access) == 0 else int(access)
        refdes, pin = text[20:26].strip(), text[27:31].strip()
        flag = None if hole is None or plating is None else plating == "P"
        self.raw.append((net, x, y, layer, hole, self.line, refdes, pin, flag))

    def _mm(self, count: int, sign: str) -> float:
        """A coordinate count in mm (the units are known: checked first)."""
        per_unit, counts = self.scale or (1.0, 1)
        return (-1.0 if sign == "-" else 1.0) * count * per_unit / counts

    def _result(self) -> Netlist:
        points = []
        for net, x, y, access, hole, line, refdes, pin, plated in self.raw:
            if net in self.aliases:
                name: str | None = self.aliases[net][0]
            elif net in ("", "N/C"):
                name = None
            else:
                name = net
            points.append(NetPoint(net=name, x=x, y=y, access=access, hole=hole, line=line,
                                   refdes=refdes, pin=pin, plated=plated))
        return Netlist(path=self.name, points=points)


def _show(text: str) -> str:
    return repr(text if len(text) <= 40 else text[:37] + "...")
