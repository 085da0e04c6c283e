"""Reader for the neutral board JSON format (``docs/board-format.md``).

``load_board(path)`` reads a file, ``read_board_dict(data, file)`` a dict
already in memory; both return a :class:`checker.model.Board` or raise one
:class:`checker.errors.BoardError` that names the file and the JSON path of
the first problem (``board.json: tracks[12].width: must be > 0``).

Checking comes in stages, each stopping at the first problem:

1. the file itself: missing, unreadable, not UTF-8, not JSON (line and
   column), not an object, a ``format`` / ``version`` that is not ours;
2. the shipped JSON Schema (``board.schema.json``, draft 2020-12). A good
   file takes the quick path: msgspec decodes it, checking the tracks
   against the schema as it goes, a yes/no check compiled from the schema
   passes the rest, and repeated keys are counted in the text
   (:func:`_read_fast`). Anything the quick path does not accept is read
   again the careful way: Python's ``json`` with hooks that note repeated
   keys, ``NaN`` / ``Infinity`` and huge integers, a walk that names the
   place of each, and ``jsonschema``, whose best-matching error is reported;
3. what a schema cannot say: names that must exist or be unique, stackup
   order, polygon validity, coordinates more than 10 m from the origin,
   collinear three-point arcs, via layer order, an empty board.

Lengths are converted to millimetres once, here; the input is never
modified.
"""

from __future__ import annotations

import contextlib
import copy
import functools
import gc
import importlib.resources
import itertools
import json
import math
import os
import re
from operator import attrgetter, itemgetter, methodcaller
from pathlib import Path
from typing import Annotated, Any, Callable, Iterator, NoReturn

import fastjsonschema
import jsonschema
import jsonschema.exceptions
import msgspec
import numpy as np
import shapely
from shapely.geometry.polygon import orient

from .. import limits, progress
from ..bounds import (
    COPPER_THICKNESS,
    DIELECTRIC_THICKNESS,
    HOLE,
    LOSS_TANGENT,
    MASK_THICKNESS,
    PERMITTIVITY,
    TRACE_WIDTH,
    Bound,
)
from ..errors import BoardError
from ..inputfile import decode_utf8, read_bytes
from ..model import (
    NO_NET,
    Board,
    CopperLayer,
    Dielectric,
    Net,
    Pieces,
    Region,
    Stackup,
    Vias,
)
from ..units import UNITS
from .arcs import arc_polyline, chord_count, circle_through  # noqa: F401  (re-exported)

FORMAT = "couplint-board"
VERSION = 1

#: A coordinate farther than this from the origin (10 m) is taken as a units
#: mistake rather than a board.
MAX_COORDINATE_MM = 10_000.0

#: Pieces shorter than this (mm) are dropped as zero-length (repeated points).
MIN_PIECE_LENGTH_MM = 1e-9

#: Deepest nesting the format uses is 5 (regions[i].holes[j][k][0]); far
#: deeper input is rejected before anything recursive looks at it.
MAX_DEPTH = 16

_JSON_TYPES = {
    "object": "an object",
    "array": "an array",
    "string": "a string",
    "number": "a number",
    "integer": "an integer",
    "boolean": "true or false",
    "null": "null",
}


# --------------------------------------------------------------------------- entry points


def load_board(path: str | os.PathLike[str]) -> Board:
    """Read a board file in the neutral JSON format.

    Raises :class:`BoardError` (file, JSON path, message) for anything wrong
    with the file, from a missing file to a self-intersecting region.
    """
    file = os.fspath(path)
    raw = read_bytes(file, BoardError, "a board file")
    stage = progress.Stage(f"reading {os.path.basename(file)}", total=len(raw))
    with _collector_paused():
        board = _read_fast(raw, file, stage)
        if board is not None:
            return board
        stage.at(len(raw), "reading it again the careful way, to say what is wrong")
        text = decode_utf8(raw, file, BoardError, bom=True)
        if not text.strip():
            raise BoardError(file, None, "the file is empty")
        data, duplicates = _parse_json(text, file)
        return _read(data, file, suspect=duplicates)


def _read_fast(raw: bytes, file: str, stage: progress.Stage | None = None) -> Board | None:
    """The board of a well-formed file, read the quick way, or None when
    anything is off (then the careful path reads the file again and words
    the problem). msgspec decodes the text and checks the tracks against
    the schema's ``$defs.track`` in one pass in C (:class:`_QuickTrack`),
    about three times as fast as Python's ``json`` with the hooks the
    careful path needs followed by a check of the parsed tracks. It refuses
    NaN, Infinity, numbers beyond the float range, invalid UTF-8 and any
    key the format does not have itself; it keeps the last of a repeated
    key, so repeated keys are counted instead (:func:`_no_repeated_keys`)."""
    body = raw[3:] if raw.startswith(b"\xef\xbb\xbf") else raw
    parsed = _quick_parse(body)
    if parsed is None:
        return None
    data, tracks = parsed
    try:
        _check_header(data, file)
    except BoardError:
        return None
    cap = limits.current().track_points
    if tracks and max(map(len, map(attrgetter("points"), tracks))) > cap:
        return None  # the careful path names the track
    _check_point_counts(data, file)
    if not _valid_fast(data):
        return None
    keys = len(data) + (tracks is not None) + len(_QuickTrack.__struct_fields__) * len(tracks or ())
    if not _no_repeated_keys(body, data, keys):
        return None
    if stage is not None:
        stage.at(len(raw), f"parsed and checked; building {len(tracks or ()):,} tracks")
    return _Builder(data, file, tracks or []).build()


