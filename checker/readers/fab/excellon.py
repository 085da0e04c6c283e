"""Excellon drill files: hole and slot positions and diameters, in mm.

``read_excellon(stream, name)`` reads a binary stream (a zip member will
do: it is read once, front to back), ``load_excellon(path)`` a file; both
return a :class:`~checker.readers.fab.layer.DrillFile` or raise one
:class:`~checker.errors.FabError` naming the file and the line.

The format rules come from the Excellon format as drill exporters write
it (IPC-NC-349 and the Excellon CNC-7 programming conventions, from
memory), and the drill-file attribute comments from the Gerber Layer
Format Specification (Ucamco), section on X2 attributes in drill and
route files (from memory). What is read:

* **Header** ``M48`` ... ``%`` (or ``M95``). Before ``M48`` only blank
  lines and ``;`` comments may stand. In the header:

  - ``METRIC`` / ``INCH``, optionally with ``,LZ`` (leading zeros kept, so
    trailing zeros may be left out) or ``,TZ`` (trailing zeros kept,
    leading left out) and a digit format such as ``000.000`` (3 integer
    and 3 decimal digits). ``M71`` (metric) and ``M72`` (inch) also set
    the unit, here and in the body. Without a digit format an implied
    decimal coordinate is read as 3.3 in metric and 2.4 in inch (common
    practice).
  - tool definitions ``TnnC<diameter>``; other tool parameters (``F``
    feed, ``S`` speed, ``B`` retract, ``H``, ``Z`` ...) are ignored. A
    diameter is a plain number in the current unit. Tool numbers compare
    as numbers (``T1`` is ``T01``).
  - ``FMAT,1|2``, ``VER,1``, ``G90``, ``ICI,OFF`` and any other command
    that does not move the tool (``ATC``, ``DETECT``, ``OSTOP`` ...) are
    accepted and ignored. Incremental input (``ICI,ON``, ``G91``) is
    refused.

* **Body**:

  - ``Tnn`` selects a tool (``T0`` unloads it); ``TnnC<d>`` in the body
    defines and selects.
  - a hit ``X<x>Y<y>``: coordinates are modal, so ``X`` alone keeps the
    last ``Y`` and the other way round.
  - ``R<n>X<dx>Y<dy>`` repeats the last hit ``n`` times, each stepped by
    (dx, dy).
  - a G85 slot ``X<x1>Y<y1>G85X<x2>Y<y2>`` (a drilled slot from the first
    point to the second); the current point moves to the second.
  - routed slots: ``G00X..Y..`` moves to a point and starts rout mode,
    ``M15`` lowers the tool, ``G01X..Y..`` (or a bare ``X..Y..`` after
    it) cuts a straight slot of the tool's diameter, ``M16`` / ``M17``
    raise the tool, ``G05`` returns to drill mode. Circular routing
    (``G02`` / ``G03``) is refused.
  - ``G90`` (absolute), ``%``, operator messages ``M47`` / ``M45`` are
    accepted; ``M30`` or ``M00`` ends the program (anything after it is
    not read). A file without an end is refused as cut short.

* **Numbers** with a decimal point are read as written. Without one the
  decimal point is implied by the digit format: with ``LZ`` the digits
  are read from the left (``X015`` in 2.4 inch = 01.50 in), with ``TZ``
  from the right (``X015`` = 0.0015 in). If the header says neither and a
  coordinate has fewer digits than the format, its value is ambiguous
  and the file is refused.

* **Attributes** (comments ``; #@! ...``): ``TF.FileFunction,Plated,1,4,PTH``
  or ``NonPlated,...`` sets ``DrillFile.plated`` and ``span``;
  ``TA.AperFunction,Plated,PTH,ViaDrill`` attaches its function
  (``ViaDrill``, ``ComponentDrill`` ... the first field after the plating
  fields) to every tool defined after it, until ``TD`` deletes it.

Inch values are converted to mm (1 in = 25.4 mm). Refused, each with the
line: a file over :data:`MAX_FILE_BYTES`, bytes that are not UTF-8, no
``M48``, a header without end, a hit before a tool is selected or with an
undefined tool, a coordinate more than 10 m from the origin, a tool
diameter that is not > 0 or over 10 m, and any command not listed above.
The input is never modified.
"""

