"""Write a couplint board as one IPC-2581 revision C file, for test fixtures only.

Turns a board in the neutral JSON format (``docs/board-format.md``), read
with :func:`checker.readers.load_board`, into the XML a layout program
would hand a board maker as IPC-2581 revision C ("Generic Requirements for
Printed Board Assembly Products Manufacturing Description Data and
Transfer Methodology", IPC; element names and structure from memory, the
file is not validated against the standard's schema), so that
``checker/readers/ipc2581.py`` can be tested against the Gerber door
(``scripts/write_fab.py``) and the JSON door on the same copper.

What is written (the elements the reader reads, plus the ``Content``,
``LogisticHeader`` and ``HistoryRecord`` a file carries):

* ``Content``: ``FunctionMode mode="FABRICATION"``, ``StepRef``,
  ``LayerRef`` per layer, and the dictionaries: ``DictionaryStandard``
  (one ``Circle`` per via pad diameter) and ``DictionaryLineDesc`` (one
  ``LineDesc lineEnd="ROUND"`` per track width), in the file's units.
* ``Ecad/CadHeader units=...`` with one ``Spec`` per dielectric and mask:
  ``Dielectric type="DIELECTRIC_CONSTANT"`` and, where known,
  ``type="LOSS_TANGENT"``, each with a ``Property value``.
* ``CadData``: a ``Layer`` per copper layer (``layerFunction`` ``SIGNAL``,
  ``PLANE`` or ``MIXED`` from the role), dielectric (``DIELPREG`` when the
  JSON name says prepreg, else ``DIELCORE``: the neutral format has no
  type, so this is a placeholder), mask (``SOLDERMASK``) and drill span
  (``DRILL`` with ``Span fromLayer toLayer``); one ``Stackup`` with one
  ``StackupGroup`` of ``StackupLayer`` (``layerOrGroupRef``, ``thickness``,
  ``sequence``, ``SpecRef``) top to bottom.
* ``Step``: ``Profile`` (the outline's ``Polygon``), and a
  ``LayerFeature`` per copper layer holding, in the Gerber writer's order,
  regions (``Contour``: ``Polygon`` and one ``Cutout`` per hole), tracks
  (``Line`` for one piece, else ``Polyline``; one ``Set`` and one stroke per
  track, as write_fab writes one D02/D01 stroke), arcs (``Arc`` with the
  centre of the circle through the Board's chord points, the same centre
  write_fab writes as I/J, so a reader that chords it with
  :func:`checker.readers.arcs.arc_polyline` gets the Board's pieces back)
  and via pads (``Pad`` with ``Location`` and a ``StandardPrimitiveRef``
  to the pad's circle, in a ``Set padUsage="VIA"``); and a
  ``LayerFeature`` per drill span with one ``Hole`` (``platingStatus="VIA"``)
  per via. Every ``Set`` carries its copper's net as ``net``; copper of no
  net (JSON ``null``) gets no ``net`` attribute, as write_fab writes no
  ``TO.N`` for it.

Two options write what an exporter may write instead, so the reader can be
tested on it (the committed fixtures use neither):

* ``numbered_specs``: each ``Spec`` is named ``<layer>_1`` while its
  ``StackupLayer/SpecRef@id`` says ``SPEC_<layer>`` (a reference that
  names no Spec exactly; a widely used open-source exporter writes its
  Specs and references so);
* ``generic_copper``: every copper ``Layer`` has ``layerFunction``
  ``CONDUCTOR`` (the generic copper function), not one by role.

Coordinates are the Gerber writer's: rounded to 1 nm, then written in the
file's ``units`` (``MILLIMETER`` exactly; ``MICRON`` exactly; ``INCH`` to
12 decimals, 2.5e-11 mm), so both writers describe the same numbers.

Usage::

    python scripts/write_ipc2581.py BOARD.json OUT.xml [--units MILLIMETER|INCH|MICRON]
        [--numbered-specs] [--generic-copper]
    python scripts/write_ipc2581.py --fixtures      # regenerate fixtures/ipc2581/*.xml

or from Python: ``write_ipc2581(board_or_path, out, units=..., ...) -> Path``,
``ipc2581_text(board, units=..., numbered_specs=..., generic_copper=...) -> str``.

The file is invented test data; nothing here imitates any layout program's
output beyond what the open standard prescribes.
"""

from __future__ import annotations

import argparse
import os
import sys
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from write_fab import (
    CREATION_DATE,
    GENERATOR,
    FabWriteError,
    Stroke,
    fmt_mm,
    fmt_nm_decimal,
    rings_nm,
    strokes_of,
    to_nm,
)

