"""The IPC-2581 door: one XML file with the whole board.

``load_ipc2581(path)`` reads a file, ``read_ipc2581(stream, name)`` a
binary stream; both return the same :class:`checker.model.Board` the
fabrication-package door builds, or raise one
:class:`~checker.errors.FabError` naming the file and the place (the XML
element path, with the line where the parser gives it). ``is_ipc2581(head)``
recognises the format from a file's first bytes; ``looks_like_xml(head)``
any XML document. A file that is XML but not IPC-2581 can be handed to
this door, which names its root; so can a ``.xml`` file that is empty,
white space, binary or other text, which this door names as such.

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
:func:`checker.readers.fab.build.board_from_layers`, so everything after
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
  Functions: ``SIGNAL`` is copper of role *signal*, ``PLANE`` *plane*,
  ``MIXED`` *mixed*; ``CONDUCTOR`` (the generic copper function, which an
  exporter writes for every copper layer, planes included), ``CONDFOIL`` and
  ``CONDFILM`` copper of no stated role (taken as mixed, with a note; the
  analysis finds planes from the copper itself); ``DIEL*`` (``DIELCORE``,
  ``DIELPREG``, ...) dielectrics; ``SOLDERMASK`` a mask; ``DRILL`` a drill
  layer. A layer of ``polarity="NEGATIVE"`` is a negative image (a plane:
  the outline minus what it draws), as a negative Gerber file.
* ``CadData/Stackup`` (exactly one): its ``StackupLayer`` elements (directly
  or in ``StackupGroup``), in ``sequence`` order where every one has it,
  else in file order, top to bottom: ``layerOrGroupRef`` (a Layer),
  ``thickness``, and a ``SpecRef@id`` naming the Spec with εr and loss
  tangent. A ``SpecRef`` that names no Spec is not refused: an id
  ``SPEC_X`` is read as the one Spec named ``X`` or ``X_<digits>`` (how a
  widely used open-source exporter names its Specs and refers to them),
  with a note; failing that the layer gets the defaults below, with a note.
  A StackupLayer thinner than :data:`MIN_THICKNESS_MM` (1 um) is refused,
  naming it: no board is built of such a layer. The model stackup is built as from a Gerber job file
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
  is on no net). A ``Set`` nested in a ``Set`` is read the same way, with
  its own ``net`` and ``padUsage`` where it gives them, else its parent's.
  Only copper and drill layers are read: a LayerFeature of a layer no
  ``Layer`` defines (an exporter writes tenting, plugging and filling
  layers so) or of another function is skipped with a note. In a Set:

  - ``Features`` (an optional ``Xform`` and ``Location`` placing its
    content, then features): ``Line`` (``startX`` ...), ``Arc`` (start, end,
    ``centerX``/``centerY``, ``clockwise``; start = end is a full circle),
    ``Polyline`` (``PolyBegin``, ``PolyStepSegment``, ``PolyStepCurve``),
    each with a ``LineDesc`` or ``LineDescRef`` (``lineWidth``, ``lineEnd``
    ``ROUND`` / ``SQUARE`` / ``NONE``; ``ROUND`` where not given; a
    ``lineProperty`` of dashed or dotted lines is read as solid, with a
    note: more copper, so more coupling, never less);
    ``Contour`` (``Polygon`` and ``Cutout`` holes), ``Outline`` (a
    ``Polygon`` drawn with its ``LineDesc``; from memory),
    ``UserSpecial`` (its children, read the same way), a standard primitive
    inline or by ``StandardPrimitiveRef`` and a user primitive by
    ``UserPrimitiveRef``. Round-ended lines, arcs and polylines of a width
    > 0 are traces: one stroke each, arcs chorded by
    :func:`checker.readers.arcs.arc_polyline` exactly as the Gerber door
    chords G02/G03 (start radius, the last point put on the end point), so
    both doors give the same pieces; every other feature is a region.
    Lines of width :data:`MIN_FEATURE_MM` (1 nm) or less are skipped with
    a note; a trace narrower than :data:`MIN_TRACE_MM` (1 um) is read that
    wide, with a note (the analysis' width resolution; more copper).
  - Fill and outline of closed shapes (a Contour, an Outline, a standard
    primitive): a ``FillDesc`` or ``FillDescRef``
    (``DictionaryFillDesc/EntryFillDesc``) child of the shape or of its
    ``Polygon``, and a ``LineDesc``/``LineDescRef`` there. ``fillProperty``
    ``FILL`` or no FillDesc: the area, grown by half the line width where
    a LineDesc is given (its outline is drawn with that line). ``HOLLOW``
    (and ``VOID``, read as HOLLOW with a note): the outline only, stroked
    with the line width — a ring, not an area. ``HATCH`` / ``MESH``: read
    filled, with a note (more copper than the hatch lines). A hollow shape
    without a line width is stroked :data:`HOLLOW_LINE_MM` (0.05 mm, the
    thinnest plausible copper line) wide, with a note. It is not filled,
    though a filled reading would be more copper (more C12): filling an
    outline can cover copper of other nets inside it (a keep-out or
    courtyard drawn on copper around a part), which would short those nets
    and merge nets found by connectivity — a wrong board, worse than a
    thin ring. The fill reading is from memory of the standard.
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
* ``Xform`` (from memory, not quoted from the standard): ``scale``, then
  ``mirror`` (x -> -x, about the y axis), then ``rotation`` (degrees,
  counter-clockwise), then ``xOffset`` / ``yOffset``, then the
  ``Location``. Another reading exists — rotate first, then mirror — which
  differs for a mirrored shape rotated by other than 0 or 180 degrees (the
  turn goes the other way); this module mirrors first, its reading of the
  standard from memory, to be checked against the standard's text.
  Revision B also lets a standard primitive carry an ``Xform`` of its own
  (e.g. a RectCenter turned 90 degrees): it is applied first, then the
  Pad's (or Features') ``Xform``, then the ``Location``: a point p of the
  primitive lands at Location + Xform_pad(Xform_own(p)) (the order from
  memory). A primitive's own offsets are in its dictionary's units.

Refused, each with the element path: a file over the per-file cap (:mod:`checker.limits`);
an empty file, one of white space only, binary content or text that does
not start with ``<`` (each said so: "not an IPC-2581 file"); bytes that are
not well-formed XML (with the line); any ``DOCTYPE`` (an IPC-2581 file has
none; a DTD is how entity-expansion bombs and external entities get in; the
expat parser is set up to refuse a DOCTYPE where it starts, and entity
declarations and external references, as ``defusedxml`` does, with less
work per element); a root other than ``IPC-2581`` (any other XML is named
by its root); no ``Ecad``, ``CadHeader`` units, ``CadData``, ``Stackup`` or
``Step``; an unknown unit; a reference to a Layer of the Stackup or a Span,
or to a dictionary entry, that is not defined, or an id defined twice; a
Layer name used twice; a StackupLayer thinner than 1 um;
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

Two-point round-ended lines, the bulk of a board, are read in plain Python
(no numpy per line: for one segment its overhead is most of the cost).
"""

