"""The IPC-2581 door: one XML file with the whole board.

``load_ipc2581(path)`` reads a file, ``read_ipc2581(stream, name)`` a
binary stream; both return the same :class:`checker.model.Board` the
fabrication-package door builds, or raise one
:class:`~checker.errors.FabError` naming the file and the place (the XML
element path, with the line where the parser gives it). ``is_ipc2581(head)``
recognises the format from a file's first bytes.

Format: IPC-2581 revision B/C, "Generic Requirements for Printed Board
Assembly Products Manufacturing Description Data and Transfer
Methodology" (IPC). The element and attribute names below are the
standard's; their exact schema types, defaults and the enumerations are
**cited from memory** (the standard's XSD was not at hand), and where a
detail below says "from memory" the reading is this module's best
understanding, not a quotation. The file is read the way the Gerber door
reads a package: it is turned into the same intermediate objects
(:mod:`checker.readers.fab.layer`: a ``JobStackup``, one ``GerberLayer``
per copper layer, one ``DrillFile`` per drill layer and plating, an
outline polygon) and handed to
:func:`checker.readers.fab.assemble.board_from_layers`, so everything after
the parse — roles, via pads joining their holes, nets by connectivity,
notes — is the one shared assembly step.

What is read
============

* The root element ``IPC-2581`` (any XML namespace; ``revision`` B or C,
  anything else refused; without a ``revision`` it is read as C, with a
  note).
* ``Ecad/CadHeader@units``: ``MILLIMETER``, ``INCH`` or ``MICRON``; every
  coordinate and size of ``Ecad`` is in it and converted to mm once here
  (1 in = 25.4 mm, 1 um = 0.001 mm). Each dictionary of ``Content``
  (``DictionaryStandard``, ``DictionaryUser``, ``DictionaryLineDesc``) has
  its own ``units`` (the CadHeader's where it gives none). Any other unit
  is refused.
* ``CadHeader/Spec``: per ``name``, ``Dielectric`` children of ``type``
  ``DIELECTRIC_CONSTANT`` (εr) and ``LOSS_TANGENT``, each with a
  ``Property@value`` (from memory).
* ``CadData/Layer``: ``name``, ``layerFunction``, ``polarity`` and, for a
  drill layer, a ``Span`` child (``fromLayer``, ``toLayer``).
  Functions: ``SIGNAL`` and ``CONDUCTOR`` are copper of role *signal*,
  ``PLANE`` *plane*, ``MIXED`` *mixed*; ``CONDFOIL`` / ``CONDFILM`` copper
  of no stated role (taken as mixed, with a note); ``DIEL*`` (``DIELCORE``,
  ``DIELPREG``, ...) dielectrics; ``SOLDERMASK`` a mask; ``DRILL`` a drill
  layer. A layer of ``polarity="NEGATIVE"`` is a negative image (a plane:
  the outline minus what it draws), as a negative Gerber file.
* ``CadData/Stackup`` (exactly one): its ``StackupLayer`` elements (directly
  or in ``StackupGroup``), in ``sequence`` order where every one has it,
  else in file order, top to bottom: ``layerOrGroupRef`` (a Layer),
  ``thickness``, and a ``SpecRef@id`` naming the Spec with εr and loss
  tangent. The model stackup is built as from a Gerber job file
  (:mod:`checker.readers.fab.jobfile`): copper layers in order; the
  dielectrics between two copper layers joined by the series rule
  (T = Σtᵢ, εeff = T / Σ(tᵢ/εᵢ), the loss tangent likewise from the complex
  permittivities); a mask above the first / below the last copper layer;
  other layers outside the copper ignored. Values the standard makes
  optional and the file leaves out get jobfile's documented defaults —
  a dielectric's εr :data:`~checker.readers.fab.jobfile.DEFAULT_DIELECTRIC_ER`,
  a mask's εr :data:`~checker.readers.fab.jobfile.DEFAULT_MASK_ER` and
  thickness :data:`~checker.readers.fab.jobfile.DEFAULT_MASK_MM`, a copper
  layer's thickness :data:`~checker.readers.fab.jobfile.DEFAULT_COPPER_MM` —
  marked ``assumed`` on the layer, with a note naming the value and
  "common practice, not your board". A dielectric between copper layers
  without a thickness is refused (nothing can stand for it).
* ``CadData/Step`` (the one step, or the one ``Content/StepRef`` names):
  ``Profile`` (``Polygon`` and ``Cutout``) is the board outline, and each
  ``LayerFeature@layerRef`` holds ``Set`` elements whose ``net`` attribute
  names the net of everything in them (a Set without ``net`` is copper of
  unknown net, found by connectivity, as copper without ``TO.N``; ``net=""``
  is on no net). In a Set:

  - ``Features`` (an optional ``Xform`` and ``Location`` placing its
    content, then features): ``Line`` (``startX`` ...), ``Arc`` (start, end,
    ``centerX``/``centerY``, ``clockwise``; start = end is a full circle),
    ``Polyline`` (``PolyBegin``, ``PolyStepSegment``, ``PolyStepCurve``),
    each with a ``LineDesc`` or ``LineDescRef`` (``lineWidth``, ``lineEnd``
    ``ROUND`` / ``SQUARE`` / ``NONE``; ``ROUND`` where not given);
    ``Contour`` (``Polygon`` and ``Cutout`` holes), ``Outline`` (a filled
    ``Polygon`` grown by half its ``LineDesc`` width; from memory),
    ``UserSpecial`` (its children, read the same way), a standard primitive
    inline or by ``StandardPrimitiveRef`` and a user primitive by
    ``UserPrimitiveRef``. Round-ended lines, arcs and polylines of a width
    > 0 are traces: one stroke each, arcs chorded by
    :func:`checker.readers.arcs.arc_polyline` exactly as the Gerber door
    chords G02/G03 (start radius, the last point put on the end point), so
    both doors give the same pieces; every other feature is a region.
  - ``Pad``: ``Location`` (required), an optional ``Xform``, and its shape
    by ``StandardPrimitiveRef``, ``UserPrimitiveRef`` or inline. A pad of
    ``padUsage="VIA"`` is a via pad (it joins its hole's via, as a
    ``ViaPad`` flash does), ``TERMINATION`` a component pad.
  - ``Hole`` (on a drill layer): ``x``, ``y``, ``diameter``,
    ``platingStatus`` ``VIA`` (a via), ``PLATED`` (a plated hole of unknown
    use, taken as a via as an Excellon hole without a function is;
    ``TERMINATION`` Sets make it a component hole), ``NONPLATED`` (joins
    nothing). The hole spans the copper layers of its drill layer's
    ``Span`` (through all copper where it has none, with a note).

* Standard primitives (``DictionaryStandard/EntryStandard``, or inline):
  ``Circle`` (``diameter``: the equal-area polygon of the Gerber door, so a
  pad of diameter d has area π d²/4), ``RectCenter`` (``width``,
  ``height``), ``RectCorner`` (``lowerLeftX`` ... ``upperRightY``),
  ``RectRound`` (``radius`` on the corners whose ``upperRight`` /
  ``upperLeft`` / ``lowerRight`` / ``lowerLeft`` flag is true; all four where
  no flag is given — from memory), ``RectCham`` (``chamfer``, the same
  flags), ``Oval`` (obround), ``Ellipse``, ``Diamond``, ``Donut``
  (``shape`` ``ROUND`` or ``SQUARE``; ``outerDiameter``, ``innerDiameter``)
  and ``Contour``. User primitives (``DictionaryUser/EntryUser``): a
  ``UserSpecial`` of the features above, or one such feature; lines in a
  primitive are pad copper (regions), not traces.
* ``Xform`` (from memory): ``scale``, then ``mirror`` (x -> -x), then
  ``rotation`` (degrees, counter-clockwise), then ``xOffset`` /
  ``yOffset``, then the ``Location``.

Refused, each with the element path: a file over :data:`MAX_FILE_BYTES`;
bytes that are not well-formed XML (with the line); any ``DOCTYPE`` (an
IPC-2581 file has none; a DTD is how entity-expansion bombs and external
entities get in, and ``defusedxml`` refuses them); a root other than
``IPC-2581``; no ``Ecad``, ``CadHeader`` units, ``CadData``, ``Stackup`` or
``Step``; an unknown unit; a reference to a Layer, Spec or dictionary entry
that is not defined, or an id defined twice; a Layer name used twice;
anything but dielectrics between two copper layers; a number that is not
finite; a coordinate or size over 10 m (a units mistake); a size that is not
> 0; ``Set polarity="NEGATIVE"`` (clear copper; export positive copper with
cutouts instead); the standard primitives not listed above (``Butterfly``,
``Hexagon``, ``Moire``, ``Octagon``, ``Thermal``, ``Triangle``); a ``Pad``
with no shape of its own (``padstackDefRef`` alone); more than
:data:`MAX_TRACE_POINTS` trace points or :data:`MAX_SHAPES` shapes.
Every such path is checked by a fuzz test (tests/test_ipc2581.py: corrupted
files give a FabError and nothing else). Noted and skipped: ``Text``,
``SlotCavity``, ``PadStack`` elements of the
step (holes and pads are read from the layers' ``LayerFeature``), layers of
other functions (legend, paste, mask images), unknown elements (the first
five named). Zero-width lines are skipped with a note. The input is never
modified.
"""