def _quick_parse(body: bytes) -> tuple[dict, list | None] | None:
    """``body`` decoded by msgspec: the top level as a dict without the
    tracks, and the tracks (:class:`_QuickTrack`, None when the file has no
    ``tracks`` key); None when msgspec refuses it, or it holds a number of
    300 digits or more."""
    if _LONG_NUMBER in body.translate(_DIGITS_AS_ZERO):
        return None  # an integer of hundreds of digits: the careful path judges it
    try:
        quick = _QUICK_DECODER.decode(body)
    except (msgspec.DecodeError, RecursionError):
        return None
    data = {key: value for key in _QUICK_KEYS if (value := getattr(quick, key)) is not msgspec.UNSET}
    return data, data.pop("tracks", None)


_Name = Annotated[str, msgspec.Meta(min_length=1)]


class _QuickTrack(msgspec.Struct, forbid_unknown_fields=True):
    """``$defs.track`` of ``board.schema.json``, as msgspec checks it while
    decoding: exactly these four keys; a non-empty layer name; a non-empty
    net name or null; a width that is a number (not true or false) above 0;
    at least two points, each a list of exactly two numbers.
    ``tests/test_board_json.py`` holds it to the schema on mutated boards."""

    layer: _Name
    net: _Name | None
    width: Annotated[float, msgspec.Meta(gt=0)]
    points: Annotated[list[tuple[float, float]], msgspec.Meta(min_length=2)]


class _QuickBoard(msgspec.Struct, forbid_unknown_fields=True):
    """The top level of a board file for the quick parse: the schema's keys
    and no other; everything but the tracks as plain JSON values, checked
    afterwards by :func:`_valid_fast`."""

    format: Any = msgspec.UNSET
    version: Any = msgspec.UNSET
    name: Any = msgspec.UNSET
    description: Any = msgspec.UNSET
    units: Any = msgspec.UNSET
    stackup: Any = msgspec.UNSET
    nets: Any = msgspec.UNSET
    tracks: list[_QuickTrack] | msgspec.UnsetType = msgspec.UNSET
    arcs: Any = msgspec.UNSET
    regions: Any = msgspec.UNSET
    vias: Any = msgspec.UNSET
    outline: Any = msgspec.UNSET


_QUICK_KEYS = _QuickBoard.__struct_fields__
_QUICK_DECODER = msgspec.json.Decoder(_QuickBoard)
#: The top-level arrays whose items are the board's objects besides the
#: tracks (the schema nests no object deeper than one of these items).
_OBJECT_ARRAYS = ("stackup", "nets", "arcs", "regions", "vias")
_KEY_SPACE = re.compile(rb'"[ \t\r\n]+:')
#: Every digit as "0", every other byte as " ": a run of 300 zeros is then a
#: number of 300 digits or more (msgspec reads the integers in the untyped
#: parts whatever their size; Python's ``float`` cannot take them).
_DIGITS_AS_ZERO = bytes(48 if 48 <= b <= 57 else 32 for b in range(256))
_LONG_NUMBER = b"0" * 300


def _no_repeated_keys(body: bytes, data: dict, keys: int) -> bool:
    """Whether no object of the schema-valid ``data`` (``keys`` keys at the
    top level and in the tracks) repeated a key in ``body``, its text.
    Without an escaped quote in the text, every ``":``
    in it ends a key (a quote inside a string is always escaped) and, when
    no key has white space before its colon, every key ends so: the count
    of ``":`` is then the number of keys written, and equals the number of
    keys parsed exactly when none was repeated. Any other text answers
    False (the careful path then decides)."""
    if b'\\"' in body or _KEY_SPACE.search(body) is not None:
        return False
    parsed = keys + sum(sum(map(len, data[key])) for key in _OBJECT_ARRAYS if key in data)
    return body.count(b'":') == parsed


@contextlib.contextmanager
def _collector_paused() -> Iterator[None]:
    """Python's cyclic garbage collector paused while a board is parsed and
    built: the millions of lists and dicts of a large board (none in a
    cycle) trigger collection after collection, which more than doubles the
    time of ``json.loads`` on 100 MB (measured: 6.5 s against 3.5 s)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def read_board_dict(data: Any, file: str) -> Board:
    """Build a :class:`Board` from parsed board JSON; ``file`` is used in
    messages, as ``Board.path`` and (its stem) as the default board name.
    ``data`` is not modified."""
    if isinstance(data, dict):
        _check_raw(data, file)
    return _read(data, file, suspect=False)


def read_stackup_dict(data: dict, file: str) -> Stackup:
    """The stackup alone, from a dict holding ``units`` (optional) and
    ``stackup`` as a board file would (the stackup YAML door uses it): the
    same schema, rules and messages as a whole board file."""
    data = {"format": FORMAT, "version": VERSION, "nets": [], **data}
    _check_raw(data, file)
    if not _fast_schema_check()(data):
        _check_schema(data, file)
    with np.errstate(over="ignore"):
        return _Builder(data, file).stackup()


def _read(data: Any, file: str, suspect: bool) -> Board:
    if not isinstance(data, dict):
        raise BoardError(file, None, f"must be a JSON object {{...}}, got {describe_json_value(data)}")
    _check_header(data, file)
    _check_point_counts(data, file)
    if suspect or not _valid_fast(data):
        # Something is off: find it, slowly, with the path and a good message.
        _check_raw(data, file)
        _check_schema(data, file)
        # Nothing found: the quick check is stricter than it need be (a
        # number type other than int or float, say); the data is valid.
    return _Builder(data, file).build()


def _check_point_counts(data: dict, file: str) -> None:
    """The ``track-points`` cap (:mod:`checker.limits`) on every track's
    points and every region ring's corners, before any check walks them."""
    cap = limits.current().track_points

    def over(value: Any) -> bool:
        return isinstance(value, list) and len(value) > cap

    def fail(path: tuple, count: int) -> NoReturn:
        raise BoardError(file, format_path(path), f"{count:,} points, over the cap of {cap:,} points per track or "
                                                  f"outline; {limits.hint('track-points')}")

    tracks = data.get("tracks")
    if isinstance(tracks, list) and tracks:
        try:  # the common case in C: every track an object with a list of points, none too long
            quick = max(map(len, map(itemgetter("points"), tracks))) <= cap
        except (TypeError, KeyError):
            quick = False
        if quick:
            data = {k: v for k, v in data.items() if k != "tracks"}
    for key in ("tracks", "regions"):
        items = data.get(key)
        if not isinstance(items, list):
            continue
        for i, item in enumerate(items):
            if not isinstance(item, dict):
                continue
            if key == "tracks" and over(item.get("points")):
                fail((key, i, "points"), len(item["points"]))
            if key == "regions":
                if over(item.get("outline")):
                    fail((key, i, "outline"), len(item["outline"]))
                holes = item.get("holes")
                for j, hole in enumerate(holes if isinstance(holes, list) else []):
                    if over(hole):
                        fail((key, i, "holes", j), len(hole))
    if over(data.get("outline")):
        fail(("outline",), len(data["outline"]))


