"""Excellon drill files: hole and slot positions and diameters, in mm.

``read_excellon(stream, name)`` reads a binary stream (a zip member will
do: it is read once, front to back), ``load_excellon(path)`` a file; both
return a :class:`~checker.readers.fab.layer.DrillFile` or raise one
:class:`~checker.errors.FabError` naming the file and the line.
``DrillFile.notes`` holds one sentence for everything the reader took from
a comment, assumed or inferred instead of reading it from a command.
``looks_like_drill(head)`` tells from a file's first bytes whether it is an
Excellon program, with or without a header.

The format rules come from the Excellon format as drill exporters write
it (IPC-NC-349 and the Excellon CNC-7 programming conventions, from
memory), and the drill-file attribute comments from the Gerber Layer
Format Specification (Ucamco), section on X2 attributes in drill and
route files (from memory). The format comments below belong to no
standard: they are the forms drill exporters commonly write. The
plausibility limits used to infer what a file does not say (a board within
1 m, drills of 0.05 to 10 mm) are ours. What is read:

* **Header** ``M48`` ... ``%`` (or ``M95``). Before ``M48`` only blank
  lines, ``;`` comments and ``%`` (rewind stop) may stand. In the header:

  - ``METRIC`` / ``INCH``, optionally with ``,LZ`` (leading zeros kept, so
    trailing zeros may be left out) or ``,TZ`` (trailing zeros kept,
    leading left out) and a digit format such as ``000.000`` (3 integer
    and 3 decimal digits). ``M71`` (metric) and ``M72`` (inch) also set
    the unit, here and in the body. A unit used before the header sets
    one (a tool diameter above ``METRIC``) is refused.
  - tool definitions ``TnnC<diameter>``; other tool parameters (``F``
    feed, ``S`` speed, ``B`` retract, ``H``, ``Z`` ...) are ignored. A
    diameter is a plain number in the current unit. Tool numbers compare
    as numbers (``T1`` is ``T01``). In a file with a header, selecting a
    tool the file does not define is refused.
  - ``FMAT,1|2``, ``VER,1``, ``G90``, ``ICI,OFF`` and any other command
    that does not move the tool (``ATC``, ``DETECT``, ``OSTOP`` ...) are
    accepted and ignored. Incremental input (``ICI,ON``, ``G91``) is
    refused.

* **No header.** A file whose first command is not ``M48`` is read as a
  program without header (a note says so) when its lines up to ``M30``
  (at most 2000 after the first command) are all body commands, with at
  least one tool selection and one hit (see :func:`looks_like_drill`);
  otherwise it is refused as before. A tool selected without a diameter
  anywhere before it (``T1`` and no ``T1C...``) is taken as
  :data:`ASSUMED_DIAMETER_MM` (0.15 mm, the smallest mechanical via drill
  fabricators commonly offer): an assumption, stated in a note. The first
  unit command anywhere in the file (``METRIC``, ``INCH``, ``M71``,
  ``M72``) sets the unit from the start (a note says so if values come
  before it); with none, the unit is inferred (below).

* **Format comments**, ``;`` lines anywhere in the file that start with
  ``FILE_FORMAT`` or ``FORMAT`` followed by ``=`` or ``:``, for example
  ``;FILE_FORMAT=4:4``, ``;FORMAT={2:4/ absolute / inch / suppress
  trailing zeros}``, ``; FORMAT={-:-/ absolute / metric / decimal}`` or
  ``;Format: 2.4 / Absolute / Inch``. From them: the digit format (the
  first ``W:F`` or ``W.F`` pair, ``W`` integer and ``F`` decimal digits;
  ``-:-`` gives none), the unit (``inch``, ``metric``, ``mm``) and the zero
  suppression (``LZ``, ``TZ``; ``suppress leading zeros`` is ``TZ``,
  ``suppress trailing zeros`` is ``LZ``). A bare ``Leading`` or
  ``Trailing`` does not say whether those zeros are kept or left out and
  is not used (a note says so); ``incremental`` is noted and the file read
  as absolute (only ``G91`` / ``ICI,ON`` are refused). Where several
  comments give one item, the first is used. **Explicit commands win over
  comments**: the ``METRIC`` / ``INCH`` line's digit format and ``LZ`` /
  ``TZ`` replace the comment's (a note says so where they differ), and the
  comment's unit is used only if the file's first unit command agrees with
  it or there is none. What the file takes from a comment is stated in a
  note. Other comments (``;TYPE=PLATED``, ``;Layer: ...``, tool tables)
  are ignored: plating comes only from ``TF.FileFunction``.

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
  - ``G90`` (absolute), ``%``, operator messages ``M47`` / ``M45``,
    ``METRIC`` / ``INCH`` are accepted; ``M30`` or ``M00`` ends the
    program (anything after it is not read). A file without an end is
    refused as cut short.

* **Numbers** with a decimal point are read as written. Without one the
  decimal point is implied by the digit format: the ``METRIC`` / ``INCH``
  line's, else a format comment's, else 3.3 in metric and 2.4 in inch
  (common practice; a note says so), unless the coordinates do not fit it
  (below). With ``LZ`` the digits are read from the left (``X015`` in 2.4
  inch = 01.50 in), with ``TZ`` from the right (``X015`` = 0.0015 in). A
  coordinate with more digits than a stated format is refused.

* **Inferred** where the file says nothing, each in a note:

  - *digit format*, when none is stated and a coordinate has more digits
    than the default allows: the unit's default integer digits (3 in mm,
    2 in inch) and the rest decimals (8 digits in mm: 3.5); if that puts
    a coordinate more than :data:`PLAUSIBLE_BOARD_MM` (1 m) from the
    origin, one integer digit fewer, and so on. Where a format with more
    integer digits (and at least the default decimals) would also stay
    within 1 m, the note names it: the smaller reading is taken because it
    errs toward holes being placed on the board's copper rather than
    dropped beyond it.
  - *zero suppression*, when neither ``LZ`` nor ``TZ`` is stated and a
    coordinate other than 0 has fewer digits than the format: a short coordinate
    written with a leading 0 shows that leading zeros are kept (``LZ``),
    one with a trailing 0 that trailing zeros are kept (``TZ``); a file
    showing both is refused (no reading fits). With no such sign, ``TZ``
    (leading zeros left out, digits counted from the right), the common
    practice (Gerber files leave out leading zeros too), which is also the
    reading that keeps such coordinates nearer the origin.
  - *units*, when the file states none anywhere (no unit command, no
    format comment): a reading is plausible when every coordinate lies
    within 1 m of the origin and every tool diameter within
    :data:`PLAUSIBLE_DRILL_MM` (0.05 to 10 mm). If one of metric and inch
    is plausible, that one; if both, the one whose largest coordinate is
    smaller (metric on a tie), as it errs toward holes being placed; if
    neither, the file is refused.

* **Plating comments** ``;TYPE=PLATED`` / ``;TYPE=NON_PLATED`` (written by
  some exporters, also both in one file, each before its tools) set the
  plating of the tools defined after them where no ``TF.FileFunction``
  says it: ``DrillFile.plated`` when all holes agree, else
  ``DrillFile.hole_plated`` per hole (a tool before any such comment is
  plated).

* **Attributes** (comments ``; #@! ...``): ``TF.FileFunction,Plated,1,4,PTH``
  or ``NonPlated,...`` sets ``DrillFile.plated`` and ``span``;
  ``TA.AperFunction,Plated,PTH,ViaDrill`` attaches its function
  (``ViaDrill``, ``ComponentDrill`` ... the first field after the plating
  fields) to every tool defined after it, until ``TD`` deletes it.

Inch values are converted to mm (1 in = 25.4 mm). Refused, each with the
line: a file over the per-file cap (:mod:`checker.limits`), bytes that are not UTF-8, a file
that neither starts with ``M48`` nor looks like a program without header, a
header without end, a hit before a tool is selected, an undefined tool in
a file with a header, a coordinate more than 10 m from the origin or with
more than 12 digits, a tool diameter that is not > 0 or over 10 m, and any
command not listed above. The input is never modified.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field
from typing import BinaryIO, NoReturn

import numpy as np

from ...errors import FabError
from .layer import DrillFile
from .source import read_lines, read_path

#: A coordinate or diameter beyond 10 m is taken as a units mistake.
MAX_COORDINATE_MM = 10_000.0

MM_PER_INCH = 25.4

#: Implied-decimal digit formats (integer digits, decimal digits) when the
#: file states none (common practice).
DEFAULT_DIGITS = {"mm": (3, 3), "in": (2, 4)}

#: An implied-decimal coordinate with more digits is refused.
MAX_DIGITS = 12

#: When a format or the units are inferred, a reading that puts a
#: coordinate further than this from the origin is not a plausible board.
PLAUSIBLE_BOARD_MM = 1000.0

#: When the units are inferred, tool diameters must lie in this range (mm):
#: from laser microvias to the largest drilled (not routed) holes.
PLAUSIBLE_DRILL_MM = (0.05, 10.0)

#: Assumed diameter of a tool selected without one in a file without header:
#: the smallest mechanical via drill fabricators commonly offer (0.15 mm).
ASSUMED_DIAMETER_MM = 0.15

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
#: A plating comment some exporters write in the header (``;TYPE=PLATED``,
#: ``;TYPE=NON_PLATED``): used when no ``TF.FileFunction`` says it.
_TYPE_COMMENT = re.compile(r";\s*TYPE\s*=\s*(PLATED|NON[_-]?PLATED)\s*", re.IGNORECASE)
_ATTRIBUTE = re.compile(r";\s*#@!\s*(.*)")

# format comments (see the module docstring)
_FORMAT_COMMENT = re.compile(r";\s*(?:FILE_)?FORMAT\s*[=:]\s*(.*)", re.IGNORECASE)
_COMMENT_DIGITS = re.compile(r"(?<![0-9])([0-9]{1,2})\s*[:.]\s*([0-9]{1,2})(?![0-9])")
_COMMENT_UNIT = re.compile(r"\b(inch|inches|imperial|metric|mm|millimet(?:er|re)s?)\b", re.IGNORECASE)
_SUPPRESS = r"(?:suppress\w*|omit\w*|delet\w*|remov\w*|strip\w*|drop\w*|no)"
_LEAVE_OUT_LEADING = re.compile(rf"{_SUPPRESS}\s+leading|leading\s+zeros?\s+{_SUPPRESS}", re.IGNORECASE)
_LEAVE_OUT_TRAILING = re.compile(rf"{_SUPPRESS}\s+trailing|trailing\s+zeros?\s+{_SUPPRESS}", re.IGNORECASE)
_VAGUE_ZEROS = re.compile(r"\b(leading|trailing)\b", re.IGNORECASE)

# looks_like_drill: the lines of a body, as the reader accepts them
_LIKE_NUM = r"[+-]?[0-9]*\.?[0-9]*"
_LIKE_TOOL = re.compile(rf"T[0-9]{{1,6}}(?:[A-Z]{_LIKE_NUM})*")
_LIKE_HIT = re.compile(rf"(?:G0[0-3])?(?=[XY])(?:X{_LIKE_NUM})?(?:Y{_LIKE_NUM})?"
                       rf"(?:G85(?:X{_LIKE_NUM})?(?:Y{_LIKE_NUM})?)?")
_LIKE_REPEAT = re.compile(rf"R[0-9]{{1,9}}(?:X{_LIKE_NUM})?(?:Y{_LIKE_NUM})?")
_LIKE_UNITS = re.compile(r"(?:METRIC|INCH)(?:,[A-Z0-9.]*)*")
_LIKE_WORDS = {"%", "M71", "M72", "G90", "G05", "G00", "G01", "M15", "M16", "M17"}
#: code lines of a file without header that must all look like a body
_LIKE_LINES = 2000


def load_excellon(path: str | os.PathLike[str]) -> DrillFile:
    """Read the Excellon file at ``path`` (see the module docstring)."""
    return read_path(path, read_excellon, "a drill file")


def read_excellon(stream: BinaryIO, name: str) -> DrillFile:
    """Read an Excellon file from a binary stream; ``name`` is used in
    messages and as ``DrillFile.path``.

    The file is read twice when its format must be inferred: a first pass
    gathers the implied-decimal coordinates, tool diameters and units
    seen; :func:`_decide` infers what the file leaves open; a second pass
    reads with it. A file that states everything it uses is read once.
    """
    lines = read_lines(stream, name)
    if not any(s.strip() for s in lines):
        raise FabError(name, None, "the file is empty")
    pre = _prescan(lines)
    survey = _Parser(name, pre, survey=True)
    try:
        result = survey.parse(lines)
    except FabError:
        if not survey.flagged:
            raise
    if not survey.flagged:
        return result
    decided = _decide(survey)
    return _Parser(name, pre, survey=False, decided=decided).parse(lines)


def looks_like_drill(head: bytes) -> bool:
    """Whether ``head`` (a file's first bytes) is an Excellon program: its
    first command is ``M48``, or every line up to the end of ``head`` (blank
    and ``;`` lines aside) is a body command -- tool selection or
    definition ``T<n>``, hit ``X..Y..``, ``G85`` slot, ``G00``/``G01``
    move, repeat ``R<n>``, ``M30``, ``M00``, ``%``, ``M71``, ``M72``,
    ``METRIC``/``INCH``, ``G90``, ``G05``, ``M15``-``M17`` -- with at least
    one tool and one hit. Gerber (``%FS...*%``, ``X..Y..D01*``, ``G04 ...*``)
    and IPC-D-356 (``P  JOB``, ``317...``) lines are none of these. A last
    line cut short by the end of ``head`` is not held against it."""
    text = head.decode("utf-8", errors="replace").lstrip("\ufeff")
    lines = re.split(r"\r\n|\r|\n", text)
    cut = not text.endswith(("\n", "\r"))
    return _drill_like(lines, cut_last=cut)


def _drill_like(lines: list[str], cut_last: bool) -> bool:
    tools = hits = 0
    first = True
    for i, raw in enumerate(lines):
        s = raw.strip()
        if not s or s.startswith(";"):
            continue
        s = s.split(";", 1)[0].strip()
        if s == "%":
            continue  # rewind stop: before M48 or in a body
        if first and s.startswith("M48"):
            return True
        first = False
        if _LIKE_TOOL.fullmatch(s):
            tools += 1
        elif _LIKE_HIT.fullmatch(s):
            hits += 1
        elif s in ("M30", "M00"):
            break  # the end of the program: what follows is not read
        elif s in _LIKE_WORDS or s.startswith(("M47", "M45")) or _LIKE_REPEAT.fullmatch(s) or _LIKE_UNITS.fullmatch(s):
            pass
        elif cut_last and i == len(lines) - 1:
            break
        else:
            return False
    return tools > 0 and hits > 0


# --------------------------------------------------------------------------- before reading


@dataclass
class _FormatComment:
    """What the format comments of a file say (the first to give each item)."""

    digits: tuple[int, int] | None = None
    unit: str | None = None
    zeros: str | None = None  # "LZ" or "TZ"
    line: int = 0  # the first format comment
    text: str = ""
    notes: list[str] = field(default_factory=list)


@dataclass
class _Prescan:
    """What is known before the commands are read."""

    unit_statement: tuple[str, int] | None  # the first METRIC / INCH / M71 / M72: unit, line
    comment: _FormatComment | None
    command_digits: bool = False  # a METRIC / INCH command states a digit format
    command_zeros: bool = False  # a METRIC / INCH command states LZ or TZ


def _prescan(lines: list[str]) -> _Prescan:
    """The first unit command and the format comments, up to the end of
    the program."""
    unit: tuple[str, int] | None = None
    comment: _FormatComment | None = None
    digits = zeros = False
    for i, raw in enumerate(lines):
        s = raw.strip()
        if not s:
            continue
        if s.startswith(";"):
            m = _FORMAT_COMMENT.fullmatch(s)
            if m:
                comment = comment or _FormatComment(line=i + 1, text=s)
                _read_format_comment(comment, m.group(1), i + 1)
            continue
        code = s.split(";", 1)[0].strip()
        if code.startswith(("METRIC", "INCH")):
            options = code.split(",")[1:]
            digits = digits or any(re.fullmatch(r"\s*0+\.0+\s*", o) for o in options)
            zeros = zeros or any(o.strip() in ("LZ", "TZ") for o in options)
        if unit is None:
            if code.startswith("METRIC") or code == "M71":
                unit = ("mm", i + 1)
            elif code.startswith("INCH") or code == "M72":
                unit = ("in", i + 1)
        if code in ("M30", "M00"):
            break
    return _Prescan(unit, comment, digits, zeros)


def _read_format_comment(c: _FormatComment, body: str, line: int) -> None:
    """Fill ``c`` from one format comment's text (items ``c`` already has
    are kept; a disagreeing later value is noted)."""
    m = _COMMENT_DIGITS.search(body)
    digits = (int(m.group(1)), int(m.group(2))) if m and int(m.group(1)) + int(m.group(2)) > 0 else None
    m = _COMMENT_UNIT.search(body)
    unit = None if m is None else ("in" if m.group(1).lower() in ("inch", "inches", "imperial") else "mm")
    zeros = None
    if re.search(r"\bLZ\b", body) or _LEAVE_OUT_TRAILING.search(body):
        zeros = "LZ"
    elif re.search(r"\bTZ\b", body) or _LEAVE_OUT_LEADING.search(body):
        zeros = "TZ"
    elif (vague := _VAGUE_ZEROS.search(body)) is not None:
        c.notes.append(f"line {line}: the format comment's {vague.group(1)!r} does not say whether those zeros "
                       "are kept or left out: not used")
    if re.search(r"\bincremental\b", body, re.IGNORECASE):
        c.notes.append(f"line {line}: the format comment says incremental, but the commands do not (no G91 or "
                       "ICI,ON): coordinates read as absolute")
    for name, value in (("digits", digits), ("unit", unit), ("zeros", zeros)):
        if value is None:
            continue
        have = getattr(c, name)
        if have is None:
            setattr(c, name, value)
        elif have != value:
            c.notes.append(f"line {line}: this format comment's {name} ({_item(name, value)}) differ from an "
                           f"earlier comment's ({_item(name, have)}): the earlier one is used")


def _item(name: str, value: object) -> str:
    if name == "digits":
        digits: tuple[int, int] = value  # type: ignore[assignment]  # what a digits note holds
        return f"{digits[0]}.{digits[1]}"
    if name == "unit":
        return "inch" if value == "in" else "mm"
    return str(value)


# --------------------------------------------------------------------------- inference


@dataclass
class _Stats:
    """The implied-decimal coordinates the first pass saw in one unit."""

    longest: int = 0
    longest_line: int = 0
    max_right: int = 0  # the largest digit string as an integer (digits read from the right)
    max_left: str = ""  # the largest digit string padded on the right to MAX_DIGITS (read from the left)
    # (length, line, text) of the shortest non-zero coordinate: any, written with a leading 0, with a trailing 0
    shortest: tuple[int, int, str] | None = None
    leading_zero: tuple[int, int, str] | None = None
    trailing_zero: tuple[int, int, str] | None = None

    def add(self, digits: str, line: int) -> None:
        n = len(digits)
        if n > self.longest:
            self.longest, self.longest_line = n, line
        value = int(digits)
        self.max_right = max(self.max_right, value)
        self.max_left = max(self.max_left, digits + "0" * (MAX_DIGITS - n))
        if value == 0:
            return  # zero reads the same either way
        if self.shortest is None or n < self.shortest[0]:
            self.shortest = (n, line, digits)
        if digits[0] == "0" and (self.leading_zero is None or n < self.leading_zero[0]):
            self.leading_zero = (n, line, digits)
        if digits[-1] == "0" and (self.trailing_zero is None or n < self.trailing_zero[0]):
            self.trailing_zero = (n, line, digits)

    def merge(self, other: _Stats) -> None:
        if other.longest > self.longest:
            self.longest, self.longest_line = other.longest, other.longest_line
        self.max_right = max(self.max_right, other.max_right)
        self.max_left = max(self.max_left, other.max_left)
        for name in ("shortest", "leading_zero", "trailing_zero"):
            a, b = getattr(self, name), getattr(other, name)
            if a is None or (b is not None and b[0] < a[0]):
                setattr(self, name, b)

    def largest(self, digits: tuple[int, int], zeros: str | None) -> float:
        """The largest coordinate, in the file's unit, read with ``digits``."""
        whole, frac = digits
        if zeros == "LZ":
            return int(self.max_left[: whole + frac] or "0") / 10**frac
        return self.max_right / 10**frac