from __future__ import annotations

import itertools
import math
import os
import re
from dataclasses import dataclass, field
from typing import BinaryIO, NoReturn
from xml.etree.ElementTree import Element, TreeBuilder
from xml.parsers import expat

import numpy as np
import shapely
import shapely.affinity
from shapely.geometry.polygon import orient

from .. import limits
from ..bounds import LOSS_TANGENT, PERMITTIVITY
from ..errors import FabError
from ..model import Board, CopperLayer, Dielectric, Stackup
from .arcs import arc_polyline
from .fab.build import board_from_layers
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
    series_dielectric,
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

#: A feature (line, arc, outline stroke) this thin or thinner (mm; 1 nm)
#: is skipped with a note: below the resolution of every export format.
MIN_FEATURE_MM = 1e-6

#: A round-ended trace narrower than this (mm; 1 um), but wider than
#: MIN_FEATURE_MM, is widened to it with a note: the analysis tables
#: widths to 1 um, where a narrower trace would have no width at all
#: (more copper, not less, per the project rule).
MIN_TRACE_MM = 1e-3

#: A StackupLayer (dielectric, mask or copper) thinner than this (mm;
#: 1 um) is refused: no board is built of it (a units mistake).
MIN_THICKNESS_MM = 1e-3

#: The line width (mm) a hollow shape without a LineDesc is stroked with:
#: 0.05 mm (2 mil), narrower than the finest trace common fabrication
#: processes make, so the thinnest plausible copper line (a note says so).
HOLLOW_LINE_MM = 0.05

#: ``layerFunction`` of copper layers -> the role it states (None: none).
#: ``CONDUCTOR`` is the generic copper function (an exporter writes it for
#: every copper layer, planes too): it states no role, as ``CONDFOIL``.
COPPER_FUNCTIONS: dict[str, str | None] = {
    "SIGNAL": "signal", "PLANE": "plane", "MIXED": "mixed",
    "CONDUCTOR": None, "CONDFOIL": None, "CONDFILM": None,
}

#: ``fillProperty`` of a ``FillDesc`` -> read as filled (True) or as its
#: outline only (False); from memory. ``HATCH`` and ``MESH`` (a grid of
#: lines inside the outline) are read filled, with a note: more copper.
FILL_PROPERTIES = {"FILL": True, "HATCH": True, "MESH": True, "HOLLOW": False, "VOID": False}

#: Standard primitives this reader can draw.
PRIMITIVES = ("Circle", "RectCenter", "RectCorner", "RectRound", "RectCham", "Oval", "Ellipse", "Diamond",
              "Donut", "Contour")

#: Standard primitives of the standard this reader refuses (from memory).
UNSUPPORTED_PRIMITIVES = ("Butterfly", "Hexagon", "Moire", "Octagon", "Thermal", "Triangle")

#: Children that describe their parent (read by it, not shapes of their own).
_DESCRIPTIONS = {"Xform", "Location", "LineDesc", "LineDescRef", "FillDesc", "FillDescRef"}