# --------------------------------------------------------------------------- pass 1: raw data


class _DuplicateKeys(dict):
    """A JSON object in which a key appeared more than once."""

    duplicate: str = ""


def _parse_json(text: str, file: str) -> tuple[Any, bool]:
    """The parsed data, and whether it is suspect: an object repeated a key,
    or a NaN / Infinity appeared (both are reported with their path by
    :func:`_check_raw`)."""
    duplicates: list[str] = []

    def non_finite(name: str) -> float:
        duplicates.append(name)  # not a duplicate, but as suspect: the slow path names the place
        return float(name)

    def pairs(items: list[tuple[str, Any]]) -> dict:
        out = dict(items)
        if len(out) == len(items):
            return out
        seen: set[str] = set()
        dup = next(k for k, _ in items if k in seen or seen.add(k))  # type: ignore[func-returns-value]
        flagged = _DuplicateKeys(out)
        flagged.duplicate = dup
        duplicates.append(dup)
        return flagged

    def integer(digits: str) -> int:
        if len(digits) > 300:  # beyond the float range: the slow path names the place
            duplicates.append(digits[:20])
        return int(digits)

    try:
        data = json.loads(text, object_pairs_hook=pairs, parse_constant=non_finite, parse_int=integer)
    except json.JSONDecodeError as exc:
        raise BoardError(file, f"line {exc.lineno}, column {exc.colno}", f"invalid JSON: {exc.msg}") from None
    except RecursionError:
        raise BoardError(file, None, "invalid JSON: nested far too deeply") from None
    except ValueError:  # an integer of thousands of digits (Python refuses to convert it)
        raise BoardError(file, None, "invalid JSON: a number with thousands of digits") from None
    return data, bool(duplicates)


def _check_raw(data: Any, file: str) -> None:
    """Reject non-finite numbers, duplicate keys and absurd nesting, in
    document order, with the JSON path. Iterative, so no depth blows it up."""
    stack: list[tuple[Any, tuple]] = [(data, ())]
    while stack:
        value, path = stack.pop()
        if len(path) > MAX_DEPTH:
            raise BoardError(file, format_path(path), "nested far deeper than the board format allows")
        if isinstance(value, bool) or value is None or isinstance(value, str):
            continue
        if isinstance(value, float):
            if not math.isfinite(value):
                shown = "NaN" if math.isnan(value) else ("Infinity" if value > 0 else "-Infinity")
                raise BoardError(file, format_path(path), f"must be a finite number, got {shown}")
        elif isinstance(value, int):
            if abs(value) > 1e300:
                raise BoardError(file, format_path(path), "number far too large")
        elif isinstance(value, dict):
            if isinstance(value, _DuplicateKeys):
                raise BoardError(file, format_path(path), f"key {value.duplicate!r} appears more than once")
            for key, item in reversed(list(value.items())):
                if not isinstance(key, str):
                    raise BoardError(file, format_path(path), f"keys must be strings, got {key!r}")
                stack.append((item, path + (key,)))
        elif isinstance(value, (list, tuple)):
            for i in range(len(value) - 1, -1, -1):
                stack.append((value[i], path + (i,)))
        else:
            raise BoardError(file, format_path(path), f"not a JSON value: {type(value).__name__}")


def format_path(parts: Any) -> str | None:
    """``("tracks", 12, "width")`` -> ``"tracks[12].width"``; ``None`` for the root."""
    out = ""
    for part in parts:
        if isinstance(part, int):
            out += f"[{part}]"
        elif re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", part):
            out += f".{part}" if out else part
        else:
            out += f"[{json.dumps(part)}]"
    return out or None