from __future__ import annotations

import itertools
import math
import os
import re
from dataclasses import dataclass, field
from typing import BinaryIO, NoReturn
from xml.etree.ElementTree import Element, TreeBuilder

import numpy as np
import shapely
import shapely.affinity
from defusedxml import DefusedXmlException
from defusedxml.ElementTree import DefusedXMLParser, ParseError
from shapely.geometry.polygon import orient

from ..errors import FabError
from ..model import Board, CopperLayer, Dielectric, Stackup
from .arcs import arc_polyline
from .fab.assemble import board_from_layers
from .fab.gerber_apertures import disc, disc_vertex_count, obround
from .fab.gerber_macros import contour_polygon, polygonal_part
from .fab.gerber_sink import stroke_outline
from .fab.jobfile import (
    ASSUMED_WORDS,
    DEFAULT_COPPER_MM,
    DEFAULT_DIELECTRIC_ER,
    DEFAULT_MASK_ER,
    DEFAULT_MASK_MM,
    MAX_LENGTH_MM,
)
from .fab.layer import (
    NET_UNKNOWN,
    DrillFile,
    GerberLayer,
    GerberShape,
    GerberTraces,
    JobStackup,
)
from .fab.source import read_path

#: Larger files are refused before they are parsed (512 MiB; the parsed
#: tree takes several times the file's size in memory).
MAX_FILE_BYTES = 512 * 1024 * 1024

#: Most trace points (ends of pieces) over all copper layers.
MAX_TRACE_POINTS = 20_000_000

#: Most pads, regions and other shapes over all copper layers.
MAX_SHAPES = 1_000_000

#: Deepest nesting of user primitives (``UserSpecial`` in ``UserSpecial``).
MAX_NESTING = 32

#: Unknown elements named in the note (the rest are counted).
MAX_UNKNOWN_NAMED = 5

#: An arc whose end lies farther than this (mm), or 0.1 % of its radius,
#: from the circle through its start is refused (the Gerber door's rule).
ARC_DEVIATION_MM = 0.001

#: CadHeader / dictionary ``units`` -> mm per unit.
UNITS_MM = {"MILLIMETER": 1.0, "INCH": 25.4, "MICRON": 0.001}

#: ``layerFunction`` of copper layers -> the role it states (None: none).
COPPER_FUNCTIONS: dict[str, str | None] = {
    "SIGNAL": "signal", "CONDUCTOR": "signal", "PLANE": "plane", "MIXED": "mixed",
    "CONDFOIL": None, "CONDFILM": None,
}

#: Standard primitives this reader can draw.
PRIMITIVES = ("Circle", "RectCenter", "RectCorner", "RectRound", "RectCham", "Oval", "Ellipse", "Diamond",
              "Donut", "Contour")

#: Standard primitives of the standard this reader refuses (from memory).
UNSUPPORTED_PRIMITIVES = ("Butterfly", "Hexagon", "Moire", "Octagon", "Thermal", "Triangle")

#: Set children that carry nothing for copper (silently passed over).
_QUIET = {"NonstandardAttribute", "ColorRef", "Color", "PinRef", "Fiducial", "GlobalFiducial",
          "LocalFiducial", "BadBoardMark", "GoodPanelMark", "FillDesc", "FillDescRef"}

_NUMBER = re.compile(r"\s*[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?\s*", re.ASCII)
_NON_FINITE = re.compile(r"\s*[+-]?(?:inf|infinity|nan)\s*", re.IGNORECASE)

_SNIFF = re.compile(
    rb"\A\s*(?:<\?xml[^>]*\?>\s*)?"
    rb"(?:(?:<!--.*?-->|<\?.*?\?>|<!DOCTYPE[^\[>]*(?:\[.*?\])?\s*>)\s*)*"
    rb"<(?:[A-Za-z_][\w.\-]*:)?IPC-2581[\s/>]", re.DOTALL)

_IDENTITY = (1.0, 0.0, 0.0, 1.0, 0.0, 0.0)


def is_ipc2581(head: bytes) -> bool:
    """Whether ``head`` (a file's first bytes, a few kB) starts an IPC-2581
    file: after an optional byte-order mark, XML declaration, comments,
    processing instructions and DOCTYPE, the root element is ``IPC-2581``
    (with or without a namespace prefix)."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        head = head.decode("utf-16", errors="ignore").encode("utf-8")
    return _SNIFF.match(head.removeprefix(b"\xef\xbb\xbf")) is not None


def load_ipc2581(path: str | os.PathLike[str]) -> Board:
    """Read the IPC-2581 file at ``path`` into a Board (see the module docstring)."""
    return read_path(path, read_ipc2581, "an IPC-2581 file")


def read_ipc2581(stream: BinaryIO, name: str) -> Board:
    """Read an IPC-2581 file from a binary stream; ``name`` is used in
    messages and as the Board's path."""
    root, lines = _parse(stream, name)
    return _Reader(name, lines).board(root)


# --------------------------------------------------------------------------- XML


class _LineTreeBuilder(TreeBuilder):
    """A TreeBuilder that records the line of each element's start tag."""

    def __init__(self) -> None:
        super().__init__()
        self.lines: dict[int, int] = {}
        self.parser: DefusedXMLParser | None = None

    def start(self, tag, attrs):
        elem = super().start(tag, attrs)
        self.lines[id(elem)] = self.parser.parser.CurrentLineNumber
        return elem


def _parse(stream: BinaryIO, name: str) -> tuple[Element, dict[int, int]]:
    try:
        data = stream.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise FabError(name, None, f"cannot read the file: {exc}") from None
    if len(data) > MAX_FILE_BYTES:
        raise FabError(name, None, f"over the size limit of {MAX_FILE_BYTES:,} bytes: not read")
    if not bytes(data).strip():
        raise FabError(name, None, "the file is empty")
    builder = _LineTreeBuilder()
    parser = DefusedXMLParser(target=builder, forbid_dtd=True, forbid_entities=True, forbid_external=True)
    builder.parser = parser
    try:
        parser.feed(data)
        root = parser.close()
    except ParseError as exc:
        line, column = exc.position
        raise FabError(name, line, f"not well-formed XML: {_parse_message(exc)} (column {column + 1})") from None
    except DefusedXmlException as exc:
        line = parser.parser.CurrentLineNumber
        raise FabError(name, line, f"refused for safety: {_defused_words(exc)}") from None
    except (ValueError, LookupError) as exc:  # an encoding Python cannot decode
        raise FabError(name, None, f"not readable XML: {exc}") from None
    return root, builder.lines


def _parse_message(exc: ParseError) -> str:
    return re.sub(r": line \d+, column \d+$", "", str(exc))


def _defused_words(exc: DefusedXmlException) -> str:
    kind = type(exc).__name__
    if kind == "DTDForbidden":
        return ("a DOCTYPE declaration (an IPC-2581 file has none; a DTD can define entities, the way "
                "entity-expansion bombs and external entities get in)")
    if kind == "EntitiesForbidden":
        return "an entity declaration (entity expansion is refused: it is how XML bombs work)"
    if kind == "ExternalReferenceForbidden":
        return "a reference to an external resource (never fetched)"
    return f"{kind}: {exc}"