@dataclass
class _Decision:
    """What the second pass takes as given, and the notes saying why."""

    unit: str | None = None  # the unit when the file states none
    zeros: str | None = None
    digits: dict[str, tuple[int, int]] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    #: per unit with inferred digits: the other plausible readings (factor, format)
    others: dict[str, list[tuple[float, str]]] = field(default_factory=dict)


def _unit_name(unit: str) -> str:
    return "inch" if unit == "in" else "mm"


def _factor(unit: str) -> float:
    return MM_PER_INCH if unit == "in" else 1.0


def _infer_digits(st: _Stats, unit: str, zeros: str | None) -> tuple[tuple[int, int], str | None]:
    """The digit format for coordinates of up to ``st.longest`` digits
    when the file states none, and the note saying so (``None`` if the
    default fits)."""
    whole_d, frac_d = DEFAULT_DIGITS[unit]
    n = st.longest
    if n <= whole_d + frac_d:
        return (whole_d, frac_d), None

    def mm(whole: int) -> float:
        return st.largest((whole, n - whole), zeros) * _factor(unit)

    whole = next(w for w in range(whole_d, 0, -1) if mm(w) <= PLAUSIBLE_BOARD_MM or w == 1)
    name = _unit_name(unit)
    note = (f"line {st.longest_line}: no digit format stated, and coordinates have up to {n} digits, more than "
            f"the default {whole_d}.{frac_d} ({name}) allows: read as {whole}.{n - whole}")
    if whole < whole_d:
        note += (f", as {whole_d}.{n - whole_d} (the {name} default's {whole_d} integer digits, the rest decimals) "
                 f"would put a coordinate {mm(whole_d) / 1000:.3g} m from the origin, beyond a plausible board of 1 m")
    else:
        note += f" (the {name} default's {whole_d} integer digits, the rest decimals)"
    note += f"; the largest coordinate is {mm(whole):.6g} mm"
    also = [w for w in range(whole + 1, n - frac_d + 1) if mm(w) <= PLAUSIBLE_BOARD_MM]
    if also:
        note += (f"; {also[0]}.{n - also[0]} would also give a plausible board (largest coordinate "
                 f"{mm(also[0]):.6g} mm): the smaller reading was taken, as it errs toward holes being placed "
                 "on the board's copper rather than dropped beyond it (the assembly tries the other readings "
                 "against the copper's pads)")
    return (whole, n - whole), note