#: Set children that carry nothing for copper (silently passed over).
_QUIET = {"NonstandardAttribute", "ColorRef", "Color", "PinRef", "Fiducial", "GlobalFiducial",
          "LocalFiducial", "BadBoardMark", "GoodPanelMark", "FillDesc", "FillDescRef"}

_NUMBER = re.compile(r"\s*[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?\s*", re.ASCII)
_NON_FINITE = re.compile(r"\s*[+-]?(?:inf|infinity|nan)\s*", re.IGNORECASE)

#: After the prolog, the root's start tag (any namespace prefix).
_ROOT_TAG = re.compile(rb"<(?:[A-Za-z_][\w.\-]*:)?IPC-2581[\s/>]")
_SPACE = re.compile(rb"[ \t\r\n]*")
_UTF8_BOM = b"\xef\xbb\xbf"
_UTF16_BOMS = (b"\xff\xfe", b"\xfe\xff")
#: C0 controls but tab, line feed, form feed, carriage return; and DEL.
_CONTROL_BYTES = bytes([*range(9), 11, *range(14, 32), 127])

_IDENTITY = (1.0, 0.0, 0.0, 1.0, 0.0, 0.0)

_LINE_ENDS = ("startX", "startY", "endX", "endY")

#: ``{uri}Name`` -> ``Name`` (a few dozen distinct tags per file).
_LOCAL_NAMES: dict[str, str] = {}


def _utf8_head(head: bytes) -> bytes:
    """``head`` without a byte-order mark, UTF-16 turned into UTF-8."""
    if head.startswith(_UTF16_BOMS):
        return head.decode("utf-16", errors="ignore").encode("utf-8")
    return head.removeprefix(_UTF8_BOM)


def is_ipc2581(head: bytes) -> bool:
    """Whether ``head`` (a file's first bytes, a few kB) starts an IPC-2581
    file: after an optional byte-order mark, XML declaration, comments,
    processing instructions and DOCTYPE, the root element is ``IPC-2581``
    (with or without a namespace prefix).

    A plain scan, not one regular expression: each step skips one
    ``<?...?>``, ``<!--...-->`` or ``<!DOCTYPE ...>`` by ``bytes.find`` and
    moves forward, so the time is linear in the head's length whatever it
    holds (a pattern with a repeated group of lazy alternatives backtracks
    exponentially over many comments before a root that does not match)."""
    text = _utf8_head(head)
    i, n = 0, len(text)
    while i < n:
        i = _SPACE.match(text, i).end()  # type: ignore[union-attr]  # \s* always matches
        if text.startswith(b"<?", i):
            end = text.find(b"?>", i + 2)
            step = 2
        elif text.startswith(b"<!--", i):
            end = text.find(b"-->", i + 4)
            step = 3
        elif text.startswith(b"<!DOCTYPE", i):
            close = text.find(b">", i)
            subset = text.find(b"[", i, close if close >= 0 else n)
            if subset >= 0:  # an internal subset [...] may hold '>' of its own
                close = text.find(b"]", subset)
                close = text.find(b">", close) if close >= 0 else -1
            end, step = close, 1
        else:
            break
        if end < 0:
            return False
        i = end + step
    return _ROOT_TAG.match(text, i) is not None


def looks_like_xml(head: bytes) -> bool:
    """Whether ``head`` (a file's first bytes) starts, after a byte-order
    mark and white space, with ``<``: any XML document, IPC-2581 or not.
    A ``.xml`` file that does not can still be handed to
    :func:`read_ipc2581`, which names what is wrong with it."""
    return _utf8_head(head).lstrip(b" \t\r\n").startswith(b"<")


def load_ipc2581(path: str | os.PathLike[str]) -> Board:
    """Read the IPC-2581 file at ``path`` into a Board (see the module docstring)."""
    return read_path(path, read_ipc2581, "an IPC-2581 file")


def read_ipc2581(stream: BinaryIO, name: str) -> Board:
    """Read an IPC-2581 file from a binary stream; ``name`` is used in
    messages and as the Board's path."""
    root, lines = _parse(stream, name)
    return _Reader(name, lines).board(root)


# --------------------------------------------------------------------------- XML


class _Refused(Exception):
    """A construct refused for safety (raised from an expat handler)."""


def _refuse(words: str):
    def handler(*_args):
        raise _Refused(words)
    return handler


_DTD_WORDS = ("a DOCTYPE declaration (an IPC-2581 file has none; a DTD can define entities, the way "
              "entity-expansion bombs and external entities get in)")