def describe_json_value(value: Any) -> str:
    """A JSON value as an error message shows it: ``null``, ``true``, a
    number or a quoted string (cut to 40 characters), ``an array``,
    ``an object``."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        text = repr(value)
        return text if len(text) <= 40 else text[:37] + "..."
    if isinstance(value, str):
        return json.dumps(value if len(value) <= 40 else value[:37] + "...")
    if isinstance(value, list):
        return "an array"
    if isinstance(value, dict):
        return "an object"
    return type(value).__name__


# --------------------------------------------------------------------------- pass 2: schema


@functools.lru_cache(maxsize=1)
def board_schema() -> dict:
    """The shipped JSON Schema of the board format (draft 2020-12)."""
    text = importlib.resources.files(__package__).joinpath("board.schema.json").read_text(encoding="utf-8")
    return json.loads(text)


@functools.lru_cache(maxsize=1)
def _validator() -> jsonschema.Draft202012Validator:
    schema = board_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


@functools.lru_cache(maxsize=1)
def _fast_schema_check() -> Callable[[Any], bool]:
    """A yes/no check of the shipped schema, compiled by ``fastjsonschema``.

    ``jsonschema`` walks a board of 50 000 tracks in tens of seconds; the
    compiled check does it in about a second. A board it accepts is
    schema-valid; a board it refuses goes through the raw walk and
    ``jsonschema`` for a message with the path. (Non-finite numbers are
    caught while parsing, see :func:`_parse_json`.)
    """
    check = fastjsonschema.compile(copy.deepcopy(board_schema()))

    def valid(data: Any) -> bool:
        try:
            check(data)
        except fastjsonschema.JsonSchemaException:
            return False
        return True

    return valid


def _valid_fast(data: dict) -> bool:
    """Whether ``data`` is schema-valid, decided quickly: the bulk arrays
    (``tracks``, ``vias``) by :func:`_bulk_valid`, the rest by the compiled
    schema with those arrays left empty. True means valid; False means "look
    closer" (the slow path finds and words the problem)."""
    bulk = {key: data[key] for key in _BULK if isinstance(data.get(key), list)}
    if not all(_bulk_valid(key, items) for key, items in bulk.items()):
        return False
    return _fast_schema_check()({**data, **{key: [] for key in bulk}})


#: The board's bulk arrays, checked column by column (see _bulk_valid).
_BULK = ("tracks", "vias")
_NUMBER_TYPES = frozenset({int, float})
_TRACK_KEYS = frozenset({"layer", "net", "width", "points"})
_VIA_KEYS = frozenset({"at", "drill", "pad", "from", "to"})


def _bulk_valid(key: str, items: list) -> bool:
    """The schema's ``$defs.track`` / ``$defs.via`` checked over a whole
    array a column at a time (``map`` and ``set`` run in C): a million
    tracks in well under a second, where a per-object schema walk takes
    tens of seconds. Must accept exactly what the schema accepts;
    ``tests/test_board_json.py`` holds the two side by side on mutated
    boards."""
    if not items:
        return True
    if set(map(type, items)) != {dict}:
        return False
    if key == "tracks":
        # four keys each, and each of the four track keys there: exactly those keys
        if set(map(len, items)) != {len(_TRACK_KEYS)}:
            return False
        try:
            points = list(map(itemgetter("points"), items))
            layers, nets = list(map(itemgetter("layer"), items)), list(map(itemgetter("net"), items))
            widths = list(map(itemgetter("width"), items))
        except KeyError:
            return False
        if set(map(type, points)) != {list} or min(map(len, points)) < 2:
            return False
        if not (_names_valid(layers, nullable=False) and _names_valid(nets, nullable=True)
                and _positive_valid(widths)):
            return False
        return _points_valid(list(itertools.chain.from_iterable(points)))
    key_sets = set(map(frozenset, items))
    if not all(_VIA_KEYS <= keys <= _VIA_KEYS | {"net"} for keys in key_sets):
        return False
    return (_points_valid(list(map(itemgetter("at"), items)))
            and _positive_valid(list(map(itemgetter("drill"), items)))
            and _positive_valid(list(map(itemgetter("pad"), items)))
            and _names_valid(map(itemgetter("from"), items), nullable=False)
            and _names_valid(map(itemgetter("to"), items), nullable=False)
            and _names_valid((item.get("net") for item in items if "net" in item), nullable=True))


def _names_valid(values, nullable: bool) -> bool:
    """Each a non-empty string (or None if ``nullable``): the schema's
    ``layer_ref`` / ``net_ref``."""
    values = list(values)
    allowed = {str, type(None)} if nullable else {str}
    return set(map(type, values)) <= allowed and "" not in set(values)


def _positive_valid(values: list) -> bool:
    """Each a JSON number (not true/false) greater than 0: ``$defs.positive``."""
    if not set(map(type, values)) <= _NUMBER_TYPES:
        return False
    array = np.asarray(values, dtype=np.float64)
    return bool(np.all(array > 0))


def _points_valid(points: list) -> bool:
    """Each a list of exactly two JSON numbers: ``$defs.point``."""
    if set(map(type, points)) != {list} or set(map(len, points)) != {2}:
        return False
    return set(map(type, itertools.chain.from_iterable(points))) <= _NUMBER_TYPES


def _check_header(data: dict, file: str) -> None:
    """``format`` and ``version`` first: for some other JSON file, or a future
    version, they explain more than any other error would."""
    fmt = data.get("format")
    if fmt != FORMAT:
        got = "missing" if "format" not in data else f"got {describe_json_value(fmt)}"
        raise BoardError(file, "format", f'must be "{FORMAT}" ({got}; is this a couplint board file?)')
    version = data.get("version")
    if isinstance(version, bool) or version != VERSION:
        got = "missing" if "version" not in data else f"got {describe_json_value(version)}"
        raise BoardError(file, "version",
                         f"must be {VERSION} ({got}; this couplint reads board format version {VERSION})")