from checker.model import NO_NET, Board, Dielectric
from checker.readers import load_board

ROOT = Path(__file__).resolve().parents[1]

#: ``layerFunction`` of each stackup role.
ROLE_FUNCTIONS = {"signal": "SIGNAL", "plane": "PLANE", "mixed": "MIXED"}

#: Units the writer can use -> nm per unit.
UNITS_NM = {"MILLIMETER": 1_000_000, "MICRON": 1_000, "INCH": 25_400_000}

#: The committed fixtures: file under ``fixtures/ipc2581`` -> (board, options).
FIXTURES: dict[str, tuple[str, dict[str, Any]]] = {
    "six_layer.xml": ("fixtures/six_layer_fab.json", {}),
    "four_layer_mixed_inch.xml": ("fixtures/four_layer_mixed.json", {"units": "INCH"}),
}

#: The name of the one step.
STEP = "board"


class _Writer:
    """Builds the XML tree of one board in one unit."""

    def __init__(self, board: Board, units: str = "MILLIMETER", date: str = CREATION_DATE,
                 numbered_specs: bool = False, generic_copper: bool = False) -> None:
        if units not in UNITS_NM:
            raise FabWriteError(f"units must be one of {', '.join(UNITS_NM)}, got {units!r}")
        self.board = board
        self.units = units
        self.date = date
        self.numbered_specs = numbered_specs
        self.generic_copper = generic_copper
        self.layers = board.stackup.layers
        self.n = len(self.layers)
        self.strokes = strokes_of(board)
        v = board.vias
        self.spans = sorted({(int(a), int(b)) for a, b in zip(v.first_layer, v.last_layer)})
        self.names = self.layer_names()

    # ---- numbers

    def length_nm(self, nm: int) -> str:
        """A coordinate on the 1 nm grid in the file's units."""
        if self.units == "MILLIMETER":
            return fmt_nm_decimal(nm)
        if self.units == "MICRON":
            sign = "-" if nm < 0 else ""
            whole, frac = divmod(abs(nm), 1000)
            return f"{sign}{whole}.{(f'{frac:03d}'.rstrip('0') or '0')}"
        return _plain(nm / UNITS_NM["INCH"], 12)

    def coord(self, mm: float) -> str:
        return self.length_nm(to_nm(mm))

    def size(self, mm: float) -> str:
        """A size (width, diameter, thickness) in the file's units: as
        write_fab writes it (9 places of mm), converted."""
        if self.units == "MILLIMETER":
            return fmt_mm(mm)
        return _plain(float(fmt_mm(mm)) * 1_000_000 / UNITS_NM[self.units], 15)

    # ---- names

    def layer_names(self) -> dict[str, str]:
        """Names of every non-copper layer: masks, dielectrics, drill spans."""
        st = self.board.stackup
        out = {}
        if st.mask_top is not None:
            out["mask_top"] = st.mask_top.name or "SOLDERMASK_TOP"
        if st.mask_bottom is not None:
            out["mask_bottom"] = st.mask_bottom.name or "SOLDERMASK_BOTTOM"
        for i, d in enumerate(st.dielectrics):
            out[f"diel{i}"] = d.name or f"DIELECTRIC_{i + 1}"
        for a, b in self.spans:
            out[f"drill{a}_{b}"] = f"DRILL_{self.layers[a].name}_{self.layers[b].name}"
        every = [c.name for c in self.layers] + list(out.values())
        repeated = sorted({x for x in every if every.count(x) > 1})
        if repeated:
            raise FabWriteError(f"layer name(s) {', '.join(repeated)} used twice: IPC-2581 layer names must differ")
        return out

    def net_of(self, index: int) -> dict[str, str]:
        return {} if index == NO_NET else {"net": self.board.nets[index].name}

    # ---- the document

    def build(self) -> ET.Element:
        root = ET.Element("IPC-2581", {"revision": "C", "xmlns": "http://webstds.ipc.org/2581"})
        widths = sorted({s.width for s in self.strokes})
        pads = sorted({float(p) for p in self.board.vias.pad})
        self.content(root, widths, pads)
        self.logistics(root)
        ecad = ET.SubElement(root, "Ecad", {"name": self.board.name})
        header = ET.SubElement(ecad, "CadHeader", {"units": self.units})
        self.specs(header)
        cad = ET.SubElement(ecad, "CadData")
        self.layer_elements(cad)
        self.stackup(cad)
        self.step(cad)
        return root

    def content(self, root: ET.Element, widths: list[float], pads: list[float]) -> None:
        content = ET.SubElement(root, "Content", {"roleRef": "Owner"})
        ET.SubElement(content, "FunctionMode", {"mode": "FABRICATION"})
        ET.SubElement(content, "StepRef", {"name": STEP})
        for name in self.stack_order():
            ET.SubElement(content, "LayerRef", {"name": name})
        for a, b in self.spans:
            ET.SubElement(content, "LayerRef", {"name": self.names[f"drill{a}_{b}"]})
        std = ET.SubElement(content, "DictionaryStandard", {"units": self.units})
        for d in pads:
            entry = ET.SubElement(std, "EntryStandard", {"id": circle_id(d)})
            ET.SubElement(entry, "Circle", {"diameter": self.size(d)})
        lines = ET.SubElement(content, "DictionaryLineDesc", {"units": self.units})
        for w in widths:
            entry = ET.SubElement(lines, "EntryLineDesc", {"id": line_id(w)})
            ET.SubElement(entry, "LineDesc", {"lineEnd": "ROUND", "lineWidth": self.size(w)})

    def logistics(self, root: ET.Element) -> None:
        head = ET.SubElement(root, "LogisticHeader")
        ET.SubElement(head, "Role", {"id": "Owner", "roleFunction": "SENDER"})
        ET.SubElement(head, "Enterprise", {"id": "fixtures", "code": "NONE"})
        ET.SubElement(head, "Person", {"name": "couplint fixture writer", "enterpriseRef": "fixtures",
                                       "roleRef": "Owner"})
        history = ET.SubElement(root, "HistoryRecord", {"number": "1", "origination": self.date,
                                                        "software": GENERATOR[0], "lastChange": self.date})
        rev = ET.SubElement(history, "FileRevision", {"fileRevisionId": "1",
                                                      "comment": "invented test data, not a real product"})
        ET.SubElement(rev, "SoftwarePackage", {"name": "write_ipc2581", "revision": GENERATOR[2],
                                               "vendor": GENERATOR[0]})

    def insulators(self) -> list[tuple[str, Dielectric]]:
        st = self.board.stackup
        out = []
        if st.mask_top is not None:
            out.append((self.names["mask_top"], st.mask_top))
        out += [(self.names[f"diel{i}"], d) for i, d in enumerate(st.dielectrics)]
        if st.mask_bottom is not None:
            out.append((self.names["mask_bottom"], st.mask_bottom))
        return out

    def specs(self, header: ET.Element) -> None:
        for name, d in self.insulators():
            spec = ET.SubElement(header, "Spec", {"name": f"{name}_1" if self.numbered_specs else f"SPEC_{name}"})
            er = ET.SubElement(spec, "Dielectric", {"type": "DIELECTRIC_CONSTANT"})
            ET.SubElement(er, "Property", {"value": _plain(d.er, 9)})
            if d.loss_tangent is not None:
                tan = ET.SubElement(spec, "Dielectric", {"type": "LOSS_TANGENT"})
                ET.SubElement(tan, "Property", {"value": _plain(d.loss_tangent, 9)})

    def stack_order(self) -> list[str]:
        """Every stackup layer's name, top to bottom."""
        st = self.board.stackup
        out = [self.names["mask_top"]] if st.mask_top is not None else []
        for i, c in enumerate(self.layers):
            out.append(c.name)
            if i < len(st.dielectrics):
                out.append(self.names[f"diel{i}"])
        if st.mask_bottom is not None:
            out.append(self.names["mask_bottom"])
        return out

    def side(self, i: int) -> str:
        return "TOP" if i == 0 else "BOTTOM" if i == self.n - 1 else "INTERNAL"

    def layer_elements(self, cad: ET.Element) -> None:
        st = self.board.stackup
        if st.mask_top is not None:
            ET.SubElement(cad, "Layer", {"name": self.names["mask_top"], "layerFunction": "SOLDERMASK",
                                         "side": "TOP", "polarity": "POSITIVE"})
        for i, c in enumerate(self.layers):
            function = "CONDUCTOR" if self.generic_copper else ROLE_FUNCTIONS[c.role]
            ET.SubElement(cad, "Layer", {"name": c.name, "layerFunction": function,
                                         "side": self.side(i), "polarity": "POSITIVE"})
            if i < len(st.dielectrics):
                name = self.names[f"diel{i}"]
                function = "DIELPREG" if "preg" in name.lower() else "DIELCORE"
                ET.SubElement(cad, "Layer", {"name": name, "layerFunction": function, "side": "INTERNAL",
                                             "polarity": "POSITIVE"})
        if st.mask_bottom is not None:
            ET.SubElement(cad, "Layer", {"name": self.names["mask_bottom"], "layerFunction": "SOLDERMASK",
                                         "side": "BOTTOM", "polarity": "POSITIVE"})
        for a, b in self.spans:
            drill = ET.SubElement(cad, "Layer", {"name": self.names[f"drill{a}_{b}"], "layerFunction": "DRILL",
                                                 "side": "ALL", "polarity": "POSITIVE"})
            ET.SubElement(drill, "Span", {"fromLayer": self.layers[a].name, "toLayer": self.layers[b].name})

    def stackup(self, cad: ET.Element) -> None:
        st = self.board.stackup
        thickness = {c.name: c.thickness_mm for c in self.layers}
        thickness.update({name: d.thickness_mm for name, d in self.insulators()})
        total = sum(c.thickness_mm for c in self.layers) + sum(d.thickness_mm for d in st.dielectrics)
        stack = ET.SubElement(cad, "Stackup", {"name": "PRIMARY", "overallThickness": self.size(total),
                                               "tolPlus": "0", "tolMinus": "0", "whereMeasured": "METAL"})
        group = ET.SubElement(stack, "StackupGroup", {"name": "GROUP_PRIMARY", "thickness": self.size(total),
                                                      "tolPlus": "0", "tolMinus": "0"})
        insulators = {name for name, _ in self.insulators()}
        for k, name in enumerate(self.stack_order()):
            layer = ET.SubElement(group, "StackupLayer", {"layerOrGroupRef": name,
                                                          "thickness": self.size(thickness[name]),
                                                          "tolPlus": "0", "tolMinus": "0", "sequence": str(k + 1)})
            if name in insulators:
                ET.SubElement(layer, "SpecRef", {"id": f"SPEC_{name}"})

    # ---- the step

    def step(self, cad: ET.Element) -> None:
        step = ET.SubElement(cad, "Step", {"name": STEP})
        ET.SubElement(step, "Datum", {"x": "0.0", "y": "0.0"})
        if self.board.outline is not None:
            outer, _ = rings_nm(self.board.outline)
            self.polygon(ET.SubElement(step, "Profile"), "Polygon", outer)
        for i in range(self.n):
            self.copper_layer(step, i)
        for a, b in self.spans:
            self.drill_layer(step, a, b)

    def polygon(self, parent: ET.Element, tag: str, ring: list[tuple[int, int]]) -> None:
        poly = ET.SubElement(parent, tag)
        ET.SubElement(poly, "PolyBegin", self.xy(ring[0]))
        for q in ring[1:] + [ring[0]]:
            ET.SubElement(poly, "PolyStepSegment", self.xy(q))

    def xy(self, q: tuple[int, int], prefix: str = "") -> dict[str, str]:
        """``x``/``y`` attributes of a point (nm), or ``startX``/``startY`` ... with a prefix."""
        kx, ky = (f"{prefix}X", f"{prefix}Y") if prefix else ("x", "y")
        return {kx: self.length_nm(q[0]), ky: self.length_nm(q[1])}

    def copper_layer(self, step: ET.Element, i: int) -> None:
        feature = ET.SubElement(step, "LayerFeature", {"layerRef": self.layers[i].name})
        for r in self.board.regions:
            if r.layer != i:
                continue
            shell, holes = rings_nm(r.polygon)
            contour = ET.SubElement(ET.SubElement(ET.SubElement(feature, "Set", self.net_of(r.net)), "Features"),
                                    "Contour")
            self.polygon(contour, "Polygon", shell)
            for h in holes:
                self.polygon(contour, "Cutout", h)
        for s in self.strokes:
            if s.layer == i:
                self.stroke(ET.SubElement(ET.SubElement(feature, "Set", self.net_of(s.net)), "Features"), s)
        v = self.board.vias
        for k in np.flatnonzero((v.first_layer <= i) & (v.last_layer >= i)).tolist():
            pad = ET.SubElement(ET.SubElement(feature, "Set", {**self.net_of(int(v.net[k])), "padUsage": "VIA"}),
                                "Pad")
            ET.SubElement(pad, "Location", {"x": self.coord(v.x[k]), "y": self.coord(v.y[k])})
            ET.SubElement(pad, "StandardPrimitiveRef", {"id": circle_id(float(v.pad[k]))})

    def stroke(self, features: ET.Element, s: Stroke) -> None:
        if s.centre is not None:
            arc = ET.SubElement(features, "Arc", {**self.xy(s.points[0], "start"), **self.xy(s.points[1], "end"),
                                                  **self.xy(s.centre, "center"),
                                                  "clockwise": "false" if s.ccw else "true"})
            ET.SubElement(arc, "LineDescRef", {"id": line_id(s.width)})
        elif len(s.points) == 2:
            line = ET.SubElement(features, "Line", {**self.xy(s.points[0], "start"), **self.xy(s.points[1], "end")})
            ET.SubElement(line, "LineDescRef", {"id": line_id(s.width)})
        else:
            poly = ET.SubElement(features, "Polyline")
            ET.SubElement(poly, "PolyBegin", self.xy(s.points[0]))
            for q in s.points[1:]:
                ET.SubElement(poly, "PolyStepSegment", self.xy(q))
            ET.SubElement(poly, "LineDescRef", {"id": line_id(s.width)})

    def drill_layer(self, step: ET.Element, a: int, b: int) -> None:
        feature = ET.SubElement(step, "LayerFeature", {"layerRef": self.names[f"drill{a}_{b}"]})
        v = self.board.vias
        for k in np.flatnonzero((v.first_layer == a) & (v.last_layer == b)).tolist():
            hole_set = ET.SubElement(feature, "Set", self.net_of(int(v.net[k])))
            ET.SubElement(hole_set, "Hole", {"name": f"H{k + 1}", "diameter": self.size(float(v.drill[k])),
                                             "platingStatus": "VIA", "plusTol": "0", "minusTol": "0",
                                             "x": self.coord(v.x[k]), "y": self.coord(v.y[k])})