def _parse(stream: BinaryIO, name: str) -> tuple[Element, dict[int, int]]:
    """The element tree of the file and the line of each element's start
    tag (by ``id``).

    Parsed by expat (Python's ``pyexpat``) into the C ``TreeBuilder``, with
    the refusals ``defusedxml`` makes and no more work per element than
    recording its line: a DOCTYPE is refused where it starts (before any
    internal subset is read, so no entity is ever declared), and so are
    entity declarations and external references should one get through;
    parameter entities are never parsed."""
    cap = limits.current().file_bytes
    try:
        data = stream.read(cap + 1)
    except OSError as exc:
        raise FabError(name, None, f"cannot read the file: {exc}") from None
    if len(data) > cap:
        raise FabError(name, None, f"over the cap of {cap // limits.MB:,} MB read per file: not read; "
                                   f"{limits.hint('file-mb')}")
    _not_xml(bytes(data[:4096]) if len(data) > 4096 else bytes(data), data, name)
    parser = expat.ParserCreate(None, "}")
    parser.buffer_text = True
    parser.SetParamEntityParsing(expat.XML_PARAM_ENTITY_PARSING_NEVER)
    parser.StartDoctypeDeclHandler = _refuse(_DTD_WORDS)
    parser.EntityDeclHandler = _refuse("an entity declaration (entity expansion is refused: it is how XML "
                                       "bombs work)")
    parser.UnparsedEntityDeclHandler = _refuse("an entity declaration (entity expansion is refused: it is how "
                                               "XML bombs work)")
    parser.ExternalEntityRefHandler = _refuse("a reference to an external resource (never fetched)")
    builder = TreeBuilder()
    lines: dict[int, int] = {}
    tags: dict[str, str] = {}
    build_start = builder.start

    def start(tag: str, attrs: dict[str, str]) -> None:
        fixed = tags.get(tag)
        if fixed is None:  # expat gives "uri}Name"; ElementTree's form is "{uri}Name"
            fixed = tags[tag] = "{" + tag if "}" in tag else tag
        lines[id(build_start(fixed, attrs))] = parser.CurrentLineNumber

    parser.StartElementHandler = start
    parser.EndElementHandler = builder.end
    parser.CharacterDataHandler = builder.data
    try:
        parser.Parse(data, True)
        root = builder.close()
    except expat.ExpatError as exc:
        raise FabError(name, exc.lineno, f"not well-formed XML: {expat.ErrorString(exc.code)} "
                                         f"(column {exc.offset + 1})") from None
    except _Refused as exc:
        raise FabError(name, parser.CurrentLineNumber, f"refused for safety: {exc}") from None
    except (ValueError, LookupError) as exc:  # an encoding Python cannot decode
        raise FabError(name, None, f"not readable XML: {exc}") from None
    return root, lines