from __future__ import annotations

import os
import re
from typing import BinaryIO, NoReturn

import numpy as np

from ...errors import FabError
from .layer import DrillFile
from .source import read_lines, read_path

#: Larger files are refused before they are read (256 MiB).
MAX_FILE_BYTES = 256 * 1024 * 1024

#: A coordinate or diameter beyond 10 m is taken as a units mistake.
MAX_COORDINATE_MM = 10_000.0

MM_PER_INCH = 25.4

#: Implied-decimal digit formats (integer digits, decimal digits) when the
#: header gives none (common practice).
DEFAULT_DIGITS = {"mm": (3, 3), "in": (2, 4)}

#: Fields of TA.AperFunction / TF.FileFunction that say plating and hole
#: type rather than the function.
_PLATING_FIELDS = {"Plated", "NonPlated", "PTH", "NPTH", "Blind", "Buried", "Through"}

_NUM = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"  # unambiguous: no quadratic backtracking
_TOOL = re.compile(rf"T([0-9]{{1,6}})((?:[A-Z]{_NUM})*)")
_PARAM = re.compile(rf"([A-Z])({_NUM})")
_XY = rf"(?:X({_NUM}))?(?:Y({_NUM}))?"
_COORDS = re.compile(_XY)
_HIT = re.compile(rf"{_XY}(?:G85{_XY})?")
_REPEAT = re.compile(rf"R([0-9]{{1,9}}){_XY}")
_UNITS = re.compile(r"(METRIC|INCH)((?:,[^,]*)*)")
_ATTRIBUTE = re.compile(r";\s*#@!\s*(.*)")


def load_excellon(path: str | os.PathLike[str]) -> DrillFile:
    """Read the Excellon file at ``path`` (see the module docstring)."""
    return read_path(path, read_excellon, "a drill file")


def read_excellon(stream: BinaryIO, name: str) -> DrillFile:
    """Read an Excellon file from a binary stream; ``name`` is used in
    messages and as ``DrillFile.path``."""
    lines = read_lines(stream, name, MAX_FILE_BYTES)
    return _Parser(name).parse(lines)