def _local(tag) -> str:
    """An element's name without its namespace (``{uri}Layer`` -> ``Layer``)."""
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


def _children(elem: Element, name: str) -> list[Element]:
    return [c for c in elem if _local(c.tag) == name]


def _child(elem: Element, name: str) -> Element | None:
    for c in elem:
        if _local(c.tag) == name:
            return c
    return None


def _flag(text: str | None) -> bool | None:
    if text is None:
        return None
    return text.strip().lower() in ("true", "1", "yes")


# --------------------------------------------------------------------------- the pieces being built


@dataclass
class _Copper:
    """One copper layer's traces and shapes as they are read."""

    name: str
    number: int
    negative: bool
    net_names: list[str] = field(default_factory=list)
    net_index: dict[str, int] = field(default_factory=dict)
    x1: list[float] = field(default_factory=list)
    y1: list[float] = field(default_factory=list)
    x2: list[float] = field(default_factory=list)
    y2: list[float] = field(default_factory=list)
    width: list[float] = field(default_factory=list)
    net: list[int] = field(default_factory=list)
    stroke: list[int] = field(default_factory=list)
    ordinal: list[int] = field(default_factory=list)
    stroke_line: list[int] = field(default_factory=list)
    shapes: list[GerberShape] = field(default_factory=list)

    def net_of(self, name: str | None) -> int:
        if name is None:
            return NET_UNKNOWN
        if name not in self.net_index:
            self.net_index[name] = len(self.net_names)
            self.net_names.append(name)
        return self.net_index[name]

    def add_stroke(self, points: np.ndarray, width: float, net: int, line: int) -> int:
        """One stroke of the pieces between consecutive distinct points;
        returns the number of pieces (0: a dot)."""
        keep = np.r_[True, np.any(points[1:] != points[:-1], axis=1)]
        pts = points[keep]
        k = len(pts) - 1
        if k < 1:
            return 0
        s = len(self.stroke_line)
        self.stroke_line.append(line)
        self.x1 += pts[:-1, 0].tolist()
        self.y1 += pts[:-1, 1].tolist()
        self.x2 += pts[1:, 0].tolist()
        self.y2 += pts[1:, 1].tolist()
        self.width += [width] * k
        self.net += [net] * k
        self.stroke += [s] * k
        self.ordinal += list(range(k))
        return k

    def layer(self, path: str) -> GerberLayer:
        f = lambda v: np.asarray(v, dtype=np.float64)
        i = lambda v: np.asarray(v, dtype=np.int64)
        traces = GerberTraces(f(self.x1), f(self.y1), f(self.x2), f(self.y2), f(self.width), i(self.net),
                              i(self.stroke), i(self.ordinal), i(self.stroke_line))
        return GerberLayer(path=path, file_function=None, negative=self.negative, net_names=list(self.net_names),
                           traces=traces, shapes=list(self.shapes))


@dataclass
class _Drill:
    """One drill layer's holes as they are read (plated and not)."""

    name: str
    span: tuple[int, int]
    holes: list[tuple[float, float, float, str, bool, int]] = field(default_factory=list)

    def files(self, file: str) -> list[DrillFile]:
        out = []
        for plated in (True, False):
            rows = [h for h in self.holes if h[4] is plated]
            if not rows:
                continue
            x, y, d = (np.array([r[k] for r in rows], dtype=np.float64) for k in range(3))
            empty = np.zeros(0, dtype=np.float64)
            out.append(DrillFile(path=f"{file} ({self.name}{'' if plated else ', non-plated'})", plated=plated,
                                 span=self.span, x=x, y=y, diameter=d, function=[r[3] for r in rows],
                                 line=np.array([r[5] for r in rows], dtype=np.int64), slot_x1=empty,
                                 slot_y1=empty.copy(), slot_x2=empty.copy(), slot_y2=empty.copy(),
                                 slot_diameter=empty.copy(), slot_line=np.zeros(0, dtype=np.int64)))
        return out


@dataclass(frozen=True)
class _LayerDef:
    name: str
    function: str
    polarity: str
    elem: Element
    path: str


# --------------------------------------------------------------------------- the reader