def _not_xml(head: bytes, data, name: str) -> None:
    """Refuse, naming the file, content that cannot be an IPC-2581 file:
    nothing, white space only, or a first character other than ``<``
    (binary content or other text)."""
    if not data:
        raise FabError(name, None, "the file is empty: not an IPC-2581 file")
    if head.startswith(_UTF16_BOMS):
        text = _utf8_head(head[:len(head) // 2 * 2])
        start = 0
    else:
        text = bytes(data)
        start = len(_UTF8_BOM) if text.startswith(_UTF8_BOM) else 0
    first = _SPACE.match(text, start).end()  # type: ignore[union-attr]  # \s* always matches
    if first == len(text):
        if len(head) == len(data) or not head.startswith(_UTF16_BOMS):
            raise FabError(name, None, "the file holds only white space: not an IPC-2581 file")
        return  # a long UTF-16 run of white space: the parser reads on
    if text[first:first + 1] == b"<":
        return
    sample = text[first:first + 1024]
    controls = len(sample) - len(sample.translate(None, _CONTROL_BYTES))
    if controls * 100 > len(sample) or b"\x00" in sample:
        raise FabError(name, None, "binary content, not XML: not an IPC-2581 file")
    shown = sample[:20].decode("utf-8", errors="replace")
    line = text.count(b"\n", 0, first) + 1
    raise FabError(name, line, f"not XML (the text starts {shown!r}, not with '<'): not an IPC-2581 file")


def _local(tag) -> str:
    """An element's name without its namespace (``{uri}Layer`` -> ``Layer``)."""
    try:
        return _LOCAL_NAMES[tag]
    except (KeyError, TypeError):
        if not isinstance(tag, str):
            return ""
        name = tag.rsplit("}", 1)[-1]
        if len(_LOCAL_NAMES) < 4096:  # a file of many odd tags does not grow it without end
            _LOCAL_NAMES[tag] = name
        return name


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

    def add_segment(self, x1: float, y1: float, x2: float, y2: float, width: float, net: int, line: int) -> None:
        """One stroke of one piece between two distinct points (the common
        case, kept out of numpy: per call, numpy costs more than the work)."""
        self.ordinal.append(0)
        self.stroke.append(len(self.stroke_line))
        self.stroke_line.append(line)
        self.x1.append(x1)
        self.y1.append(y1)
        self.x2.append(x2)
        self.y2.append(y2)
        self.width.append(width)
        self.net.append(net)

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
        self.widened = 0   # traces widened to MIN_TRACE_MM
        self.readings: dict[str, int] = {}  # assumption -> count
        self.fill_descs: dict[str, tuple[Element, str, float]] = {}

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
        if not _NUMBER.fullmatch(text):
            if _NON_FINITE.fullmatch(text):
                self.fail(elem, path, f"{attr}={text!r}: not a finite number")
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

    def coords(self, elem: Element, path: str, attrs: tuple[str, ...], scale: float) -> list[float]:
        """:meth:`coord` of each of ``attrs``, the plain case inline."""
        out = []
        for attr in attrs:
            text = elem.get(attr)
            if text is not None and _NUMBER.fullmatch(text):
                mm = float(text) * scale
                if abs(mm) <= MAX_LENGTH_MM:  # inf (an overflow) is not
                    out.append(mm)
                    continue
            out.append(self.coord(elem, path, attr, scale))  # the checks and their messages
        return out

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
        notes += [f"{self.name}: {what} ({count})" for what, count in self.readings.items()]
        if self.widened:
            notes.append(f"{self.name}: {self.widened} round-ended line(s) narrower than {MIN_TRACE_MM * 1000:g} um "
                         f"read {MIN_TRACE_MM * 1000:g} um wide "
                         f"(the analysis' width resolution; more copper, not less)")
        job_notes = tuple(f"{self.name}: {what} not given for {', '.join(where)}: {value} used ({ASSUMED_WORDS})"
                          for (what, value), where in self.assumed.items())
        job = JobStackup(path=self.name, stackup=stackup, copper_numbers=tuple(range(1, n + 1)),
                         board_thickness_mm=None, layer_count=n, roles_given=False, notes=job_notes)
        gerbers = {builders[name].number: builders[name].layer(self.name) for name in copper}
        drill_files = [f for d in drills.values() for f in d.files(self.name)]
        given: dict[int, str | None] = {}
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
                # above its sanity bound a value overflows the series rule that joins the layers
                bound = PERMITTIVITY if kind == "DIELECTRIC_CONSTANT" else LOSS_TANGENT
                problem = bound.problem(value, "a dielectric constant" if bound is PERMITTIVITY else "a loss tangent")
                if problem is not None:
                    self.fail(prop, f"{here}/Property", problem)
                values[kind] = value
            out[name] = (values.get("DIELECTRIC_CONSTANT"), values.get("LOSS_TANGENT"), spec, path)
        return out

    def dictionaries(self, content: Element) -> None:
        kinds = {"DictionaryStandard": ("EntryStandard", self.standard),
                 "DictionaryUser": ("EntryUser", self.user),
                 "DictionaryLineDesc": ("EntryLineDesc", self.line_descs),
                 "DictionaryFillDesc": ("EntryFillDesc", self.fill_descs)}
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
                body = [c for c in entry if _local(c.tag) not in _QUIET
                        or (kind == "DictionaryFillDesc" and _local(c.tag) == "FillDesc")]
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
        return CopperLayer(layer.name, "mixed", self.thickness(elem, path, layer))

    def thickness(self, elem: Element, path: str, layer: _LayerDef) -> float:
        """A StackupLayer's thickness in mm, refused below MIN_THICKNESS_MM."""
        mm = self.size(elem, path, "thickness", self.cad_scale)
        if mm < MIN_THICKNESS_MM:
            self.fail(elem, path, f"thickness={elem.get('thickness')!r} of layer {layer.name!r} is {mm:.3g} mm, "
                      f"thinner than {MIN_THICKNESS_MM * 1000:g} um: not a physical board layer (a units mistake?)")
        return mm

    def insulator(self, elem: Element, path: str, layer: _LayerDef, specs: dict,
                  mask: bool) -> tuple[float, float, float | None, tuple[str, ...]]:
        """(thickness, εr, loss tangent, assumed) of a dielectric or mask."""
        assumed = []
        if elem.get("thickness") is not None:
            thickness = self.thickness(elem, path, layer)
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
            found = self.spec_of(key, specs, layer)
            if found is None:
                continue
            e, t, _, _ = specs[found]
            er = e if er is None else er
            tan_d = t if tan_d is None else tan_d
        if er is None:
            er = DEFAULT_MASK_ER if mask else DEFAULT_DIELECTRIC_ER
            assumed.append("er")
            self.assume("solder mask εr" if mask else "dielectric εr", f"{er:g}", layer)
        return thickness, er, tan_d, tuple(assumed)

    def spec_of(self, key: str | None, specs: dict, layer: _LayerDef) -> str | None:
        """The Spec a ``SpecRef@id`` names: the Spec of that name; else, for
        an id ``SPEC_X``, the one Spec named ``X`` or ``X_<digits>`` (an
        open-source exporter names its Specs that way and refers to them by
        ``SPEC_<layer>``; a note says so); else None, with a note (the
        layer's values then are the documented defaults)."""
        if key in specs:
            return key
        if key is not None and key.startswith("SPEC_"):
            stem = key[len("SPEC_"):]
            near = [name for name in specs if name == stem or re.fullmatch(re.escape(stem) + r"_[0-9]+", name)]
            if len(near) == 1:
                self.notes.append(f"{self.name}: layer {layer.name!r}: SpecRef {key!r} names no Spec; the Spec "
                                  f"{near[0]!r} is read for it (its name is the reference without 'SPEC_')")
                return near[0]
            if near:
                self.notes.append(f"{self.name}: layer {layer.name!r}: SpecRef {key!r} names no Spec and could be "
                                  f"any of {', '.join(map(repr, sorted(near)))}: none is used")
                return None
        self.notes.append(f"{self.name}: layer {layer.name!r}: SpecRef {key!r} names no Spec of the CadHeader: "
                          "its material values are not known")
        return None

    def combine(self, rows: list[tuple[Element, str, _LayerDef]], specs: dict) -> Dielectric:
        """One model dielectric from consecutive layers, by the series rule
        (:func:`checker.readers.fab.jobfile.series_dielectric`)."""
        return series_dielectric([(t, e, tan, layer.name, got) for (t, e, tan, got), (_, _, layer)
                                  in zip((self.insulator(e, p, layer, specs, mask=False) for e, p, layer in rows),
                                         rows)])

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
        undefined: dict[str, int] = {}
        for k, lf in enumerate(_children(step, "LayerFeature")):
            ref = lf.get("layerRef")
            path = f"{step_path}/LayerFeature[{ref if ref is not None else k + 1}]"
            if ref is None:
                self.fail(lf, path, "missing attribute 'layerRef'")
            if ref not in layers:  # an exporter writes tenting, plugging, filling layers so
                undefined[ref] = undefined.get(ref, 0) + 1
                continue
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
        if undefined:
            self.notes.append(f"{self.name}: not read: LayerFeature(s) of layer(s) no Layer of CadData defines: "
                              + ", ".join(repr(k) for k in undefined) + " (only copper and drill layers matter)")

    def set_attributes(self, s: Element, here: str, net: str | None, usage: str) -> tuple[str | None, str]:
        """(net or None, padUsage) of a Set: its own where it gives them,
        else its parent Set's (``net`` None and ``usage`` "" at the top)."""
        polarity = s.get("polarity")
        if polarity is not None and polarity.strip().upper() != "POSITIVE":
            self.fail(s, here, f"polarity={polarity!r}: clear (negative) copper in a Set is not supported; export "
                      "positive copper with cutouts")
        own = s.get("padUsage")
        return s.get("net", net), usage if own is None else own.strip().upper()

    def copper_features(self, lf: Element, path: str, layer: _Copper) -> None:
        for k, s in enumerate(_children(lf, "Set")):
            self.copper_set(s, f"{path}/Set[{k + 1}]", None, "", layer, 0)

    def copper_set(self, s: Element, here: str, net_name: str | None, usage: str, layer: _Copper,
                   depth: int) -> None:
        """One Set of a copper layer, and the Sets nested in it."""
        net_name, usage = self.set_attributes(s, here, net_name, usage)
        net = layer.net_of(net_name)
        count: dict[str, int] = {}
        for child in s:
            name = _local(child.tag)
            count[name] = count.get(name, 0) + 1
            if name == "Features":
                at = f"{here}/Features[{count[name]}]"
                xf = self.placement(child, at)
                seen: dict[str, int] = {}
                for feature in child:
                    fname = _local(feature.tag)
                    seen[fname] = k = seen.get(fname, 0) + 1
                    if fname not in ("Xform", "Location"):
                        self.feature(feature, f"{at}/{fname}[{k}]", xf, net, layer, traces=True)
            elif name == "Pad":
                self.pad(child, f"{here}/Pad[{count[name]}]", net, usage, layer)
            elif name == "Set":
                self.nested(child, f"{here}/Set[{count[name]}]", depth)
                self.copper_set(child, f"{here}/Set[{count[name]}]", net_name, usage, layer, depth + 1)
            elif name == "Hole":
                self.skip("Hole elements on copper layers (holes are read from drill layers)")
            elif name == "SlotCavity":
                self.skip("SlotCavity (slots)")
            elif name not in _QUIET:
                self.unknown_element(name, f"{here}/{name}[{count[name]}]")

    def nested(self, s: Element, here: str, depth: int) -> None:
        if depth >= MAX_NESTING:
            self.fail(s, here, f"Sets nested more than {MAX_NESTING} deep")

    def drill_features(self, lf: Element, path: str, drill: _Drill) -> None:
        for k, s in enumerate(_children(lf, "Set")):
            self.drill_set(s, f"{path}/Set[{k + 1}]", "", drill, 0)

    def drill_set(self, s: Element, here: str, usage: str, drill: _Drill, depth: int) -> None:
        """The holes of one Set of a drill layer, and of the Sets nested in it."""
        _, usage = self.set_attributes(s, here, None, usage)
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
        for k, inner in enumerate(_children(s, "Set")):
            self.nested(inner, f"{here}/Set[{k + 1}]", depth)
            self.drill_set(inner, f"{here}/Set[{k + 1}]", usage, drill, depth + 1)

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
        loc = xform = None
        for c in elem:
            name = _local(c.tag)
            if name == "Location" and loc is None:
                loc = c
            elif name == "Xform" and xform is None:
                xform = c
        lx = ly = 0.0
        if loc is not None:
            lx = self.coord(loc, f"{path}/Location", "x", self.cad_scale)
            ly = self.coord(loc, f"{path}/Location", "y", self.cad_scale)
        if xform is None:
            return (1.0, 0.0, 0.0, 1.0, lx, ly)
        a, b, d, e, ox, oy = self.xform_map(xform, f"{path}/Xform", self.cad_scale)
        return (a, b, d, e, lx + ox, ly + oy)

    def xform_map(self, xform: Element, here: str, unit: float) -> tuple[float, ...]:
        """The affine map of one ``Xform`` (offsets in ``unit`` mm): scale,
        then mirror (x -> -x), then rotation (counter-clockwise), then the
        offsets (the order is this module's reading, from memory)."""
        scale = self.number(xform, here, "scale", default=1.0, required=False)
        if not 0 < scale <= 1e6:
            self.fail(xform, here, f"scale={xform.get('scale')!r} must be > 0")
        rot = math.radians(self.number(xform, here, "rotation", default=0.0, required=False))
        mirror = bool(_flag(xform.get("mirror")))
        ox = self.coord(xform, here, "xOffset", unit) if xform.get("xOffset") is not None else 0.0
        oy = self.coord(xform, here, "yOffset", unit) if xform.get("yOffset") is not None else 0.0
        c, s = math.cos(rot), math.sin(rot)
        m = -1.0 if mirror else 1.0
        return (c * m * scale, -s * scale, s * m * scale, c * scale, ox, oy)

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
            width, end = self.line_desc(elem, path, self.cad_scale)
            if xf is not _IDENTITY and xf != _IDENTITY:
                width *= math.sqrt(abs(xf[0] * xf[3] - xf[1] * xf[2]))
            if width < MIN_TRACE_MM:
                width = self.thin(width, end == "ROUND" and traces)
                if width == 0:
                    return
            if traces and end == "ROUND":
                if name == "Line":  # the common case in plain Python: numpy costs more than it saves here
                    x1, y1, x2, y2 = self.coords(elem, path, _LINE_ENDS, self.cad_scale)
                    if xf is not _IDENTITY and xf != _IDENTITY:
                        a, b, d, e, xo, yo = xf
                        x1, y1, x2, y2 = a * x1 + b * y1 + xo, d * x1 + e * y1 + yo, a * x2 + b * y2 + xo, \
                            d * x2 + e * y2 + yo
                    self.points += 2
                    if self.points > MAX_TRACE_POINTS:
                        self.fail(elem, path, f"more than {MAX_TRACE_POINTS} trace points: over this reader's limit")
                    if x1 != x2 or y1 != y2:
                        layer.add_segment(x1, y1, x2, y2, width, net, line)
                        return
                    pts = np.array([[x1, y1], [x2, y2]])
                else:
                    pts = self.path_points(elem, path, xf, self.cad_scale)
                    self.points += len(pts)
                    if self.points > MAX_TRACE_POINTS:
                        self.fail(elem, path, f"more than {MAX_TRACE_POINTS} trace points: over this reader's limit")
                    if layer.add_stroke(pts, width, net, line):
                        return
            else:
                pts = self.path_points(elem, path, xf, self.cad_scale)
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

    def read_as(self, what: str) -> None:
        """Count a reading that is an assumption, for a note."""
        self.readings[what] = self.readings.get(what, 0) + 1

    def thin(self, width: float, trace: bool) -> float:
        """The width (mm) to read a line narrower than MIN_TRACE_MM with: 0
        (skipped, counted for a note) at MIN_FEATURE_MM or less; a trace's
        widened to MIN_TRACE_MM (counted for a note: more copper, not less);
        any other line's as it is."""
        if width <= MIN_FEATURE_MM:
            self.skip("zero-width lines on copper" if width == 0 else
                      f"lines {MIN_FEATURE_MM * 1e6:g} nm wide or less on copper")
            return 0.0
        if trace:
            self.widened += 1
            return MIN_TRACE_MM
        return width

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
        geom = self.own_shape(elem, path, scale, name, depth)
        xform = _child(elem, "Xform")
        if xform is None or geom.is_empty:
            return geom
        # the primitive's own Xform (revision B) places it in its parent's frame
        return self.place(self.xform_map(xform, f"{path}/Xform", scale), geom)

    def own_shape(self, elem: Element, path: str, scale: float, name: str, depth: int) -> shapely.Geometry:
        """A primitive's copper in its own frame (before its own Xform)."""
        if name in PRIMITIVES:
            shape = self.standard_shape(elem, path, scale, name)
            return shape if name == "Contour" else self.dress(shape, [(elem, path)], scale)
        if name in UNSUPPORTED_PRIMITIVES:
            self.fail(elem, path, f"the standard primitive {name} is not supported by this reader "
                      f"(supported: {', '.join(PRIMITIVES)})")
        if name == "UserSpecial":
            parts = [self.primitive(c, f"{path}/{_local(c.tag)}", scale, depth + 1) for c in elem
                     if _local(c.tag) not in _QUIET and _local(c.tag) not in _DESCRIPTIONS]
            parts = [p for p in parts if not p.is_empty]
            return shapely.union_all(parts) if parts else shapely.Polygon()
        if name in ("Line", "Arc", "Polyline"):
            pts = self.path_points(elem, path, _IDENTITY, scale)
            width, end = self.line_desc(elem, path, scale)
            width = self.thin(width, trace=False)
            return _stroke_shape(pts, width, end) if width > 0 else shapely.Polygon()
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
            (x0, y0), (x1, y1), (xc, yc) = p.tolist()
            return self.arc(elem, path, x0, y0, x1, y1, xc, yc, clockwise)
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
        if name != "Profile":
            shape = self.dress(shape, [(elem, path), (polys[0], f"{path}/Polygon")], scale,
                               math.sqrt(abs(xf[0] * xf[3] - xf[1] * xf[2])))
        return polygonal_part(shape)

    def dress(self, shape: shapely.Geometry, owners: list[tuple[Element, str]], scale: float,
              factor: float = 1.0) -> shapely.Geometry:
        """The copper of a closed shape given its fill and line: the first
        ``FillDesc``/``FillDescRef`` and ``LineDesc``/``LineDescRef`` among
        the ``owners`` (the shape's element, then its Polygon). Filled (no
        FillDesc, FILL, HATCH, MESH): the area, grown by half the line
        width where one is given (the outline is drawn with it). Hollow
        (HOLLOW, VOID): the outline stroked with the line width, a ring;
        without a width, HOLLOW_LINE_MM with a note. ``factor`` scales the
        width as a placement already applied to ``shape`` does."""
        fill = width = None
        for elem, path in owners:
            if fill is None:
                fill = self.fill_desc(elem, path)
            if width is None and (_child(elem, "LineDesc") is not None or _child(elem, "LineDescRef") is not None):
                width = self.line_desc(elem, path, scale)[0] * factor
        if width is not None and width <= MIN_FEATURE_MM:
            width = None
        if fill is None or FILL_PROPERTIES[fill]:
            if width is None:
                return shape
            return shapely.union_all([shape, _outline_stroke(shape, width)])
        if width is None:
            width = HOLLOW_LINE_MM
            self.read_as(f"hollow shapes without a line width stroked {HOLLOW_LINE_MM:g} mm wide (the thinnest "
                         "plausible copper line; filling them could join copper of other nets)")
        return _outline_stroke(shape, width)

    def fill_desc(self, elem: Element, path: str) -> str | None:
        """The ``fillProperty`` of an element's ``FillDesc`` or
        ``FillDescRef`` (``FILL`` where it gives none); None without either."""
        for c in elem:
            kind = _local(c.tag)
            if kind == "FillDesc":
                return self.read_fill(c, f"{path}/FillDesc")
            if kind == "FillDescRef":
                key = c.get("id")
                if key not in self.fill_descs:
                    self.fail(c, f"{path}/FillDescRef", f"FillDescRef id {key!r} names no entry of the "
                              "DictionaryFillDesc")
                body, body_path, _ = self.fill_descs[key]
                if _local(body.tag) != "FillDesc":
                    self.fail(body, body_path, f"EntryFillDesc {key!r} holds <{_local(body.tag)}>, not a FillDesc")
                return self.read_fill(body, body_path)
        return None

    def read_fill(self, desc: Element, path: str) -> str:
        text = desc.get("fillProperty")
        prop = "FILL" if text is None else text.strip().upper()
        if prop not in FILL_PROPERTIES:
            self.fail(desc, path, f"fillProperty={text!r} (accepted: {', '.join(FILL_PROPERTIES)})")
        if prop in ("HATCH", "MESH"):
            self.read_as("HATCH and MESH fills read as solid copper (more copper than the lines of the hatch)")
        elif prop == "VOID":
            self.read_as("VOID fills read as HOLLOW (the outline only)")
        return prop

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
        style = (desc.get("lineProperty") or "SOLID").strip().upper()
        if style != "SOLID":
            self.read_as("line descriptions of a lineProperty other than SOLID (dashed, dotted) read as solid "
                         "lines (more copper, not less)")
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


def _outline_stroke(shape: shapely.Geometry, width: float) -> shapely.Geometry:
    """Every ring (outer and holes) of a polygonal shape drawn with a round
    line of ``width``: the Gerber door's exact-area stroke outline, as a
    region drawn with a round aperture."""
    rings = [np.asarray(ring.coords) for part in shapely.get_parts(polygonal_part(shape)) if not part.is_empty
             for ring in (part.exterior, *part.interiors)]
    parts = [stroke_outline(ring, width) for ring in rings if len(ring) > 1]
    return shapely.union_all(parts) if parts else shapely.Polygon()


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