class _Later:
    """Orders JSON paths backwards, so that of two sibling errors the one
    earlier in the file ranks higher."""

    def __init__(self, path: Any) -> None:
        self.path = path

    def __lt__(self, other: "_Later") -> bool:
        return other.path < self.path

    def __eq__(self, other: object) -> bool:
        return isinstance(other, _Later) and other.path == self.path


def _relevance(error: jsonschema.exceptions.ValidationError) -> tuple:
    """jsonschema's own ranking (shallowest error first), except that among
    siblings the first in the file wins: that is where a reader starts."""
    shallow, path, *rest = jsonschema.exceptions.relevance(error)
    return (shallow, _Later(path), *rest)


def _check_schema(data: dict, file: str) -> None:
    error = jsonschema.exceptions.best_match(_validator().iter_errors(data), key=_relevance)
    if error is not None:
        raise BoardError(file, format_path(error.absolute_path), _schema_message(error))


def _schema_message(error: jsonschema.exceptions.ValidationError) -> str:
    """One plain sentence for a schema error (the path is reported apart)."""
    schema = error.schema if isinstance(error.schema, dict) else {}
    instance = error.instance
    custom = schema.get("x-messages", {}).get(error.validator) or schema.get("x-message")
    if custom:
        if error.validator == "type":
            return f"{custom}, got {describe_json_value(instance)}"
        return custom
    v, value = error.validator, error.validator_value
    if v == "type":
        kinds = [value] if isinstance(value, str) else list(value)
        return f"must be {' or '.join(_JSON_TYPES.get(k, k) for k in kinds)}, got {describe_json_value(instance)}"
    if v == "required":
        missing = [k for k in value if k not in instance]
        return f"missing required key {missing[0]!r}" if missing else error.message
    if v == "additionalProperties":
        allowed = list(schema.get("properties", {}))
        extra = [k for k in instance if k not in allowed]
        return f"unknown key {extra[0]!r} (allowed here: {', '.join(allowed)})" if extra else error.message
    if v == "exclusiveMinimum":
        return f"must be > {value:g}, got {describe_json_value(instance)}"
    if v == "minimum":
        return f"must be >= {value:g}, got {describe_json_value(instance)}"
    if v == "maximum":
        return f"must be <= {value:g}, got {describe_json_value(instance)}"
    if v == "exclusiveMaximum":
        return f"must be < {value:g}, got {describe_json_value(instance)}"
    if v == "enum":
        return f"must be one of {', '.join(json.dumps(x) for x in value)}, got {describe_json_value(instance)}"
    if v == "const":
        return f"must be {json.dumps(value)}, got {describe_json_value(instance)}"
    if v == "minLength":
        return "must not be empty"
    if v == "minItems":
        return f"needs at least {value} entries, got {len(instance)}"
    if v == "maxItems":
        return f"may have at most {value} entries, got {len(instance)}"
    return error.message


# --------------------------------------------------------------------------- pass 3: meaning


