"""Gerber RS-274X / X2 copper-layer reader: one file in, one
:class:`~checker.readers.fab.layer.GerberLayer` out.

Follows the Gerber Layer Format Specification, revision 2021.02 (Ucamco);
section numbers below refer to it. The file is read once, front to back, in
blocks of :data:`READ_BLOCK` bytes, in time linear in its size (also the
clear-polarity step, :mod:`.gerber_output`):

* a run of strokes (each an optional ``%TO.N,..*%``, a ``D02`` and
  ``D01`` lines), or of straight draws or region vertices, is matched by
  one regular expression and kept as text; its coordinates are parsed
  later, with all other runs, in one vectorised pass (:mod:`.gerber_runs`),
  and land in flat arrays (:mod:`.gerber_sink`; no Python object per
  draw);
* other ``D01``/``D02``/``D03`` lines (arcs, flashes, clear draws),
  attribute lines and aperture selections are read by one precompiled
  regular expression each, with the reader's state in local variables;
* every other line goes through the general command splitter
  (:mod:`.gerber_commands`) and the command handlers below, which also
  report every error. The fast paths give the same values as the general
  one (see :func:`_signed` for the sign of ``-0``).

What becomes what
-----------------
* Draws and arcs (D01) with a solid circle aperture of diameter > 0 ->
  :class:`GerberTraces` rows, width = diameter x LS scale (2.4, 4.9.5); arcs
  are split into chords by :func:`checker.readers.arcs.arc_polyline`
  (:mod:`.gerber_arcs`). A zero-length draw that is not part of a longer
  stroke is a dot: a ``draw`` shape (a disc; spec 2.4 says it is a draw
  object, not a flash).
* Flashes (D03) -> ``pad`` shapes: the aperture outline (4.4, 4.5, with
  holes, LM/LR/LS applied, 4.9) placed at the flash point (``at``). Circles
  become polygons of exactly the circle's area whose outline stays within
  the arc chord tolerance (:mod:`.gerber_apertures`).
* Regions (G36/G37) -> one ``region`` shape per contour (4.10), cut-ins
  resolved into holes.
* Draws with R, O or P apertures (deprecated, 8.2.3; arcs are accepted
  too), or with a circle that has a hole -> ``draw`` shapes, the aperture's
  outline swept along the path (holes ignored).
* Block apertures (AB, 4.11, nested too) and step-and-repeat (SR, 4.12) are
  expanded; clear polarity (LPC, 2.7) removes earlier copper of any net
  (see :mod:`.gerber_output` for how traces are clipped).
* ``TA.AperFunction`` ``NonMaterial`` and ``Profile`` objects (drawing
  elements, not copper) are dropped from a file whose ``TF.FileFunction``
  says ``Copper``; in any other file (a profile layer, say) they are read
  like everything else. ``NonConductor`` (also ``NonConductorDraw``) copper
  is kept but never as a trace: as shapes whose ``function`` says so.
* Zero-size objects (C aperture of diameter 0, 4.3.2) have no image and are
  dropped.
* Negative file polarity (``TF.FilePolarity,Negative``, or the deprecated
  ``%IPNEG*%``): ``negative=True``, the drawn objects returned as they are.

Nets: an object takes the ``TO.N`` value set when it is created (5.4,
5.6.13); the empty value and ``N/C`` are kept as names; an object with
several ``.N`` values gets ``NET_UNKNOWN`` (to be recovered by
connectivity). Objects copied from a block keep their own attributes.

Deprecated forms read (chapter 8): G54 before Dnn, G55, G70/G71 units,
G90, G74 single-quadrant arcs, G01/G02/G03 combined with D01, coordinates
without D code after a D01 (8.3.2), G1/D1 style codes (8.3.3), trailing-zero
FS (8.2.1.1), low resolution, rectangular holes (8.2.2), primitives 2, 22
and 6, ``%SRX1Y1I0J0*%`` as SR close, an SR left open at M02 (8.3.4),
attributes in ``G04 #@! ...`` comments, IP, IN, LN, and AS/IR/MI/OF/SF when
they state the default.

Refused, with one :class:`~checker.errors.FabError` naming file and line:
incremental coordinates (FS ..I.. or G91), D01/D03 before FS and MO, an
undefined aperture, an arc before G74/G75, a region not closed by G37, an
AB statement open at M02, a file without M02 (truncated), coordinates more
than 10 m from the origin (also apertures, LS-scaled traces and pads, and
copies made by SR or AB), non-ASCII bytes in a command or invalid UTF-8 in
an attribute, sizes the spec forbids (negative, zero for R/O/P), holes that
do not fit, files over the per-file cap (:mod:`checker.limits`) and content beyond the
object limits below. No other exception leaves :func:`read_gerber`.

Tolerated deviations: a missing G01 before the first draw (linear assumed);
the current point starts at (0, 0) and is kept after AB and SR statements;
an unclosed region contour is closed; Dnn and attribute commands inside a
region statement (the attributes apply to the region); TD of an attribute
that is not set; unknown commands are ignored (2.14 asks readers to warn
and go on); nothing after M02 is read; a redefined macro variable takes its
new value (see also :mod:`.gerber_commands`).
"""

from __future__ import annotations

import functools
import math
import os
import re
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.errors import GEOSException

from ... import limits
from ...errors import FabError
from ..board_json import MAX_COORDINATE_MM
from .gerber_apertures import (
    EMPTY,
    ApertureError,
    apply_matrix,
    disc,
    is_identity,
    stadium,
    standard_aperture,
    swept_outline,
    transform_matrix,
)
from .gerber_arcs import ArcError, arc_circle, arc_points
from .gerber_attributes import AttributeSyntaxError, attribute_in_comment, parse_attribute
from .gerber_commands import CommandSplitter, SplitError, show_command
from .gerber_macros import ApertureMacro, MacroError, contour_polygon, instantiate, parse_macro
from .gerber_output import build
from .gerber_runs import PointChunks, group_matchers, run_matcher, stroke_heads
from .gerber_sink import ObjectSink, ReplayError, ShapeRecord, stroke_outline
from .layer import NET_UNKNOWN, GerberLayer

#: The caps on trace points (all strokes) and on shapes and clear objects
#: of one file are ``--limit draws`` and ``--limit shapes`` (:mod:`checker.limits`).
#: Most contour points in one region statement.
MAX_REGION_POINTS = 5_000_000
#: Deepest nesting of AB / SR statements.
MAX_BLOCK_DEPTH = 32
#: Longest line read as one (a file without line breaks is read in pieces of this size).
READ_CHUNK = 1 << 16
#: Bytes asked of the stream per read.
READ_BLOCK = 1 << 20
#: Fewest lines of a run of straight draws kept as text and parsed in bulk; in a region contour of
#: fewer than MIN_REGION_RUN points, runs of fewer lines are read line by line (a contour's points are
#: parsed when it closes: bulk parsing pays only on longer ones).
MIN_RUN = 4
MIN_REGION_RUN = 16
#: Fewest lines of a run of whole strokes (net change, D02, D01 lines) taken at once.
MIN_GROUPS_LINES = 8
#: Lines between checks of the object limits in the fast path.
CHECK_EVERY = 1 << 16

#: Aperture functions whose objects are not copper at all (5.6.10): dropped from copper layers.
#: Unknown-command warnings kept per file (the rest are counted).
MAX_WARNINGS = 5

DROPPED_FUNCTIONS = frozenset({"NonMaterial", "Profile"})
#: Aperture functions of copper that conducts nothing: kept as flagged shapes.
NON_CONDUCTOR_FUNCTIONS = frozenset({"NonConductor", "NonConductorDraw"})

_INTERNAL = "an internal error of couplint's Gerber reader"

_WORD = re.compile(r"(?:G0*(\d{1,3}))?(?:X([+-]?\d+))?(?:Y([+-]?\d+))?(?:I([+-]?\d+))?(?:J([+-]?\d+))?"
                   r"(?:D0*(\d{1,10}))?(?:M0*(\d{1,3}))?")
_DECIMAL = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)")
_FS = re.compile(r"FS([LTD]?)([AI])(?:N\d+)?(?:G\d+)?X(\d)(\d)Y(\d)(\d)(?:D\d+)?(?:M\d+)?")
_AD = re.compile(r"ADD(\d+)([^,]*)(?:,(.*))?", re.DOTALL)
_NAME = re.compile(r"[._a-zA-Z$][._a-zA-Z0-9$]*")
_SR = re.compile(r"SR(?:X(\d+))?(?:Y(\d+))?(?:I([+-]?(?:\d+\.?\d*|\.\d+)))?(?:J([+-]?(?:\d+\.?\d*|\.\d+)))?")
_SPACES = re.compile(r"\s+")
_COMMENT = re.compile(rb"G0*4(?![0-9])").match
#: Consecutive whole lines that are each one comment without an attribute (no ``#@!``: no '#' at all)
_COMMENT_RUN = re.compile(rb"(?:G0*4(?![0-9])[^*%#\r\n]*\*\r?\n)+").match
#: A line that is one word command or one single-word extended command.
_ONE_WORD = re.compile(rb"[ \t]*(?:([^%*\r\n]+)\*|%([^%*\r\n]+)\*%)[ \t\r\n]*").fullmatch
_MAX_DIGITS = 18
#: A line that is one attribute command (TO, TA, TD): its text.
_ATTRIBUTE_LINE = re.compile(rb"%(T[OAD][^%*\r\n]*)\*%\r?\n?").fullmatch
#: A line that is an aperture selection (1) or a G01/G02/G03 alone (2).
_SELECT_LINE = re.compile(rb"(?:G0*54)?D0*([1-9][0-9]{1,8})\*\r?\n?|G0*([123])\*\r?\n?").fullmatch
_NUMBER = re.compile(rb"[+-]?[0-9]+").match