def _other_readings(st: _Stats, unit: str, zeros: str | None, whole: int) -> list[tuple[float, str]]:
    """The other plausible digit formats of an inferred one, as (factor on
    the coordinates, format in words): reading w integer digits instead of
    ``whole`` multiplies every implied-decimal coordinate by 10**(w - whole)."""
    n = st.longest
    _, frac_d = DEFAULT_DIGITS[unit]
    out = []
    for w in range(1, n):
        if w != whole and st.largest((w, n - w), zeros) * _factor(unit) <= PLAUSIBLE_BOARD_MM:
            out.append((10.0 ** (w - whole), f"{w}.{n - w}"))
    return out


def _decide(p: _Parser) -> _Decision:
    """Infer, from what the first pass ``p`` saw, the zero suppression,
    units and digit formats the file leaves open (module docstring)."""
    d = _Decision()
    stated = p.digits or p.comment_digits
    zeros = p.zeros or p.comment_zeros

    def total(unit: str | None) -> int:
        st = p.stats[unit]
        if stated:
            return sum(stated)
        default = max(sum(v) for v in DEFAULT_DIGITS.values()) if unit is None else sum(DEFAULT_DIGITS[unit])
        return max(default, st.longest)

    if zeros is None:
        def shortest(name: str) -> tuple[int, int, str] | None:
            found = [(s, total(u)) for u, st in p.stats.items() if (s := getattr(st, name)) is not None]
            short = [s for s, t in found if s[0] < t]
            return min(short, key=lambda s: s[1]) if short else None

        lead, trail, short = shortest("leading_zero"), shortest("trailing_zero"), shortest("shortest")
        if lead and trail:
            later = max(lead, trail, key=lambda s: s[1])
            if lead == trail:
                raise FabError(p.name, lead[1], f"the coordinate {lead[2]} has fewer digits than the format but "
                                                "keeps both a leading and a trailing zero, and no LZ or TZ is stated: "
                                                "no reading of the implied decimal point fits both")
            raise FabError(p.name, later[1], f"coordinates with fewer digits than the format keep leading zeros "
                                             f"(line {lead[1]}: {lead[2]}) and trailing zeros (line {trail[1]}: "
                                             f"{trail[2]}), and no LZ or TZ is stated: no reading of the implied "
                                             "decimal point fits both")
        if lead or trail:
            zeros = "LZ" if lead else "TZ"
            sign = lead or trail
            assert sign is not None
            kept, end = ("leading", "left") if lead else ("trailing", "right")
            d.notes.append(f"line {sign[1]}: no LZ or TZ stated, and the coordinate {sign[2]} has fewer digits than "
                           f"the format but keeps its {kept} zero: read as {zeros} ({kept} zeros kept, digits "
                           f"counted from the {end})")
        elif short:
            zeros = "TZ"
            d.notes.append(f"line {short[1]}: no LZ or TZ stated, and the coordinate {short[2]} has fewer digits "
                           "than the format: read as TZ (leading zeros left out, digits counted from the right), the "
                           "common practice, as in Gerber files; it is also the reading that keeps such coordinates "
                           "nearer the origin, erring toward holes being placed on the board's copper")
        d.zeros = zeros

    if p.unit_needed is not None:
        d.unit = _decide_unit(p, stated, zeros, d.notes)
        if None in p.stats:
            p.stats.setdefault(d.unit, _Stats()).merge(p.stats.pop(None))

    if not stated:
        for unit, st in p.stats.items():
            if unit is None:
                continue
            digits, note = _infer_digits(st, unit, zeros)
            if note is not None:
                d.digits[unit] = digits
                d.notes.append(note)
                d.others[unit] = _other_readings(st, unit, zeros, digits[0])
    return d


