"""The Gerber job file (``.gbrjob``): the stackup and the list of files.

``read_job(stream, name)`` reads a binary stream (a zip member will do),
``load_job(path)`` a file; both return a
:class:`~checker.readers.fab.layer.JobStackup` or raise one
:class:`~checker.errors.FabError` naming the file and the JSON path
(``board.gbrjob: MaterialStackup[3].Thickness: ...``), or the line for a
JSON syntax error.

Format: Ucamco, "Gerber Job Format" specification (2018 and later
revisions), sections ``GeneralSpecs``, ``FilesAttributes`` and
``MaterialStackup``; cited from memory. The file is JSON (RFC 8259,
UTF-8). What is read:

* ``GeneralSpecs`` (optional): ``Size`` ``{"X": mm, "Y": mm}``,
  ``LayerNumber`` (the number of copper layers) and ``BoardThickness``
  (mm). If ``LayerNumber`` is given it must equal the number of
  ``Copper`` entries in ``MaterialStackup``.
* ``FilesAttributes`` (optional): a list of ``{"Path", "FileFunction",
  "FilePolarity"}``, returned as ``JobStackup.files`` = ((path, file
  function, polarity), ...), the polarity ``""`` where not given.
* ``MaterialStackup`` (required): the physical layers in order, top to
  bottom, each an object with ``Type`` and, depending on it, ``Name``,
  ``Thickness`` (mm), ``Material``, ``DielectricConstant`` and
  ``LossTangent``. The last two may be numbers or strings, and a string
  may use a decimal comma (``"4,2"``).

How the model :class:`~checker.model.Stackup` is built from it:

* every ``Copper`` entry is a copper layer, in order, named by its
  ``Name`` (``L1``, ``L2`` ... if it has none; two copper entries may not
  share a name) and with its ``Thickness`` (> 0). The role is
  ``mixed`` and ``JobStackup.roles_given`` is False: a job file does not
  say which layer is a plane (the Gerber files' ``TF.FileFunction``
  does, and the copper decides in the end). ``copper_numbers`` are 1, 2,
  ... n in this order.
* the ``Dielectric`` entries between two neighbouring copper layers
  (a core and a prepreg, say) make one model dielectric. Each needs
  ``Thickness`` (> 0); ``DielectricConstant`` (>= 1) and ``LossTangent``
  (>= 0) are optional. The combined layer has the summed thickness
  T = sum(t_i) and, as capacitors in series (a uniform field normal to
  the layers), the permittivity

      eps_eff = T / sum(t_i / eps_i)

  and, with complex permittivities eps_i (1 - j tan_i) in the same
  series rule, the loss tangent tan_eff = -Im(eps*_eff) / Re(eps*_eff)
  (``None`` if any part lacks one). Its name is the parts' ``Name``
  values joined by " + ". Any other ``Type`` between two copper layers
  is refused, and so are two copper layers with nothing between them.
* a ``SolderMask`` above the first copper layer is ``mask_top``, one
  below the last is ``mask_bottom``; thickness and εr optional. At most
  one per side.
* other types above the first / below the last copper layer
  (``Legend``, ``SolderPaste`` ...) are ignored; a ``Dielectric`` there
  is refused (the model has no place for it).

**Optional values left out.** The job format makes every
``MaterialStackup`` field but ``Type`` optional, and exporters leave
some out. What the geometry cannot do without — a dielectric's thickness
between two copper layers — is refused with a message naming
``--stackup FILE``, which supplies it. Everything else gets a documented
default, recorded in ``JobStackup.notes`` and in the layer's ``assumed``
field so the reports mark it "common practice, not your board":

* a dielectric's εr: :data:`DEFAULT_DIELECTRIC_ER` (4.6);
* a solder mask's εr: :data:`DEFAULT_MASK_ER` (4.0); its thickness:
  :data:`DEFAULT_MASK_MM` (0.025 mm);
* a copper layer's thickness: :data:`DEFAULT_COPPER_MM` (0.035 mm).

Each default sits at the high end of the usual range, so the coupling
it gives errs toward more, not less (C12 grows with εr, with copper
thickness for edge coupling, and with a mask's thickness and εr).

Refused, with the JSON path: a file over the per-file cap (:mod:`checker.limits`), bytes
that are not UTF-8, invalid JSON (with the line), ``NaN`` / ``Infinity``,
a key repeated in one object, wrong types, missing required values, and
the stackup problems above. The input is never modified.
"""

