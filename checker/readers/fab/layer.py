"""What each fabrication-format reader returns: plain data, no physics.

The readers (``gerber.py``, ``excellon.py``, ``ipc356.py``, ``jobfile.py``,
``stackup_yaml.py``) each turn one file into one of these objects; only
``assemble.py`` turns them into a :class:`checker.model.Board`. Lengths are
millimetres in the file's own coordinates (x right, y up), converted from
inch where the file says so.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely

from ...model import Stackup

#: ``GerberLayer.net`` / ``GerberShape.net`` value for an object without a
#: ``TO.N`` attribute (net unknown: recover it by connectivity).
NET_UNKNOWN = -1


@dataclass
class GerberTraces:
    """Straight copper pieces drawn with round apertures, as parallel arrays.

    Arcs (G02/G03) arrive already split into chords by
    :func:`checker.readers.arcs.arc_polyline`. ``stroke`` numbers the
    contiguous strokes of the file (a run of D01 draws and arcs that follow
    each other without a D02, D03, aperture change or attribute change);
    ``ordinal`` is a piece's position along its stroke (0, 1, 2 ...), so
    consecutive pieces of one stroke touch end to start. ``net`` indexes
    ``GerberLayer.net_names`` (``NET_UNKNOWN`` for none). ``stroke_line[s]``
    is the file line where stroke ``s`` starts.
    """

    x1: np.ndarray
    y1: np.ndarray
    x2: np.ndarray
    y2: np.ndarray
    width: np.ndarray
    net: np.ndarray
    stroke: np.ndarray
    ordinal: np.ndarray
    stroke_line: np.ndarray

    def __len__(self) -> int:
        return int(self.x1.shape[0])


@dataclass(frozen=True)
class GerberShape:
    """Copper that is not a round-aperture trace: a flash (``kind`` ``pad``),
    a region (``region``) or a draw with a non-round aperture (``draw``),
    after clear polarity, step-and-repeat and block apertures are applied.

    ``function``: the ``TA.AperFunction`` value's first field
    (``ViaPad``, ``ComponentPad``, ``SMDPad``, ``Conductor``, ``AntiPad``,
    ``NonConductor`` ...) or ``None``. ``at``: the flash position for pads.
    ``pin``: the ``TO.P`` value (reference designator, pin) if given.
    ``component``: the ``TO.C`` value.
    """

    kind: str
    polygon: shapely.Polygon | shapely.MultiPolygon
    net: int
    line: int
    function: str | None = None
    at: tuple[float, float] | None = None
    pin: tuple[str, ...] | None = None
    component: str | None = None


@dataclass
class GerberLayer:
    """One Gerber file.

    ``file_function``: the ``TF.FileFunction`` fields (``("Copper", "L2",
    "Inr", "Signal")``) or ``None`` if the file has none. ``negative``:
    ``TF.FilePolarity,Negative`` (the drawn objects are the *absence* of
    copper, as in a plane layer). ``net_names``: the distinct ``TO.N``
    values in order of first use; an empty ``TO.N`` value is kept as ``""``
    (the spec's "not connected"), ``N/C`` as ``"N/C"``.
    ``attributes``: the other file attributes (``TF.*``) as name -> fields.
    """

    path: str
    file_function: tuple[str, ...] | None
    negative: bool
    net_names: list[str]
    traces: GerberTraces
    shapes: list[GerberShape]
    attributes: dict[str, tuple[str, ...]] = field(default_factory=dict)
    #: what the reader ignored and a user should know (unknown commands, spec 2.14)
    warnings: list[str] = field(default_factory=list)


@dataclass
class DrillFile:
    """One Excellon file. ``plated``: True / False from
    ``TF.FileFunction,Plated|NonPlated,...``, ``None`` if unknown.
    ``span``: (from, to) copper layer numbers of ``TF.FileFunction``
    (``Plated,1,4,PTH`` -> (1, 4)) or ``None``. Holes and slots are
    parallel arrays; ``function`` holds the ``TA.AperFunction`` of each
    hole's tool (``ViaDrill``, ``ComponentDrill`` ...) or ``""``;
    ``line`` the file line of each hit.
    """

    path: str
    plated: bool | None
    span: tuple[int, int] | None
    x: np.ndarray
    y: np.ndarray
    diameter: np.ndarray
    function: list[str]
    line: np.ndarray
    slot_x1: np.ndarray
    slot_y1: np.ndarray
    slot_x2: np.ndarray
    slot_y2: np.ndarray
    slot_diameter: np.ndarray
    slot_line: np.ndarray
    #: what the reader assumed or inferred (format, units, zeros, tool sizes), one sentence each
    notes: list[str] = field(default_factory=list)
    #: per hole, where the file's plating differs between its tools (``;TYPE=`` comments);
    #: ``None`` when ``plated`` says it for the whole file
    hole_plated: np.ndarray | None = None
    #: where the digit format was inferred and other readings give a plausible
    #: board too: (factor on every implied-decimal coordinate, format in words)
    other_readings: tuple[tuple[float, str], ...] = ()


@dataclass(frozen=True)
class NetPoint:
    """One IPC-D-356 test point (317 through-hole / 327 surface record):
    ``net`` after NNAME aliases are resolved, ``None`` for N/C;
    ``access``: the copper layer number the point is reached from
    (1 = top; ``None`` = both sides of a through hole); ``line``: the file line.
    ``refdes`` / ``pin``: the reference designator (``VIA`` for a via) and
    pin as written; ``plated``: the hole's P (True) / U (False) flag,
    ``None`` without a hole or flag."""

    net: str | None
    x: float
    y: float
    access: int | None
    hole: float | None
    line: int
    refdes: str = ""
    pin: str = ""
    plated: bool | None = None


@dataclass
class Netlist:
    path: str
    points: list[NetPoint]


@dataclass
class JobStackup:
    """The stackup of a Gerber job file (or a stackup YAML file).

    ``stackup``: the model Stackup; its copper layers are in order top to
    bottom, and ``copper_numbers[i]`` is the Gerber layer number (``L1`` =
    1 ...) of ``stackup.layers[i]``. ``board_thickness_mm`` and
    ``layer_count`` as the file states them (``None`` if absent).
    ``roles_given``: whether the file said each copper layer's role
    (a job file does not; a stackup YAML does). ``files``: a job file's
    ``FilesAttributes`` as (path, file function, polarity) in file order
    (polarity ``""`` if not given; empty for a stackup YAML).
    ``size_mm``: ``GeneralSpecs.Size`` (X, Y) if the file gives it.
    ``notes``: the defaults the reader used for values the file left out.
    """

    path: str
    stackup: Stackup
    copper_numbers: tuple[int, ...]
    board_thickness_mm: float | None
    layer_count: int | None
    roles_given: bool
    files: tuple[tuple[str, str, str], ...] = ()
    size_mm: tuple[float, float] | None = None
    #: what the reader assumed (a documented default for a value the file
    #: left out), each a sentence for the report's notes
    notes: tuple[str, ...] = ()