class _Builder:
    """Checks what the schema cannot, and converts to the model (in mm).

    Runs only on schema-valid data, so every key and type is as the schema
    says. Tracks and vias are handled as whole arrays (boards have many);
    arcs and regions one by one.
    """

    def __init__(self, data: dict, file: str, quick_tracks: list | None = None) -> None:
        self.data = data
        self.file = file
        #: the tracks as the quick parse typed them (:class:`_QuickTrack`), else None: ``data["tracks"]``
        self.quick_tracks = quick_tracks
        self.units: str = data.get("units", "mm")
        self.scale: float = UNITS["length"][self.units]
        self.sources: list[str] = []
        self.columns: list[list[np.ndarray]] = []

    def fail(self, path: tuple, message: str) -> NoReturn:
        raise BoardError(self.file, format_path(path), message)

    def build(self) -> Board:
        # A huge number times the unit may overflow to inf; the 10 m checks
        # then report it, so numpy need not warn.
        with np.errstate(over="ignore"):
            return self._build()

    def _build(self) -> Board:
        data = self.data
        stackup = self.stackup()
        self.layer_index = {layer.name: i for i, layer in enumerate(stackup.layers)}
        self.dielectric_names = {d.name for d in stackup.dielectrics if d.name}
        self.mask_names = {m.name for m in (stackup.mask_top, stackup.mask_bottom) if m is not None and m.name}
        nets = self.nets()
        self.net_index: dict[str | None, int] = {net.name: i for i, net in enumerate(nets)}
        self.net_index[None] = NO_NET
        self.tracks(data.get("tracks", []))
        for i, arc in enumerate(data.get("arcs", [])):
            self.arc(i, arc)
        regions = tuple(self.region(i, r) for i, r in enumerate(data.get("regions", [])))
        vias = self.vias(data.get("vias", []))
        outline = self.polygon(("outline",), data["outline"], (), []) if "outline" in data else None
        if not self.sources and not regions:
            self.fail((), "the board has no copper: tracks, arcs and regions are all missing or empty")
        if self.columns:
            pieces = Pieces.from_columns(*(np.concatenate(c) for c in zip(*self.columns)))
        else:
            pieces = Pieces.empty()
        return Board(
            name=data.get("name") or Path(self.file).stem,
            path=self.file,
            stackup=stackup,
            nets=nets,
            pieces=pieces,
            sources=tuple(self.sources),
            regions=regions,
            vias=vias,
            outline=outline,
        )

    # ---- stackup and nets

    def stackup(self) -> Stackup:
        layers: list[CopperLayer] = []
        dielectrics: list[Dielectric] = []
        seen: dict[str, int] = {}
        entries = self.data["stackup"]
        # solder mask: optional, only as the very first and/or last entry
        masks = [i for i, entry in enumerate(entries) if "mask" in entry and "copper" not in entry
                 and "dielectric" not in entry]
        mask_top = mask_bottom = None
        first, last = 0, len(entries)
        for i in masks:
            if i == 0 and first == 0:
                mask_top, first = self.mask(i, entries[i]), 1
            elif i == len(entries) - 1 and i >= first:
                mask_bottom, last = self.mask(i, entries[i]), i
            else:
                self.fail(("stackup", i), "a solder mask can only be the first entry (over the top copper) or the "
                          "last (under the bottom copper)")
        if first >= last:
            self.fail(("stackup",), "needs at least one copper layer besides the solder mask")
        for i in range(first, last):
            entry = entries[i]
            if (i - first) % 2 == 0:
                if "copper" not in entry:
                    where = ("the stackup starts with copper" if i == 0 else "the top solder mask is followed by copper"
                             if i == first else "a dielectric is followed by copper")
                    self.fail(("stackup", i), f"expected a copper layer here ({where}): the stackup lists "
                              "copper and dielectric alternately, top to bottom, starting and ending with copper")
                name = entry["copper"]
                if name in seen:
                    self.fail(("stackup", i, "copper"), f"layer name {name!r} is already used by stackup[{seen[name]}]")
                seen[name] = i
                thickness = self.length(("stackup", i, "thickness"), entry["thickness"], COPPER_THICKNESS)
                layers.append(CopperLayer(name, entry["role"], thickness))
            else:
                if "dielectric" not in entry:
                    self.fail(("stackup", i), "expected a dielectric here: two copper layers need a "
                              "dielectric between them")
                dielectrics.append(self.dielectric(i, entry, "dielectric", DIELECTRIC_THICKNESS))
        if (last - first) % 2 == 0:
            where = "before the bottom solder mask" if mask_bottom is not None else ""
            self.fail(("stackup", last - 1), f"the stackup must end with a copper layer{' ' + where if where else ''}, "
                      "not a dielectric")
        return Stackup(tuple(layers), tuple(dielectrics), mask_top, mask_bottom)

    def mask(self, i: int, entry: dict) -> Dielectric:
        return self.dielectric(i, entry, "mask", MASK_THICKNESS)

    def dielectric(self, i: int, entry: dict, key: str, thickness: Bound) -> Dielectric:
        """A dielectric or solder-mask entry, every number within its bound."""
        tan_d = entry.get("loss_tangent")
        here = ("stackup", i)
        return Dielectric(
            thickness_mm=self.length(here + ("thickness",), entry["thickness"], thickness),
            er=self.bounded(here + ("er",), float(entry["er"]), PERMITTIVITY),
            loss_tangent=None if tan_d is None else self.bounded(here + ("loss_tangent",), float(tan_d), LOSS_TANGENT),
            name=entry.get(key),
        )

    def nets(self) -> tuple[Net, ...]:
        entries = self.data["nets"]
        seen: dict[str, int] = {}
        for i, entry in enumerate(entries):
            name = entry["name"]
            if name in seen:
                self.fail(("nets", i, "name"), f"net {name!r} is already declared at nets[{seen[name]}]")
            seen[name] = i
        partner: dict[str, str] = {}
        for i, entry in enumerate(entries):
            name, pair = entry["name"], entry.get("pair")
            if pair is None:
                continue
            where = ("nets", i, "pair")
            if pair == name:
                self.fail(where, f"net {name!r} cannot be its own differential partner")
            if pair not in seen:
                self.fail(where, f"unknown net {pair!r}: a pair partner must be declared in nets")
            for a, b in ((name, pair), (pair, name)):
                if partner.get(a, b) != b:
                    self.fail(where, f"conflicting differential pairs: {a!r} is already paired with {partner[a]!r}")
            partner[name], partner[pair] = pair, name
        return tuple(Net(e["name"], partner.get(e["name"])) for e in entries)

    # ---- names and coordinates

    def layer(self, path: tuple, name: str) -> int:
        index = self.layer_index.get(name)
        if index is None:
            if name in self.dielectric_names:
                self.fail(path, f"{name!r} is a dielectric, not a copper layer")
            if name in self.mask_names:
                self.fail(path, f"{name!r} is a solder mask, not a copper layer")
            self.fail(path, f"unknown layer {name!r} (copper layers: {', '.join(self.layer_index)})")
        return index

    def net(self, path: tuple, name: str | None) -> int:
        index = self.net_index.get(name)
        if index is None:
            self.fail(path, f"unknown net {name!r}: every net must be declared in nets")
        return index

    def lookup(self, kind: str, items: list, key: str, table: dict, find: Callable) -> np.ndarray:
        """The index of ``items[i][key]`` in ``table`` for every i, as an
        array; on an unknown name, ``find``'s message for the first."""
        # map and methodcaller run in C: a million items fast
        return self.lookup_names(kind, list(map(methodcaller("get", key), items)), key, table, find)

    def lookup_names(self, kind: str, names: list, key: str, table: dict, find: Callable) -> np.ndarray:
        """The index of ``names[i]`` (item i's ``key``) in ``table`` for every
        i, as an array; on an unknown name, ``find``'s message for the first."""
        out = np.fromiter(map(table.get, names, itertools.repeat(-9)), dtype=np.int64,
                          count=len(names)).astype(np.int32)
        bad = np.flatnonzero(out == -9)
        if len(bad):
            i = int(bad[0])
            find((kind, i, key), names[i])
        return out

    def length(self, path: tuple, value: float, bound: Bound) -> float:
        """A width, thickness, drill or pad in mm, refused outside its
        physical sanity ``bound`` (:mod:`checker.bounds`)."""
        mm = float(value) * self.scale
        if mm > MAX_COORDINATE_MM:
            self.fail(path, f"{value:g} {self.units} is more than 10 m "
                      f'(wrong "units"? the file says {self.units})')
        self.bounded(path, mm, bound)
        return mm

    def bounded(self, path: tuple, value: float, bound: Bound) -> float:
        problem = bound.problem(value)
        if problem is not None:
            self.fail(path, problem)
        return value

    def first_outside(self, values: np.ndarray, bound: Bound) -> int | None:
        """Index of the first of ``values`` (mm) outside ``bound``, or None."""
        bad = np.flatnonzero(~((values >= bound.low) & (values <= bound.high)))
        return int(bad[0]) if len(bad) else None

    def too_far(self, path: tuple, value: float) -> NoReturn:
        self.fail(path, f"coordinate {value:g} {self.units} is more than 10 m from the origin "
                  f'(wrong "units"? the file says {self.units})')

    def point(self, path: tuple, xy: list) -> np.ndarray:
        """One point in mm, refused if more than 10 m from the origin."""
        x, y = float(xy[0]) * self.scale, float(xy[1]) * self.scale
        if max(abs(x), abs(y)) > MAX_COORDINATE_MM:
            self.too_far(path, max(xy, key=abs))
        return np.array([x, y])

    def far_points(self, xy: np.ndarray) -> np.ndarray:
        return np.flatnonzero(np.abs(xy).max(axis=1) > MAX_COORDINATE_MM) if len(xy) else np.zeros(0, int)

    # ---- tracks and arcs -> pieces

    def tracks(self, tracks: list) -> None:
        """All tracks at once (:meth:`track_columns`), from their objects,
        or from the typed tracks of the quick parse (:func:`_read_fast`)."""
        get: Callable[[str], Callable[[Any], Any]]
        if self.quick_tracks is not None:
            tracks, get = self.quick_tracks, attrgetter
        else:
            get = itemgetter
        if tracks:
            self.track_columns(*(list(map(get(key), tracks)) for key in ("layer", "net", "width", "points")))

    def track_columns(self, layers: list, nets: list, widths: list, points: list) -> None:
        """All tracks at once, given column by column (each track's layer
        name, net name, width and list of points): one array of points,
        pieces between consecutive points of the same track, zero-length
        ones dropped."""
        t = len(layers)
        layer = self.lookup_names("tracks", layers, "layer", self.layer_index, self.layer)
        net = self.lookup_names("tracks", nets, "net", self.net_index, self.net)
        counts = np.fromiter(map(len, points), dtype=np.int64, count=t)
        first = np.concatenate(([0], np.cumsum(counts)[:-1]))
        # the schema check passed: every point is two numbers, so the flat run of coordinates is exact
        flat = itertools.chain.from_iterable(itertools.chain.from_iterable(points))
        xy = np.fromiter(flat, dtype=np.float64, count=2 * int(counts.sum())).reshape(-1, 2) * self.scale
        far = self.far_points(xy)
        if len(far):
            k = int(far[0])
            i = int(np.searchsorted(first, k, side="right") - 1)
            j = k - int(first[i])
            self.too_far(("tracks", i, "points", j), max(points[i][j], key=abs))
        # piece s joins point s and s + 1 unless s is the last point of a track
        not_first = np.ones(len(xy), dtype=bool)
        not_first[first] = False
        joins = np.flatnonzero(not_first[1:])  # s such that s + 1 is not a track's first point
        owner = np.repeat(np.arange(t), counts - 1)
        a, b = xy[joins], xy[joins + 1]
        keep = np.hypot(*(b - a).T) > MIN_PIECE_LENGTH_MM
        kept_per_track = np.bincount(owner[keep], minlength=t)
        empty = np.flatnonzero(kept_per_track == 0)
        if len(empty):
            self.fail(("tracks", int(empty[0]), "points"), "the track has no length: all its points coincide")
        owner, a, b = owner[keep], a[keep], b[keep]
        before = np.concatenate(([0], np.cumsum(kept_per_track)[:-1]))
        ordinal = np.arange(len(owner)) - before[owner]
        width = np.fromiter(widths, dtype=np.float64, count=t) * self.scale
        bad = self.first_outside(width, TRACE_WIDTH)
        if bad is not None:
            k = bad
            self.length(("tracks", k, "width"), widths[k], TRACE_WIDTH)
        base = len(self.sources)
        self.sources.extend(map("tracks[{}]".format, range(t)))
        self.columns.append([a[:, 0], a[:, 1], b[:, 0], b[:, 1], width[owner], net[owner], layer[owner],
                             owner + base, ordinal])

    def arc(self, i: int, a: dict) -> None:
        here = ("arcs", i)
        layer = self.layer(here + ("layer",), a["layer"])
        net = self.net(here + ("net",), a["net"])
        if "center" in a:
            c = self.point(here + ("center",), a["center"])
            r = float(a["radius"]) * self.scale
            if np.abs(c).max() + r > MAX_COORDINATE_MM:
                self.fail(here + ("radius",), "the arc reaches more than 10 m from the origin "
                          f'(wrong "units"? the file says {self.units})')
            a0, a1 = float(a["start_angle"]), float(a["end_angle"])
            if a0 == a1:
                self.fail(here + ("end_angle",), "equals start_angle: the arc sweeps nothing "
                          "(write start_angle + 360 for a full circle)")
            sweep = (a1 - a0) % 360.0 or 360.0
            xy = arc_polyline(c[0], c[1], r, math.radians(a0), math.radians(sweep))
            # the last point from end_angle itself, as the file gives it
            xy[-1] = c + r * np.array([math.cos(math.radians(a1)), math.sin(math.radians(a1))])
        else:
            p = [self.point(here + (k,), a[k]) for k in ("start", "mid", "end")]
            try:
                cx, cy, r, a0, sweep = circle_through(*p)
            except ValueError as exc:
                self.fail(here, f"start, mid and end {exc}: no arc passes through them")
            if max(abs(cx), abs(cy)) + r > MAX_COORDINATE_MM:
                self.fail(here, "start, mid and end are almost collinear: the circle through them "
                          "reaches more than 10 m from the origin")
            xy = arc_polyline(cx, cy, r, a0, sweep)
            xy[0], xy[-1] = p[0], p[2]  # exactly the file's end points
        n = len(xy) - 1
        self.columns.append([xy[:-1, 0], xy[:-1, 1], xy[1:, 0], xy[1:, 1],
                             np.full(n, self.length(here + ("width",), a["width"], TRACE_WIDTH)), np.full(n, net),
                             np.full(n, layer),
                             np.full(n, len(self.sources)), np.arange(n)])
        self.sources.append(f"arcs[{i}]")

    # ---- polygons

    def ring(self, path: tuple, points: list) -> np.ndarray:
        """One polygon ring in file units, checked to be a simple polygon
        (repeated corners and a closing corner equal to the first dropped)."""
        arr = np.asarray(points, dtype=np.float64)
        far = self.far_points(arr * self.scale)
        if len(far):
            k = int(far[0])
            self.too_far(path + (k,), max(points[k], key=abs))
        keep = np.ones(len(arr), dtype=bool)
        keep[1:] = np.any(arr[1:] != arr[:-1], axis=1)
        arr = arr[keep]
        if len(arr) > 1 and np.array_equal(arr[0], arr[-1]):
            arr = arr[:-1]
        if len(arr) < 3:
            self.fail(path, "degenerate polygon: fewer than 3 distinct corners")
        poly = shapely.Polygon(arr)
        if not poly.area > 0:
            self.fail(path, f"degenerate polygon: its corners enclose no area ({shapely.is_valid_reason(poly)})")
        if not poly.is_valid:
            self.fail(path, f"not a valid polygon: {shapely.is_valid_reason(poly)}")
        return arr

    def polygon(self, shell_path: tuple, outline: list, holes_path: tuple, holes: list) -> shapely.Polygon:
        """Validated in file units (so messages quote the file's numbers),
        returned in mm, exterior counter-clockwise."""
        shell = self.ring(shell_path, outline)
        shell_poly = shapely.Polygon(shell)
        inner = []
        for j, hole in enumerate(holes):
            ring = self.ring(holes_path + (j,), hole)
            if not shapely.within(shapely.Polygon(ring), shell_poly):
                self.fail(holes_path + (j,), "the hole lies (partly) outside the region's outline")
            inner.append(ring)
        if inner:
            poly = shapely.Polygon(shell, inner)
            if not poly.is_valid:
                self.fail(holes_path, f"the holes make an invalid polygon: {shapely.is_valid_reason(poly)} "
                          "(holes must not overlap each other or run along the outline)")
        return orient(shapely.Polygon(shell * self.scale, [h * self.scale for h in inner]), 1.0)

    def region(self, i: int, r: dict) -> Region:
        here = ("regions", i)
        layer = self.layer(here + ("layer",), r["layer"])
        net = self.net(here + ("net",), r.get("net"))
        polygon = self.polygon(here + ("outline",), r["outline"], here + ("holes",), r.get("holes", []))
        return Region(layer=layer, net=net, polygon=polygon, source=f"regions[{i}]")

    # ---- vias

    def vias(self, vias: list) -> Vias:
        n = len(vias)
        if not n:
            return Vias.empty()
        xy = np.array([v["at"] for v in vias], dtype=np.float64).reshape(-1, 2) * self.scale
        far = self.far_points(xy)
        if len(far):
            k = int(far[0])
            self.too_far(("vias", k, "at"), max(vias[k]["at"], key=abs))
        drill = np.fromiter((v["drill"] for v in vias), dtype=np.float64, count=n)
        pad = np.fromiter((v["pad"] for v in vias), dtype=np.float64, count=n)
        for key, column in (("drill", drill), ("pad", pad)):  # pad > drill is checked next
            bad = self.first_outside(column * self.scale, HOLE)
            if bad is not None:
                k = bad
                self.length(("vias", k, key), vias[k][key], HOLE)
        small = np.flatnonzero(pad <= drill)
        if len(small):
            k = int(small[0])
            drill_k, pad_k = vias[k]["drill"], vias[k]["pad"]
            self.fail(("vias", k, "pad"), f"must be larger than the drill ({drill_k:g}), got {pad_k:g}")
        first = self.lookup("vias", vias, "from", self.layer_index, self.layer)
        last = self.lookup("vias", vias, "to", self.layer_index, self.layer)
        wrong = np.flatnonzero(first >= last)
        if len(wrong):
            k = int(wrong[0])
            v = vias[k]
            if first[k] == last[k]:
                self.fail(("vias", k, "to"), f"a via joins at least two layers; from and to are both {v['to']!r}")
            self.fail(("vias", k), f"the from layer {v['from']!r} lies below the to layer {v['to']!r}: "
                      "give the upper layer as from and the lower as to")
        net = self.lookup("vias", vias, "net", self.net_index, self.net)
        return Vias(xy[:, 0].copy(), xy[:, 1].copy(), drill * self.scale, pad * self.scale, first, last, net)