from __future__ import annotations

import json
import math
import os
import re
from typing import Any, BinaryIO, NoReturn

from ...bounds import LOSS_TANGENT, PERMITTIVITY, Bound
from ...errors import FabError
from ...model import CopperLayer, Dielectric, Stackup
from ..board_json import describe_json_value, format_path
from .layer import JobStackup
from .source import read_path, read_text

#: A length over 10 m is taken as a units mistake.
MAX_LENGTH_MM = 10_000.0

#: εr of a dielectric whose entry gives none: FR-4 class laminates are
#: specified at about 4.2-4.8 between 1 MHz and 1 GHz depending on resin
#: content (common practice, from memory); the upper half is taken so C12
#: errs high.
DEFAULT_DIELECTRIC_ER = 4.6

#: εr of a solder mask whose entry gives none: liquid photoimageable masks
#: are about 3.3-4.0 (common practice, from memory); the top is taken.
DEFAULT_MASK_ER = 4.0

#: Thickness of a solder mask whose entry gives none: about 10-30 um over
#: copper is usual (common practice, from memory).
DEFAULT_MASK_MM = 0.025

#: Thickness of a copper layer whose entry gives none: 1 oz/ft^2 (35 um),
#: the usual base copper (common practice).
DEFAULT_COPPER_MM = 0.035

#: The words that mark a default in notes and reports.
ASSUMED_WORDS = "common practice, not your board"

_DECIMAL = re.compile(r"\s*([+-]?(?:[0-9]+(?:[.,][0-9]*)?|[.,][0-9]+)(?:[eE][+-]?[0-9]+)?)\s*", re.ASCII)


def load_job(path: str | os.PathLike[str]) -> JobStackup:
    """Read the Gerber job file at ``path`` (see the module docstring)."""
    return read_path(path, read_job, "a job file")


def read_job(stream: BinaryIO, name: str) -> JobStackup:
    """Read a Gerber job file from a binary stream; ``name`` is used in
    messages and as ``JobStackup.path``."""
    data = _parse(stream, name)
    return _Job(name, data).build()


def series_dielectric(layers: list[tuple[float, float, float | None, str | None, tuple[str, ...]]]) -> Dielectric:
    """One model dielectric from consecutive layers (thickness mm, εr, loss
    tangent or None, name or None, assumed values), as capacitors in series
    in a field normal to the layers: T = Σtᵢ, εeff = T / Σ(tᵢ/εᵢ), and the
    loss tangent from the complex permittivities εᵢ(1 − j tanᵢ) by the same
    rule (``None`` if any part lacks one). Every fabrication door with a
    layered stackup uses it."""
    total = sum(t for t, _, _, _, _ in layers)
    er = _series(total, [(t, e) for t, e, _, _, _ in layers]).real
    tan_d = None
    tans = [tan for _, _, tan, _, _ in layers]
    if all(tan is not None for tan in tans):
        eps = _series(total, [(t, e * complex(1.0, -tan)) for (t, e, *_), tan in zip(layers, tans) if tan is not None])
        tan_d = -eps.imag / eps.real
    names = [n for _, _, _, n, _ in layers if n]
    assumed = tuple(sorted({a for *_, parts_assumed in layers for a in parts_assumed}))
    return Dielectric(thickness_mm=total, er=er, loss_tangent=tan_d, name=" + ".join(names) or None,
                      assumed=assumed)


def _series(total: float, parts: list[tuple[float, complex]]) -> complex:
    """``total / Σ(tᵢ / εᵢ)``. Callers bound each εᵢ (1 to 100, loss tangent
    0 to 1), so only thicknesses near the smallest float can break the sum
    (``tᵢ / εᵢ`` rounds to 0): then the same sum is taken with thicknesses
    relative to the thickest layer, which cannot round to 0."""
    denominator = sum(t / e for t, e in parts)
    if denominator != 0:
        return total / denominator
    top = max(t for t, _ in parts)
    return (total / top) / sum((t / top) / e for t, e in parts)


