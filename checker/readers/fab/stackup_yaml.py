"""A stackup YAML file (``--stackup team-stackup.yaml``): the stackup of a
fabrication package written by hand, with the roles a job file lacks.

``load_stackup_yaml(path)`` reads a file, ``read_stackup_yaml(stream,
name)`` a binary stream; both return a
:class:`~checker.readers.fab.layer.JobStackup` with ``roles_given=True``
and ``copper_numbers`` 1..n (top to bottom), or raise one
:class:`~checker.errors.FabError`.

The format is couplint's own: one YAML mapping (YAML 1.1 as PyYAML's safe
loader reads it) with

* ``stackup`` (required): the same list as the ``stackup`` key of the
  neutral board JSON (``docs/board-format.md``, section Stackup): copper
  ``{copper, role, thickness}``, dielectric ``{dielectric, thickness, er,
  loss_tangent}`` and optional solder masks ``{mask, thickness, er,
  loss_tangent}`` first / last, top to bottom, alternating copper and
  dielectric;
* ``units`` (optional): ``mm``, ``mil``, ``um`` or ``in``, the unit of
  every thickness written as a bare number, as in the board format;
  without it every thickness needs its unit (``thickness: 35 um``), as
  every quantity of a rule file does (:mod:`checker.units`);
* ``description`` (optional): free text for people, ignored.

Any other top-level key is refused. Numbers follow YAML 1.1: ``0.001``
and ``1.0e-3`` are numbers, but ``1e-3`` (no dot) and ``1.0e3`` (no sign
in the exponent) are strings, refused as not numbers. Example::

    stackup:
      - {mask: top-mask, thickness: 15 um, er: 3.8}
      - {copper: TOP, role: signal, thickness: 35 um}
      - {dielectric: prepreg, thickness: 0.2 mm, er: 4.2}
      - {copper: GND, role: plane, thickness: 35 um}

The list is checked by the board JSON door itself (its schema and its
stackup rules), so both doors accept and refuse the same stackups with
the same words. Errors: YAML syntax problems name the line and column (from
the parser's marks); a key repeated in one mapping names both lines;
schema and stackup problems name the key path and its line
(``stackup[2].er (line 5): must be >= 1, got 0.5``). The input is never
modified.
"""

from __future__ import annotations

import os
import re
from typing import Any, BinaryIO, NoReturn

import yaml

from ...errors import BoardError, FabError
from ...model import Stackup
from ...units import UNITS, UnitError, needs_unit, parse_quantity
from ...yamldoc import YamlProblem, compose_document, construct
from ...yamlkeys import first_repeated_key
from .. import board_json
from .layer import JobStackup
from .source import read_path, read_text

#: Larger files are refused before they are read (1 MiB: a stackup is small).
MAX_FILE_BYTES = 1024 * 1024

TOP_KEYS = ("units", "stackup", "description")

_PATH_PART = re.compile(r'\.?([A-Za-z_][A-Za-z0-9_]*)|\[([0-9]+)\]|\[("(?:[^"\\]|\\.)*")\]')


def load_stackup_yaml(path: str | os.PathLike[str]) -> JobStackup:
    """Read the stackup YAML file at ``path`` (see the module docstring)."""
    return read_path(path, read_stackup_yaml, "a stackup file")


def read_stackup_yaml(stream: BinaryIO, name: str) -> JobStackup:
    """Read a stackup YAML file from a binary stream; ``name`` is used in
    messages and as ``JobStackup.path``."""
    text = _read_text(stream, name)
    node, data = _load(text, name)
    stackup = _validate(data, node, name)
    n = len(stackup.layers)
    return JobStackup(
        path=name,
        stackup=stackup,
        copper_numbers=tuple(range(1, n + 1)),
        board_thickness_mm=None,
        layer_count=n,
        roles_given=True,
    )


# --------------------------------------------------------------------------- text and YAML


def _read_text(stream: BinaryIO, name: str) -> str:
    text = read_text(stream, name, "not a stackup file", format_limit=MAX_FILE_BYTES)
    if not text.strip():
        raise FabError(name, None, "the file is empty (a stackup file holds a 'stackup:' list)")
    return text


