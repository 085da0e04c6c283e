"""Write a couplint board as a fabrication package, for test fixtures only.

Turns a board in the neutral JSON format (``docs/board-format.md``), read
with :func:`checker.readers.load_board`, into the files a layout program
hands a board maker, so the fabrication-export readers can be tested
against the JSON door on the same copper:

* ``<board>-L<n>.gbr``: one Gerber X2 file per copper layer (Gerber Layer
  Format Specification, Ucamco; the X2 attributes ``TF.FileFunction``,
  ``TF.FilePolarity``, ``TA.AperFunction`` and ``TO.N``);
* ``<board>-PTH-<from>-<to>.drl``: one Excellon drill file per via span,
  with the X2 attributes as ``; #@!`` comments (``Plated,1,6,PTH``,
  ``Blind`` or ``Buried`` where the span is not the whole board);
* ``<board>.gbrjob``: the Gerber job file (JSON, Ucamco's Gerber job
  format): ``Header`` (``GenerationSoftware``, ``CreationDate``),
  ``GeneralSpecs`` (``ProjectId.Name``, ``Size`` of the outline,
  ``LayerNumber``, ``BoardThickness`` = copper + dielectrics, masks not
  counted), ``FilesAttributes`` (``Path``, ``FileFunction``,
  ``FilePolarity`` of every Gerber and drill file) and ``MaterialStackup``
  top to bottom: ``SolderMask`` (``Name``, ``Thickness``,
  ``DielectricConstant``, ``LossTangent``), ``Copper`` (``Name`` = the
  JSON layer name, ``Thickness``) and ``Dielectric`` (``Name`` when the
  JSON gives one, ``Material`` ``FR4`` as a placeholder since the JSON
  has none, ``Thickness``, ``DielectricConstant``, ``LossTangent`` when
  known);
* ``<board>-Profile.gbr``: the board outline (``Profile,NP``), when the
  board has one;
* ``<board>.ipc``: an IPC-D-356A netlist, with ``ipc356=True``.

Usage::

    python scripts/write_fab.py BOARD.json OUTDIR [--holes clear|cutin] [--sr]
        [--negative-planes] [--no-net-attributes] [--no-roles] [--ipc356] [--er-as-string]
    python scripts/write_fab.py --fixtures      # regenerate fixtures/fab/*

or from Python: ``write_fab(board_or_path, outdir, **options) -> list[Path]``.

What is written, and why it describes the same copper as the Board:

* Every track (one ``tracks[i]`` source of the Board) is ONE stroke: a D02
  to its first point, then a D01 per following point, with a round
  aperture of its width (``TA.AperFunction,Conductor``). The Board's
  pieces are taken as they are: a repeated point, which gave no piece,
  gives no zero-length draw.
* Every arc (an ``arcs[i]`` source) is one G02/G03 stroke in G75 mode,
  from its first chord point to its last, with I/J to the centre of the
  circle through its chord points (:func:`checker.readers.arcs.circle_through`);
  a reader that chords it with :func:`checker.readers.arcs.arc_polyline`
  gets the Board's pieces back. A full circle is written with equal start
  and end points (a 360 degree arc in G75 mode). An arc that became a
  single chord cannot be recovered from the Board and is written as that
  straight chord (the same piece).
* Regions are G36/G37 contours. Holes either follow their region at once
  in clear polarity (``LPC``; every region with holes is written before
  any track, and a hole that would also clear an earlier region's copper
  makes that one region fall back to cut-ins, with a G04 comment), or are
  joined to the outline by cut-in lines (``holes="cutin"``).
* Vias: a ``TA.AperFunction,ViaPad`` flash of the pad diameter on every
  copper layer of the via's span, and a hit in the span's drill file.
  With ``sr=True`` vias of one pad, drill, net and span that fill a
  rectangular grid of at least 2 x 2 become one step-and-repeat block
  (``%SRX..Y..I..J..*%``) around a single flash; the drill hits stay
  individual.
* ``TO.N`` precedes each object whose net differs from the current one;
  ``%TD*%`` clears it before copper of no net (JSON ``null``), which is
  written without ``TO.N``.
* Coordinates are ``%FSLAX46Y46*%`` millimetres: a 1 nm grid. A board whose
  coordinates are plain decimals of at most 6 places (mm) round-trips
  exactly; :func:`rounding_mm` reports the largest move otherwise.

Options change the form, never the copper:

``holes``: ``"clear"`` (default) or ``"cutin"``.
``sr``: step-and-repeat blocks for via grids (default off).
``negative_planes``: plane layers as ``TF.FilePolarity,Negative`` images
  of the *absence* of copper: the copper is the board outline minus the
  dark objects. Allowed only where the plane layer's copper is one region
  (with holes) inside the outline and no track, and the board has an
  outline. The image is: the part of the outline outside the plane's
  outline (dark, written as the outline with the plane outline clear, or
  as one cut-in contour), then each hole of the plane (dark). Such a file
  carries no ``TO.N`` (there is no copper object to carry it: the reader
  recovers the plane's net from the vias through it, so at least one via
  of the plane's net must pass through the copper and none of another
  net may) and no via pads (the drill file gives the via's span).
``net_attributes``: ``False`` writes no ``TO.N`` at all.
``roles``: ``False`` writes every copper layer's ``TF.FileFunction`` (in
  the Gerber file and in the job file's ``FilesAttributes``) as
  ``Copper,L<n>,Top|Inr|Bot`` without the optional layer type field
  (``Plane``, ``Signal``, ``Mixed``; the Gerber Layer Format
  Specification makes it optional), and names no role in the files'
  comments: an export that declares no layer roles. The job file's
  ``MaterialStackup`` carries no role either way. (A negative plane layer
  still says ``TF.FilePolarity,Negative``, which readers take as a plane.)
``ipc356``: also write the IPC-D-356A netlist.
``er_as_string``: the job file's ``DielectricConstant`` values as strings
  with a decimal comma (``"4,2"``), as some exporters write them.
``name``: the base of the file names (default: the board's name, with
  characters other than letters, digits, ``.``, ``_`` and ``-`` replaced).
``creation_date``: the ``CreationDate`` of every file (fixed by default,
  so a package is a pure function of the board and the options).

The package is invented test data; nothing here imitates any layout
program's output beyond what the open formats prescribe.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import shapely

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from checker.model import NO_NET, Board  # noqa: E402
from checker.readers import load_board  # noqa: E402
from checker.readers.arcs import circle_through  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]

#: ``TF.GenerationSoftware`` fields (vendor, application, version) and the
#: job file's ``Header.GenerationSoftware``.
GENERATOR = ("couplint-fixture-writer", "write_fab", "1")

#: Fixed creation date: the output depends on the board and options only.
CREATION_DATE = "2000-01-01T00:00:00+00:00"

#: Coordinates are written in nanometres (``%FSLAX46Y46*%`` in mm).
NM_PER_MM = 1_000_000

#: The job file's ``Material`` of every dielectric: the neutral format has
#: no material, so the writer states the common laminate as a placeholder.
PLACEHOLDER_MATERIAL = "FR4"

#: Gerber ``TF.FileFunction`` copper type for each stackup role.
ROLE_TYPES = {"signal": "Signal", "plane": "Plane", "mixed": "Mixed"}

#: The committed packages: folder under ``fixtures/fab`` -> (board, options).
FIXTURE_SETS: dict[str, tuple[str, dict[str, Any]]] = {
    "six_layer": ("fixtures/six_layer_fab.json", {"sr": True, "ipc356": True}),
    "four_layer_mixed": ("fixtures/four_layer_mixed.json", {"holes": "cutin", "ipc356": True}),
    # the shielding cases (fixtures/shielding/*.json), exported without layer roles
    **{f"shielding-{case}": (f"fixtures/shielding/{case}.json", {"roles": False})
       for case in ("void_under_run", "empty_layer", "ground_strip", "island", "split_plane",
                    "guard_stitched", "guard_one_end")},
}

#: Suffixes of the files the writer makes (stale ones are removed from a
#: fixture folder before it is regenerated).
WRITTEN_SUFFIXES = (".gbr", ".drl", ".gbrjob", ".ipc")


class FabWriteError(ValueError):
    """The board cannot be written with the options asked for."""


# --------------------------------------------------------------------------- numbers


def to_nm(value: float) -> int:
    """A length in mm as an integer number of nanometres (round half even)."""
    return int(round(float(value) * NM_PER_MM))


def fmt_mm(value: float) -> str:
    """A length in mm as a plain decimal (at most 9 places, at least one)."""
    text = f"{float(value):.9f}".rstrip("0")
    if text.endswith("."):
        text += "0"
    return "0.0" if text in ("-0.0", "-0.") else text


def fmt_nm_decimal(nm: int) -> str:
    """An integer number of nanometres as a millimetre decimal (``22.4``)."""
    sign = "-" if nm < 0 else ""
    whole, frac = divmod(abs(nm), NM_PER_MM)
    frac_text = f"{frac:06d}".rstrip("0") or "0"
    return f"{sign}{whole}.{frac_text}"


def gerber_string(text: str) -> str:
    """A Gerber attribute field: the reserved characters ``% * , \\`` and
    control characters escaped as ``\\uXXXX`` (Gerber spec, "String")."""
    out = []
    for ch in text:
        if ch in "%*,\\" or ord(ch) < 32:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return "".join(out)


def comment_text(text: str) -> str:
    """Text safe inside a G04 comment (no ``*`` or ``%``)."""
    return re.sub(r"[*%\r\n]", "_", text)


def safe_file_stem(name: str) -> str:
    """A board name as a file-name stem."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-.")
    return stem or "board"