# --------------------------------------------------------------------------- JSON


class _Repeated(dict):
    """A JSON object in which ``repeated`` appeared more than once."""

    repeated: str = ""


def _parse(stream: BinaryIO, name: str) -> Any:
    text = read_text(stream, name)
    if not text.strip():
        raise FabError(name, None, "the file is empty")

    def pairs(items: list[tuple[str, Any]]) -> dict:
        out = dict(items)
        if len(out) == len(items):
            return out
        seen: set[str] = set()
        flagged = _Repeated(out)
        flagged.repeated = next(k for k, _ in items if k in seen or seen.add(k))  # type: ignore[func-returns-value]
        return flagged

    def constant(word: str) -> float:
        raise _NonFinite(word)

    try:
        return json.loads(text, object_pairs_hook=pairs, parse_constant=constant)
    except json.JSONDecodeError as exc:
        raise FabError(name, exc.lineno, f"invalid JSON: {exc.msg} (column {exc.colno})") from None
    except _NonFinite as exc:
        raise FabError(name, None, f"invalid JSON: {exc.args[0]} is not a number JSON allows") from None
    except RecursionError:
        raise FabError(name, None, "invalid JSON: nested far too deeply") from None
    except ValueError as exc:  # an integer with thousands of digits
        raise FabError(name, None, f"invalid JSON: {exc}") from None


class _NonFinite(ValueError):
    pass


# --------------------------------------------------------------------------- meaning