@functools.cache
def _digits(div: float) -> int:
    """Most digits of a coordinate that cannot be more than 10 m from the origin."""
    return max(1, math.floor(math.log10(MAX_COORDINATE_MM * div + 1)))


@functools.cache
def _fast_regex(div_x: float, div_y: float):
    """``[Gnn]X..Y..[I..J..]Dnn*`` lines (G01, G02, G03; D01, D02, D03)
    whose coordinates cannot be more than 10 m from the origin (longer
    numbers go the general way, which checks them). ``div``: coordinate
    units per mm."""
    nx, ny = _digits(div_x), _digits(div_y)
    return re.compile(rb"(?:G0*([123]))?(?:X([+-]?[0-9]{1,%d}))?(?:Y([+-]?[0-9]{1,%d}))?"
                      rb"(?:I([+-]?[0-9]{1,%d}))?(?:J([+-]?[0-9]{1,%d}))?D0*([123])\*\r?\n?"
                      % (nx, ny, nx, ny)).fullmatch


def _signed(digits: bytes, div: float, general: bool) -> float:
    """A coordinate in mm from its digits: ``int(digits) / div``; with
    ``general``, as the general path reads it (the quotient of the
    magnitude, negated: ``-0`` is ``-0.0``)."""
    value = int(digits) / div
    if general and value == 0 and digits[:1] == b"-":
        return -0.0
    return value


def _line_end(buf: bytes, pos: int, end: int, lines: int) -> int:
    """Where the ``lines``-th line of ``buf[pos:end]`` ends (after its line
    feed; the span holds at least that many lines)."""
    return pos + int(np.flatnonzero(np.frombuffer(buf, np.uint8, end - pos, pos) == 10)[lines - 1]) + 1


def _parse_attribute_line(text: bytes) -> tuple | None:
    """An attribute command's (code, name, fields), or ``None`` if the
    general path must read it (to report an error, or odd spacing)."""
    if text != text.strip():
        return None
    try:
        return parse_attribute(text.decode("utf-8"))
    except (UnicodeDecodeError, AttributeSyntaxError):
        return None


@dataclass
class Aperture:
    """One entry of the aperture dictionary (2.2, 4.3). ``outline``: mm,
    origin at (0, 0), before LM/LR/LS; ``round_width``: the diameter of a
    circle standard aperture (the width of its draws), else ``None``;
    ``kind``: ``standard``, ``macro`` or ``block`` (then ``block`` holds the
    objects)."""

    number: int
    kind: str
    outline: shapely.Geometry
    round_width: float | None
    function: str | None
    function_index: int
    line: int
    block: ObjectSink | None = None


@dataclass
class _Statement:
    """An open AB or SR statement: its sink and what to do at its close."""

    kind: str
    line: int
    parent: ObjectSink
    sink: ObjectSink
    number: int = 0
    repeat: tuple[int, int, float, float] = (1, 1, 0.0, 0.0)
    function: str | None = None


class _Region:
    """An open region statement: its contours, each the line it starts on
    and its points."""

    def __init__(self, line: int) -> None:
        self.line = line
        self.contour_line = line  # where the next contour starts: the G36 or the last D02
        self.contours: list[tuple[int, PointChunks]] = []
        self.current: PointChunks | None = None
        self.points = 0


def load_gerber(path: str | os.PathLike) -> GerberLayer:
    """Read the Gerber file at ``path`` (refused unread if over the
    per-file cap, ``--limit file-mb``)."""
    name = os.fspath(path)
    try:
        size = os.path.getsize(name)
    except OSError as exc:
        raise FabError(name, None, f"cannot read the file: {exc.strerror or exc}") from None
    cap = limits.current().file_bytes
    if size > cap:
        raise FabError(name, None, f"the file is {size:,} bytes, more than the cap of {cap:,} bytes per file; "
                       f"refusing to read it ({limits.hint('file-mb')})")
    try:
        stream = open(name, "rb")
    except OSError as exc:
        raise FabError(name, None, f"cannot read the file: {exc.strerror or exc}") from None
    with stream:
        return read_gerber(stream, name)


def read_gerber(stream, name: str, size_limit: int | None = None) -> GerberLayer:
    """Read one Gerber layer from a binary stream (read once, front to
    back; it need not be seekable). ``name`` is what error messages call
    the file. Raises only :class:`FabError`."""
    reader = _GerberReader(name, limits.current().file_bytes if size_limit is None else size_limit)
    try:
        return reader.read(stream)
    except FabError:
        raise
    except MemoryError:
        raise FabError(name, reader.line, "ran out of memory reading this file") from None
    except OSError as exc:
        raise FabError(name, reader.line, f"cannot read the file: {exc}") from None
    except Exception as exc:  # a bug: still one clear message, never a traceback
        raise FabError(name, reader.line, f"cannot be read: {type(exc).__name__}: {exc} ({_INTERNAL}; "
                       "please report it with the file)") from None