# --------------------------------------------------------------------------- the copper, from the Board


@dataclass
class Stroke:
    """One D02 + D01 run: a track (``points``, (k, 2) nm) or an arc
    (``points`` = start, end; ``centre`` in nm; ``ccw``)."""

    layer: int
    net: int
    width: float
    points: list[tuple[int, int]]
    source: str
    centre: tuple[int, int] | None = None
    ccw: bool = True
    #: exact (unrounded) mm coordinates the stroke stands for, for rounding_mm
    exact: list[tuple[float, float]] = field(default_factory=list)


def strokes_of(board: Board) -> list[Stroke]:
    """The Board's pieces as strokes, in source order: one per track, one
    per arc (a run of consecutive, touching pieces of one source, layer,
    net and width; a break in any of these starts a new stroke)."""
    p = board.pieces
    if not len(p):
        return []
    order = np.lexsort((p.ordinal, p.source))
    out: list[Stroke] = []
    run: list[int] = []

    def flush() -> None:
        if run:
            out.append(_stroke(board, run))
            run.clear()

    for row in order:
        row = int(row)
        if run:
            last = run[-1]
            same = (p.source[row] == p.source[last] and p.layer[row] == p.layer[last]
                    and p.net[row] == p.net[last] and p.width[row] == p.width[last]
                    and p.x1[row] == p.x2[last] and p.y1[row] == p.y2[last])
            if not same:
                flush()
        run.append(row)
    flush()
    return out