def _plain(value: float, places: int) -> str:
    """A number as a plain decimal of at most ``places`` places (no exponent)."""
    text = f"{float(value):.{places}f}".rstrip("0")
    if text.endswith("."):
        text += "0"
    return "0.0" if text in ("-0.0", "-0.") else text


def circle_id(diameter: float) -> str:
    return f"CIRCLE_{fmt_mm(diameter)}"


def line_id(width: float) -> str:
    return f"ROUND_{fmt_mm(width)}"


def ipc2581_text(board: Board, units: str = "MILLIMETER", date: str = CREATION_DATE, *,
                 numbered_specs: bool = False, generic_copper: bool = False) -> str:
    """The IPC-2581 revision C document of ``board`` (see the module docstring)."""
    root = _Writer(board, units, date, numbered_specs=numbered_specs, generic_copper=generic_copper).build()
    ET.indent(root, space=" ")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def write_ipc2581(board_or_path: Board | str | os.PathLike[str], out: str | os.PathLike[str],
                  **options: Any) -> Path:
    """Write the IPC-2581 file of a board to ``out`` (its folder created if
    missing); ``options``: ``units``, ``date``, ``numbered_specs``,
    ``generic_copper``."""
    board = board_or_path if isinstance(board_or_path, Board) else load_board(board_or_path)
    path = Path(out)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(ipc2581_text(board, **options).encode("utf-8"))
    return path