class _Parser:
    """The state of one Excellon program while it is read line by line."""

    def __init__(self, name: str) -> None:
        self.name = name
        self.line = 0
        self.unit: str | None = None  # "mm" or "in"
        self.zeros: str | None = None  # "LZ" or "TZ"
        self.digits: tuple[int, int] | None = None
        self.tools: dict[int, tuple[float, str]] = {}  # number -> (diameter mm, function)
        self.function = ""  # TA.AperFunction for tools defined from now on
        self.plated: bool | None = None
        self.span: tuple[int, int] | None = None
        self.tool: int | None = None
        self.x: float | None = None
        self.y: float | None = None
        self.rout = False  # in rout mode (after G00)
        self.motion = "G00"
        self.down = False
        self.last_hit: tuple[float, float] | None = None
        self.holes: list[tuple[float, float, float, str, int]] = []
        self.slots: list[tuple[float, float, float, float, float, int]] = []

    def fail(self, message: str, line: int | None = None) -> NoReturn:
        raise FabError(self.name, self.line if line is None else line, message)

    # ---- the program

    def parse(self, lines: list[str]) -> DrillFile:
        if not any(s.strip() for s in lines):
            raise FabError(self.name, None, "the file is empty")
        i = self._header_start(lines)
        i = self._header(lines, i)
        self._body(lines, i)
        return self._result()

    def _header_start(self, lines: list[str]) -> int:
        for i, raw in enumerate(lines):
            self.line = i + 1
            text = raw.strip()
            if not text:
                continue
            if text.startswith(";"):
                self._comment(text)
                continue
            if text == "M48":
                return i + 1
            self.fail(f"expected the header start M48, got {_show(text)} (is this an Excellon drill file?)")
        raise FabError(self.name, None, "no M48 header: not an Excellon drill file")

    def _header(self, lines: list[str], start: int) -> int:
        header_line = start  # the M48 line
        for i in range(start, len(lines)):
            self.line = i + 1
            text = lines[i].strip()
            if not text:
                continue
            if text.startswith(";"):
                self._comment(text)
                continue
            text = text.split(";", 1)[0].strip()
            if text in ("%", "M95"):
                return i + 1
            if text.startswith(("METRIC", "INCH")):
                self._units(text)
            elif text in ("M71", "M72"):
                self.unit = "mm" if text == "M71" else "in"
            elif re.match("T[0-9]", text):
                self._tool(text, select=False)
            elif text.startswith("FMAT"):
                if text not in ("FMAT,1", "FMAT,2"):
                    self.fail(f"unknown format {_show(text)} (expected FMAT,1 or FMAT,2)")
            elif text == "G91" or (text.startswith("ICI") and text != "ICI,OFF"):
                self.fail(f"incremental coordinates ({text}) are not supported")
            elif re.match(r"[XY][+-]?[0-9.]", text):
                self.fail(f"a hit in the header (M48 ... %): {_show(text)}")
            elif text == "M48":
                self.fail("a second M48 inside the header")
            elif text in ("M30", "M00"):
                self.fail(f"end of program ({text}) inside the header: the header has no end (% or M95)")
            # anything else in the header (VER, ATC, DETECT, ICI,OFF, G90 ...) sets up the
            # machine without moving it: ignored
        self.fail("the header (M48) has no end (% or M95): the file is cut short", line=header_line)

    def _body(self, lines: list[str], start: int) -> None:
        for i in range(start, len(lines)):
            self.line = i + 1
            text = lines[i].strip()
            if not text:
                continue
            if text.startswith(";"):
                self._comment(text)
                continue
            text = text.split(";", 1)[0].strip()
            if text in ("M30", "M00"):
                return
            self._command(text)
        self.line = len(lines)
        while self.line > 1 and not lines[self.line - 1].strip():
            self.line -= 1
        self.fail("no end of program (M30): the file is cut short")

    def _command(self, text: str) -> None:
        head = text[0]
        if head == "T":
            self._tool(text, select=True)
        elif head in "XY":
            if "G85" in text:
                self._g85(text)
            elif self.rout:
                self._move(text, self.motion)
            else:
                self._hit(text)
        elif head == "R":
            self._repeat(text)
        elif text.startswith(("G00", "G01", "G02", "G03")):
            self._move(text[3:], text[:3])
        elif text == "G05":
            self.rout, self.down = False, False
        elif text == "M15":
            if not self.rout:
                self.fail("M15 (tool down) outside rout mode: a G00 move must come first")
            self.down = True
        elif text in ("M16", "M17"):
            self.down = False
        elif text in ("G90", "%", "M71", "M72") or text.startswith(("M47", "M45")):
            if text in ("M71", "M72"):
                self.unit = "mm" if text == "M71" else "in"
        elif text.startswith(("METRIC", "INCH")):
            self._units(text)
        elif text == "G91" or text.startswith("ICI"):
            self.fail(f"incremental coordinates ({text}) are not supported")
        else:
            self.fail(f"unknown or unsupported command {_show(text)}")

    # ---- header commands

    def _units(self, text: str) -> None:
        m = _UNITS.fullmatch(text)
        if not m:
            self.fail(f"cannot read the units command {_show(text)} (expected e.g. METRIC,TZ,000.000)")
        self.unit = "mm" if m.group(1) == "METRIC" else "in"
        for part in m.group(2).split(",")[1:]:
            part = part.strip()
            if part in ("LZ", "TZ"):
                self.zeros = part
            elif re.fullmatch(r"0+\.0+", part):
                whole, frac = part.split(".")
                if len(whole) + len(frac) > 12:
                    self.fail(f"digit format {part!r} has more than 12 digits")
                self.digits = (len(whole), len(frac))
            else:
                self.fail(f"unknown option {part!r} in {_show(text)} (expected LZ, TZ or a digit format like 000.000)")

    def _tool(self, text: str, select: bool) -> None:
        m = _TOOL.fullmatch(text)
        if not m:
            self.fail(f"cannot read the tool command {_show(text)} (expected e.g. T01C0.300 or T01)")
        number = int(m.group(1))
        params = dict(_PARAM.findall(m.group(2)))
        if "C" in params:
            if number == 0:
                self.fail("tool T0 cannot be defined: T0 means no tool")
            diameter = self._length(params["C"], what="tool diameter")
            if not diameter > 0:
                self.fail(f"tool T{number}: diameter must be > 0, got {params['C']}")
            known = self.tools.get(number)
            if known is not None and abs(known[0] - diameter) > 1e-9:
                self.fail(f"tool T{number} is defined twice with different diameters "
                          f"({known[0]:g} mm and {diameter:g} mm)")
            self.tools[number] = (diameter, self.function)
        elif not select:
            self.fail(f"tool definition {_show(text)} without a diameter (C)")
        if select:
            if number == 0:
                self.tool = None
                return
            if number not in self.tools:
                defined = ", ".join(f"T{n}" for n in sorted(self.tools)) or "none"
                self.fail(f"unknown tool T{number} (defined: {defined})")
            self.tool = number

    def _comment(self, text: str) -> None:
        m = _ATTRIBUTE.fullmatch(text)
        if not m:
            return
        body = m.group(1).strip()
        name, _, rest = body.partition(",")
        fields = [f.strip() for f in rest.split(",")] if rest else []
        if name == "TF.FileFunction":
            self._file_function(fields)
        elif name == "TA.AperFunction":
            self.function = next((f for f in fields if f not in _PLATING_FIELDS and not f.isdecimal()), "")
        elif name in ("TD", "TD.AperFunction"):
            self.function = ""

    def _file_function(self, fields: list[str]) -> None:
        if not fields or fields[0] not in ("Plated", "NonPlated"):
            return  # a drill map or other drawing: plating unknown
        self.plated = fields[0] == "Plated"
        if len(fields) < 3 or not all(re.fullmatch("[0-9]{1,3}", f) for f in fields[1:3]):
            self.fail("TF.FileFunction: expected Plated|NonPlated,<from layer>,<to layer>,..., got "
                      f"{','.join(fields)!r}")
        first, last = int(fields[1]), int(fields[2])
        if first < 1 or last < 1:
            self.fail(f"TF.FileFunction: layer numbers start at 1, got {first} and {last}")
        self.span = (first, last)

    # ---- numbers

    def _length(self, value: str, what: str) -> float:
        """A plain decimal number (tool diameter) in the current unit, in mm."""
        if self.unit is None:
            self.fail(f"{what} before the units are set (METRIC or INCH in the header)")
        mm = float(value) * (MM_PER_INCH if self.unit == "in" else 1.0)
        if abs(mm) > MAX_COORDINATE_MM:
            self.fail(f"{what} {value} {self.unit} is more than 10 m (wrong units?)")
        return mm

    def _coordinate(self, value: str) -> float:
        """One X or Y value in mm: decimal point as written, else implied
        by the digit format and zero suppression."""
        if self.unit is None:
            self.fail("a coordinate before the units are set (METRIC or INCH in the header)")
        if "." in value:
            number = float(value)
        else:
            sign = -1.0 if value.startswith("-") else 1.0
            digits = value.lstrip("+-")
            whole, frac = self.digits or DEFAULT_DIGITS[self.unit]
            total = whole + frac
            if len(digits) > total:
                self.fail(f"coordinate {value} has more digits than the format {whole}.{frac} allows")
            if len(digits) < total and self.zeros is None:
                self.fail(f"coordinate {value} has fewer digits than the format {whole}.{frac} and the header "
                          "does not say LZ or TZ: its decimal point is ambiguous")
            if self.zeros == "LZ":
                digits = digits.ljust(total, "0")
            number = sign * int(digits) / 10**frac
        mm = number * (MM_PER_INCH if self.unit == "in" else 1.0)
        if abs(mm) > MAX_COORDINATE_MM:
            self.fail(f"coordinate {value} {self.unit} is more than 10 m from the origin (wrong units or format?)")
        return mm

    def _point(self, x: str | None, y: str | None, base: tuple[float | None, float | None]) -> tuple[float, float]:
        """The point a command names, missing axes taken from ``base``."""
        px = self._coordinate(x) if x is not None else base[0]
        py = self._coordinate(y) if y is not None else base[1]
        if px is None or py is None:
            self.fail(f"the {'X' if px is None else 'Y'} coordinate is not known yet (no earlier value to keep)")
        return px, py

    # ---- body commands

    def _diameter(self, what: str) -> tuple[float, str]:
        if self.tool is None:
            self.fail(f"{what} before any tool is selected")
        return self.tools[self.tool]

    def _hit(self, text: str) -> None:
        m = _HIT.fullmatch(text)
        if not m:
            self.fail(f"cannot read the hit {_show(text)}")
        diameter, function = self._diameter("a hit")
        self.x, self.y = self._point(m.group(1), m.group(2), (self.x, self.y))
        self.holes.append((self.x, self.y, diameter, function, self.line))
        self.last_hit = (self.x, self.y)

    def _g85(self, text: str) -> None:
        m = _HIT.fullmatch(text)
        if not m or "G85" not in text:
            self.fail(f"cannot read the G85 slot {_show(text)} (expected X..Y..G85X..Y..)")
        if self.rout:
            self.fail("a G85 slot in rout mode (G05 must come first)")
        diameter, _ = self._diameter("a G85 slot")
        x1, y1 = self._point(m.group(1), m.group(2), (self.x, self.y))
        x2, y2 = self._point(m.group(3), m.group(4), (x1, y1))
        self.slots.append((x1, y1, x2, y2, diameter, self.line))
        self.x, self.y = x2, y2

    def _repeat(self, text: str) -> None:
        m = _REPEAT.fullmatch(text)
        if not m:
            self.fail(f"cannot read the repeat {_show(text)} (expected R<count>X<dx>Y<dy>)")
        if self.rout:
            self.fail("a repeat (R) in rout mode")
        if self.last_hit is None:
            self.fail("a repeat (R) before any hit")
        count = int(m.group(1))
        if count > 100_000:
            self.fail(f"repeat count {count} is absurd (more than 100000)")
        diameter, function = self._diameter("a repeat")
        dx = self._coordinate(m.group(2)) if m.group(2) is not None else 0.0
        dy = self._coordinate(m.group(3)) if m.group(3) is not None else 0.0
        x, y = self.last_hit
        for _ in range(count):
            x, y = x + dx, y + dy
            if max(abs(x), abs(y)) > MAX_COORDINATE_MM:
                self.fail("the repeated hits reach more than 10 m from the origin")
            self.holes.append((x, y, diameter, function, self.line))
        self.x, self.y = x, y
        self.last_hit = (x, y)

    def _move(self, text: str, code: str) -> None:
        """A G00 / G01 motion (G02 / G03 are refused); a bare coordinate
        in rout mode continues the last motion."""
        if code in ("G02", "G03"):
            self.fail(f"circular routing ({code}) is not supported: only straight routed slots are read")
        m = _COORDS.fullmatch(text)
        if not m:
            self.fail(f"cannot read the {code} motion {_show(text)} (expected X..Y..)")
        if code == "G00":
            self.rout, self.down = True, False
        elif not self.rout:
            self.fail("G01 outside rout mode: a G00 move must come first")
        self.motion = code
        if m.group(1) is None and m.group(2) is None:
            return  # the mode alone
        start = (self.x, self.y)
        end = self._point(m.group(1), m.group(2), start)
        if code == "G01" and self.down:
            diameter, _ = self._diameter("a routed slot")
            if start[0] is None or start[1] is None:
                self.fail("a routed slot without a start point")
            self.slots.append((start[0], start[1], end[0], end[1], diameter, self.line))
        self.x, self.y = end

    # ---- result

    def _result(self) -> DrillFile:
        h = self.holes
        s = self.slots
        col = lambda rows, k: np.array([r[k] for r in rows], dtype=np.float64)  # noqa: E731
        return DrillFile(
            path=self.name,
            plated=self.plated,
            span=self.span,
            x=col(h, 0),
            y=col(h, 1),
            diameter=col(h, 2),
            function=[r[3] for r in h],
            line=np.array([r[4] for r in h], dtype=np.int64),
            slot_x1=col(s, 0),
            slot_y1=col(s, 1),
            slot_x2=col(s, 2),
            slot_y2=col(s, 3),
            slot_diameter=col(s, 4),
            slot_line=np.array([r[5] for r in s], dtype=np.int64),
        )


def _show(text: str) -> str:
    """A command as quoted in a message (cut to 40 characters)."""
    return repr(text if len(text) <= 40 else text[:37] + "...")
