"""Physical sanity bounds on every stackup and geometry number.

A number outside these is a mistake (wrong units, a corrupted export, a
typing slip), not a board: it is refused with the key and the bound before
any field solve sees it. The bounds are deliberately wide: they separate
"a board" from "not a board", not good design from bad.

| quantity              | low      | high    | why the bound                                        |
|-----------------------|----------|---------|------------------------------------------------------|
| copper thickness      | 1 um     | 1 mm    | thinner is no foil or plating; 1 mm is ~28 oz copper |
| dielectric thickness  | 1 um     | 25 mm   | thin-film capacitance laminates are ~8 um; 25 mm is  |
|                       |          |         | thicker than any PCB                                 |
| solder mask thickness | 1 um     | 1 mm    | masks are ~10-50 um                                  |
| relative permittivity | 1        | 100     | 1 is vacuum; laminates are ~2-12, filled ceramics    |
|                       |          |         | up to a few tens                                     |
| loss tangent          | 0        | 1       | PCB materials are ~0.001-0.03                        |
| trace width           | 1 um     | 1 m     | below 1 um is no PCB feature; the upper bound is the |
|                       |          |         | 10 m coordinate bound's order                        |
| drill, via pad        | 1 um     | 100 mm  |                                                      |

Typical values above are common practice (from memory), not from a
standard; the bounds themselves are ours.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .describe import shorten
from .errors import BoardError


@dataclass(frozen=True)
class Bound:
    """Closed interval ``[low, high]`` in ``unit`` (mm for lengths)."""

    low: float
    high: float
    unit: str

    def problem(self, value: float, what: str = "") -> str | None:
        """A sentence saying how ``value`` breaks the bound, or None;
        ``what`` names the quantity when the place does not."""
        if math.isfinite(value) and self.low <= value <= self.high:
            return None
        side = "below" if value < self.low else "above"
        return (f"{what + ' ' if what else ''}{_show(value, self.unit)} is {side} the sanity bound "
                f"({_show(self.low, self.unit)} to {_show(self.high, self.unit)}): wrong units, or a damaged file?")


COPPER_THICKNESS = Bound(0.001, 1.0, "mm")
DIELECTRIC_THICKNESS = Bound(0.001, 25.0, "mm")
MASK_THICKNESS = Bound(0.001, 1.0, "mm")
PERMITTIVITY = Bound(1.0, 100.0, "")
LOSS_TANGENT = Bound(0.0, 1.0, "")
TRACE_WIDTH = Bound(0.001, 1000.0, "mm")
HOLE = Bound(0.001, 100.0, "mm")


def _show(value: float, unit: str) -> str:
    text = f"{value:.6g}"
    if unit == "mm" and math.isfinite(value) and 0 < abs(value) < 0.01:
        text = f"{value * 1000:.6g} um"
    elif unit:
        text = f"{text} {unit}"
    return text


def check_stackup(stackup, file: str) -> None:
    """Raise :class:`BoardError` at the first stackup number outside its
    bound; the place names the layer (``stackup: dielectric 'core' (L2-L3)``)."""
    for layer in stackup.layers:
        _raise(file, f"stackup: copper layer {_name(layer.name)}",
               COPPER_THICKNESS.problem(layer.thickness_mm, "thickness"))
    names = [layer.name for layer in stackup.layers]
    for i, d in enumerate(stackup.dielectrics):
        where = f"stackup: dielectric {_name(d.name) + ' ' if d.name else ''}({_name(names[i])}-{_name(names[i + 1])})"
        _check_dielectric(file, where, d, DIELECTRIC_THICKNESS)
    for side, mask in (("top", stackup.mask_top), ("bottom", stackup.mask_bottom)):
        if mask is not None:
            _check_dielectric(file, f"stackup: {side} solder mask", mask, MASK_THICKNESS)


def _check_dielectric(file: str, where: str, d, thickness: Bound) -> None:
    _raise(file, where, thickness.problem(d.thickness_mm, "thickness"))
    _raise(file, where, PERMITTIVITY.problem(d.er, "er"))
    if d.loss_tangent is not None:
        _raise(file, where, LOSS_TANGENT.problem(d.loss_tangent, "loss tangent"))


def check_geometry(board) -> None:
    """Raise :class:`BoardError` at the first trace width, drill or via pad
    outside its bound, naming where the copper came from
    (``Board.sources``: a file and line, or a JSON path)."""
    width = board.pieces.width
    if len(width):
        bad = np.flatnonzero(~((width >= TRACE_WIDTH.low) & (width <= TRACE_WIDTH.high)))
        if len(bad):
            k = int(bad[0])
            source = int(board.pieces.source[k])
            where = board.sources[source] if 0 <= source < len(board.sources) else f"piece {k}"
            file, sep, place = where.rpartition(": ")  # "L1.gbr: line 31" from a package, "tracks[3]" from JSON
            if not sep:
                file, place = board.path, where
            _raise(file, place, TRACE_WIDTH.problem(float(width[k]), "trace width"))
    for column, what in ((board.vias.drill, "drill"), (board.vias.pad, "pad")):
        if len(column):
            bad = np.flatnonzero(~((column >= HOLE.low) & (column <= HOLE.high)))
            if len(bad):
                k = int(bad[0])
                x, y = float(board.vias.x[k]), float(board.vias.y[k])
                _raise(board.path, None, HOLE.problem(float(column[k]), f"via at ({x:.4f}, {y:.4f}) mm: {what}"))


def _name(text: str) -> str:
    return repr(shorten(str(text), 40))


def _raise(file: str, place: str | None, problem: str | None) -> None:
    if problem is not None:
        raise BoardError(file, place, problem)