def _decide_unit(p: _Parser, stated: tuple[int, int] | None, zeros: str | None, notes: list[str]) -> str:
    """The unit of a file that states none: the plausible reading, or the
    smaller of two (module docstring)."""
    st = p.stats.get(None)
    found: dict[str, tuple[float, list[str]]] = {}
    for unit in ("mm", "in"):
        f = _factor(unit)
        largest = p.unknown_decimal * f
        if st is not None:
            digits = stated or _infer_digits(st, unit, zeros)[0]
            largest = max(largest, st.largest(digits, zeros) * f)
        why = []
        if largest > PLAUSIBLE_BOARD_MM:
            why.append(f"a coordinate {largest / 1000:.3g} m from the origin")
        lo, hi = PLAUSIBLE_DRILL_MM
        if p.unknown_diameters:
            small, large = min(p.unknown_diameters) * f, max(p.unknown_diameters) * f
            if small < lo:
                why.append(f"a {small:.4g} mm drill")
            if large > hi:
                why.append(f"a {large:.4g} mm drill")
        found[unit] = (largest, why)
    plausible = [u for u in ("mm", "in") if not found[u][1]]
    line = p.unit_needed
    if not plausible:
        raise FabError(p.name, line, "no units stated (no METRIC, INCH, M71, M72 or format comment), and neither "
                                     f"reading is a plausible board: in mm {' and '.join(found['mm'][1])}; in inch "
                                     f"{' and '.join(found['in'][1])}")
    head = f"line {line}: no units stated (no METRIC, INCH, M71, M72 or format comment): read as "
    if len(plausible) == 1:
        unit = plausible[0]
        other = "in" if unit == "mm" else "mm"
        notes.append(head + f"{_unit_name(unit)}, the only plausible reading (in {_unit_name(other)}: "
                            f"{' and '.join(found[other][1])})")
        return unit
    unit = min(plausible, key=lambda u: found[u][0])  # mm first on a tie
    other = "in" if unit == "mm" else "mm"
    notes.append(head + f"{_unit_name(unit)}, largest coordinate {found[unit][0]:.6g} mm; {_unit_name(other)} would "
                        f"also be plausible (largest coordinate {found[other][0]:.6g} mm): the smaller reading was "
                        "taken, as it errs toward holes being placed on the board's copper rather than dropped "
                        "beyond it")
    return unit