class _Reader:
    """Reads one parsed file; one instance per file."""

    def __init__(self, name: str, lines: dict[int, int]) -> None:
        self.name = name
        self.lines = lines
        self.notes: list[str] = []
        self.assumed: dict[tuple[str, str], list[str]] = {}
        self.unknown: dict[str, str] = {}   # element name -> first place
        self.unknown_count = 0
        self.skipped: dict[str, int] = {}   # what -> count
        self.cad_scale = 1.0
        self.line_descs: dict[str, tuple[Element, str, float]] = {}
        self.standard: dict[str, tuple[Element, str, float]] = {}
        self.user: dict[str, tuple[Element, str, float]] = {}
        self.geometry_cache: dict[tuple[str, str], shapely.Geometry] = {}
        self.line_cache: dict[str, tuple[float, str]] = {}
        self.points = 0
        self.shape_count = 0

    # ---- errors and numbers

    def line(self, elem: Element | None) -> int | None:
        return self.lines.get(id(elem)) if elem is not None else None

    def fail(self, elem: Element | None, path: str, message: str) -> NoReturn:
        line = self.line(elem)
        raise FabError(self.name, line, message, place=f"{path} (line {line})" if line else path)

    def number(self, elem: Element, path: str, attr: str, default: float = 0.0, required: bool = True) -> float:
        """The attribute as a finite number (``default`` where it is absent
        and not ``required``)."""
        text = elem.get(attr)
        if text is None:
            if required:
                self.fail(elem, path, f"missing attribute {attr!r}")
            return default
        if _NON_FINITE.fullmatch(text):
            self.fail(elem, path, f"{attr}={text!r}: not a finite number")
        if not _NUMBER.fullmatch(text):
            self.fail(elem, path, f"{attr}={text!r}: not a number")
        try:
            value = float(text)
        except (ValueError, OverflowError):  # pragma: no cover - the pattern admits only floats
            self.fail(elem, path, f"{attr}={text!r}: not a number")
        if not math.isfinite(value):
            self.fail(elem, path, f"{attr}={text!r}: not a finite number (too large)")
        return value

    def coord(self, elem: Element, path: str, attr: str, scale: float) -> float:
        mm = self.number(elem, path, attr) * scale
        if abs(mm) > MAX_LENGTH_MM:
            self.fail(elem, path, f"{attr}={elem.get(attr)!r} is {mm:g} mm from the origin, more than 10 m "
                      "(a units mistake?)")
        return mm

    def size(self, elem: Element, path: str, attr: str, scale: float, *, zero_ok: bool = False) -> float:
        """A length attribute in mm: > 0 (>= 0 with ``zero_ok``), at most 10 m."""
        mm = self.number(elem, path, attr) * scale
        if mm < 0 or (mm == 0 and not zero_ok):
            self.fail(elem, path, f"{attr}={elem.get(attr)!r} must be {'>=' if zero_ok else '>'} 0")
        if mm > MAX_LENGTH_MM:
            self.fail(elem, path, f"{attr}={elem.get(attr)!r} is {mm:g} mm, more than 10 m (a units mistake?)")
        return mm

    def units(self, elem: Element, path: str, required: bool) -> float:
        text = elem.get("units")
        if text is None:
            if required:
                self.fail(elem, path, f"missing attribute 'units' (accepted: {', '.join(UNITS_MM)})")
            return self.cad_scale
        key = text.strip().upper()
        if key not in UNITS_MM:
            self.fail(elem, path, f"unknown units {text!r} (accepted: {', '.join(UNITS_MM)})")
        return UNITS_MM[key]

    def skip(self, what: str) -> None:
        self.skipped[what] = self.skipped.get(what, 0) + 1

    def unknown_element(self, name: str, path: str) -> None:
        self.unknown_count += 1
        self.unknown.setdefault(name, path)

    # ---- the whole file

    def board(self, root: Element) -> Board:
        if _local(root.tag) != "IPC-2581":
            self.fail(root, _local(root.tag) or "root", f"the root element is <{_local(root.tag)}>, not "
                      "<IPC-2581>: not an IPC-2581 file")
        self.revision(root)
        ecad = _child(root, "Ecad")
        if ecad is None:
            self.fail(root, "IPC-2581", "no Ecad element: the file carries no board data")
        header = _child(ecad, "CadHeader")
        if header is None:
            self.fail(ecad, "IPC-2581/Ecad", "no CadHeader (it gives the units of every coordinate)")
        self.cad_scale = self.units(header, "IPC-2581/Ecad/CadHeader", required=True)
        specs = self.specs(header)
        content = _child(root, "Content")
        if content is not None:
            self.dictionaries(content)
        cad = _child(ecad, "CadData")
        if cad is None:
            self.fail(ecad, "IPC-2581/Ecad", "no CadData element: no layers, stackup or copper")
        here = "IPC-2581/Ecad/CadData"
        layers = self.layer_defs(cad, here)
        stackup, copper, roles = self.stackup(cad, here, layers, specs)
        step, step_path = self.step(cad, here, content)
        numbers = {name: k + 1 for k, name in enumerate(copper)}
        spans = self.drill_spans(layers, numbers, copper)
        builders = {name: _Copper(name, numbers[name], layers[name].polarity == "NEGATIVE") for name in copper}
        drills = {name: _Drill(name, span) for name, span in spans.items()}
        self.step_features(step, step_path, layers, builders, drills)
        outline = self.profile(step, step_path)
        return self.assemble(stackup, copper, roles, builders, drills, outline, step)

    def revision(self, root: Element) -> None:
        text = root.get("revision")
        if text is None:
            self.notes.append(f"{self.name}: the IPC-2581 root gives no revision: read as revision C")
            return
        if not text.strip().upper().startswith(("B", "C")):
            self.fail(root, "IPC-2581", f"revision={text!r}: this reader reads IPC-2581 revisions B and C")

    def assemble(self, stackup: Stackup, copper: list[str], roles: dict[str, str | None],
                 builders: dict[str, _Copper], drills: dict[str, _Drill], outline, step: Element) -> Board:
        n = len(copper)
        notes = list(self.notes)
        if self.skipped:
            notes.append(f"{self.name}: not read: " + ", ".join(f"{k} ({v})" for k, v in sorted(self.skipped.items())))
        if self.unknown_count:
            named = ", ".join(f"<{k}> at {v}" for k, v in list(self.unknown.items())[:MAX_UNKNOWN_NAMED])
            notes.append(f"{self.name}: {self.unknown_count} element(s) this reader does not know were skipped, "
                         f"e.g. {named}")
        pad_stacks = len(_children(step, "PadStack"))
        if pad_stacks:
            notes.append(f"{self.name}: {pad_stacks} PadStack element(s) not read: pads and holes are read from "
                         "each layer's LayerFeature")
        job_notes = tuple(f"{self.name}: {what} not given for {', '.join(where)}: {value} used ({ASSUMED_WORDS})"
                          for (what, value), where in self.assumed.items())
        job = JobStackup(path=self.name, stackup=stackup, copper_numbers=tuple(range(1, n + 1)),
                         board_thickness_mm=None, layer_count=n, roles_given=False, notes=job_notes)
        gerbers = {builders[name].number: builders[name].layer(self.name) for name in copper}
        drill_files = [f for d in drills.values() for f in d.files(self.name)]
        given = {}
        for name in copper:
            role = roles[name]
            if role is None:
                notes.append(f"layer {name}: its layerFunction names no role: taken as mixed")
                role = "mixed"
            given[builders[name].number] = role
        names = {builders[name].number: f"{self.name} (Layer {name})" for name in copper}
        base = os.path.basename(self.name.rsplit(":", 1)[-1])
        board_name = base.rsplit(".", 1)[0] if "." in base.lstrip(".") else base
        return board_from_layers(board_name, self.name, job, gerbers, drill_files, None, outline, notes,
                                 given_roles=given, file_names=names)

    # ---- header: specs and dictionaries

    def specs(self, header: Element) -> dict[str, tuple[float | None, float | None, Element, str]]:
        """Spec name -> (εr, loss tangent, element, path)."""
        out: dict[str, tuple[float | None, float | None, Element, str]] = {}
        for k, spec in enumerate(_children(header, "Spec")):
            path = f"IPC-2581/Ecad/CadHeader/Spec[{k + 1}]"
            name = spec.get("name")
            if name is None:
                self.fail(spec, path, "missing attribute 'name'")
            if name in out:
                self.fail(spec, path, f"Spec name {name!r} is defined twice")
            values: dict[str, float] = {}
            for j, diel in enumerate(_children(spec, "Dielectric")):
                kind = (diel.get("type") or "").strip().upper()
                if kind not in ("DIELECTRIC_CONSTANT", "LOSS_TANGENT") or kind in values:
                    continue
                here = f"{path}/Dielectric[{j + 1}]"
                prop = _child(diel, "Property")
                if prop is None or prop.get("value") is None:
                    self.fail(diel, here, f"a {kind} Dielectric needs a Property with a value")
                value = self.number(prop, f"{here}/Property", "value")
                if kind == "DIELECTRIC_CONSTANT" and value < 1:
                    self.fail(prop, f"{here}/Property", f"a dielectric constant must be >= 1, got {value:g}")
                if kind == "LOSS_TANGENT" and value < 0:
                    self.fail(prop, f"{here}/Property", f"a loss tangent must be >= 0, got {value:g}")
                values[kind] = value
            out[name] = (values.get("DIELECTRIC_CONSTANT"), values.get("LOSS_TANGENT"), spec, path)
        return out

    def dictionaries(self, content: Element) -> None:
        kinds = {"DictionaryStandard": ("EntryStandard", self.standard),
                 "DictionaryUser": ("EntryUser", self.user),
                 "DictionaryLineDesc": ("EntryLineDesc", self.line_descs)}
        count: dict[str, int] = {}
        for d in content:
            kind = _local(d.tag)
            if kind not in kinds:
                continue
            count[kind] = count.get(kind, 0) + 1
            path = f"IPC-2581/Content/{kind}[{count[kind]}]"
            scale = self.units(d, path, required=False)
            entry_name, table = kinds[kind]
            for k, entry in enumerate(_children(d, entry_name)):
                here = f"{path}/{entry_name}[{k + 1}]"
                key = entry.get("id")
                if key is None:
                    self.fail(entry, here, "missing attribute 'id'")
                if key in table:
                    self.fail(entry, here, f"{entry_name} id {key!r} is defined twice")
                body = [c for c in entry if _local(c.tag) not in _QUIET]
                if not body:
                    self.fail(entry, here, f"{entry_name} {key!r} is empty")
                table[key] = (body[0], f"{here}/{_local(body[0].tag)}", scale)

    # ---- layers and stackup

    def layer_defs(self, cad: Element, here: str) -> dict[str, _LayerDef]:
        out: dict[str, _LayerDef] = {}
        for k, elem in enumerate(_children(cad, "Layer")):
            path = f"{here}/Layer[{k + 1}]"
            name = elem.get("name")
            if name is None or not name.strip():
                self.fail(elem, path, "missing attribute 'name'")
            if name in out:
                self.fail(elem, path, f"Layer name {name!r} is defined twice (first at {out[name].path})")
            function = (elem.get("layerFunction") or "").strip().upper()
            if not function:
                self.fail(elem, path, f"Layer {name!r} has no layerFunction")
            polarity = (elem.get("polarity") or "POSITIVE").strip().upper()
            out[name] = _LayerDef(name, function, polarity, elem, f"{here}/Layer[{name}]")
        return out

    def stackup(self, cad: Element, here: str, layers: dict[str, _LayerDef],
                specs: dict) -> tuple[Stackup, list[str], dict[str, str | None]]:
        stacks = _children(cad, "Stackup")
        if not stacks:
            self.fail(cad, here, "no Stackup: the file does not give the layer thicknesses and permittivities, "
                      "and couplint does not assume them")
        if len(stacks) > 1:
            self.fail(stacks[1], f"{here}/Stackup[2]", "a second Stackup: this reader reads boards with one stackup")
        stack = stacks[0]
        spath = f"{here}/Stackup"
        entries: list[tuple[Element, str]] = []
        for k, c in enumerate(stack):
            if _local(c.tag) == "StackupLayer":
                entries.append((c, f"{spath}/StackupLayer[{k + 1}]"))
            elif _local(c.tag) == "StackupGroup":
                for j, g in enumerate(_children(c, "StackupLayer")):
                    entries.append((g, f"{spath}/StackupGroup[{k + 1}]/StackupLayer[{j + 1}]"))
        if not entries:
            self.fail(stack, spath, "the Stackup has no StackupLayer")
        if all(e.get("sequence") is not None for e, _ in entries):
            entries.sort(key=lambda ep: self.number(ep[0], ep[1], "sequence"))
        rows = []
        seen: dict[str, str] = {}
        for elem, path in entries:
            ref = elem.get("layerOrGroupRef")
            if ref is None:
                self.fail(elem, path, "missing attribute 'layerOrGroupRef'")
            if ref not in layers:
                self.fail(elem, path, f"layerOrGroupRef {ref!r} names no Layer of CadData")
            if ref in seen:
                self.fail(elem, path, f"layer {ref!r} is in the Stackup twice (also at {seen[ref]})")
            seen[ref] = path
            rows.append((elem, path, layers[ref]))
        kinds = []
        for _, _, layer in rows:
            f = layer.function
            kinds.append("copper" if f in COPPER_FUNCTIONS else "dielectric" if f.startswith("DIEL")
                         else "mask" if f == "SOLDERMASK" else "other")
        copper_rows = [i for i, kind in enumerate(kinds) if kind == "copper"]
        if not copper_rows:
            self.fail(stack, spath, "the Stackup has no copper layer (layerFunction SIGNAL, PLANE, MIXED or "
                      "CONDUCTOR)")
        copper_layers = [self.copper(*rows[i]) for i in copper_rows]
        dielectrics = []
        for a, b in itertools.pairwise(copper_rows):
            between = list(range(a + 1, b))
            for i in between:
                if kinds[i] != "dielectric":
                    elem, path, layer = rows[i]
                    self.fail(elem, path, f"layer {layer.name!r} ({layer.function}) between two copper layers: "
                              "only dielectric layers (DIEL...) can lie between copper layers")
            if not between:
                self.fail(rows[b][0], rows[b][1], "two copper layers with no dielectric between them")
            dielectrics.append(self.combine([rows[i] for i in between], specs))
        mask_top = self.outside([rows[i] for i in range(copper_rows[0])], "above the top", specs)
        mask_bottom = self.outside([rows[i] for i in range(copper_rows[-1] + 1, len(rows))], "below the bottom",
                                   specs)
        names = [rows[i][2].name for i in copper_rows]
        roles = {rows[i][2].name: COPPER_FUNCTIONS[rows[i][2].function] for i in copper_rows}
        for name, layer in layers.items():
            if layer.function in COPPER_FUNCTIONS and name not in roles:
                self.notes.append(f"{self.name}: copper Layer {name!r} is not in the Stackup: not read")
        return Stackup(tuple(copper_layers), tuple(dielectrics), mask_top, mask_bottom), names, roles

    def assume(self, what: str, value: str, layer: _LayerDef) -> None:
        self.assumed.setdefault((what, value), []).append(layer.name)

    def copper(self, elem: Element, path: str, layer: _LayerDef) -> CopperLayer:
        if elem.get("thickness") is None:
            self.assume("copper thickness", f"{DEFAULT_COPPER_MM:g} mm", layer)
            return CopperLayer(layer.name, "mixed", DEFAULT_COPPER_MM, assumed=("thickness",))
        return CopperLayer(layer.name, "mixed", self.size(elem, path, "thickness", self.cad_scale))

    def insulator(self, elem: Element, path: str, layer: _LayerDef, specs: dict,
                  mask: bool) -> tuple[float, float, float | None, tuple[str, ...]]:
        """(thickness, εr, loss tangent, assumed) of a dielectric or mask."""
        assumed = []
        if elem.get("thickness") is not None:
            thickness = self.size(elem, path, "thickness", self.cad_scale)
        elif mask:
            thickness = DEFAULT_MASK_MM
            assumed.append("thickness")
            self.assume("solder mask thickness", f"{DEFAULT_MASK_MM:g} mm", layer)
        else:
            self.fail(elem, path, f"dielectric {layer.name!r} between copper layers has no thickness (no default "
                      "can stand for it)")
        er = tan_d = None
        refs = _children(elem, "SpecRef") or _children(layer.elem, "SpecRef")
        for ref in refs:
            key = ref.get("id")
            if key not in specs:
                self.fail(ref, f"{path}/SpecRef", f"SpecRef id {key!r} names no Spec of the CadHeader")
            e, t, _, _ = specs[key]
            er = e if er is None else er
            tan_d = t if tan_d is None else tan_d
        if er is None:
            er = DEFAULT_MASK_ER if mask else DEFAULT_DIELECTRIC_ER
            assumed.append("er")
            self.assume("solder mask εr" if mask else "dielectric εr", f"{er:g}", layer)
        return thickness, er, tan_d, tuple(assumed)

    def combine(self, rows: list[tuple[Element, str, _LayerDef]], specs: dict) -> Dielectric:
        """One model dielectric from consecutive layers, by the series rule
        (as :meth:`checker.readers.fab.jobfile._Job.combine`)."""
        parts = [self.insulator(e, p, layer, specs, mask=False) for e, p, layer in rows]
        total = sum(t for t, _, _, _ in parts)
        er = total / sum(t / e for t, e, _, _ in parts)
        tan_d = None
        if all(tan is not None for _, _, tan, _ in parts):
            eps = total / sum(t / (e * complex(1.0, -tan)) for t, e, tan, _ in parts)
            tan_d = -eps.imag / eps.real
        assumed = tuple(sorted({a for *_, got in parts for a in got}))
        return Dielectric(thickness_mm=total, er=er, loss_tangent=tan_d,
                          name=" + ".join(layer.name for _, _, layer in rows), assumed=assumed)

    def outside(self, rows: list[tuple[Element, str, _LayerDef]], side: str, specs: dict) -> Dielectric | None:
        masks = [r for r in rows if r[2].function == "SOLDERMASK"]
        for elem, path, layer in rows:
            if layer.function.startswith("DIEL"):
                self.fail(elem, path, f"a dielectric ({layer.name!r}) {side} copper layer cannot be modelled "
                          "(only a solder mask can lie outside the copper layers)")
        if len(masks) > 1:
            self.fail(masks[1][0], masks[1][1], f"a second solder mask {side} copper layer")
        if not masks:
            return None
        elem, path, layer = masks[0]
        thickness, er, tan_d, assumed = self.insulator(elem, path, layer, specs, mask=True)
        return Dielectric(thickness_mm=thickness, er=er, loss_tangent=tan_d, name=layer.name, assumed=assumed)

    def drill_spans(self, layers: dict[str, _LayerDef], numbers: dict[str, int],
                    copper: list[str]) -> dict[str, tuple[int, int]]:
        out = {}
        for name, layer in layers.items():
            if layer.function != "DRILL":
                continue
            span = _child(layer.elem, "Span")
            if span is None:
                out[name] = (1, len(copper))
                self.notes.append(f"{self.name}: drill layer {name!r} has no Span: its holes are taken as through "
                                  "all copper layers")
                continue
            ends = []
            for attr in ("fromLayer", "toLayer"):
                ref = span.get(attr)
                if ref is None:
                    self.fail(span, f"{layer.path}/Span", f"missing attribute {attr!r}")
                if ref not in numbers:
                    what = "names no Layer of CadData" if ref not in layers else "is not a copper layer of the Stackup"
                    self.fail(span, f"{layer.path}/Span", f"{attr} {ref!r} {what}")
                ends.append(numbers[ref])
            out[name] = (min(ends), max(ends))
        return out

    # ---- the step

    def step(self, cad: Element, here: str, content: Element | None) -> tuple[Element, str]:
        steps = _children(cad, "Step")
        if not steps:
            self.fail(cad, here, "no Step: the file has no board geometry")
        if len(steps) == 1:
            return steps[0], f"{here}/Step[{steps[0].get('name', '1')}]"
        refs = [r.get("name") for r in _children(content, "StepRef")] if content is not None else []
        chosen = [s for s in steps if s.get("name") in refs]
        if len(chosen) != 1:
            self.fail(cad, here, f"{len(steps)} Step elements and Content names "
                      f"{'none' if not chosen else 'several'} of them (StepRef): which is the board is unclear")
        return chosen[0], f"{here}/Step[{chosen[0].get('name')}]"

    def step_features(self, step: Element, step_path: str, layers: dict[str, _LayerDef],
                      builders: dict[str, _Copper], drills: dict[str, _Drill]) -> None:
        other: dict[str, str] = {}
        for k, lf in enumerate(_children(step, "LayerFeature")):
            ref = lf.get("layerRef")
            path = f"{step_path}/LayerFeature[{ref if ref is not None else k + 1}]"
            if ref is None:
                self.fail(lf, path, "missing attribute 'layerRef'")
            if ref not in layers:
                self.fail(lf, path, f"layerRef {ref!r} names no Layer of CadData")
            layer = layers[ref]
            if ref in builders:
                self.copper_features(lf, path, builders[ref])
            elif ref in drills:
                self.drill_features(lf, path, drills[ref])
            elif layer.function in COPPER_FUNCTIONS:
                self.fail(lf, path, f"copper layer {ref!r} has features but is not in the Stackup")
            else:
                other[ref] = layer.function
        if other:
            self.notes.append(f"{self.name}: not read: the features of layer(s) "
                              + ", ".join(f"{k} ({v})" for k, v in other.items()))

    def sets(self, lf: Element, path: str):
        """(Set element, its path, net or None, padUsage) of a LayerFeature."""
        for k, s in enumerate(_children(lf, "Set")):
            here = f"{path}/Set[{k + 1}]"
            polarity = (s.get("polarity") or "POSITIVE").strip().upper()
            if polarity != "POSITIVE":
                self.fail(s, here, f"polarity={s.get('polarity')!r}: clear (negative) copper in a Set is not "
                          "supported; export positive copper with cutouts")
            yield s, here, s.get("net"), (s.get("padUsage") or "").strip().upper()

    def copper_features(self, lf: Element, path: str, layer: _Copper) -> None:
        for s, here, net_name, usage in self.sets(lf, path):
            net = layer.net_of(net_name)
            count: dict[str, int] = {}
            for child in s:
                name = _local(child.tag)
                count[name] = count.get(name, 0) + 1
                at = f"{here}/{name}[{count[name]}]"
                if name == "Features":
                    xf = self.placement(child, at)
                    seen: dict[str, int] = {}
                    for feature in child:
                        fname = _local(feature.tag)
                        seen[fname] = seen.get(fname, 0) + 1
                        if fname not in ("Xform", "Location"):
                            self.feature(feature, f"{at}/{fname}[{seen[fname]}]", xf, net, layer, traces=True)
                elif name == "Pad":
                    self.pad(child, at, net, usage, layer)
                elif name == "Hole":
                    self.skip("Hole elements on copper layers (holes are read from drill layers)")
                elif name == "SlotCavity":
                    self.skip("SlotCavity (slots)")
                elif name not in _QUIET:
                    self.unknown_element(name, at)

    def drill_features(self, lf: Element, path: str, drill: _Drill) -> None:
        for s, here, _net, usage in self.sets(lf, path):
            for k, hole in enumerate(_children(s, "Hole")):
                at = f"{here}/Hole[{k + 1}]"
                x = self.coord(hole, at, "x", self.cad_scale)
                y = self.coord(hole, at, "y", self.cad_scale)
                d = self.size(hole, at, "diameter", self.cad_scale)
                status = (hole.get("platingStatus") or "").strip().upper()
                if status.startswith("VIA"):
                    function, plated = "ViaDrill", True
                elif status.startswith("NONPLATED"):
                    function, plated = "", False
                elif status.startswith("PLATED"):
                    function, plated = ("ComponentDrill" if usage == "TERMINATION" else ""), True
                else:
                    self.fail(hole, at, f"platingStatus={hole.get('platingStatus')!r} (accepted: VIA, PLATED, "
                              "NONPLATED)")
                drill.holes.append((x, y, d, function, plated, self.line(hole) or 0))
            if _children(s, "SlotCavity"):
                self.skip("SlotCavity (slots)")

    def profile(self, step: Element, step_path: str):
        prof = _child(step, "Profile")
        if prof is None:
            return None
        path = f"{step_path}/Profile"
        shape = self.filled(prof, path, _IDENTITY, self.cad_scale)
        parts = [p for p in shapely.get_parts(shape) if p.area > 0]
        if not parts:
            self.notes.append(f"{self.name}: the board Profile is not a closed shape; no outline used")
            return None
        return orient(max(parts, key=lambda g: g.area), 1.0)

    # ---- placement (Location + Xform)

    def placement(self, elem: Element, path: str) -> tuple[float, ...]:
        """The affine map (a, b, d, e, xoff, yoff) of an element's ``Xform``
        and ``Location`` children: x' = a x + b y + xoff, y' = d x + e y + yoff."""
        loc = _child(elem, "Location")
        xform = _child(elem, "Xform")
        lx = ly = 0.0
        if loc is not None:
            lx = self.coord(loc, f"{path}/Location", "x", self.cad_scale)
            ly = self.coord(loc, f"{path}/Location", "y", self.cad_scale)
        if xform is None:
            return (1.0, 0.0, 0.0, 1.0, lx, ly)
        here = f"{path}/Xform"
        scale = self.number(xform, here, "scale", default=1.0, required=False)
        if not 0 < scale <= 1e6:
            self.fail(xform, here, f"scale={xform.get('scale')!r} must be > 0")
        rot = math.radians(self.number(xform, here, "rotation", default=0.0, required=False))
        mirror = bool(_flag(xform.get("mirror")))
        ox = self.coord(xform, here, "xOffset", self.cad_scale) if xform.get("xOffset") is not None else 0.0
        oy = self.coord(xform, here, "yOffset", self.cad_scale) if xform.get("yOffset") is not None else 0.0
        c, s = math.cos(rot), math.sin(rot)
        m = -1.0 if mirror else 1.0
        return (c * m * scale, -s * scale, s * m * scale, c * scale, lx + ox, ly + oy)

    @staticmethod
    def apply(xf: tuple[float, ...], pts: np.ndarray) -> np.ndarray:
        if xf == _IDENTITY:
            return pts
        a, b, d, e, xo, yo = xf
        return np.column_stack((a * pts[:, 0] + b * pts[:, 1] + xo, d * pts[:, 0] + e * pts[:, 1] + yo))

    @staticmethod
    def place(xf: tuple[float, ...], geom: shapely.Geometry) -> shapely.Geometry:
        if xf == _IDENTITY:
            return geom
        return shapely.affinity.affine_transform(geom, list(xf))

    # ---- features

    def feature(self, elem: Element, path: str, xf: tuple[float, ...], net: int, layer: _Copper, traces: bool,
                depth: int = 0) -> None:
        """One feature of a Set's ``Features`` (``traces``: round lines
        become traces) on a copper layer."""
        name = _local(elem.tag)
        line = self.line(elem) or 0
        if name in ("Line", "Arc", "Polyline"):
            pts = self.path_points(elem, path, xf, self.cad_scale)
            width, end = self.line_desc(elem, path, self.cad_scale)
            width *= math.sqrt(abs(xf[0] * xf[3] - xf[1] * xf[2]))
            if width == 0:
                self.skip("zero-width lines on copper")
                return
            if traces and end == "ROUND":
                self.points += len(pts)
                if self.points > MAX_TRACE_POINTS:
                    self.fail(elem, path, f"more than {MAX_TRACE_POINTS} trace points: over this reader's limit")
                if layer.add_stroke(pts, width, net, line):
                    return
            self.add_shape(layer, "draw", _stroke_shape(pts, width, end), net, line, elem, path)
        elif name in ("Contour", "Outline"):
            self.add_shape(layer, "region", self.filled(elem, path, xf, self.cad_scale), net, line, elem, path)
        elif name == "UserSpecial":
            if depth >= MAX_NESTING:
                self.fail(elem, path, f"user primitives nested more than {MAX_NESTING} deep")
            for c in elem:
                self.feature(c, f"{path}/{_local(c.tag)}", xf, net, layer, traces, depth + 1)
        elif name in ("StandardPrimitiveRef", "UserPrimitiveRef") or name in PRIMITIVES \
                or name in UNSUPPORTED_PRIMITIVES:
            shape = self.primitive(elem, path, self.cad_scale)
            self.add_shape(layer, "region", self.place(xf, shape), net, line, elem, path)
        elif name == "Text":
            self.skip("Text on copper layers")
        elif name not in _QUIET:
            self.unknown_element(name, path)

    def add_shape(self, layer: _Copper, kind: str, geom: shapely.Geometry, net: int, line: int, elem: Element,
                  path: str, function: str | None = None, at: tuple[float, float] | None = None) -> None:
        geom = polygonal_part(geom)
        if geom.is_empty:
            return
        self.shape_count += 1
        if self.shape_count > MAX_SHAPES:
            self.fail(elem, path, f"more than {MAX_SHAPES} pads, regions and other shapes: over this reader's limit")
        layer.shapes.append(GerberShape(kind, geom, net, line, function, at))

    def pad(self, elem: Element, path: str, net: int, usage: str, layer: _Copper) -> None:
        loc = _child(elem, "Location")
        if loc is None:
            self.fail(elem, path, "a Pad needs a Location")
        xf = self.placement(elem, path)
        shapes = [c for c in elem if _local(c.tag) in ("StandardPrimitiveRef", "UserPrimitiveRef", "UserSpecial")
                  or _local(c.tag) in PRIMITIVES or _local(c.tag) in UNSUPPORTED_PRIMITIVES]
        if not shapes:
            self.fail(elem, path, "the Pad has no shape (StandardPrimitiveRef, UserPrimitiveRef or an inline "
                      "primitive); pads given only by padstackDefRef are not read")
        parts = [self.primitive(c, f"{path}/{_local(c.tag)}", self.cad_scale) for c in shapes]
        geom = self.place(xf, parts[0] if len(parts) == 1 else shapely.union_all(parts))
        function = {"VIA": "ViaPad", "TERMINATION": "ComponentPad"}.get(usage)
        self.add_shape(layer, "pad", geom, net, self.line(elem) or 0, elem, path, function, (xf[4], xf[5]))

    # ---- primitives (shapes at the origin, mm)

    def primitive(self, elem: Element, path: str, scale: float, depth: int = 0) -> shapely.Geometry:
        """The copper of a primitive: a reference to a dictionary entry, or
        an inline standard primitive or user primitive, at the origin."""
        name = _local(elem.tag)
        if name in ("StandardPrimitiveRef", "UserPrimitiveRef"):
            key = elem.get("id")
            table = self.standard if name == "StandardPrimitiveRef" else self.user
            kind = "DictionaryStandard" if name == "StandardPrimitiveRef" else "DictionaryUser"
            if key is None:
                self.fail(elem, path, "missing attribute 'id'")
            if key not in table:
                self.fail(elem, path, f"{name} id {key!r} names no entry of the {kind}")
            cache = (name, key)
            if cache not in self.geometry_cache:
                body, body_path, body_scale = table[key]
                self.geometry_cache[cache] = self.primitive(body, body_path, body_scale, depth + 1)
            return self.geometry_cache[cache]
        if depth > MAX_NESTING:
            self.fail(elem, path, f"primitives nested more than {MAX_NESTING} deep")
        if name in PRIMITIVES:
            return self.standard_shape(elem, path, scale, name)
        if name in UNSUPPORTED_PRIMITIVES:
            self.fail(elem, path, f"the standard primitive {name} is not supported by this reader "
                      f"(supported: {', '.join(PRIMITIVES)})")
        if name == "UserSpecial":
            parts = [self.primitive(c, f"{path}/{_local(c.tag)}", scale, depth + 1) for c in elem
                     if _local(c.tag) not in _QUIET]
            parts = [p for p in parts if not p.is_empty]
            return shapely.union_all(parts) if parts else shapely.Polygon()
        if name in ("Line", "Arc", "Polyline"):
            pts = self.path_points(elem, path, _IDENTITY, scale)
            width, end = self.line_desc(elem, path, scale)
            return _stroke_shape(pts, width, end)
        if name == "Outline":
            return self.filled(elem, path, _IDENTITY, scale)
        if name == "Text":
            self.skip("Text in primitives")
            return shapely.Polygon()
        self.fail(elem, path, f"<{name}> is not a primitive this reader knows (standard: {', '.join(PRIMITIVES)}; "
                  "user: UserSpecial, Line, Arc, Polyline, Outline)")

    def standard_shape(self, elem: Element, path: str, scale: float, name: str) -> shapely.Geometry:
        size = lambda attr, **kw: self.size(elem, path, attr, scale, **kw)
        if name == "Circle":
            return disc(0.0, 0.0, size("diameter") / 2)
        if name == "RectCenter":
            w, h = size("width"), size("height")
            return shapely.box(-w / 2, -h / 2, w / 2, h / 2)
        if name == "RectCorner":
            x0, y0 = (self.coord(elem, path, a, scale) for a in ("lowerLeftX", "lowerLeftY"))
            x1, y1 = (self.coord(elem, path, a, scale) for a in ("upperRightX", "upperRightY"))
            if not (x1 > x0 and y1 > y0):
                self.fail(elem, path, "the upper right corner must lie above and right of the lower left one")
            return shapely.box(x0, y0, x1, y1)
        if name in ("RectRound", "RectCham"):
            w, h = size("width"), size("height")
            attr = "radius" if name == "RectRound" else "chamfer"
            r = size(attr, zero_ok=True)
            if r > min(w, h) / 2:
                self.fail(elem, path, f"{attr} {r:g} mm is more than half the shorter side ({min(w, h) / 2:g} mm)")
            flags = [_flag(elem.get(k)) for k in ("upperRight", "upperLeft", "lowerLeft", "lowerRight")]
            corners = [True] * 4 if all(f is None for f in flags) else [bool(f) for f in flags]
            return _corner_rect(w, h, r, corners, rounded=name == "RectRound")
        if name == "Oval":
            return obround(size("width"), size("height"))
        if name == "Ellipse":
            w, h = size("width"), size("height")
            if w == h:
                return disc(0.0, 0.0, w / 2)
            n = disc_vertex_count(max(w, h) / 2)
            rho = math.sqrt(2 * math.pi / (n * math.sin(2 * math.pi / n)))  # equal-area polygon, as disc()
            t = 2 * math.pi * np.arange(n) / n
            return shapely.Polygon(np.column_stack((w / 2 * rho * np.cos(t), h / 2 * rho * np.sin(t))))
        if name == "Diamond":
            w, h = size("width"), size("height")
            return shapely.Polygon([(w / 2, 0), (0, h / 2), (-w / 2, 0), (0, -h / 2)])
        if name == "Donut":
            shape = (elem.get("shape") or "ROUND").strip().upper()
            outer, inner = size("outerDiameter"), size("innerDiameter")
            if not inner < outer:
                self.fail(elem, path, "innerDiameter must be smaller than outerDiameter")
            if shape == "ROUND":
                return disc(0.0, 0.0, outer / 2).difference(disc(0.0, 0.0, inner / 2))
            if shape == "SQUARE":
                return shapely.box(-outer / 2, -outer / 2, outer / 2, outer / 2).difference(
                    shapely.box(-inner / 2, -inner / 2, inner / 2, inner / 2))
            self.fail(elem, path, f"Donut shape={elem.get('shape')!r} is not supported (ROUND, SQUARE)")
        # Contour
        return self.filled(elem, path, _IDENTITY, scale)

    # ---- paths and polygons

    def path_points(self, elem: Element, path: str, xf: tuple[float, ...], scale: float) -> np.ndarray:
        """Chord points (k, 2) in mm of a Line, Arc or Polyline, placed by ``xf``."""
        name = _local(elem.tag)
        c = lambda attr: self.coord(elem, path, attr, scale)
        if name == "Line":
            return self.apply(xf, np.array([[c("startX"), c("startY")], [c("endX"), c("endY")]]))
        if name == "Arc":
            p = self.apply(xf, np.array([[c("startX"), c("startY")], [c("endX"), c("endY")],
                                         [c("centerX"), c("centerY")]]))
            clockwise = self.clockwise(elem, path) != _mirrors(xf)
            return self.arc(elem, path, *p[0], *p[1], *p[2], clockwise)
        return self.apply(xf, self.poly_points(elem, path, scale, closed=False))

    def clockwise(self, elem: Element, path: str) -> bool:
        value = _flag(elem.get("clockwise"))
        if value is None:
            self.fail(elem, path, "missing attribute 'clockwise' (true or false)")
        return value

    def poly_points(self, elem: Element, path: str, scale: float, closed: bool) -> np.ndarray:
        """Points (k, 2) mm of a ``PolyBegin`` / ``PolyStepSegment`` /
        ``PolyStepCurve`` sequence (a Polyline, Polygon or Cutout), curves
        chorded."""
        steps = [c for c in elem if _local(c.tag) in ("PolyBegin", "PolyStepSegment", "PolyStepCurve")]
        if not steps or _local(steps[0].tag) != "PolyBegin":
            self.fail(elem, path, f"a {_local(elem.tag)} must start with a PolyBegin")
        out = []
        x = y = 0.0
        for k, s in enumerate(steps):
            kind = _local(s.tag)
            here = f"{path}/{kind}[{k + 1}]"
            if kind == "PolyBegin" and k > 0:
                self.fail(s, here, "a second PolyBegin in one outline")
            nx, ny = self.coord(s, here, "x", scale), self.coord(s, here, "y", scale)
            if kind == "PolyStepCurve":
                cx, cy = self.coord(s, here, "centerX", scale), self.coord(s, here, "centerY", scale)
                pts = self.arc(s, here, x, y, nx, ny, cx, cy, self.clockwise(s, here))
                out.append(pts[1:])
            else:
                out.append(np.array([[nx, ny]]))
            x, y = nx, ny
        pts = np.vstack(out)
        if len(steps) < 2 and not closed:
            self.fail(elem, path, f"a {_local(elem.tag)} needs at least two points")
        return pts

    def arc(self, elem: Element, path: str, x0: float, y0: float, x1: float, y1: float, cx: float, cy: float,
            clockwise: bool) -> np.ndarray:
        """Chord points of the arc from (x0, y0) to (x1, y1) around (cx, cy),
        by :func:`arc_polyline` on the start radius with the last point put
        on the end point (as the Gerber door chords G75 arcs); start = end
        is a full circle."""
        r0 = math.hypot(x0 - cx, y0 - cy)
        if r0 == 0:
            self.fail(elem, path, "the arc's centre coincides with its start point")
        r1 = math.hypot(x1 - cx, y1 - cy)
        if abs(r1 - r0) > max(ARC_DEVIATION_MM, 1e-3 * r0):
            self.fail(elem, path, f"the arc starts {r0:.6g} mm from its centre but ends {r1:.6g} mm from it; "
                      "no circle fits")
        if max(abs(cx), abs(cy)) + r0 > MAX_LENGTH_MM:
            self.fail(elem, path, "the arc reaches more than 10 m from the origin")
        a0 = math.atan2(y0 - cy, x0 - cx)
        a1 = math.atan2(y1 - cy, x1 - cx)
        if x0 == x1 and y0 == y1:
            sweep = -2 * math.pi if clockwise else 2 * math.pi
        elif clockwise:
            sweep = -((a0 - a1) % (2 * math.pi))
        else:
            sweep = (a1 - a0) % (2 * math.pi)
        if sweep == 0:
            return np.array([[x0, y0], [x1, y1]])
        pts = arc_polyline(cx, cy, r0, a0, sweep)
        pts[0] = (x0, y0)
        pts[-1] = (x1, y1)
        return pts

    def filled(self, elem: Element, path: str, xf: tuple[float, ...], scale: float) -> shapely.Geometry:
        """A Contour (``Polygon`` minus its ``Cutout`` holes), an Outline (its
        ``Polygon`` grown by half its line width) or a Profile, placed by ``xf``."""
        name = _local(elem.tag)
        polys = _children(elem, "Polygon")
        if len(polys) != 1:
            self.fail(elem, path, f"a {name} needs exactly one Polygon, it has {len(polys)}")
        shell = contour_polygon(self.apply(xf, self.poly_points(polys[0], f"{path}/Polygon", scale, closed=True)))
        holes = [contour_polygon(self.apply(xf, self.poly_points(c, f"{path}/Cutout[{k + 1}]", scale, closed=True)))
                 for k, c in enumerate(_children(elem, "Cutout"))]
        shape = shell.difference(shapely.union_all(holes)) if holes else shell
        if name == "Outline":
            has_desc = _child(elem, "LineDesc") is not None or _child(elem, "LineDescRef") is not None
            width = self.line_desc(elem, path, scale)[0] if has_desc else 0.0
            width *= math.sqrt(abs(xf[0] * xf[3] - xf[1] * xf[2]))
            if width > 0:
                shape = shapely.buffer(shape, width / 2, quad_segs=max(4, disc_vertex_count(width / 2) // 4))
        return polygonal_part(shape)

    def line_desc(self, elem: Element, path: str, scale: float) -> tuple[float, str]:
        """(width mm, end) of a feature's ``LineDesc`` or ``LineDescRef``."""
        desc = _child(elem, "LineDesc")
        if desc is not None:
            return self.read_line_desc(desc, f"{path}/LineDesc", scale)
        ref = _child(elem, "LineDescRef")
        if ref is None:
            self.fail(elem, path, f"a {_local(elem.tag)} needs a LineDesc or LineDescRef (its width)")
        key = ref.get("id")
        if key not in self.line_descs:
            self.fail(ref, f"{path}/LineDescRef", f"LineDescRef id {key!r} names no entry of the DictionaryLineDesc")
        if key not in self.line_cache:
            body, body_path, body_scale = self.line_descs[key]
            if _local(body.tag) != "LineDesc":
                self.fail(body, body_path, f"EntryLineDesc {key!r} holds <{_local(body.tag)}>, not a LineDesc")
            self.line_cache[key] = self.read_line_desc(body, body_path, body_scale)
        return self.line_cache[key]

    def read_line_desc(self, desc: Element, path: str, scale: float) -> tuple[float, str]:
        width = self.size(desc, path, "lineWidth", scale, zero_ok=True)
        end = (desc.get("lineEnd") or "ROUND").strip().upper()
        if end not in ("ROUND", "SQUARE", "NONE"):
            self.fail(desc, path, f"lineEnd={desc.get('lineEnd')!r} (accepted: ROUND, SQUARE, NONE)")
        return width, end


# --------------------------------------------------------------------------- geometry helpers


def _mirrors(xf: tuple[float, ...]) -> bool:
    """Whether the map reverses orientation (a mirror)."""
    return xf[0] * xf[3] - xf[1] * xf[2] < 0


def _stroke_shape(pts: np.ndarray, width: float, end: str) -> shapely.Geometry:
    """The copper of a line of ``width`` along ``pts``: round ends by the
    Gerber door's exact-area stroke outline; square or flat (``NONE``) ends
    by a buffer with round joins."""
    if end == "ROUND":
        return stroke_outline(pts, width)
    if width <= 0 or len(pts) < 2:
        return shapely.Polygon()
    line = shapely.LineString(pts)
    if line.length == 0:
        return shapely.Polygon()
    return shapely.buffer(line, width / 2, cap_style="square" if end == "SQUARE" else "flat", join_style="round",
                          quad_segs=max(4, disc_vertex_count(width / 2) // 4))


def _corner_rect(w: float, h: float, r: float, corners: list[bool], rounded: bool) -> shapely.Polygon:
    """A w x h rectangle centred on the origin whose flagged corners
    (upper right, upper left, lower left, lower right) are rounded with
    radius ``r`` (chords on the circle, within the arc tolerance) or cut
    by a chamfer of ``r``."""
    if r == 0:
        return shapely.box(-w / 2, -h / 2, w / 2, h / 2)
    pts = []
    signs = [(1, 1), (-1, 1), (-1, -1), (1, -1)]
    for k, ((sx, sy), on) in enumerate(zip(signs, corners)):
        x, y = sx * w / 2, sy * h / 2
        if not on:
            pts.append((x, y))
            continue
        start = math.pi / 2 * k  # the corner's arc runs from angle start to start + 90 degrees
        cx, cy = x - sx * r, y - sy * r
        if rounded:
            pts += [tuple(p) for p in arc_polyline(cx, cy, r, start, math.pi / 2)]
        else:
            pts += [(cx + r * math.cos(start), cy + r * math.sin(start)),
                    (cx + r * math.cos(start + math.pi / 2), cy + r * math.sin(start + math.pi / 2))]
    return shapely.Polygon(pts)