def _load(text: str, name: str) -> tuple[yaml.Node, Any]:
    """The YAML node tree and the data built from it (safe tags only, one
    document, no repeated keys, no alias bombs, no nesting bombs: see
    :mod:`checker.yamldoc`)."""
    try:
        node = compose_document(text, MAX_NODES, "a stackup file")
        if node is None:
            raise FabError(name, None, "the file is empty (a stackup file holds a 'stackup:' list)")
        _check_repeated_keys(node, name)
        return node, construct(node)
    except YamlProblem as exc:
        raise FabError(name, exc.line, exc.message, place=exc.place) from None


#: Most nodes a stackup file may hold once its aliases are expanded.
MAX_NODES = 100_000


def _check_repeated_keys(node: yaml.Node, name: str) -> None:
    found = first_repeated_key(node, lambda path, key: f"{path}.{key}" if path else str(key))
    if found is not None:
        raise FabError(name, found.line, f"key {found.key!r} appears twice (lines {found.first_line} and "
                       f"{found.line}); each key may appear once", place=f"{found.path} (line {found.line})")


# --------------------------------------------------------------------------- meaning


def _validate(data: Any, node: yaml.Node, name: str) -> Stackup:
    """The stackup, checked by the board JSON door's schema and rules;
    its errors are given the YAML line of the place they name."""

    def fail(place: str | None, message: str) -> NoReturn:
        line = _line_of(node, place)
        shown = f"{place} (line {line})" if place else f"line {line}"
        raise FabError(name, line, message, place=shown)

    if not isinstance(data, dict):
        fail(None, f"must be a mapping with a 'stackup:' list, got {_kind(data)}")
    for key in data:
        if key not in TOP_KEYS:
            shown = key if isinstance(key, str) else repr(key)
            fail(shown if isinstance(key, str) else None,
                 f"unknown key {shown!r} (allowed here: {', '.join(TOP_KEYS)})")
    if "stackup" not in data:
        fail(None, "missing required key 'stackup' (the list of copper, dielectric and mask entries)")
    given = {k: data[k] for k in ("units", "stackup") if k in data}
    if isinstance(data["stackup"], list):
        given["stackup"] = _thicknesses_in_mm(data["stackup"], data.get("units"), fail)
        if isinstance(data.get("units"), str) and data["units"] in UNITS["length"]:
            given["units"] = "mm"  # every thickness is in mm now
    try:
        return board_json.read_stackup_dict(given, name)
    except BoardError as exc:
        fail(exc.place, exc.message)


def _thicknesses_in_mm(entries: list, units: Any, fail) -> list:
    """The entries with every thickness in mm: a quantity (``35 um``,
    ``0.2 mm``, ``1.4 mil``) as written, a bare number in the file's
    ``units`` when the file has that key; a bare number in a file without
    ``units`` is refused (a thickness needs its unit). Anything else is left
    for the board door to refuse with its own words."""
    factor = UNITS["length"].get(units) if isinstance(units, str) else None
    if units is not None and factor is None:
        return entries  # a bad units value: the board door names it
    out = []
    for i, entry in enumerate(entries):
        value = entry.get("thickness") if isinstance(entry, dict) else None
        place = f"stackup[{i}].thickness"
        if isinstance(value, str):
            try:
                entry = {**entry, "thickness": parse_quantity(value, "length")}
            except UnitError as exc:
                fail(place, str(exc))
        elif isinstance(value, (int, float)) and not isinstance(value, bool):
            if factor is None:
                fail(place, f"{needs_unit('length', f'{value:g}')}; or give the unit of every bare number "
                            "with a top-level 'units:' key")
            assert factor is not None  # fail() raises
            entry = {**entry, "thickness": value * factor}
        out.append(entry)
    return out


def _line_of(root: yaml.Node, place: str | None) -> int:
    """The YAML line of the node at a JSON-style path (``stackup[2].er``);
    the deepest node found on the way if the path leaves the tree."""
    node = root
    for m in _PATH_PART.finditer(place or ""):
        key, index, quoted = m.groups()
        if quoted is not None:
            key = quoted[1:-1]
        following: yaml.Node | None = None
        if isinstance(node, yaml.MappingNode) and key is not None:
            following = next((v for k, v in node.value if isinstance(k, yaml.ScalarNode) and k.value == key), None)
        elif isinstance(node, yaml.SequenceNode) and index is not None and int(index) < len(node.value):
            following = node.value[int(index)]
        if following is None:
            break
        node = following
    return node.start_mark.line + 1


def _kind(value: Any) -> str:
    if isinstance(value, list):
        return "a list"
    if value is None:
        return "null"
    if isinstance(value, str):
        return "a string"
    return type(value).__name__