class _Job:
    def __init__(self, name: str, data: Any) -> None:
        self.name = name
        self.data = data
        #: (what, value used) -> the entries a default was used for
        self.assumed: dict[tuple[str, str], list[str]] = {}

    def fail(self, path: tuple, message: str) -> NoReturn:
        raise FabError(self.name, None, message, place=format_path(path))

    def obj(self, path: tuple, value: Any) -> dict:
        if not isinstance(value, dict):
            self.fail(path, f"must be a JSON object {{...}}, got {describe_json_value(value)}")
        if isinstance(value, _Repeated):
            self.fail(path, f"key {value.repeated!r} appears more than once")
        return value

    def number(self, path: tuple, value: Any, *, minimum: float, exclusive: bool, text_ok: bool = False) -> float:
        """A finite number >= (or >) ``minimum``; with ``text_ok`` also a
        string such as ``"4.2"`` or ``"4,2"``."""
        if isinstance(value, str) and text_ok:
            m = _DECIMAL.fullmatch(value)
            if not m:
                self.fail(path, f"must be a number (or a number in a string), got {describe_json_value(value)}")
            number = float(m.group(1).replace(",", "."))
        elif isinstance(value, (int, float)) and not isinstance(value, bool):
            try:
                number = float(value)
            except OverflowError:
                self.fail(path, f"number far too large, got {describe_json_value(value)}")
        else:
            self.fail(path, f"must be a number, got {describe_json_value(value)}")
        if not math.isfinite(number):
            self.fail(path, f"must be a finite number, got {describe_json_value(value)}")
        if number < minimum or (exclusive and number == minimum):
            self.fail(path, f"must be {'>' if exclusive else '>='} {minimum:g}, got {describe_json_value(value)}")
        return number

    def bounded(self, path: tuple, number: float, bound: Bound) -> None:
        """Refuse a material value outside its physical sanity bound here, at
        its own key: the series rule that joins the layers needs it finite."""
        problem = bound.problem(number)
        if problem is not None:
            self.fail(path, problem)

    def length(self, path: tuple, value: Any) -> float:
        mm = self.number(path, value, minimum=0.0, exclusive=True)
        if mm > MAX_LENGTH_MM:
            self.fail(path, f"{mm:g} mm is more than 10 m (a job file gives lengths in mm)")
        return mm

    def text(self, path: tuple, value: Any) -> str:
        if not isinstance(value, str):
            self.fail(path, f"must be a string, got {describe_json_value(value)}")
        return value

    # ---- sections

    def build(self) -> JobStackup:
        root = self.obj((), self.data)
        size, layer_number, thickness = self.general(root)
        files = self.files(root)
        stackup = self.stackup(root)
        n = len(stackup.layers)
        if layer_number is not None and layer_number != n:
            self.fail(("GeneralSpecs", "LayerNumber"), f"says {layer_number} copper layers but MaterialStackup "
                      f"has {n} Copper entries")
        return JobStackup(
            path=self.name,
            stackup=stackup,
            copper_numbers=tuple(range(1, n + 1)),
            board_thickness_mm=thickness,
            layer_count=layer_number,
            roles_given=False,
            files=files,
            size_mm=size,
            notes=self.assumed_notes(),
        )

    def assumed_notes(self) -> tuple[str, ...]:
        """One note per kind of default used, naming the entries."""
        out = []
        for (what, value), where in self.assumed.items():
            out.append(f"{self.name}: {what} not given for {', '.join(where)}: {value} used "
                       f"({ASSUMED_WORDS}; give it in the job file or with --stackup FILE)")
        return tuple(out)

    def assume(self, what: str, value: str, i: int, entry: dict) -> None:
        label = f"MaterialStackup[{i}]"
        if isinstance(entry.get("Name"), str) and entry["Name"].strip():
            label += f" ({entry['Name']})"
        self.assumed.setdefault((what, value), []).append(label)

    def general(self, root: dict) -> tuple[tuple[float, float] | None, int | None, float | None]:
        if "GeneralSpecs" not in root:
            return None, None, None
        here = ("GeneralSpecs",)
        specs = self.obj(here, root["GeneralSpecs"])
        size = None
        if "Size" in specs:
            box = self.obj(here + ("Size",), specs["Size"])
            for axis in ("X", "Y"):
                if axis not in box:
                    self.fail(here + ("Size",), f"missing required key {axis!r}")
            size = (self.length(here + ("Size", "X"), box["X"]), self.length(here + ("Size", "Y"), box["Y"]))
        layers = None
        if "LayerNumber" in specs:
            value = specs["LayerNumber"]
            if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 1000:
                self.fail(here + ("LayerNumber",),
                          f"must be a whole number 1 to 1000, got {describe_json_value(value)}")
            layers = value
        thickness = self.length(here + ("BoardThickness",), specs["BoardThickness"]) if "BoardThickness" in specs \
            else None
        return size, layers, thickness

    def files(self, root: dict) -> tuple[tuple[str, str, str], ...]:
        if "FilesAttributes" not in root:
            return ()
        entries = root["FilesAttributes"]
        if not isinstance(entries, list):
            self.fail(("FilesAttributes",), f"must be a JSON array [...], got {describe_json_value(entries)}")
        out = []
        for i, entry in enumerate(entries):
            here = ("FilesAttributes", i)
            entry = self.obj(here, entry)
            for key in ("Path", "FileFunction"):
                if key not in entry:
                    self.fail(here, f"missing required key {key!r}")
            polarity = self.text(here + ("FilePolarity",), entry["FilePolarity"]) if "FilePolarity" in entry else ""
            out.append((self.text(here + ("Path",), entry["Path"]),
                        self.text(here + ("FileFunction",), entry["FileFunction"]), polarity))
        return tuple(out)

    def stackup(self, root: dict) -> Stackup:
        if "MaterialStackup" not in root:
            self.fail((), "no MaterialStackup: this job file does not give the stackup")
        entries = root["MaterialStackup"]
        if not isinstance(entries, list):
            self.fail(("MaterialStackup",), f"must be a JSON array [...], got {describe_json_value(entries)}")
        kinds = []
        for i, entry in enumerate(entries):
            entry = self.obj(("MaterialStackup", i), entry)
            if "Type" not in entry:
                self.fail(("MaterialStackup", i), "missing required key 'Type'")
            kinds.append(self.text(("MaterialStackup", i, "Type"), entry["Type"]))
        copper = [i for i, kind in enumerate(kinds) if kind == "Copper"]
        if not copper:
            self.fail(("MaterialStackup",), "has no Copper entry")
        layers = [self.copper(i, entries[i], k + 1) for k, i in enumerate(copper)]
        names: dict[str, int] = {}
        for k, i in enumerate(copper):
            if layers[k].name in names:
                self.fail(("MaterialStackup", i, "Name"), f"copper layer name {layers[k].name!r} is already used "
                          f"by MaterialStackup[{names[layers[k].name]}]")
            names[layers[k].name] = i
        dielectrics = []
        for a, b in zip(copper, copper[1:]):
            between = list(range(a + 1, b))
            for i in between:
                if kinds[i] != "Dielectric":
                    self.fail(("MaterialStackup", i, "Type"), f"{kinds[i]!r} between two copper layers: only "
                              "Dielectric entries can lie between copper layers")
            if not between:
                self.fail(("MaterialStackup", b), "two copper layers with no Dielectric entry between them")
            dielectrics.append(self.combine([(i, entries[i]) for i in between]))
        mask_top = self.outside(entries, kinds, range(0, copper[0]), "above the top")
        mask_bottom = self.outside(entries, kinds, range(copper[-1] + 1, len(entries)), "below the bottom")
        return Stackup(tuple(layers), tuple(dielectrics), mask_top, mask_bottom)

    def copper(self, i: int, entry: dict, number: int) -> CopperLayer:
        here = ("MaterialStackup", i)
        name = self.text(here + ("Name",), entry["Name"]) if "Name" in entry else f"L{number}"
        if not name.strip():
            self.fail(here + ("Name",), "must not be empty")
        if "Thickness" not in entry:
            self.assume("copper thickness", f"{DEFAULT_COPPER_MM:g} mm", i, entry)
            return CopperLayer(name, "mixed", DEFAULT_COPPER_MM, assumed=("thickness",))
        return CopperLayer(name, "mixed", self.length(here + ("Thickness",), entry["Thickness"]))

    def layer(self, i: int, entry: dict, mask: bool) -> tuple[float, float, float | None, str | None, tuple]:
        """(thickness, er, loss tangent, name, assumed) of a dielectric or
        mask entry; a missing value a default may stand for is assumed."""
        here = ("MaterialStackup", i)
        assumed = []
        if "Thickness" in entry:
            thickness = self.length(here + ("Thickness",), entry["Thickness"])
        elif mask:
            thickness = DEFAULT_MASK_MM
            assumed.append("thickness")
            self.assume("solder mask thickness", f"{DEFAULT_MASK_MM:g} mm", i, entry)
        else:
            self.fail(here, "missing key 'Thickness': a dielectric between copper layers needs its thickness "
                      "(no default can stand for it); give the stackup with --stackup FILE")
        if "DielectricConstant" in entry:
            er = self.number(here + ("DielectricConstant",), entry["DielectricConstant"], minimum=1.0,
                             exclusive=False, text_ok=True)
            self.bounded(here + ("DielectricConstant",), er, PERMITTIVITY)
        else:
            er = DEFAULT_MASK_ER if mask else DEFAULT_DIELECTRIC_ER
            assumed.append("er")
            self.assume("solder mask εr" if mask else "dielectric εr", f"{er:g}", i, entry)
        tan_d = None
        if "LossTangent" in entry:
            tan_d = self.number(here + ("LossTangent",), entry["LossTangent"], minimum=0.0, exclusive=False,
                                text_ok=True)
            self.bounded(here + ("LossTangent",), tan_d, LOSS_TANGENT)
        name = self.text(here + ("Name",), entry["Name"]) if "Name" in entry else None
        return thickness, er, tan_d, name, tuple(assumed)

    def combine(self, parts: list[tuple[int, dict]]) -> Dielectric:
        """One model dielectric from consecutive entries, by the series rule."""
        return series_dielectric([self.layer(i, e, mask=False) for i, e in parts])

    def outside(self, entries: list, kinds: list[str], span: range, side: str) -> Dielectric | None:
        masks = [i for i in span if kinds[i] == "SolderMask"]
        for i in span:
            if kinds[i] == "Dielectric":
                self.fail(("MaterialStackup", i, "Type"), f"a Dielectric {side} copper layer cannot be modelled "
                          "(only a SolderMask can lie outside the copper layers)")
        if len(masks) > 1:
            self.fail(("MaterialStackup", masks[1]), f"a second SolderMask {side} copper layer")
        if not masks:
            return None
        thickness, er, tan_d, name, assumed = self.layer(masks[0], entries[masks[0]], mask=True)
        return Dielectric(thickness_mm=thickness, er=er, loss_tangent=tan_d, name=name, assumed=assumed)