class _GerberReader:
    """The state of one file being read: graphics state (2.6), apertures,
    attribute dictionaries, open statements, and the objects so far."""

    def __init__(self, name: str, size_limit: int) -> None:
        self.name = name
        self.size_limit = size_limit
        caps = limits.current()
        self.max_points = caps.draws
        self.max_shapes = caps.shapes
        self.line = 0
        self.warnings: list[str] = []
        self.unknown_count = 0
        # coordinate format and unit (4.2)
        self.zeros: str | None = None
        self.x_digits = self.y_digits = (0, 0)
        self.unit: str | None = None
        self.div_x = self.div_y = 1.0
        self.resolution_mm = 0.0
        # graphics state
        self.cx = self.cy = 0.0
        self.interpolation: int | None = None
        self.quadrant: str | None = None
        self.dark = True
        self.mirror = "N"
        self.rotation = 0.0
        self.scale = 1.0
        self.matrix = (1.0, 0.0, 0.0, 1.0)
        self.aperture: Aperture | None = None
        self.last_operation = 0
        self.stroke_open = False
        self.region: _Region | None = None
        # dictionaries
        self.apertures: dict[int, Aperture] = {}
        self.macros: dict[str, ApertureMacro] = {}
        self.templates: dict[tuple, shapely.Geometry] = {}
        self.aperture_attributes: dict[str, tuple[str, ...]] = {}
        self.object_attributes: dict[str, tuple[str, ...]] = {}
        self.file_attributes: dict[str, tuple[str, ...]] = {}
        self.file_function: tuple[str, ...] | None = None
        self.negative = False
        self.net_names: list[str] = []
        self.net_index: dict[str, int] = {}
        self.net = NET_UNKNOWN
        self.pin: tuple[str, ...] | None = None
        self.component: str | None = None
        self.functions: list[str] = []
        self.function_index: dict[str, int] = {}
        # objects
        self.image = ObjectSink()
        self.sink = self.image
        self.statements: list[_Statement] = []
        self.done = False
        # fast path
        self.fast_re = None
        self.run_re = self.simple_run_re = None
        self.group_res = (None, None)
        self.fast_stroke = self.fast_clear_stroke = False
        self.clear_width = 0.0
        self.trace_width = 0.0
        self.trace_function = -1
        self.flash_outline: shapely.Geometry | None = None
        self.flash_function: str | None = None
        self.fast_state: tuple = ()
        self.version = 0

    # ------------------------------------------------------------------ errors

    def _too_large(self, line: int) -> FabError:
        return self.error(line, f"the file is larger than {self.size_limit:,} bytes: over the per-file cap; "
                                f"{limits.hint('file-mb')}")

    def error(self, line: int | None, message: str) -> FabError:
        return FabError(self.name, line, message)

    # ------------------------------------------------------------------ main loop

    def read(self, stream) -> GerberLayer:
        """Read the stream to M02 and build the layer.

        One loop over lines, in three tiers, the graphics state held in
        local variables (reloaded whenever :meth:`_refresh` counts a new
        ``version``): (1) while the interpolation is linear, a run of whole
        strokes, or of straight draws or region vertices, taken whole
        (:mod:`.gerber_runs`); (2) one D01/D02/D03 line (arcs, moves,
        flashes, single draws, clear draws), an attribute line or an
        aperture selection, each by one regular expression; (3) anything
        else, and every line that would raise an error, through the general
        path. Lines are counted, the size limit and the object limits
        (every CHECK_EVERY lines) are checked exactly as if every line went
        through the general path."""
        splitter = CommandSplitter()
        read_block = stream.read
        size_limit = self.size_limit
        buf = b""
        pos = 0
        eof = finished = False
        lineno = last_line = 1
        nbytes = 0
        next_check = CHECK_EVERY
        no_run_before = no_groups_before = 0  # a run was tried up to here: no new try before it
        attributes: dict[bytes, tuple | None] = {}  # attribute command text -> parsed (None: general path)
        net_fields: dict[bytes, tuple[str]] = {}  # TO.N value in a run -> the attribute's fields
        self._refresh()
        while not finished and not self.done:
            # ---- the fast path: state in locals, one regex per line (or per run of draws)
            version = self.version
            fast = self.fast_re if splitter.idle() else None
            run, simple_run = self.run_re, self.simple_run_re
            groups, group_nets = self.group_res
            object_attributes, net_index = self.object_attributes, self.net_index
            stroke, region = self.fast_stroke, self.region
            clear_stroke, clear_width = self.fast_clear_stroke, self.clear_width
            div_x, div_y = self.div_x, self.div_y
            sink = self.sink
            pending = sink.pending
            add_x, add_y = pending.xs.append, pending.ys.append
            s_start, s_width, s_net, s_func, s_line = sink.s_start, sink.s_width, sink.s_net, sink.s_func, sink.s_line
            width, function = self.trace_width, self.trace_function
            flash, flash_function, dark, shapes = self.flash_outline, self.flash_function, self.dark, sink.shapes
            cx, cy, net, pin, component = self.cx, self.cy, self.net, self.pin, self.component
            stroke_open, last_op, mode = self.stroke_open, self.last_operation, self.interpolation or 1
            runs = fast is not None and (stroke or region is not None)
            while True:
                if runs and region is None and mode == 1 and pos >= no_run_before and pos >= no_groups_before:
                    # ---- strokes, each an optional net change, a D02 and D01 lines, all spelled simply:
                    # one match for them all, their points kept as text, parsed in bulk later
                    gm = groups(buf, pos)
                    rend = gm.end() if gm is not None else pos
                    n = buf.count(b"\n", pos, rend)
                    if lineno + n > next_check:  # the object limits are checked at next_check: stop before
                        n = next_check - lineno
                        if n > 0:
                            rend = _line_end(buf, pos, rend, n)
                            while rend > pos and not buf.endswith(b"D01*\n", pos, rend):  # not after a head
                                rend = buf.rfind(b"\n", pos, rend - 1) + 1 or pos
                        else:
                            rend = pos
                        n = buf.count(b"\n", pos, rend)
                    if n < MIN_GROUPS_LINES or nbytes + (rend - pos) > size_limit:
                        no_groups_before = max(rend, pos + 1)  # the runs below take these lines
                    else:
                        text = buf[pos:rend]
                        d02, points_before, net_changes = stroke_heads(text)
                        stroke_nets = np.empty(len(d02), dtype=np.int32)
                        done = 0
                        for k, name in net_changes:  # in order: as _apply_attribute, _object_attributes_changed
                            stroke_nets[done:k] = net
                            done = k
                            fields = net_fields.get(name)
                            if fields is None:
                                fields = net_fields[name] = (name.decode("ascii"),)
                            if object_attributes.get(".N") != fields:
                                object_attributes[".N"] = fields
                                net = net_index.get(fields[0])
                                if net is None:
                                    net = net_index[fields[0]] = len(self.net_names)
                                    self.net_names.append(fields[0])
                                self.net = net
                        stroke_nets[done:] = net
                        nets_before = len(net_changes)
                        s_start.frombytes((points_before + (len(sink.px) + len(pending))).tobytes())
                        s_line.frombytes((d02 + (lineno + 1)).tobytes())  # the line after each D02
                        s_width.frombytes(np.full(len(d02), width).tobytes())
                        s_net.frombytes(stroke_nets.tobytes())
                        s_func.frombytes(np.full(len(d02), function, dtype=np.int32).tobytes())
                        pending.add_run(group_nets(b"", text) if nets_before else text, n - nets_before, cx, cy,
                                        div_x, div_y, False, True)
                        ix = text.rfind(b"X")
                        iy = text.rfind(b"Y")
                        cx = int(text[ix + 1:iy]) / div_x
                        cy = int(text[iy + 1:-5]) / div_y
                        stroke_open = True
                        last_op = 1
                        lineno += n
                        last_line = lineno - 1
                        nbytes += rend - pos
                        pos = rend
                        continue
                if runs and mode == 1 and pos >= no_run_before:
                    # ---- a run of straight draws or region vertices, after at most one net change (TO.N)
                    # and one D02: kept as text, its points parsed in bulk later
                    rm = simple_run(buf, pos)  # the common spelling first: the faster expression
                    n = buf.count(b"\n", pos, rm.end()) if rm is not None else 0
                    simple = n >= MIN_RUN
                    if not simple:
                        rm = run(buf, pos)
                        n = buf.count(b"\n", pos, rm.end()) if rm is not None else 0
                    if rm is None:
                        no_run_before = pos + 1
                    else:
                        rend = rm.end()
                        if lineno + n > next_check:  # the object limits are checked at next_check
                            n = next_check - lineno
                            if n > 0:
                                rend = _line_end(buf, pos, rend, n)
                            else:
                                n, rend = 0, pos
                        net_change = rm.start(1) >= 0
                        lead = rm.start(3) >= 0  # a D02 line: the points start anew at its point
                        if n < MIN_RUN or nbytes + (rend - pos) > size_limit or (region is not None and (
                                net_change or (n < MIN_REGION_RUN and (lead or region.current is None or len(
                                    region.current) < MIN_REGION_RUN)))):  # (a short run in a small contour)
                            no_run_before = pos + 1 if net_change else rend
                        else:
                            # the new current point: the run's last X and Y
                            ix = buf.rfind(b"X", pos, rend)
                            iy = buf.rfind(b"Y", pos, rend)
                            if simple:  # the last line is X<x>Y<y>D01*
                                last_x, last_y = buf[ix + 1:iy], buf[iy + 1:rend - 5]
                            else:
                                last_x = _NUMBER(buf, ix + 1)[0] if ix >= 0 else None
                                last_y = _NUMBER(buf, iy + 1)[0] if iy >= 0 else None
                            if region is None:
                                if net_change:
                                    fields = net_fields.get(rm[2])
                                    if fields is None:
                                        fields = net_fields[rm[2]] = (rm[2].decode("ascii"),)
                                    if object_attributes.get(".N") != fields:  # as _apply_attribute does
                                        stroke_open = False
                                        object_attributes[".N"] = fields
                                        net = net_index.get(fields[0])  # as _object_attributes_changed does
                                        if net is None:
                                            net = net_index[fields[0]] = len(self.net_names)
                                            self.net_names.append(fields[0])
                                        self.net = net
                                    text = buf[rm.end(1):rend]
                                else:
                                    text = buf[pos:rend]
                                if lead or not stroke_open:
                                    s_start.append(len(sink.px) + len(pending))
                                    s_width.append(width)
                                    s_net.append(net)
                                    s_func.append(function)
                                    s_line.append(lineno + net_change + lead)  # the line of its first D01
                                pending.add_run(text, n - net_change, cx, cy, div_x, div_y,
                                                not lead and not stroke_open, simple)
                                stroke_open = True
                            else:
                                if lead:
                                    region.current = None
                                    region.contour_line = lineno
                                    contour = self._start_contour(None, None)
                                else:
                                    contour = region.current
                                    if contour is None:
                                        contour = self._start_contour(cx, cy)
                                contour.add_run(buf[pos:rend], n, cx, cy, div_x, div_y, False, simple)
                                region.points += n - lead
                                if region.points > MAX_REGION_POINTS:
                                    raise self._too_many_region_points()
                            if region is None:
                                if last_x is not None:
                                    cx = int(last_x) / div_x
                                if last_y is not None:
                                    cy = int(last_y) / div_y
                            else:
                                if last_x is not None:
                                    cx = _signed(last_x, div_x, True)
                                if last_y is not None:
                                    cy = _signed(last_y, div_y, True)
                            last_op = 1
                            lineno += n
                            last_line = lineno - 1
                            nbytes += rend - pos
                            pos = rend
                            continue
                # ---- the next line is buf[pos:end] (at most READ_CHUNK bytes, as readline(READ_CHUNK))
                end = buf.find(b"\n", pos, pos + READ_CHUNK) + 1
                if not end:
                    if not eof and len(buf) - pos < READ_CHUNK:
                        block = read_block(READ_BLOCK)
                        if block:
                            buf = buf[pos:] + block
                            no_run_before -= pos
                            no_groups_before -= pos
                            pos = 0
                        else:
                            eof = True
                        continue
                    end = min(len(buf), pos + READ_CHUNK)
                    if end == pos:
                        finished = True
                        break
                if fast is not None and buf[pos] == 71:  # 'G': a run of plain comments (no attribute)?
                    cm = _COMMENT_RUN(buf, pos)
                    if cm is not None:  # skipped whole, counted as the general path counts them
                        rend = cm.end()
                        n = buf.count(b"\n", pos, rend)
                        nbytes += rend - pos
                        if nbytes > size_limit:
                            raise self._too_large(lineno)
                        lineno += n
                        last_line = lineno - 1
                        pos = rend
                        continue
                if fast is not None:
                    m = fast(buf, pos, end)
                    if m is not None:
                        g, xs, ys, is_, js, d = m.groups()
                        new_mode = mode if g is None else g[0] - 48
                        # the old line-at-a-time fast path's lines: their coordinates are int / div
                        plain = region is None and is_ is None and js is None and (
                            g is None or (new_mode == 1 and mode == 1))
                        last_line = lineno
                        nbytes += end - pos
                        if nbytes > size_limit:
                            raise self._too_large(lineno)
                        if lineno >= next_check:
                            next_check = lineno + CHECK_EVERY
                            self._check_limits(lineno)
                        if d == b"1":
                            if clear_stroke and new_mode == 1:
                                # ---- a straight clear draw with a round aperture: its stadium, a clear object
                                x = _signed(xs, div_x, True) if xs is not None else cx
                                cy_ = _signed(ys, div_y, True) if ys is not None else cy
                                outline = (stadium(cx, cy, x, cy_, clear_width) if x != cx or cy_ != cy
                                           else disc(cx, cy, clear_width / 2))
                                sink.add_clear(ShapeRecord("draw", outline, 0.0, 0.0, net, lineno, flash_function))
                                if len(shapes) + len(sink.clears) > self.max_shapes:
                                    raise self.error(lineno, f"more than {self.max_shapes:,} pads, regions and other "
                                                     f"shapes: over the cap; {limits.hint('shapes')}")
                                cx = x
                                cy = cy_
                                mode = new_mode
                                last_op = 1
                                lineno += buf[end - 1] == 10
                                pos = end
                                continue
                            if region is not None or stroke:
                                if plain:
                                    x = int(xs) / div_x if xs is not None else cx
                                    cy_ = int(ys) / div_y if ys is not None else cy
                                else:
                                    x = _signed(xs, div_x, True) if xs is not None else cx
                                    cy_ = _signed(ys, div_y, True) if ys is not None else cy
                                circle = None  # a straight piece; else the arc's circle
                                if new_mode != 1:
                                    if self.quadrant is None:
                                        circle = False  # an arc before G74/G75: the general path says so
                                    else:
                                        i = _signed(is_, div_x, True) if is_ is not None else 0.0
                                        j = _signed(js, div_y, True) if js is not None else 0.0
                                        self.line = lineno
                                        try:
                                            circle = arc_circle(cx, cy, x, cy_, i, j, new_mode == 2,
                                                                self.quadrant == "single", self.resolution_mm,
                                                                MAX_COORDINATE_MM)
                                        except ArcError as exc:
                                            raise self.error(lineno, str(exc)) from None
                                if circle is not False:
                                    if region is not None:
                                        contour = region.current
                                        if contour is None:
                                            contour = self._start_contour(cx, cy)
                                        if circle is None:
                                            contour.add(x, cy_)
                                            region.points += 1
                                        else:
                                            region.points += contour.add_arc(cx, cy, x, cy_, circle, False)
                                        if region.points > MAX_REGION_POINTS:
                                            raise self._too_many_region_points()
                                    else:
                                        if not stroke_open:
                                            s_start.append(len(sink.px) + len(pending))
                                            add_x(cx)
                                            add_y(cy)
                                            s_width.append(width)
                                            s_net.append(net)
                                            s_func.append(function)
                                            s_line.append(lineno)
                                            stroke_open = True
                                        if circle is None:
                                            add_x(x)
                                            add_y(cy_)
                                        else:
                                            pending.add_arc(cx, cy, x, cy_, circle, False)
                                        if not plain and len(sink.px) + len(pending) > self.max_points:
                                            self._check_limits(lineno)  # as the general path checks
                                    cx = x
                                    cy = cy_
                                    mode = new_mode
                                    last_op = 1
                                    lineno += buf[end - 1] == 10
                                    pos = end
                                    continue
                        elif d == b"2" or (region is None and flash is not None):
                            if plain:
                                if xs is not None:
                                    cx = int(xs) / div_x
                                if ys is not None:
                                    cy = int(ys) / div_y
                            else:
                                if xs is not None:
                                    cx = _signed(xs, div_x, True)
                                if ys is not None:
                                    cy = _signed(ys, div_y, True)
                            stroke_open = False
                            mode = new_mode
                            if d == b"2":
                                if region is not None:
                                    region.current = None
                                    region.contour_line = lineno
                                last_op = 2
                            else:
                                record = ShapeRecord("pad", flash, cx, cy, net, lineno, flash_function, (cx, cy), pin,
                                                     component)
                                if dark:
                                    shapes.append(record)
                                else:
                                    sink.add_clear(record)
                                if len(shapes) + len(sink.clears) > self.max_shapes:
                                    raise self.error(lineno, f"more than {self.max_shapes:,} pads, regions and other "
                                                     f"shapes: over the cap; {limits.hint('shapes')}")
                                last_op = 3
                            lineno += buf[end - 1] == 10
                            pos = end
                            continue
                        # anything else: the general path below (its accounting is done)
                        accounted = True
                    else:
                        accounted = False
                        c = buf[pos]
                        if c == 37:  # '%': an attribute command on its own line?
                            am = _ATTRIBUTE_LINE(buf, pos, end)
                            if am is not None:
                                key = am[1]
                                parsed = attributes.get(key, 0)
                                if parsed == 0:
                                    parsed = attributes[key] = _parse_attribute_line(key)
                                if parsed is not None:
                                    last_line = lineno
                                    nbytes += end - pos
                                    if nbytes > size_limit:
                                        raise self._too_large(lineno)
                                    if lineno >= next_check:
                                        next_check = lineno + CHECK_EVERY
                                        self._check_limits(lineno)
                                    self.stroke_open = stroke_open
                                    self.line = lineno
                                    self._apply_attribute(*parsed)
                                    stroke_open, net, pin, component = (self.stroke_open, self.net, self.pin,
                                                                        self.component)
                                    lineno += buf[end - 1] == 10
                                    pos = end
                                    continue
                        elif c == 68 or c == 71:  # 'D' or 'G': an aperture selection or G01/G02/G03 alone?
                            sm = _SELECT_LINE(buf, pos, end)
                            if sm is not None:
                                ap = self.apertures.get(int(sm[1])) if sm[1] is not None else None
                                if ap is not None or sm[2] is not None:
                                    last_line = lineno
                                    nbytes += end - pos
                                    if nbytes > size_limit:
                                        raise self._too_large(lineno)
                                    if lineno >= next_check:
                                        next_check = lineno + CHECK_EVERY
                                        self._check_limits(lineno)
                                    lineno += buf[end - 1] == 10
                                    pos = end
                                    if ap is None:
                                        mode = sm[2][0] - 48
                                        continue
                                    if ap is self.aperture:
                                        continue
                                    stroke_open = False
                                    self.aperture = ap
                                    self._refresh()
                                    if self.version == version:
                                        continue
                                    self.cx, self.cy, self.stroke_open, self.last_operation = (
                                        cx, cy, stroke_open, last_op)
                                    self.interpolation = mode
                                    break  # the fast-path state changed: reload it all
                else:
                    accounted = False
                # ---- the general path (a line holding just one command skips the splitter)
                line = buf[pos:end]
                pos = end
                if not accounted:
                    last_line = lineno
                    nbytes += len(line)
                    if nbytes > size_limit:
                        raise self._too_large(lineno)
                    if lineno >= next_check:
                        next_check = lineno + CHECK_EVERY
                        self.cx, self.cy, self.stroke_open = cx, cy, stroke_open
                        self._check_limits(lineno)
                self.cx, self.cy, self.stroke_open, self.last_operation = cx, cy, stroke_open, last_op
                self.interpolation = mode
                self.line = lineno
                single = _ONE_WORD(line) if fast is not None or splitter.idle() else None
                if single is not None:
                    if single[1] is not None:
                        self._word(single[1], lineno)
                    else:
                        self._extended([(single[2], lineno)], lineno)
                else:
                    try:
                        for command in splitter.feed(line, lineno):
                            self._command(command)
                            if self.done:
                                break
                    except SplitError as exc:
                        raise self.error(exc.line, str(exc)) from None
                if line.endswith(b"\n"):
                    lineno += 1
                if self.done:
                    break
                self._refresh()
                if self.version != version:
                    break  # what the fast path relies on changed: reload it all
                fast = self.fast_re if splitter.idle() else None
                runs = fast is not None and (stroke or region is not None)
                cx, cy, net, pin, component = self.cx, self.cy, self.net, self.pin, self.component
                stroke_open, last_op, mode = self.stroke_open, self.last_operation, self.interpolation or 1
        if not self.done:
            try:
                splitter.finish(last_line)
            except SplitError as exc:
                raise self.error(exc.line, str(exc)) from None
            self._check_open_statements(last_line, "the end of the file")
            raise self.error(last_line, "the file ends without M02: it is probably truncated (spec 4.13)")
        self._check_limits(self.line)
        non_conductors = {self.function_index[f] for f in NON_CONDUCTOR_FUNCTIONS if f in self.function_index}
        traces, shapes = build(self.image, self.functions, non_conductors)
        warnings = list(self.warnings)
        if self.unknown_count > len(warnings):
            warnings.append(f"{self.unknown_count - len(warnings)} more unknown command(s) ignored")
        return GerberLayer(self.name, self.file_function, self.negative, list(self.net_names), traces, shapes,
                           dict(self.file_attributes), warnings)

    def _unknown(self, line: int, command: str) -> None:
        """Spec 2.14: an unknown command is ignored, with a warning (the first
        ``MAX_WARNINGS`` are kept, the rest counted)."""
        self.unknown_count += 1
        if len(self.warnings) < MAX_WARNINGS:
            self.warnings.append(f"line {line}: unknown command {command} ignored")

    def _check_limits(self, line: int) -> None:
        sinks = [self.image] + [s.sink for s in self.statements]
        for s in sinks:
            s.flush()
        points = sum(len(s.px) for s in sinks)
        shapes = sum(len(s.shapes) + len(s.clears) for s in sinks)
        if points > self.max_points:
            raise self.error(line, f"more than {self.max_points:,} draw and arc points on this layer: over the cap; "
                                   f"{limits.hint('draws')}")
        if shapes > self.max_shapes:
            raise self.error(line, f"more than {self.max_shapes:,} pads, regions and other shapes: over the cap; "
                                   f"{limits.hint('shapes')}")

    def _check_open_statements(self, line: int, where: str) -> None:
        if self.region is not None:
            raise self.error(self.region.line, f"the region statement (G36) opened here is not closed by G37 "
                             f"before {where} (spec 4.10)")
        for st in self.statements:
            if st.kind == "AB":
                raise self.error(st.line, f"the block aperture D{st.number} opened here (AB) is not closed "
                                 f"before {where} (spec 4.11)")

    # ------------------------------------------------------------------ fast-path state

    def _refresh(self) -> None:
        """Recompute what the fast path may do in the current state; count a
        new ``version`` when any of it changed. The fast path reads D01,
        D02 and D03 lines once FS and MO are set: draws and arcs
        (``fast_stroke``: dark, with a solid round aperture of copper),
        region contours, and flashes of an aperture whose outline under
        the current LM/LR/LS is already built (``flash_outline``); what it
        cannot do goes the general way, which reports the errors."""
        ready = self.zeros == "L" and self.unit is not None
        ap = self.aperture
        in_region = self.region is not None
        self.fast_stroke = (ready and not in_region and self.dark and ap is not None and ap.round_width is not None
                            and 0 < ap.round_width * self.scale <= MAX_COORDINATE_MM
                            and not self._dropped(ap.function))
        if self.fast_stroke:
            self.trace_width = ap.round_width * self.scale
            self.trace_function = ap.function_index
        self.fast_clear_stroke = (ready and not in_region and not self.dark and ap is not None
                                  and ap.round_width is not None
                                  and 0 < ap.round_width * self.scale <= MAX_COORDINATE_MM
                                  and not self._dropped(ap.function))
        if self.fast_clear_stroke:
            self.clear_width = ap.round_width * self.scale
        flash = None
        if ready and not in_region and ap is not None and ap.kind != "block" and not self._dropped(ap.function):
            flash = ap.outline if is_identity(self.matrix) else self.templates.get((ap.number, self.matrix))
            if flash is not None and flash.is_empty:
                flash = None
        self.flash_outline = flash
        self.flash_function = ap.function if ap is not None else None
        self.fast_re = _fast_regex(self.div_x, self.div_y) if ready else None
        self.run_re = run_matcher(_digits(self.div_x), _digits(self.div_y), False) if ready else None
        self.simple_run_re = run_matcher(_digits(self.div_x), _digits(self.div_y), True) if ready else None
        self.group_res = group_matchers(_digits(self.div_x), _digits(self.div_y)) if ready else (None, None)
        state = (self.fast_re, self.fast_stroke, self.fast_clear_stroke, in_region, self.div_x, self.div_y, self.sink,
                 self.trace_width, self.trace_function, self.clear_width, ap.number if ap is not None else None,
                 self.dark, id(flash))
        if state != self.fast_state:
            self.fast_state = state
            self.version += 1

    # ------------------------------------------------------------------ dispatch

    def _command(self, command: tuple) -> None:
        if command[0] == "word":
            self.line = command[2]
            self._word(command[1], command[2])
        else:
            self.line = command[2]
            self._extended(command[1], command[2])

    def _ascii(self, data: bytes, line: int) -> str:
        try:
            return data.decode("ascii")
        except UnicodeDecodeError:
            bad = next(b for b in data if b > 127)
            raise self.error(line, f"byte 0x{bad:02X} in the command {show_command(data)}: Gerber commands are "
                             "printable ASCII (spec 3.1)") from None

    def _utf8(self, data: bytes, line: int) -> str:
        try:
            return data.decode("utf-8")
        except UnicodeDecodeError:
            raise self.error(line, f"the attribute {show_command(data)} is not valid UTF-8 (spec 3.1)") from None

    # ------------------------------------------------------------------ word commands

    def _word(self, data: bytes, line: int) -> None:
        stripped = data.strip()
        if not stripped:
            return
        if _COMMENT(stripped):
            self._comment(stripped, line)
            return
        text = _SPACES.sub("", self._ascii(stripped, line))
        m = _WORD.fullmatch(text)
        if m is None or not text:
            raise self.error(line, f"cannot read the command {show_command(stripped)}")
        g, xs, ys, is_, js, d, mcode = m.groups()
        coords = xs is not None or ys is not None or is_ is not None or js is not None
        if g is not None:
            self._g_code(int(g), coords or d is not None, line)
        if d is not None:
            code = int(d)
            if code >= 10:
                if coords:
                    raise self.error(line, f"the command {show_command(stripped)} mixes coordinates with an "
                                     "aperture selection")
                self._select(code, line)
            elif code in (1, 2, 3):
                self._operation(code, xs, ys, is_, js, line)
            else:
                raise self.error(line, f"D{code:02d} is reserved: apertures are numbered from D10 (spec 4.3.1)")
        elif coords:
            if self.last_operation != 1:
                raise self.error(line, f"the coordinates {show_command(stripped)} have no operation code (D01, "
                                 "D02, D03); without one they mean D01 only right after a D01 (spec 8.3.2)")
            self._operation(1, xs, ys, is_, js, line)
        if mcode is not None:
            code = int(mcode)
            if code in (0, 2):
                self._end_of_file(line)
            elif code != 1:  # M01 (optional stop) has no effect (8.1.1)
                self._unknown(line, f"M{code:02d}")

    def _comment(self, data: bytes, line: int) -> None:
        if b"#@!" not in data:
            return
        text = self._utf8(data, line)
        body = re.sub(r"^G0*4", "", text)
        attribute = attribute_in_comment(body)
        if attribute is not None:
            self._attribute(attribute.replace("\r", "").replace("\n", ""), line)

    def _g_code(self, code: int, with_operation: bool, line: int) -> None:
        if code in (1, 2, 3):
            self.interpolation = code
        elif code in (54, 55):
            pass  # 8.1.1: no effect
        elif with_operation:
            raise self.error(line, f"G{code:02d} cannot be combined with coordinates or a D code")
        elif code == 36:
            if self.region is not None:
                raise self.error(line, f"G36 inside the region statement opened at line {self.region.line}")
            self._break_stroke()
            self.region = _Region(line)
        elif code == 37:
            if self.region is None:
                raise self.error(line, "G37 without a region statement (G36) to close")
            self._close_region(line)
        elif code == 74:
            self.quadrant = "single"
        elif code == 75:
            self.quadrant = "multi"
        elif code in (70, 71):
            self._set_unit("IN" if code == 70 else "MM", line)
        elif code == 90:
            pass
        elif code == 91:
            raise self.error(line, "G91 sets incremental coordinates, which this reader does not support "
                             "(deprecated since 2012, spec 8.1.1); export absolute coordinates")
        else:
            self._unknown(line, f"G{code:02d}")  # 2.14

    # ------------------------------------------------------------------ coordinates

    def _coordinate(self, text: str, axis: str, line: int) -> float:
        if self.zeros is None:
            raise self.error(line, f"coordinate {axis}{text} before the coordinate format was set (FS, spec 4.2.2)")
        if self.unit is None:
            raise self.error(line, f"coordinate {axis}{text} before the unit was set (MO, spec 4.2.1)")
        digits = text.lstrip("+-")
        if len(digits) > _MAX_DIGITS:
            raise self.error(line, f"coordinate {axis}{text} has more than {_MAX_DIGITS} digits")
        integer, decimal = self.x_digits if axis in "XI" else self.y_digits
        if self.zeros == "T":
            if len(digits) > integer + decimal:
                raise self.error(line, f"coordinate {axis}{text} has more digits than the format allows "
                                 f"({integer}.{decimal}, trailing zeros omitted)")
            digits = digits.ljust(integer + decimal, "0")
        value = int(digits) / (self.div_x if axis in "XI" else self.div_y)
        if text.startswith("-"):
            value = -value
        if abs(value) > MAX_COORDINATE_MM:
            raise self.error(line, f"coordinate {axis}{text} is {value:g} mm from the origin, more than 10 m "
                             "(wrong FS or MO?)")
        return value

    # ------------------------------------------------------------------ operations

    def _operation(self, code: int, xs, ys, is_, js, line: int) -> None:
        x = self._coordinate(xs, "X", line) if xs is not None else self.cx
        y = self._coordinate(ys, "Y", line) if ys is not None else self.cy
        if (xs is None and ys is None) and (self.zeros is None or self.unit is None) and code != 2:
            raise self.error(line, f"D{code:02d} before the coordinate format and unit were set (FS, MO; "
                             "spec 4.2)")
        if code == 1:
            i = self._coordinate(is_, "I", line) if is_ is not None else 0.0
            j = self._coordinate(js, "J", line) if js is not None else 0.0
            self._interpolate(x, y, i, j, line)
        elif code == 2:
            if self.region is not None:
                self._end_contour()
                self.region.contour_line = line
            self._break_stroke()
        else:
            if self.region is not None:
                raise self.error(line, "D03 (flash) inside a region statement is not allowed (spec 4.10.1)")
            self._flash(x, y, line)
        self.cx, self.cy = x, y
        self.last_operation = code

    def _path(self, x: float, y: float, i: float, j: float, line: int) -> np.ndarray:
        """Points from the current point to (x, y) under the interpolation mode."""
        if self.interpolation in (None, 1):
            return np.array([[self.cx, self.cy], [x, y]])
        if self.quadrant is None:
            raise self.error(line, "an arc (G02/G03) before G75 (or the deprecated G74) set the quadrant "
                             "mode (spec 4.7.2)")
        try:
            return arc_points(self.cx, self.cy, x, y, i, j, self.interpolation == 2, self.quadrant == "single",
                              self.resolution_mm, MAX_COORDINATE_MM)
        except ArcError as exc:
            raise self.error(line, str(exc)) from None

    def _interpolate(self, x: float, y: float, i: float, j: float, line: int) -> None:
        path = self._path(x, y, i, j, line)
        if self.region is not None:
            region = self.region
            contour = region.current
            if contour is None:
                contour = self._start_contour(self.cx, self.cy)
            contour.add_array(path[1:, 0], path[1:, 1])
            region.points += len(path) - 1
            if region.points > MAX_REGION_POINTS:
                raise self._too_many_region_points()
            return
        ap = self.aperture
        if ap is None:
            raise self.error(line, "D01 before any aperture was selected (Dnn, spec 4.6)")
        if self._dropped(ap.function):
            return
        if ap.kind != "standard":
            raise self.error(line, f"D01 with D{ap.number}, a {ap.kind} aperture: draws and arcs need a circle "
                             "(or the deprecated rectangle) standard aperture (spec 2.4, 8.2.3)")
        if ap.round_width is not None:
            width = ap.round_width * self.scale
            if width <= 0:
                return  # zero-size object: no image (4.3.2)
            if width > MAX_COORDINATE_MM:
                raise self.error(line, f"D01 with D{ap.number} scaled by LS{self.scale:g} draws a trace "
                                 f"{width:g} mm wide, more than 10 m")
            if self.dark:
                sink = self.sink
                if not self.stroke_open:
                    sink.s_start.append(sink.point_count())
                    sink.pending.add(path[0, 0], path[0, 1])
                    sink.s_width.append(width)
                    sink.s_net.append(self.net)
                    sink.s_func.append(ap.function_index)
                    sink.s_line.append(line)
                    self.stroke_open = True
                sink.pending.add_array(path[1:, 0], path[1:, 1])
                if sink.point_count() > self.max_points:
                    self._check_limits(line)
            else:
                self._add(ShapeRecord("draw", stroke_outline(path, width), 0.0, 0.0, self.net, line,
                                      ap.function), line)
            return
        outline = self._template(ap)
        if outline.is_empty:
            return
        self._add(ShapeRecord("draw", swept_outline(outline, path), 0.0, 0.0, self.net, line, ap.function,
                              None, self.pin, self.component), line)

    def _flash(self, x: float, y: float, line: int) -> None:
        self._break_stroke()
        ap = self.aperture
        if ap is None:
            raise self.error(line, "D03 before any aperture was selected (Dnn, spec 4.6)")
        if self._dropped(ap.function):
            return
        if ap.kind == "block":
            try:
                ap.block.replay_into(self.sink, self.matrix, x, y, not self.dark, MAX_COORDINATE_MM)
            except ReplayError as exc:
                raise self.error(line, f"flashing block aperture D{ap.number}: {exc}") from None
            self._check_limits(line)
            return
        outline = self._template(ap)
        if outline.is_empty:
            return  # zero-size: no image (4.3.2)
        self._add(ShapeRecord("pad", outline, x, y, self.net, line, ap.function, (x, y), self.pin,
                              self.component), line)

    def _add(self, record: ShapeRecord, line: int) -> None:
        if self.dark:
            self.sink.shapes.append(record)
        else:
            self.sink.add_clear(record)
        if len(self.sink.shapes) + len(self.sink.clears) > self.max_shapes:
            raise self.error(line, f"more than {self.max_shapes:,} pads, regions and other shapes: over the cap; "
                                   f"{limits.hint('shapes')}")

    def _template(self, ap: Aperture) -> shapely.Geometry:
        """The aperture outline under the current LM/LR/LS (cached)."""
        if is_identity(self.matrix):
            return ap.outline
        key = (ap.number, self.matrix)
        outline = self.templates.get(key)
        if outline is None:
            outline = apply_matrix(ap.outline, self.matrix)
            if not outline.is_empty and max(map(abs, outline.bounds)) > MAX_COORDINATE_MM:
                raise self.error(self.line, f"aperture D{ap.number} scaled by LS{self.scale:g} reaches more than "
                                 "10 m from its origin")
            self.templates[key] = outline
        return outline

    def _dropped(self, function: str | None) -> bool:
        """Whether objects of this aperture function are left out: drawing
        elements (NonMaterial, Profile) in a file that says it is copper."""
        return (function in DROPPED_FUNCTIONS and self.file_function is not None
                and self.file_function[:1] == ("Copper",))

    def _break_stroke(self) -> None:
        self.stroke_open = False

    def _select(self, number: int, line: int) -> None:
        ap = self.apertures.get(number)
        if ap is None:
            raise self.error(line, f"aperture D{number} is used but was never defined (AD)")
        if ap is not self.aperture:
            self._break_stroke()
            self.aperture = ap

    # ------------------------------------------------------------------ regions

    def _end_contour(self) -> None:
        if self.region is not None:
            self.region.current = None

    def _start_contour(self, x: float | None, y: float | None) -> PointChunks:
        """A new contour of the open region, starting at (x, y) (``None``:
        its first point is still to come)."""
        region = self.region
        contour = region.current = PointChunks(negate_after=True)
        if x is not None:
            contour.add(x, y)
        region.contours.append((region.contour_line, contour))
        return contour

    def _too_many_region_points(self) -> FabError:
        return self.error(self.region.line, f"the region statement has more than {MAX_REGION_POINTS} "
                          "contour points: over this reader's limit")

    def _close_region(self, line: int) -> None:
        region = self.region
        self.region = None
        self._break_stroke()
        function = self._aperture_function()
        for start_line, contour in region.contours:
            points = np.column_stack(contour.take())
            try:
                polygon = contour_polygon(points)
            except GEOSException as exc:
                raise self.error(start_line, f"the region contour starting here cannot be filled: {exc}") from None
            if polygon.is_empty:
                continue
            self._add(ShapeRecord("region", polygon, 0.0, 0.0, self.net, start_line, function, None, self.pin,
                                  self.component), start_line)

    # ------------------------------------------------------------------ end of file

    def _end_of_file(self, line: int) -> None:
        if self.region is not None:
            raise self.error(line, f"M02 inside the region statement opened at line {self.region.line}: "
                             "G37 is missing (spec 4.10, 4.13)")
        while self.statements:
            st = self.statements[-1]
            if st.kind == "AB":
                raise self.error(line, f"M02 inside the block aperture D{st.number} opened at line {st.line}: "
                                 "%AB*% is missing (spec 4.11, 4.13)")
            self._close_step_repeat(line)  # an SR left open at M02 closes there (8.3.4)
        self.done = True

    # ------------------------------------------------------------------ extended commands

    def _extended(self, words: list[tuple[bytes, int]], line: int) -> None:
        if not words:
            return
        first = words[0][0].lstrip()
        if first[:2] == b"AM":
            self._macro(words, line)
            return
        for data, word_line in words:
            self.line = word_line
            stripped = data.strip()
            if not stripped:
                continue
            if stripped[:2] in (b"TF", b"TA", b"TO", b"TD"):
                text = self._utf8(stripped, word_line).replace("\r", "").replace("\n", "")
                self._attribute(text, word_line)
            else:
                self._parameter(_SPACES.sub("", self._ascii(stripped, word_line)), word_line)

    def _parameter(self, text: str, line: int) -> None:
        code = text[:2]
        if self.region is not None and code in ("AD", "AB", "SR", "LP", "LM", "LR", "LS", "FS", "MO"):
            raise self.error(line, f"%{code}...% inside the region statement opened at line {self.region.line} "
                             "is not allowed (spec 4.10.1)")
        if code == "FS":
            self._format(text, line)
        elif code == "MO":
            unit = text[2:]
            if unit not in ("MM", "IN"):
                raise self.error(line, f"unknown unit {unit!r} in %MO...%: it is MM or IN (spec 4.2.1)")
            self._set_unit(unit, line)
        elif code == "AD":
            self._define_aperture(text, line)
        elif code == "AB":
            self._block(text, line)
        elif code == "SR":
            self._step_repeat(text, line)
        elif code == "LP":
            if text not in ("LPD", "LPC"):
                raise self.error(line, f"%{text}*% is not LPD or LPC (spec 4.9.2)")
            dark = text == "LPD"
            if dark != self.dark:
                self._break_stroke()
                self.dark = dark
        elif code == "LM":
            mirror = text[2:]
            if mirror not in ("N", "X", "Y", "XY"):
                raise self.error(line, f"%{text}*%: mirroring is N, X, Y or XY (spec 4.9.3)")
            self._transformation(mirror, self.rotation, self.scale)
        elif code == "LR":
            self._transformation(self.mirror, self._decimal(text[2:], "LR rotation", line), self.scale)
        elif code == "LS":
            scale = self._decimal(text[2:], "LS scale", line)
            if not 0 < scale <= 1e6:
                raise self.error(line, f"LS scale factor must be greater than 0, not {scale:g} (spec 4.9.5)")
            self._transformation(self.mirror, self.rotation, scale)
        elif code == "IP":
            if text not in ("IPPOS", "IPNEG"):
                raise self.error(line, f"%{text}*%: image polarity is POS or NEG (spec 8.1.4)")
            if text == "IPNEG":
                self.negative = True
        elif code in ("IN", "LN"):
            pass  # names, no effect (8.1.3, 8.1.6)
        elif code == "AS":
            if text != "ASAXBY":
                raise self.error(line, f"%{text}*%: axis selection other than AXBY is not supported (deprecated, "
                                 "spec 8.1.2)")
        elif code == "IR":
            if self._decimal(text[2:] or "0", "IR rotation", line) != 0:
                raise self.error(line, f"%{text}*%: image rotation is not supported (deprecated, spec 8.1.5)")
        elif code == "MI":
            if re.fullmatch(r"MI(A0)?(B0)?", text) is None:
                raise self.error(line, f"%{text}*%: image mirroring is not supported (deprecated, spec 8.1.7)")
        elif code == "OF":
            m = re.fullmatch(r"OF(?:A([+-]?[0-9.]+))?(?:B([+-]?[0-9.]+))?", text)
            if m is None or any(v is not None and float(v) != 0 for v in m.groups()):
                raise self.error(line, f"%{text}*%: image offset is not supported (deprecated, spec 8.1.8)")
        elif code == "SF":
            m = re.fullmatch(r"SF(?:A([0-9.]+))?(?:B([0-9.]+))?", text)
            if m is None or any(v is not None and float(v) != 1 for v in m.groups()):
                raise self.error(line, f"%{text}*%: image scaling is not supported (deprecated, spec 8.1.9)")
        elif code == "IF":
            raise self.error(line, "include files (%IF...%) are not supported")
        else:  # anything else is an unknown command: ignored, with a warning (2.14)
            self._unknown(line, f"%{text[:12]}...%" if len(text) > 12 else f"%{text}%")

    def _decimal(self, text: str, what: str, line: int) -> float:
        if not _DECIMAL.fullmatch(text):
            raise self.error(line, f"{what} {text[:20]!r} is not a decimal number")
        value = float(text)
        if not math.isfinite(value):
            raise self.error(line, f"{what} {text[:20]!r} is out of range")
        return value

    def _transformation(self, mirror: str, rotation: float, scale: float) -> None:
        if (mirror, rotation, scale) != (self.mirror, self.rotation, self.scale):
            self._break_stroke()
            self.mirror, self.rotation, self.scale = mirror, rotation, scale
            self.matrix = transform_matrix(mirror, rotation, scale)

    def _format(self, text: str, line: int) -> None:
        m = _FS.fullmatch(text)
        if m is None:
            raise self.error(line, f"cannot read the format specification %{text[:40]}*% (expected e.g. "
                             "%FSLAX46Y46*%, spec 4.2.2)")
        zeros, notation = m[1] or "L", m[2]
        if zeros == "D":
            raise self.error(line, "FS with zero omission 'D' is invalid: it is L or T (spec 7.1)")
        if notation == "I":
            raise self.error(line, "FS sets incremental coordinates (I), which this reader does not support "
                             "(deprecated, spec 8.2.1.2); export absolute coordinates (A)")
        x_digits, y_digits = (int(m[3]), int(m[4])), (int(m[5]), int(m[6]))
        if self.zeros is not None:
            if (zeros, x_digits, y_digits) != (self.zeros, self.x_digits, self.y_digits):
                raise self.error(line, "a second FS with a different format: the format is set once (spec 4.2.2)")
            return
        self.zeros, self.x_digits, self.y_digits = zeros, x_digits, y_digits
        self._update_scale()

    def _set_unit(self, unit: str, line: int) -> None:
        if self.unit is not None and unit != self.unit and self.last_operation:
            raise self.error(line, f"the unit changes to {unit} after coordinates were read in {self.unit}: "
                             "the unit is set once (spec 4.2.1)")
        if self.unit is not None and unit != self.unit and self.apertures:
            raise self.error(line, f"the unit changes to {unit} after apertures were defined in {self.unit}")
        self.unit = unit
        self._update_scale()

    def _update_scale(self) -> None:
        if self.zeros is None or self.unit is None:
            return
        per_mm = 1.0 if self.unit == "MM" else 1 / 25.4
        self.div_x = 10.0 ** self.x_digits[1] * per_mm
        self.div_y = 10.0 ** self.y_digits[1] * per_mm
        self.resolution_mm = 1 / min(self.div_x, self.div_y)

    # ------------------------------------------------------------------ apertures

    def _unit_mm(self, line: int, what: str) -> float:
        if self.unit is None:
            raise self.error(line, f"{what} before the unit was set (MO, spec 4.2.1)")
        return 1.0 if self.unit == "MM" else 25.4

    def _aperture_function(self) -> str | None:
        fields = self.aperture_attributes.get(".AperFunction")
        return fields[0] if fields else None

    def _function_index(self, function: str | None) -> int:
        if function is None:
            return -1
        index = self.function_index.get(function)
        if index is None:
            index = self.function_index[function] = len(self.functions)
            self.functions.append(function)
        return index

    def _new_aperture_number(self, digits: str, line: int) -> int:
        number = int(digits) if len(digits) <= 10 else 1 << 40
        if number < 10 or number > 2**31 - 1:
            raise self.error(line, f"aperture number D{digits[:12]} is outside D10 ... D2147483647 (spec 4.3.1)")
        if number in self.apertures or any(st.kind == "AB" and st.number == number for st in self.statements):
            first = self.apertures[number].line if number in self.apertures else None
            where = f" at line {first}" if first else ""
            raise self.error(line, f"aperture D{number} is defined a second time (first{where}); "
                             "an aperture number cannot be reassigned (spec 4.3.1)")
        return number

    def _define_aperture(self, text: str, line: int) -> None:
        m = _AD.fullmatch(text)
        if m is None:
            raise self.error(line, f"cannot read the aperture definition %{text[:40]}*% (spec 4.3)")
        number = self._new_aperture_number(m[1], line)
        template = m[2]
        if not _NAME.fullmatch(template):
            raise self.error(line, f"aperture D{number}: {template[:40]!r} is not a template name (spec 4.3.1)")
        unit_mm = self._unit_mm(line, f"aperture D{number}")
        params = []
        if m[3] is not None:
            for value in m[3].split("X"):
                params.append(self._decimal(value, f"aperture D{number} parameter", line))
        function = self._aperture_function()
        try:
            if template in ("C", "R", "O", "P"):
                lengths = [True] * len(params)
                if template == "P":
                    lengths = [True, False, False] + [True] * max(0, len(params) - 3)
                mm = [p * unit_mm if is_length else p for p, is_length in zip(params, lengths)]
                big = [abs(v) for v, is_length in zip(mm, lengths) if is_length and abs(v) > MAX_COORDINATE_MM]
                if big:
                    raise self.error(line, f"aperture D{number}: a size of {big[0]:g} mm is more than 10 m")
                outline, width = standard_aperture(template, mm)
                kind = "standard"
            else:
                macro = self.macros.get(template)
                if macro is None:
                    raise self.error(line, f"aperture D{number} uses the macro {template!r}, which was never "
                                     "defined (AM)")
                outline = instantiate(macro, params)
                if unit_mm != 1.0 and not outline.is_empty:
                    outline = apply_matrix(outline, (unit_mm, 0.0, 0.0, unit_mm))
                width, kind = None, "macro"
        except (ApertureError, MacroError) as exc:
            raise self.error(line, f"aperture D{number}: {exc}") from None
        except GEOSException as exc:
            raise self.error(line, f"aperture D{number}: its outline cannot be built: {exc}") from None
        if not outline.is_empty:
            x0, y0, x1, y1 = outline.bounds
            if max(abs(x0), abs(y0), abs(x1), abs(y1)) > MAX_COORDINATE_MM:
                raise self.error(line, f"aperture D{number} reaches more than 10 m from its origin")
        self.apertures[number] = Aperture(number, kind, outline, width, function, self._function_index(function),
                                          line)

    def _macro(self, words: list[tuple[bytes, int]], line: int) -> None:
        if self.region is not None:
            raise self.error(line, f"%AM...% inside the region statement opened at line {self.region.line} "
                             "is not allowed (spec 4.10.1)")
        head, head_line = words[0]
        name = _SPACES.sub("", self._ascii(head.strip(), head_line))[2:]
        if not _NAME.fullmatch(name):
            raise self.error(line, f"{name[:40]!r} is not a valid macro name (spec 3.4.5)")
        if name in self.macros:
            raise self.error(line, f"the macro {name!r} is defined a second time (first at line "
                             f"{self.macros[name].line}); macro names are unique (spec 4.5)")
        body = [(self._ascii(w, wl), wl) for w, wl in words[1:]]
        try:
            self.macros[name] = parse_macro(name, line, body)
        except MacroError as exc:
            raise self.error(getattr(exc, "line", line), str(exc)) from None

    # ------------------------------------------------------------------ blocks

    def _block(self, text: str, line: int) -> None:
        if text == "AB":
            if not self.statements or self.statements[-1].kind != "AB":
                raise self.error(line, "%AB*% closes no block aperture: there is no open %ABDnn*%"
                                 if not self.statements else
                                 f"%AB*% inside the SR statement opened at line {self.statements[-1].line}: "
                                 "close the SR first")
            st = self.statements.pop()
            self._break_stroke()
            self.sink = st.parent
            self.apertures[st.number] = Aperture(st.number, "block", EMPTY, None, st.function,
                                                 self._function_index(st.function), st.line, block=st.sink)
            return
        m = re.fullmatch(r"ABD(\d+)", text)
        if m is None:
            raise self.error(line, f"cannot read %{text[:40]}*%: a block aperture opens with %ABDnn*% (spec 4.11.2)")
        number = self._new_aperture_number(m[1], line)
        self._open_statement(_Statement("AB", line, self.sink, ObjectSink(), number=number,
                                        function=self._aperture_function()), line)

    def _open_statement(self, st: _Statement, line: int) -> None:
        if len(self.statements) >= MAX_BLOCK_DEPTH:
            raise self.error(line, f"AB/SR statements nested more than {MAX_BLOCK_DEPTH} deep")
        self._break_stroke()
        self.statements.append(st)
        self.sink = st.sink

    def _step_repeat(self, text: str, line: int) -> None:
        m = _SR.fullmatch(text)
        if m is None:
            raise self.error(line, f"cannot read the step and repeat %{text[:40]}*% (spec 4.12)")
        open_sr = bool(self.statements) and self.statements[-1].kind == "SR"
        if text == "SR":
            if open_sr:
                self._close_step_repeat(line)
            elif self.statements:
                raise self.error(line, f"%SR*% inside the block aperture D{self.statements[-1].number} opened "
                                 f"at line {self.statements[-1].line}")
            return
        if m[1] is None or m[2] is None:
            raise self.error(line, f"%{text[:40]}*% needs both X and Y repeat counts (spec 4.12)")
        nx, ny = int(m[1][:9]), int(m[2][:9])
        unit_mm = self._unit_mm(line, "SR")
        step_x = self._decimal(m[3], "SR step I", line) * unit_mm if m[3] else 0.0
        step_y = self._decimal(m[4], "SR step J", line) * unit_mm if m[4] else 0.0
        if nx < 1 or ny < 1:
            raise self.error(line, f"SR repeat counts must be at least 1, not X{nx} Y{ny} (spec 4.12)")
        if open_sr:
            self._close_step_repeat(line)  # a new SR closes the open one (8.3.4)
        if nx == 1 and ny == 1:
            return  # %SRX1Y1I0J0*%: no repeat (8.3.4)
        if nx * ny > self.max_shapes:
            raise self.error(line, f"SR with {nx} x {ny} copies: over the cap of {self.max_shapes:,} shapes; "
                                   f"{limits.hint('shapes')}")
        self._open_statement(_Statement("SR", line, self.sink, ObjectSink(), repeat=(nx, ny, step_x, step_y)),
                             line)

    def _close_step_repeat(self, line: int) -> None:
        st = self.statements.pop()
        self._break_stroke()
        self.sink = st.parent
        nx, ny, step_x, step_y = st.repeat
        copies = nx * ny
        body = st.sink
        if (st.parent.point_count() + copies * body.point_count() > self.max_points
                or len(st.parent.shapes) + copies * (len(body.shapes) + len(body.clears)) > self.max_shapes):
            raise self.error(st.line, f"the step and repeat opened here makes {copies} copies: more objects "
                             f"than the caps allow (--limit draws=N and --limit shapes=N raise them "
                             f"if the input is genuine)")
        # copies go first along Y, then along X (4.12)
        for ix in range(nx):
            for iy in range(ny):
                try:
                    body.replay_into(st.parent, (1.0, 0.0, 0.0, 1.0), ix * step_x, iy * step_y, False,
                                     MAX_COORDINATE_MM)
                except ReplayError as exc:
                    raise self.error(st.line, f"step and repeat: {exc}") from None

    # ------------------------------------------------------------------ attributes

    def _attribute(self, text: str, line: int) -> None:
        try:
            code, name, fields = parse_attribute(text)
        except AttributeSyntaxError as exc:
            raise self.error(line, str(exc)) from None
        self._apply_attribute(code, name, fields)

    def _apply_attribute(self, code: str, name: str | None, fields: tuple[str, ...]) -> None:
        if code == "TF":
            if name == ".FileFunction":
                self.file_function = fields
            elif name == ".FilePolarity":
                if fields and fields[0] == "Negative":
                    self.negative = True
            else:
                self.file_attributes[name] = fields
            return
        if code == "TA":
            self.aperture_attributes[name] = fields
            return
        if code == "TO":
            if self.object_attributes.get(name) != fields:
                self._break_stroke()
                self.object_attributes[name] = fields
                self._object_attributes_changed()
            return
        # TD (5.5)
        if name is None:
            changed = bool(self.object_attributes)
            self.aperture_attributes.clear()
            self.object_attributes.clear()
        else:
            changed = self.object_attributes.pop(name, None) is not None
            self.aperture_attributes.pop(name, None)
        if changed:
            self._break_stroke()
            self._object_attributes_changed()

    def _object_attributes_changed(self) -> None:
        fields = self.object_attributes.get(".N")
        if fields is None:
            self.net = NET_UNKNOWN
        elif len(fields) > 1:
            self.net = NET_UNKNOWN  # several nets (5.6.13): recover by connectivity
        else:
            name = fields[0] if fields else ""
            index = self.net_index.get(name)
            if index is None:
                index = self.net_index[name] = len(self.net_names)
                self.net_names.append(name)
            self.net = index
        pin = self.object_attributes.get(".P")
        self.pin = tuple(pin) if pin is not None else None
        component = self.object_attributes.get(".C")
        self.component = component[0] if component else None