# --------------------------------------------------------------------------- reading


class _Parser:
    """The state of one Excellon program while it is read line by line.

    With ``survey=True`` (the first pass) a value that cannot be read yet
    -- an implied-decimal coordinate whose format, zero suppression or
    unit is left open, or a diameter in unknown units -- is recorded in
    :attr:`stats` / :attr:`unknown_diameters` instead, read as 0, and
    :attr:`flagged` is set: the pass's result is then thrown away.
    """

    def __init__(self, name: str, pre: _Prescan, survey: bool, decided: _Decision | None = None) -> None:
        self.name = name
        self.line = 0
        self.pre = pre
        self.survey = survey
        self.decided = decided or _Decision()
        self.flagged = False
        self.notes: list[str] = []
        self.default_noted: set[str | None] = set()  # units whose default digit format a note names
        self.headerless = False
        self.unit: str | None = None  # "mm" or "in"
        self.zeros: str | None = None  # "LZ" or "TZ", as a METRIC / INCH command says
        self.digits: tuple[int, int] | None = None  # as a METRIC / INCH command says
        comment = pre.comment or _FormatComment()
        self.comment_digits = comment.digits
        self.comment_zeros = comment.zeros
        self.comment_unit = comment.unit
        self.early_unit: tuple[str, int] | None = None  # headerless: a unit command after the first values
        self.tools: dict[int, tuple[float, str]] = {}  # number -> (diameter mm, function)
        self.assumed: list[int] = []  # tools selected without a diameter (no header)
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
        # ;TYPE=PLATED / ;TYPE=NON_PLATED comments: in force for the tools defined after them
        self.type_plated: bool | None = None
        self.type_seen = False
        self.tool_plated: dict[int, bool | None] = {}
        self.hole_tool: list[int | None] = []
        # first pass: what could not be read yet
        self.stats: dict[str | None, _Stats] = {}
        self.unknown_diameters: list[float] = []
        self.unknown_decimal = 0.0  # the largest decimal-point coordinate in unknown units
        self.unit_needed: int | None = None  # the first line that needed the unknown unit

    def fail(self, message: str, line: int | None = None) -> NoReturn:
        raise FabError(self.name, self.line if line is None else line, message)

    def note(self, message: str) -> None:
        if message not in self.notes:
            self.notes.append(message)

    # ---- the program

    def parse(self, lines: list[str]) -> DrillFile:
        i = self._header_start(lines)
        self._start_unit()
        self.notes.extend(self.decided.notes)
        if not self.headerless:
            i = self._header(lines, i)
        self._body(lines, i)
        return self._result()

    def _start_unit(self) -> None:
        """The unit before any unit command: the format comment's (if the
        first unit command agrees), in a file without header the first unit
        command's, else the inferred one."""
        pre, c = self.pre, self.pre.comment
        stated = pre.unit_statement
        if c is not None:
            self.notes.extend(c.notes)
            took = []
            overridden = c.unit is not None and stated is not None and stated[0] != c.unit
            if c.digits is not None and not pre.command_digits and not overridden:
                took.append(f"digit format {c.digits[0]}.{c.digits[1]}")
            if c.unit is not None:
                if overridden:
                    self.note(f"line {c.line}: the format comment's unit ({_unit_name(c.unit)}) is overridden by the "
                              f"unit command on line {stated[1]} ({_unit_name(stated[0])}): commands win over comments"  # type: ignore[index]  # noqa: E501
                              + (", and the comment's digit format, meant for its own unit, is not used either"
                                 if c.digits is not None else ""))
                    self.comment_unit = None
                    self.comment_digits = None
                elif stated is None:
                    took.append(f"unit {_unit_name(c.unit)}")
            if c.zeros is not None and not pre.command_zeros:
                took.append(f"zero suppression {c.zeros}")
            if took:
                self.note(f"line {c.line}: {', '.join(took)} taken from the format comment {_show(c.text)} where no "
                          "command states them")
        if self.comment_unit is not None:
            self.unit = self.comment_unit
        elif self.headerless and stated is not None:
            self.unit = stated[0]
            self.early_unit = stated
        elif self.decided.unit is not None:
            self.unit = self.decided.unit

    def _header_start(self, lines: list[str]) -> int:
        for i, raw in enumerate(lines):
            self.line = i + 1
            text = raw.strip()
            if not text or text == "%":
                continue
            if text.startswith(";"):
                self._comment(text)
                continue
            if text == "M48":
                return i + 1
            if _drill_like(lines[: i + _LIKE_LINES], cut_last=False):
                self.headerless = True
                self.note("no M48 header: read as an Excellon program without header (tool sizes and units only "
                          "as the body states them)")
                self.function = ""
                return 0
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
                if self.comment_zeros not in (None, part):
                    self.note(f"line {self.line}: {part} overrides the format comment's {self.comment_zeros}: "
                              "commands win over comments")
            elif re.fullmatch(r"0+\.0+", part):
                whole, frac = part.split(".")
                if len(whole) + len(frac) > MAX_DIGITS:
                    self.fail(f"digit format {part!r} has more than {MAX_DIGITS} digits")
                self.digits = (len(whole), len(frac))
                if self.comment_digits not in (None, self.digits):
                    cw, cf = self.comment_digits
                    self.note(f"line {self.line}: the digit format {len(whole)}.{len(frac)} overrides the format "
                              f"comment's {cw}.{cf}: commands win over comments")
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
            if known is not None and number not in self.assumed and abs(known[0] - diameter) > 1e-9:
                self.fail(f"tool T{number} is defined twice with different diameters "
                          f"({known[0]:g} mm and {diameter:g} mm)")
            self.tools[number] = (diameter, self.function)
            self.tool_plated[number] = self.type_plated
        elif not select:
            self.fail(f"tool definition {_show(text)} without a diameter (C)")
        if select:
            if number == 0:
                self.tool = None
                return
            if number not in self.tools:
                if not self.headerless:
                    defined = ", ".join(f"T{n}" for n in sorted(self.tools)) or "none"
                    self.fail(f"unknown tool T{number} (defined: {defined})")
                self.tools[number] = (ASSUMED_DIAMETER_MM, "")
                self.assumed.append(number)
            self.tool = number

    def _comment(self, text: str) -> None:
        m = _ATTRIBUTE.fullmatch(text)
        if not m:
            plating = _TYPE_COMMENT.fullmatch(text)
            if plating:  # applies to the tools defined after it (a file may hold both kinds)
                self.type_plated = plating.group(1).upper() == "PLATED"
                self.type_seen = True
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

    def _unit_for(self, what: str) -> str | None:
        """The unit a value is read in; ``None`` (first pass only) when the
        file states none anywhere and it is to be inferred."""
        if self.unit is not None:
            if self.early_unit is not None and self.line < self.early_unit[1]:
                word, line = _unit_name(self.early_unit[0]), self.early_unit[1]
                self.note(f"line {self.line}: values come before the first unit command (line {line}): read in its "
                          f"unit, {word}")
            return self.unit
        if self.survey and self.pre.unit_statement is None:
            self.flagged = True
            if self.unit_needed is None:
                self.unit_needed = self.line
            return None
        self.fail(f"{what} before the units are set (METRIC or INCH in the header)")

    def _length(self, value: str, what: str) -> float:
        """A plain decimal number (tool diameter) in the current unit, in mm
        (first pass, units unknown: the number as written)."""
        unit = self._unit_for(what)
        if unit is None:
            self.unknown_diameters.append(abs(float(value)))
            return float(value)
        mm = float(value) * _factor(unit)
        if abs(mm) > MAX_COORDINATE_MM:
            self.fail(f"{what} {value} {unit} is more than 10 m (wrong units?)")
        return mm

    def _coordinate(self, value: str) -> float:
        """One X or Y value in mm: decimal point as written, else implied
        by the digit format and zero suppression."""
        unit = self.unit if self.unit is not None and self.early_unit is None else self._unit_for("a coordinate")
        if "." in value:
            number = float(value)
            if unit is None:
                self.unknown_decimal = max(self.unknown_decimal, abs(number))
                return 0.0
        else:
            sign = -1.0 if value.startswith("-") else 1.0
            digits = value.lstrip("+-")
            stated = self.digits or self.comment_digits
            whole, frac = stated or self.decided.digits.get(unit or "") or DEFAULT_DIGITS[unit or "mm"]
            total = whole + frac
            zeros = self.zeros or self.comment_zeros or self.decided.zeros
            if self.survey and (unit is None or not stated or zeros is None):  # else nothing is left to infer
                self.stats.setdefault(unit, _Stats()).add(digits, self.line)
            if len(digits) > total and stated:
                self.fail(f"coordinate {value} has more digits than the format {whole}.{frac} allows")
            if len(digits) > MAX_DIGITS:
                self.fail(f"coordinate {value} has more than {MAX_DIGITS} digits")
            ambiguous = len(digits) < total and zeros is None and digits.strip("0") != ""  # 0 reads as 0 either way
            pending = unit is None or len(digits) > total or ambiguous
            if pending:
                if self.survey:
                    self.flagged = True
                    return 0.0
                if len(digits) > total:  # not reached: the second pass's format fits every coordinate
                    self.fail(f"coordinate {value} has more digits than the format {whole}.{frac} allows")
                self.fail(f"coordinate {value} has fewer digits than the format {whole}.{frac} and the header "
                          "does not say LZ or TZ: its decimal point is ambiguous")
            if not stated and unit not in self.decided.digits and unit not in self.default_noted:
                self.default_noted.add(unit)
                self.note(f"line {self.line}: no digit format stated: implied-decimal coordinates read as "
                          f"{whole}.{frac} ({_unit_name(unit or 'mm')}), the common default")
            if zeros == "LZ":
                digits = digits.ljust(total, "0")
            number = sign * int(digits) / 10**frac
        assert unit is not None
        mm = number * _factor(unit)
        if abs(mm) > MAX_COORDINATE_MM:
            self.fail(f"coordinate {value} {unit} is more than 10 m from the origin (wrong units or format?)")
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
        self.hole_tool.append(self.tool)
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
            self.hole_tool.append(self.tool)
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
        if self.assumed:
            names = ", ".join(f"T{n}" for n in sorted(set(self.assumed)))
            self.note(f"tool(s) {names} selected without a diameter (no header defines them): taken as "
                      f"{ASSUMED_DIAMETER_MM:g} mm, the smallest mechanical via drill fabricators commonly offer; "
                      "this is an assumption, not read from the file")
        h = self.holes
        s = self.slots

        def col(rows: list, k: int) -> np.ndarray:
            return np.array([r[k] for r in rows], dtype=np.float64)

        plated, hole_plated = self.plated, None
        if self.type_seen and self.span is None:  # an X2 file function, if any, says more
            kinds = [self.tool_plated.get(t) if t is not None else None for t in self.hole_tool]
            kinds = [True if k is None else k for k in kinds]  # a tool before any ;TYPE: plated (the default)
            if kinds and all(kinds):
                plated = True
            elif kinds and not any(kinds):
                plated = False
            elif kinds:
                hole_plated = np.array(kinds, dtype=bool)
                self.note(f"{int(hole_plated.sum())} plated and {int((~hole_plated).sum())} non-plated hole(s), by "
                          "the ;TYPE= comments before their tools")
        others = [o for unit, found in self.decided.others.items() for o in found] \
            if len(self.decided.digits) == 1 and not (self.digits or self.comment_digits) else []
        return DrillFile(
            path=self.name,
            plated=plated,
            hole_plated=hole_plated,
            other_readings=tuple(others),
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
            notes=list(self.notes),
        )


def _show(text: str) -> str:
    """A command as quoted in a message (cut to 40 characters)."""
    return repr(text if len(text) <= 40 else text[:37] + "...")