def write_fixtures(root: Path = ROOT, into: Path | None = None) -> list[Path]:
    """(Re)write every committed file of :data:`FIXTURES` under ``into``
    (default ``fixtures/ipc2581``)."""
    base = into if into is not None else root / "fixtures" / "ipc2581"
    return [write_ipc2581(root / board, base / name, **options) for name, (board, options) in FIXTURES.items()]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="write_ipc2581.py",
        description="Write a couplint board (neutral JSON) as one IPC-2581 revision C file, for test fixtures.")
    parser.add_argument("board", nargs="?", help="board file (neutral JSON)")
    parser.add_argument("out", nargs="?", help="the IPC-2581 file to write")
    parser.add_argument("--units", choices=sorted(UNITS_NM), default="MILLIMETER", help="the file's units")
    parser.add_argument("--numbered-specs", action="store_true",
                        help="name each Spec <layer>_1 and refer to it as SPEC_<layer>")
    parser.add_argument("--generic-copper", action="store_true", help="layerFunction CONDUCTOR for every copper layer")
    parser.add_argument("--fixtures", action="store_true", help="regenerate fixtures/ipc2581 instead")
    args = parser.parse_args(argv)
    if args.fixtures:
        if args.board or args.out:
            parser.error("--fixtures takes no board or output file")
        for path in write_fixtures():
            print(path.relative_to(ROOT))
        return 0
    if not args.board or not args.out:
        parser.error("give BOARD.json and OUT.xml (or --fixtures)")
    try:
        print(write_ipc2581(args.board, args.out, units=args.units, numbered_specs=args.numbered_specs,
                            generic_copper=args.generic_copper))
    except FabWriteError as exc:
        print(f"{args.board}: {exc}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