def _stroke(board: Board, rows: list[int]) -> Stroke:
    p = board.pieces
    first = rows[0]
    xy = [(float(p.x1[first]), float(p.y1[first]))] + [(float(p.x2[r]), float(p.y2[r])) for r in rows]
    source = board.sources[int(p.source[first])] if board.sources else f"source {int(p.source[first])}"
    base = dict(layer=int(p.layer[first]), net=int(p.net[first]), width=float(p.width[first]), source=source)
    if source.startswith("arcs[") and len(rows) >= 2:
        closed = math.dist(xy[0], xy[-1]) <= 1e-9
        n = len(xy) - 1
        if closed:
            cx, cy, _r, _a0, sweep = circle_through(xy[0], xy[n // 3], xy[(2 * n) // 3])
        else:
            cx, cy, _r, _a0, sweep = circle_through(xy[0], xy[n // 2], xy[-1])
        ends = [xy[0], xy[0] if closed else xy[-1]]
        return Stroke(points=[(to_nm(x), to_nm(y)) for x, y in ends], centre=(to_nm(cx), to_nm(cy)),
                      ccw=sweep > 0, exact=ends + [(cx, cy)], **base)
    return Stroke(points=[(to_nm(x), to_nm(y)) for x, y in xy], exact=xy, **base)


def rings_nm(polygon: shapely.Polygon) -> tuple[list[tuple[int, int]], list[list[tuple[int, int]]]]:
    """Exterior (counter-clockwise) and holes (clockwise) in nm, without
    the closing corner."""
    polygon = shapely.geometry.polygon.orient(polygon, 1.0)

    def ring(coords) -> list[tuple[int, int]]:
        pts = [(to_nm(x), to_nm(y)) for x, y in list(coords)[:-1]]
        return [q for i, q in enumerate(pts) if q != pts[i - 1]] if len(pts) > 1 else pts

    return ring(polygon.exterior.coords), [ring(h.coords) for h in polygon.interiors]


def rounding_mm(board: Board) -> float:
    """The largest distance (mm) any written coordinate moves when rounded
    to the 1 nm grid: track points, arc ends and centres, region corners,
    via centres, the outline. 0 for a board of plain 6-place decimals."""
    worst = 0.0

    def see(x: float, y: float) -> None:
        nonlocal worst
        worst = max(worst, abs(x - to_nm(x) / NM_PER_MM), abs(y - to_nm(y) / NM_PER_MM))

    for s in strokes_of(board):
        for x, y in s.exact:
            see(x, y)
    shapes = [r.polygon for r in board.regions] + ([board.outline] if board.outline is not None else [])
    for poly in shapes:
        for ring in [poly.exterior, *poly.interiors]:
            for x, y in ring.coords:
                see(x, y)
    for x, y in zip(board.vias.x, board.vias.y):
        see(float(x), float(y))
    return worst


# --------------------------------------------------------------------------- cut-ins


def cutin_contour(shell: list[tuple[int, int]], holes: list[list[tuple[int, int]]]) -> list[tuple[int, int]]:
    """One contour for a polygon with holes: each hole is joined to the
    contour so far by a cut-in line, traversed out and back (Gerber spec,
    regions: a contour may touch itself along fully coincident cut-in
    segments). ``shell`` counter-clockwise, ``holes`` clockwise, nm.

    Holes are joined shortest bridge first; a bridge runs from a vertex of
    the contour so far (one met only once on it) to a vertex of a hole, and
    touches no other edge: it crosses no hole, no outline edge and no
    earlier bridge, and its middle lies inside the polygon.
    """
    contour = list(shell)
    remaining = [list(h) for h in holes]
    polygon = shapely.Polygon(shell, holes)
    while remaining:
        candidates = []
        counts: dict[tuple[int, int], int] = {}
        for q in contour:
            counts[q] = counts.get(q, 0) + 1
        for hi, hole in enumerate(remaining):
            for hj, hp in enumerate(hole):
                for ci, cp in enumerate(contour):
                    if counts[cp] == 1:
                        candidates.append(((cp[0] - hp[0]) ** 2 + (cp[1] - hp[1]) ** 2, hi, hj, ci))
        candidates.sort()
        edges = shapely.MultiLineString([contour + [contour[0]]] + [h + [h[0]] for h in remaining])
        for _d, hi, hj, ci in candidates:
            cp, hp = contour[ci], remaining[hi][hj]
            bridge = shapely.LineString([cp, hp])
            touch = shapely.intersection(bridge, edges)
            if not shapely.difference(touch, shapely.MultiPoint([cp, hp])).is_empty:
                continue
            if not polygon.contains(shapely.Point((cp[0] + hp[0]) / 2, (cp[1] + hp[1]) / 2)):
                continue
            hole = remaining.pop(hi)
            loop = hole[hj:] + hole[:hj]
            contour = contour[:ci + 1] + loop + [hp] + contour[ci:]
            break
        else:  # pragma: no cover - a valid polygon always has a bridge
            raise FabWriteError("no cut-in line found for a hole")
    return contour


# --------------------------------------------------------------------------- step and repeat


def find_grids(points: list[tuple[int, int]]) -> tuple[list[tuple[int, int, int, int, int, int]], list[int]]:
    """Rectangular grids of at least 2 x 2 among ``points`` (nm).

    Greedy, lowest row first: a point with a nearest right neighbour at
    ``dx`` and a nearest upper neighbour at ``dy`` starts a grid of
    ``nx`` points along its row (as far as points continue at ``dx``) by
    ``ny`` rows (as far as whole rows of ``nx`` continue at ``dy``),
    ``nx`` chosen for the most points. Returns the grids as (x0, y0, nx,
    ny, dx, dy) and the indices of the points in no grid, in input order
    (a point given twice takes part in a grid once; its repeat stays
    single).
    """
    first: dict[tuple[int, int], int] = {}
    for i, q in enumerate(points):
        first.setdefault(q, i)
    left = set(first)
    grids = []
    for q in sorted(first, key=lambda t: (t[1], t[0])):
        if q not in left:
            continue
        x0, y0 = q
        right = [t[0] for t in left if t[1] == y0 and t[0] > x0]
        up = [t[1] for t in left if t[0] == x0 and t[1] > y0]
        if not right or not up:
            continue
        dx, dy = min(right) - x0, min(up) - y0
        row = 1
        while (x0 + row * dx, y0) in left:
            row += 1
        best = (0, 0, 0)  # (count, nx, ny): the largest grid, the widest of equals
        for nx in range(row, 1, -1):
            ny = 1
            while all((x0 + i * dx, y0 + ny * dy) in left for i in range(nx)):
                ny += 1
            best = max(best, (nx * ny, nx, ny))
        _count, nx, ny = best
        if nx >= 2 and ny >= 2:
            grids.append((x0, y0, nx, ny, dx, dy))
            left -= {(x0 + i * dx, y0 + j * dy) for i in range(nx) for j in range(ny)}
    singles = [i for i, q in enumerate(points) if q in left or first[q] != i]
    return grids, singles


# --------------------------------------------------------------------------- Gerber


class GerberText:
    """A Gerber X2 file being written: tracks the modal state (aperture,
    interpolation, polarity, attribute dictionary) so that each statement
    is written only when something changes."""

    def __init__(self, net_attributes: bool) -> None:
        self.lines: list[str] = []
        self.net_attributes = net_attributes
        self.net: str | None = None          # current TO.N value
        self.function: str | None = None     # TA.AperFunction in the dictionary
        self.aperture: int | None = None
        self.mode: str | None = None
        self.dark = True

    def add(self, line: str) -> None:
        self.lines.append(line)

    def header(self, board_name: str, what: str, file_function: str, polarity: str, date: str) -> None:
        self.add("G04 couplint fixture writer: invented test data, not a real product*")
        self.add(f"G04 board {comment_text(board_name)}, {comment_text(what)}*")
        self.add(f"%TF.GenerationSoftware,{','.join(gerber_string(f) for f in GENERATOR)}*%")
        self.add(f"%TF.CreationDate,{date}*%")
        self.add(f"%TF.FileFunction,{file_function}*%")
        self.add(f"%TF.FilePolarity,{polarity}*%")
        self.add("%FSLAX46Y46*%")
        self.add("%MOMM*%")

    def define(self, apertures: list[tuple[int, float, str]]) -> None:
        """``(number, diameter, function)`` circular apertures."""
        for number, diameter, function in apertures:
            self.set_function(function)
            self.add(f"%ADD{number}C,{fmt_mm(diameter)}*%")
        self.set_function(None)
        self.add("G75*")

    def set_function(self, function: str | None) -> None:
        if function == self.function:
            return
        if function is None:
            self.add("%TD.AperFunction*%")
        else:
            self.add(f"%TA.AperFunction,{function}*%")
        self.function = function

    def set_net(self, net: str | None) -> None:
        if not self.net_attributes or net == self.net:
            return
        if net is None:
            self.add("%TD*%")       # clears the whole dictionary, TA.AperFunction too
            self.function = None
        else:
            self.add(f"%TO.N,{gerber_string(net)}*%")
        self.net = net

    def set_aperture(self, number: int) -> None:
        if number != self.aperture:
            self.add(f"D{number}*")
            self.aperture = number

    def set_mode(self, mode: str) -> None:
        if mode != self.mode:
            self.add(f"{mode}*")
            self.mode = mode

    def set_dark(self, dark: bool) -> None:
        if dark != self.dark:
            self.add("%LPD*%" if dark else "%LPC*%")
            self.dark = dark

    @staticmethod
    def xy(q: tuple[int, int]) -> str:
        return f"X{q[0]}Y{q[1]}"

    def stroke(self, s: Stroke, aperture: int) -> None:
        self.set_aperture(aperture)
        self.add(f"{self.xy(s.points[0])}D02*")
        if s.centre is None:
            self.set_mode("G01")
            for q in s.points[1:]:
                self.add(f"{self.xy(q)}D01*")
        else:
            self.set_mode("G03" if s.ccw else "G02")
            (x0, y0), (cx, cy) = s.points[0], s.centre
            self.add(f"{self.xy(s.points[1])}I{cx - x0}J{cy - y0}D01*")

    def contour(self, ring: list[tuple[int, int]], dark: bool, function: str | None) -> None:
        self.set_dark(dark)
        self.set_function(function)
        self.add("G36*")
        self.set_mode("G01")
        self.add(f"{self.xy(ring[0])}D02*")
        for q in ring[1:]:
            self.add(f"{self.xy(q)}D01*")
        self.add(f"{self.xy(ring[0])}D01*")
        self.add("G37*")

    def text(self) -> str:
        return "\n".join(self.lines + ["M02*"]) + "\n"


@dataclass
class Package:
    """What one call writes, file by file (name -> text)."""

    files: dict[str, str] = field(default_factory=dict)
    attributes: list[dict[str, str]] = field(default_factory=list)


class FabWriter:
    """Builds every file of the package for one board and one set of options."""

    def __init__(self, board: Board, *, holes: str = "clear", sr: bool = False,
                 negative_planes: bool = False, net_attributes: bool = True, ipc356: bool = False,
                 er_as_string: bool = False, name: str | None = None,
                 creation_date: str = CREATION_DATE, roles: bool = True) -> None:
        if holes not in ("clear", "cutin"):
            raise FabWriteError(f"holes must be 'clear' or 'cutin', got {holes!r}")
        self.board = board
        self.holes = holes
        self.sr = sr
        self.negative_planes = negative_planes
        self.net_attributes = net_attributes
        self.ipc356 = ipc356
        self.er_as_string = er_as_string
        self.roles = roles
        self.stem = safe_file_stem(name if name is not None else board.name)
        self.date = creation_date
        self.layers = board.stackup.layers
        self.n = len(self.layers)
        self.strokes = strokes_of(board)
        self.package = Package()

    # ---- names

    def net_name(self, index: int) -> str | None:
        return None if index == NO_NET else self.board.nets[index].name

    def position(self, i: int) -> str:
        if i == 0:
            return "Top"
        return "Bot" if i == self.n - 1 else "Inr"

    def copper_function(self, i: int) -> str:
        """``Copper,L<n>,Top|Inr|Bot[,type]``: the type field only with ``roles``."""
        function = f"Copper,L{i + 1},{self.position(i)}"
        return f"{function},{ROLE_TYPES[self.layers[i].role]}" if self.roles else function

    def is_negative(self, i: int) -> bool:
        return self.negative_planes and self.layers[i].role == "plane"

    # ---- the whole package

    def build(self) -> Package:
        for i in range(self.n):
            if self.is_negative(i):
                self.negative_layer(i)
            else:
                self.copper_layer(i)
        if self.board.outline is not None:
            self.profile()
        self.drills()
        if self.ipc356:
            self.package.files[f"{self.stem}.ipc"] = self.netlist()
        self.package.files[f"{self.stem}.gbrjob"] = self.job()
        return self.package

    def add_gerber(self, name: str, function: str, polarity: str, text: str) -> None:
        self.package.files[name] = text
        self.package.attributes.append({"Path": name, "FileFunction": function, "FilePolarity": polarity})

    # ---- copper layers

    def vias_on(self, i: int) -> np.ndarray:
        v = self.board.vias
        return np.flatnonzero((v.first_layer <= i) & (v.last_layer >= i))

    def apertures(self, widths: Iterable[float], pads: Iterable[float]) -> tuple[dict, dict, list]:
        table: list[tuple[int, float, str]] = []
        by_width: dict[float, int] = {}
        by_pad: dict[float, int] = {}
        for w in sorted(set(widths)):
            by_width[w] = 10 + len(table)
            table.append((by_width[w], w, "Conductor"))
        for d in sorted(set(pads)):
            by_pad[d] = 10 + len(table)
            table.append((by_pad[d], d, "ViaPad"))
        return by_width, by_pad, table

    def copper_layer(self, i: int) -> None:
        layer = self.layers[i]
        strokes = [s for s in self.strokes if s.layer == i]
        vias = self.vias_on(i)
        v = self.board.vias
        by_width, by_pad, table = self.apertures((s.width for s in strokes), (float(v.pad[k]) for k in vias))
        g = GerberText(self.net_attributes)
        function = self.copper_function(i)
        what = f"copper layer {layer.name} ({layer.role})" if self.roles else f"copper layer {layer.name}"
        g.header(self.board.name, what, function, "Positive", self.date)
        g.define(table)

        # regions with their holes first, so a clear-polarity hole removes
        # only its own region's copper (nothing else is drawn yet)
        drawn = shapely.Polygon()
        regions = [r for r in self.board.regions if r.layer == i]
        for r in regions:
            shell, holes = rings_nm(r.polygon)
            g.set_net(self.net_name(r.net))
            hole_area = shapely.union_all([shapely.Polygon(h) for h in holes]) if holes else None
            if holes and self.holes == "clear" and not shapely.intersection(hole_area, drawn).area > 0:
                g.contour(shell, True, "Conductor")
                for h in holes:
                    g.contour(h, False, "Conductor")
                g.set_dark(True)
            else:
                if holes and self.holes == "clear":
                    g.add(f"G04 {comment_text(r.source)}: a hole overlaps earlier copper, written as cut-ins*")
                g.contour(cutin_contour(shell, holes) if holes else shell, True, "Conductor")
            drawn = shapely.union(drawn, shapely.Polygon(shell))

        for s in strokes:
            g.set_net(self.net_name(s.net))
            g.stroke(s, by_width[s.width])

        self.via_pads(g, vias, by_pad)
        self.add_gerber(f"{self.stem}-L{i + 1}.gbr", function, "Positive", g.text())

    def via_pads(self, g: GerberText, vias: np.ndarray, by_pad: dict) -> None:
        v = self.board.vias
        at = [(to_nm(v.x[k]), to_nm(v.y[k])) for k in vias]
        groups: dict[tuple, list[int]] = {}
        for j, k in enumerate(vias):
            key = (float(v.pad[k]), float(v.drill[k]), int(v.net[k]), int(v.first_layer[k]), int(v.last_layer[k]))
            groups.setdefault(key, []).append(j)
        blocks: list[tuple[int, tuple]] = []    # (first index in file order, what)
        for key, members in groups.items():
            if self.sr:
                grids, singles = find_grids([at[j] for j in members])
            else:
                grids, singles = [], list(range(len(members)))
            for grid in grids:
                first = min(j for j in members if at[j] == (grid[0], grid[1]))
                blocks.append((first, ("grid", key, grid)))
            for m in singles:
                blocks.append((members[m], ("flash", key, at[members[m]])))
        g.set_dark(True)
        for _first, (kind, key, what) in sorted(blocks, key=lambda b: b[0]):
            pad, _drill, net, _a, _b = key
            g.set_net(self.net_name(net))
            g.set_aperture(by_pad[pad])
            if kind == "grid":
                x0, y0, nx, ny, dx, dy = what
                g.add(f"%SRX{nx}Y{ny}I{fmt_nm_decimal(dx)}J{fmt_nm_decimal(dy)}*%")
                g.add(f"{g.xy((x0, y0))}D03*")
                g.add("%SR*%")
            else:
                g.add(f"{g.xy(what)}D03*")

    # ---- negative planes

    def negative_layer(self, i: int) -> None:
        layer = self.layers[i]
        where = f"negative plane {layer.name}"
        if self.board.outline is None:
            raise FabWriteError(f"{where}: the board has no outline to invert against")
        if any(s.layer == i for s in self.strokes):
            raise FabWriteError(f"{where}: the layer has tracks or arcs; only a single plane region can be inverted")
        regions = [r for r in self.board.regions if r.layer == i]
        if len(regions) != 1:
            raise FabWriteError(f"{where}: the layer needs exactly one region to be written negative, "
                                f"it has {len(regions)}")
        plane = regions[0]
        outline = shapely.geometry.polygon.orient(self.board.outline, 1.0)
        if not shapely.covers(outline, plane.polygon):
            raise FabWriteError(f"{where}: the plane region reaches outside the board outline")
        self.check_plane_net(i, plane)

        outer, _ = rings_nm(outline)
        shell, holes = rings_nm(plane.polygon)
        function = self.copper_function(i)
        g = GerberText(net_attributes=False)
        what = "plane, negative" if self.roles else "negative"
        g.header(self.board.name, f"copper layer {layer.name} ({what}: dark = no copper)",
                 function, "Negative", self.date)
        g.add("G75*")
        if shapely.Polygon(shell).symmetric_difference(shapely.Polygon(outer)).area > 0:
            # the margin between the board edge and the plane's edge: no copper
            if self.holes == "clear":
                g.contour(outer, True, None)
                g.contour(shell, False, None)
                g.set_dark(True)
            else:
                g.contour(cutin_contour(outer, [list(reversed(shell))]), True, None)
        for h in holes:
            g.contour(h, True, None)
        self.add_gerber(f"{self.stem}-L{i + 1}.gbr", function, "Negative", g.text())

    def check_plane_net(self, i: int, plane) -> None:
        """The plane's net must be recoverable from the vias through it."""
        v = self.board.vias
        through = self.vias_on(i)
        inside = [k for k in through if plane.polygon.intersects(shapely.Point(v.x[k], v.y[k]))]
        own = [k for k in inside if v.net[k] == plane.net]
        other = [k for k in inside if v.net[k] != plane.net]
        name = self.layers[i].name
        if plane.net == NO_NET:
            raise FabWriteError(f"negative plane {name}: the plane has no net")
        if not own:
            raise FabWriteError(f"negative plane {name}: no via of {self.board.nets[plane.net].name} passes "
                                "through the plane, so a reader could not tell its net")
        if other:
            k = other[0]
            raise FabWriteError(f"negative plane {name}: the via at ({v.x[k]:g}, {v.y[k]:g}) of another net "
                                "passes through the plane copper (give the plane a hole around it)")

    # ---- profile

    def profile(self) -> None:
        outer, _ = rings_nm(shapely.geometry.polygon.orient(self.board.outline, 1.0))
        g = GerberText(net_attributes=False)
        g.header(self.board.name, "board profile", "Profile,NP", "Positive", self.date)
        g.define([(10, 0.1, "Profile")])
        g.set_aperture(10)
        g.add(f"{g.xy(outer[0])}D02*")
        g.set_mode("G01")
        for q in outer[1:] + [outer[0]]:
            g.add(f"{g.xy(q)}D01*")
        self.add_gerber(f"{self.stem}-Profile.gbr", "Profile,NP", "Positive", g.text())

    # ---- drills

    def span_kind(self, a: int, b: int) -> str:
        if a == 0 and b == self.n - 1:
            return "PTH"
        return "Blind" if a == 0 or b == self.n - 1 else "Buried"

    def drills(self) -> None:
        v = self.board.vias
        spans = sorted({(int(a), int(b)) for a, b in zip(v.first_layer, v.last_layer)})
        for a, b in spans:
            rows = np.flatnonzero((v.first_layer == a) & (v.last_layer == b))
            kind = self.span_kind(a, b)
            function = f"Plated,{a + 1},{b + 1},{kind}"
            lines = [
                "M48",
                "; DRILL file: couplint fixture writer, invented test data, not a real product",
                f"; board {self.board.name}, vias from {self.layers[a].name} to {self.layers[b].name}",
                f"; #@! TF.GenerationSoftware,{','.join(GENERATOR)}",
                f"; #@! TF.CreationDate,{self.date}",
                f"; #@! TF.FileFunction,{function}",
                "; #@! TF.FilePolarity,Positive",
                "FMAT,2",
                "METRIC",
            ]
            tools = {d: t + 1 for t, d in enumerate(sorted({float(v.drill[k]) for k in rows}))}
            for d, t in tools.items():
                lines.append(f"; #@! TA.AperFunction,Plated,{kind},ViaDrill")
                lines.append(f"T{t:02d}C{drill_text(d)}")
            lines += ["%", "G05"]
            for d, t in tools.items():
                lines.append(f"T{t:02d}")
                for k in rows:
                    if float(v.drill[k]) == d:
                        lines.append(f"X{fmt_nm_decimal(to_nm(v.x[k]))}Y{fmt_nm_decimal(to_nm(v.y[k]))}")
            lines.append("M30")
            name = f"{self.stem}-PTH-{a + 1}-{b + 1}.drl"
            self.package.files[name] = "\n".join(lines) + "\n"
            self.package.attributes.append({"Path": name, "FileFunction": function, "FilePolarity": "Positive"})

    # ---- IPC-D-356A

    def netlist(self) -> str:
        return ipc356_text(self.board, self.strokes, self.date)

    # ---- job file

    def job(self) -> str:
        board = self.board
        st = board.stackup
        if board.outline is not None:
            x0, y0, x1, y1 = board.outline.bounds
        else:
            x0, y0, x1, y1 = board.bounds()
        thickness = sum(c.thickness_mm for c in st.layers) + sum(d.thickness_mm for d in st.dielectrics)

        def er(value: float) -> Any:
            return fmt_number(value).replace(".", ",") if self.er_as_string else round(value, 9)

        def insulator(kind: str, d) -> dict:
            entry: dict[str, Any] = {"Type": kind}
            if d.name is not None:
                entry["Name"] = d.name
            if kind == "Dielectric":
                entry["Material"] = PLACEHOLDER_MATERIAL
            entry["Thickness"] = round(d.thickness_mm, 9)
            entry["DielectricConstant"] = er(d.er)
            if d.loss_tangent is not None:
                entry["LossTangent"] = round(d.loss_tangent, 9)
            return entry

        stack: list[dict] = []
        if st.mask_top is not None:
            stack.append(insulator("SolderMask", st.mask_top))
        for i, c in enumerate(st.layers):
            stack.append({"Type": "Copper", "Name": c.name, "Thickness": round(c.thickness_mm, 9)})
            if i < len(st.dielectrics):
                stack.append(insulator("Dielectric", st.dielectrics[i]))
        if st.mask_bottom is not None:
            stack.append(insulator("SolderMask", st.mask_bottom))
        job = {
            "Header": {
                "GenerationSoftware": {"Vendor": GENERATOR[0], "Application": GENERATOR[1], "Version": GENERATOR[2]},
                "CreationDate": self.date,
            },
            "GeneralSpecs": {
                "ProjectId": {"Name": board.name},
                "Size": {"X": round(x1 - x0, 9), "Y": round(y1 - y0, 9)},
                "LayerNumber": self.n,
                "BoardThickness": round(thickness, 9),
            },
            "FilesAttributes": self.package.attributes,
            "MaterialStackup": stack,
        }
        return json.dumps(job, indent=2, ensure_ascii=False) + "\n"


def fmt_number(value: float) -> str:
    """A number as Python writes it, to 9 places (``4.2``, ``4.0``)."""
    return repr(round(float(value), 9))


def drill_text(diameter: float) -> str:
    """A tool diameter in mm: three places (``0.200``), more if needed."""
    text = f"{diameter:.3f}"
    if abs(float(text) - diameter) > 1e-12:
        text = fmt_mm(diameter)
    return text


# --------------------------------------------------------------------------- IPC-D-356A


def ipc_coordinate(axis: str, mm: float) -> str:
    """``X+012500``: sign and six digits of micrometres (``UNITS CUST 1``)."""
    um = int(round(mm * 1000))
    if abs(um) > 999_999:
        raise FabWriteError(f"coordinate {mm:g} mm does not fit IPC-D-356A's 6-digit field")
    return f"{axis}{'+' if um >= 0 else '-'}{abs(um):06d}"


def ipc_size(key: str, mm: float) -> str:
    """``D0300`` / ``X0600``: four digits of micrometres."""
    um = int(round(mm * 1000))
    if not 0 <= um <= 9999:
        raise FabWriteError(f"size {mm:g} mm does not fit IPC-D-356A's 4-digit field")
    return f"{key}{um:04d}"


def ipc_record(kind: str, net: str, refdes: str, pin: str, x: float, y: float, access: int,
               size: float, drill: float | None) -> str:
    """One 317 (through hole) or 327 (surface) test record in the fixed
    columns of IPC-D-356A (from memory; the same layout gerbonara 1.5's
    parser reads): 1-3 record type, 4-17 net name, 21-26 reference
    designator, 27 ``-``, 28-31 pin, 32 mid-point flag, 33-37 ``D`` and
    hole diameter, 38 ``P`` plated, 39-41 access ``Ann``, 42-49 X, 50-57 Y,
    58-62 feature X size, 63-67 feature Y size, 68-71 rotation, 73-74
    solder mask ``S0``."""
    hole = ipc_size("D", drill) + "P" if drill is not None else " " * 6
    line = (f"{kind}{net:<14.14}   {refdes:<6.6}-{pin:<4.4} {hole}A{access:02d}"
            f"{ipc_coordinate('X', x)}{ipc_coordinate('Y', y)}{ipc_size('X', size)}Y0000R000 S0")
    assert len(line) == 74, line
    return line


def ipc356_text(board: Board, strokes: list[Stroke], date: str) -> str:
    """The IPC-D-356A netlist: a 317 record at every via (access ``A00``
    for a through via, else the layer number it is reached from: 01 for a
    blind via from the top, n from the bottom, its upper layer for a buried
    one), and a 327 record at the first point of every track on the top
    (``A01``) or bottom (``A<n>``) layer, and inside every outer-layer
    region with a net. Net names longer than 14 characters are written as
    ``NNAME<k>`` aliases declared by ``P  NNAME<k>`` parameter records.
    ``P  UNITS CUST 1``: millimetres, coordinates and sizes in 0.001 mm
    (micrometres), angles in degrees (from memory; gerbonara 1.5 reads it
    the same way)."""
    n = len(board.stackup.layers)
    used: list[int] = []
    records: list[tuple[str, int, str, str, float, float, int, float, float | None]] = []
    v = board.vias
    for k in range(len(v)):
        a, b = int(v.first_layer[k]), int(v.last_layer[k])
        access = 0 if (a == 0 and b == n - 1) else (1 if a == 0 else (n if b == n - 1 else a + 1))
        records.append(("317", int(v.net[k]), "VIA", "", float(v.x[k]), float(v.y[k]), access,
                        float(v.pad[k]), float(v.drill[k])))
    point = 0
    for s in strokes:
        if s.layer in (0, n - 1) and s.net != NO_NET:
            point += 1
            x, y = (c / NM_PER_MM for c in s.points[0])
            records.append(("327", s.net, f"TP{point}", "1", x, y, 1 if s.layer == 0 else n, s.width, None))
    for r in board.regions:
        if r.layer in (0, n - 1) and r.net != NO_NET:
            q = r.polygon.representative_point()
            x, y = round(q.x, 3), round(q.y, 3)
            if r.polygon.contains(shapely.Point(x, y)):
                point += 1
                records.append(("327", r.net, f"TP{point}", "1", x, y, 1 if r.layer == 0 else n, 0.1, None))
    for rec in records:
        if rec[1] != NO_NET and rec[1] not in used:
            used.append(rec[1])
    alias: dict[int, str] = {}
    for net in sorted(used):  # in the order of the board's nets
        if len(board.nets[net].name) > 14:
            alias[net] = f"NNAME{len(alias) + 1}"
    lines = [
        "C  IPC-D-356A netlist: couplint fixture writer, invented test data, not a real product",
        f"C  board {board.name}, written {date}",
        f"P  JOB   {board.name}",
        "P  UNITS CUST 1",
    ]
    for net, name in alias.items():
        lines.append(f"P  {name:<10}{board.nets[net].name}")
    for kind, net, refdes, pin, x, y, access, size, drill in records:
        label = "N/C" if net == NO_NET else alias.get(net, board.nets[net].name)
        lines.append(ipc_record(kind, label, refdes, pin, x, y, access, size, drill))
    lines.append("999")
    return "\n".join(lines) + "\n"


def nets_without_test_points(board: Board) -> list[str]:
    """Nets with copper that get no IPC-D-356A record (no via and no
    outer-layer track or region): a reader that recovers nets from the
    netlist cannot name them."""
    n = len(board.stackup.layers)
    named = {int(x) for x in board.vias.net} | \
            {int(board.pieces.net[i]) for i in range(len(board.pieces)) if board.pieces.layer[i] in (0, n - 1)} | \
            {r.net for r in board.regions if r.layer in (0, n - 1)}
    copper = {int(x) for x in board.pieces.net} | {r.net for r in board.regions}
    return [board.nets[k].name for k in sorted(copper - named - {NO_NET})]


# --------------------------------------------------------------------------- entry points


def write_fab(board_or_path: Board | str | os.PathLike[str], outdir: str | os.PathLike[str],
              **options: Any) -> list[Path]:
    """Write the fabrication package of a board into ``outdir`` (created
    if missing); returns the written files in order (copper layers, profile,
    drills, netlist, job file). ``options``: see the module docstring."""
    board = board_or_path if isinstance(board_or_path, Board) else load_board(board_or_path)
    package = FabWriter(board, **options).build()
    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name, text in package.files.items():
        path = out / name
        path.write_bytes(text.encode("utf-8"))
        written.append(path)
    return written


def write_fixtures(root: Path = ROOT, into: Path | None = None) -> dict[str, list[Path]]:
    """(Re)write every committed package of :data:`FIXTURE_SETS` under
    ``into`` (default ``fixtures/fab``), removing stale written files."""
    base = into if into is not None else root / "fixtures" / "fab"
    out = {}
    for folder, (board, options) in FIXTURE_SETS.items():
        target = base / folder
        if target.is_dir():
            for old in target.iterdir():
                if old.suffix in WRITTEN_SUFFIXES:
                    old.unlink()
        out[folder] = write_fab(root / board, target, **options)
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="write_fab.py",
        description="Write a couplint board (neutral JSON) as a fabrication package for test fixtures: "
                    "Gerber X2 copper layers, Excellon drills, a Gerber job file, optionally IPC-D-356A.")
    parser.add_argument("board", nargs="?", help="board file (neutral JSON)")
    parser.add_argument("outdir", nargs="?", help="folder for the package (created if missing)")
    parser.add_argument("--fixtures", action="store_true",
                        help="regenerate the committed packages under fixtures/fab instead")
    parser.add_argument("--holes", choices=("clear", "cutin"), default="clear",
                        help="region holes in clear polarity after their region (default) or as cut-ins")
    parser.add_argument("--sr", action="store_true", help="via grids as step-and-repeat blocks")
    parser.add_argument("--negative-planes", action="store_true",
                        help="plane layers as negative images (dark = no copper)")
    parser.add_argument("--no-net-attributes", action="store_true", help="write no TO.N net attributes")
    parser.add_argument("--no-roles", action="store_true",
                        help="declare no layer roles: TF.FileFunction copper attributes without the "
                             "Plane/Signal/Mixed type field")
    parser.add_argument("--ipc356", action="store_true", help="also write an IPC-D-356A netlist")
    parser.add_argument("--er-as-string", action="store_true",
                        help='job file dielectric constants as strings with a decimal comma ("4,2")')
    parser.add_argument("--name", help="base of the file names (default: the board's name)")
    args = parser.parse_args(argv)
    if args.fixtures:
        if args.board or args.outdir:
            parser.error("--fixtures takes no board or folder")
        for folder, files in write_fixtures().items():
            print(f"fixtures/fab/{folder}: {len(files)} files")
        return 0
    if not args.board or not args.outdir:
        parser.error("give BOARD.json and OUTDIR (or --fixtures)")
    board = load_board(args.board)
    try:
        files = write_fab(board, args.outdir, holes=args.holes, sr=args.sr,
                          negative_planes=args.negative_planes, net_attributes=not args.no_net_attributes,
                          ipc356=args.ipc356, er_as_string=args.er_as_string, name=args.name,
                          roles=not args.no_roles)
    except FabWriteError as exc:
        print(f"{args.board}: {exc}", file=sys.stderr)
        return 2
    for path in files:
        print(path)
    moved = rounding_mm(board)
    if moved > 1e-12:
        print(f"note: rounding to the 1 nm grid moves coordinates by up to {moved:.3g} mm", file=sys.stderr)
    if args.ipc356 and args.no_net_attributes:
        lost = nets_without_test_points(board)
        if lost:
            print(f"note: no netlist record names {', '.join(lost)} (no via, no outer-layer copper)",
                  file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
