"""Waiver files: accepted findings, each with a reason, an author and a date.

A **waiver file** (YAML, format: ``docs/waivers.md``) lists accepted
findings. :func:`load_waivers` reads it strictly: anything wrong is one
:class:`checker.errors.WaiverError` naming the file, the key path
(``waivers[3].date``) and the YAML line. :func:`append_waiver` adds one
entry by finding id, as text appended to the file (the user's comments and
layout stay byte for byte), atomically. Applying waivers to findings is
:func:`checker.review.build_review`.

"Today" (for expiry) is a parameter everywhere; :func:`today` reads it from
the ``COUPLINT_TODAY`` environment variable (``YYYY-MM-DD``) if set, so a CI
run can be reproduced on another day.
"""

from __future__ import annotations

import datetime as _dt
import fnmatch
import os
import re
from dataclasses import dataclass
from typing import Any

import yaml

from .atomic import write_atomically
from .errors import RuleError, UsageError, WaiverError
from .findings import ID_PATTERN, Finding
from .inputfile import read_text
from .ruleset import NAME_PATTERN, check_duplicate_keys, join_key
from .yamldoc import YamlProblem, compose_document

#: The only waiver-file format version this module reads and writes.
WAIVER_FILE_VERSION = 1


#: The file ``couplint waive`` writes when none is named.
DEFAULT_WAIVER_FILE = "waivers.yaml"


#: Environment variable that overrides today's date (``YYYY-MM-DD``).
TODAY_ENV = "COUPLINT_TODAY"


TOP_LEVEL_KEYS = ("version", "waivers")


WAIVER_KEYS = ("id", "rule", "nets", "layers", "reason", "author", "date", "expires")


#: What ``couplint waive`` writes into a file it creates.
NEW_FILE_HEADER = (
    "# couplint waivers: accepted findings, each with a reason (format: docs/waivers.md).\n"
    "# 'couplint waive ID --reason TEXT' appends entries; you may edit this file by hand.\n"
    f"version: {WAIVER_FILE_VERSION}\n"
    "waivers:\n"
)


_DATE_TEXT = re.compile(r"^\d{4}-\d{2}-\d{2}$")


@dataclass(frozen=True)
class Waiver:
    """One accepted violation.

    Matches a finding by ``id``, or by ``rule`` plus glob patterns for the
    nets and the layers (``nets`` = (aggressor pattern, victim pattern),
    ``layers`` a pattern for the ``/``-joined layer names). ``source`` says
    where it was written (``file:line``).
    """

    reason: str
    author: str
    date: _dt.date
    id: str | None = None
    rule: str | None = None
    nets: tuple[str, str] | None = None
    layers: str | None = None
    expires: _dt.date | None = None
    source: str = ""

    def matches(self, finding: Finding) -> bool:
        """Whether this waiver covers ``finding`` (expiry aside).

        >>> w = Waiver("r", "a", _dt.date(2026, 1, 1), rule="same-layer-spacing", nets=("SPI_*", "THERM*"))
        >>> from checker.findings import Finding
        >>> f = Finding("0" * 12, "same-layer-spacing", "spacing-ratio", "warning", "SPI_SCK", "THERM_IN",
        ...             ("TOP",), (0, 0, 1, 1), (0, 0), 2.0, 3.0, "centre/width", "", 1.5)
        >>> w.matches(f)
        True
        """
        if self.id is not None:
            return finding.id == self.id
        if finding.rule != self.rule or self.nets is None:
            return False
        if not (fnmatch.fnmatchcase(finding.aggressor, self.nets[0])
                and fnmatch.fnmatchcase(finding.victim, self.nets[1])):
            return False
        return self.layers is None or fnmatch.fnmatchcase("/".join(finding.layers), self.layers)

    def expired(self, today: _dt.date) -> bool:
        """Past its ``expires`` date (a waiver holds through that day)."""
        return self.expires is not None and self.expires < today

    def describe(self) -> str:
        """What it matches, in one short phrase."""
        if self.id is not None:
            return f"id {self.id}"
        nets = self.nets or ("*", "*")  # a waiver by pattern always has its nets (checked when read)
        text = f"rule {self.rule}, nets {nets[0]} -> {nets[1]}"
        return text + (f", layers {self.layers}" if self.layers is not None else "")


@dataclass(frozen=True)
class WaiverFile:
    """A validated waiver file: its entries in file order."""

    path: str
    waivers: tuple[Waiver, ...]
    #: column of the ``-`` of the entries (``None``: no entries yet)
    item_indent: int | None = None


def parse_date(text: str) -> _dt.date:
    """``YYYY-MM-DD`` -> date; ``ValueError`` with a readable reason."""
    text = text.strip()
    if not _DATE_TEXT.match(text):
        raise ValueError(f"{text!r} is not a date written YYYY-MM-DD")
    try:
        return _dt.date.fromisoformat(text)
    except ValueError as exc:
        raise ValueError(f"{text!r} is not a date ({exc})") from None


def today(environ: dict[str, str] | None = None) -> _dt.date:
    """Today's date, or the one in ``$COUPLINT_TODAY`` (for reproducible CI)."""
    env = os.environ if environ is None else environ
    value = env.get(TODAY_ENV)
    if value is None or value == "":
        return _dt.date.today()
    try:
        return parse_date(value)
    except ValueError as exc:
        raise UsageError(f"environment variable {TODAY_ENV}: {exc}") from None


def load_waivers(path: str | os.PathLike[str]) -> WaiverFile:
    """Read and validate a waiver file. Raises :class:`WaiverError`."""
    file = os.fspath(path)
    return parse_waivers(read_text(file, WaiverError, "a waiver file"), file)


def parse_waivers(text: str, file: str) -> WaiverFile:
    """Validate the text of a waiver file; ``file`` names it in messages and
    in each waiver's ``source``."""

    node = _compose(text, file)
    if node is None:
        raise WaiverError(file, None, "the file is empty (a waiver file starts with 'version: 1' and a "
                                      "'waivers:' list; see docs/waivers.md)")
    try:
        check_duplicate_keys(node, file)
    except RuleError as exc:  # the rule loader's check, reported as a waiver-file error
        raise WaiverError(file, exc.place, exc.message) from None
    top = _mapping(node, "", file, "a mapping with 'version' and 'waivers'")
    for key, (key_node, _) in top.items():
        if key not in TOP_LEVEL_KEYS:
            raise WaiverError(file, join_key("", key), f"unknown key (accepted: {', '.join(TOP_LEVEL_KEYS)})",
                              _line(key_node))
    if "version" not in top:
        raise WaiverError(file, None, f"missing required key 'version' (write 'version: {WAIVER_FILE_VERSION}' "
                                      f"first)", _line(node))
    version = top["version"][1]
    if not (isinstance(version, yaml.ScalarNode) and version.tag == _INT_TAG
            and version.value == str(WAIVER_FILE_VERSION)):
        raise WaiverError(file, "version", f"{_describe_node(version)} is not a supported version (this couplint "
                                           f"reads version {WAIVER_FILE_VERSION})", _line(version))
    if "waivers" not in top:
        raise WaiverError(file, None, "missing required key 'waivers' (a list of waivers; may be empty)",
                          _line(node))
    entries = top["waivers"][1]
    if _is_null(entries):
        return WaiverFile(file, ())
    if not isinstance(entries, yaml.SequenceNode):
        raise WaiverError(file, "waivers", f"expected a list of waivers, got {_describe_node(entries)}",
                          _line(entries))
    waivers: list[Waiver] = []
    first_id: dict[str, str] = {}
    first_pattern: dict[tuple, str] = {}
    for i, item in enumerate(entries.value):
        place = f"waivers[{i}]"
        w = _parse_waiver(item, file, place)
        here = f"{place} (line {_line(item)})"
        if w.id is not None:
            if w.id in first_id:
                raise WaiverError(file, join_key(place, "id"), f"{w.id} is already waived by {first_id[w.id]}; "
                                                            f"each id may be waived once", _line(item))
            first_id[w.id] = here
        else:
            pattern = (w.rule, w.nets, w.layers)
            if pattern in first_pattern:
                raise WaiverError(file, place, f"same rule, nets and layers as {first_pattern[pattern]}; "
                                               f"merge the two entries", _line(item))
            first_pattern[pattern] = here
        waivers.append(w)
    indent = entries.start_mark.column if entries.value and not entries.flow_style else None
    return WaiverFile(file, tuple(waivers), indent)


def _parse_waiver(node: yaml.Node, file: str, place: str) -> Waiver:

    body = _mapping(node, place, file, "a mapping with 'id' or 'rule', and 'reason', 'author' and 'date'")
    for key, (key_node, _) in body.items():
        if key not in WAIVER_KEYS:
            raise WaiverError(file, join_key(place, key), f"unknown key (accepted: {', '.join(WAIVER_KEYS)})",
                              _line(key_node))
    line = _line(node)
    if "id" in body and "rule" in body:
        raise WaiverError(file, place, "give either 'id' (one finding) or 'rule' with 'nets' (matching "
                                       "findings), not both", line)
    if "id" not in body and "rule" not in body:
        raise WaiverError(file, place, "missing 'id' (one finding, 12 hex digits) or 'rule' with 'nets' "
                                       "(findings matching patterns)", line)
    fields: dict[str, Any] = {}
    if "id" in body:
        for key in ("nets", "layers"):
            if key in body:
                raise WaiverError(file, join_key(place, key), f"'{key}' only goes with 'rule' (an id names one "
                                                           f"finding already)", _line(body[key][0]))
        value = body["id"][1]
        text = _text(value, file, join_key(place, "id"))
        if not ID_PATTERN.match(text):
            raise WaiverError(file, join_key(place, "id"), f"{text!r} is not a finding id (12 hex digits, as "
                                                        f"'couplint check' prints in [brackets])", _line(value))
        fields["id"] = text.lower()
    else:
        value = body["rule"][1]
        text = _text(value, file, join_key(place, "rule"))
        if not NAME_PATTERN.match(text):
            raise WaiverError(file, join_key(place, "rule"), f"{text!r} is not a rule name (lowercase letter "
                                                          f"first, then lowercase letters, digits and '-')",
                              _line(value))
        fields["rule"] = text
        if "nets" not in body:
            raise WaiverError(file, place, "missing 'nets': [aggressor pattern, victim pattern] ('*' matches "
                                           "any net)", line)
        fields["nets"] = _patterns(body["nets"][1], file, join_key(place, "nets"))
        if "layers" in body:
            fields["layers"] = _pattern(body["layers"][1], file, join_key(place, "layers"))
    for key in ("reason", "author"):
        if key not in body:
            raise WaiverError(file, place, f"missing required key '{key}'", line)
        fields[key] = _text(body[key][1], file, join_key(place, key))
    if "date" not in body:
        raise WaiverError(file, place, "missing required key 'date' (when the waiver was granted, YYYY-MM-DD)",
                          line)
    fields["date"] = _date(body["date"][1], file, join_key(place, "date"))
    if "expires" in body:
        expires = _date(body["expires"][1], file, join_key(place, "expires"))
        if expires < fields["date"]:
            raise WaiverError(file, join_key(place, "expires"), f"{expires} is before the waiver's date "
                                                             f"{fields['date']}", _line(body["expires"][1]))
        fields["expires"] = expires
    return Waiver(source=f"{file}:{line}", **fields)


def _patterns(node: yaml.Node, file: str, place: str) -> tuple[str, str]:
    if not isinstance(node, yaml.SequenceNode) or len(node.value) != 2:
        raise WaiverError(file, place, f"expected [aggressor pattern, victim pattern], got "
                                       f"{_describe_node(node)}", _line(node))
    return (_pattern(node.value[0], file, f"{place}[0]"), _pattern(node.value[1], file, f"{place}[1]"))


def _pattern(node: yaml.Node, file: str, place: str) -> str:
    """A glob (``fnmatch``: ``*``, ``?``, ``[...]``), case sensitive."""
    return _text(node, file, place)


def _text(node: yaml.Node, file: str, place: str) -> str:
    """Non-empty text. Any scalar is read as written (``author: 2024`` is the
    text '2024'); null, lists and mappings are errors."""
    if not isinstance(node, yaml.ScalarNode) or _is_null(node):
        raise WaiverError(file, place, f"expected text, got {_describe_node(node)}", _line(node))
    text = node.value.strip()
    if not text:
        raise WaiverError(file, place, "must not be empty", _line(node))
    return text


def _date(node: yaml.Node, file: str, place: str) -> _dt.date:
    if not isinstance(node, yaml.ScalarNode) or _is_null(node):
        raise WaiverError(file, place, f"expected a date written YYYY-MM-DD, got {_describe_node(node)}",
                          _line(node))
    try:
        return parse_date(node.value)
    except ValueError as exc:
        raise WaiverError(file, place, str(exc), _line(node)) from None


_NULL_TAG = "tag:yaml.org,2002:null"


_INT_TAG = "tag:yaml.org,2002:int"


_MERGE_TAG = "tag:yaml.org,2002:merge"


def _is_null(node: yaml.Node) -> bool:
    return isinstance(node, yaml.ScalarNode) and node.tag == _NULL_TAG


def _line(node: yaml.Node) -> int:
    return node.start_mark.line + 1


def _mapping(node: yaml.Node, place: str, file: str, expected: str) -> dict[str, tuple[yaml.Node, yaml.Node]]:
    """key -> (key node, value node) of a mapping node, merge keys (``<<``) applied."""
    if not isinstance(node, yaml.MappingNode):
        raise WaiverError(file, place or None, f"expected {expected}, got {_describe_node(node)}", _line(node))
    out: dict[str, tuple[yaml.Node, yaml.Node]] = {}
    merged: dict[str, tuple[yaml.Node, yaml.Node]] = {}
    for key_node, value_node in node.value:
        if key_node.tag == _MERGE_TAG:
            sources = value_node.value if isinstance(value_node, yaml.SequenceNode) else [value_node]
            for source in sources:
                for key, pair in _mapping(source, place, file, "a mapping to merge ('<<')").items():
                    merged.setdefault(key, pair)
            continue
        if not isinstance(key_node, yaml.ScalarNode):
            raise WaiverError(file, place or None, "a key must be plain text", _line(key_node))
        out[key_node.value] = (key_node, value_node)
    for key, pair in merged.items():
        out.setdefault(key, pair)
    return out


def _describe_node(node: yaml.Node) -> str:
    if isinstance(node, yaml.MappingNode):
        return "a mapping"
    if isinstance(node, yaml.SequenceNode):
        return f"a list of {len(node.value)}"
    if _is_null(node):
        return "null (nothing)"
    if node.tag == "tag:yaml.org,2002:str":
        return f"the text {node.value!r}"
    return node.value


def _compose(text: str, file: str) -> yaml.Node | None:
    """The document's node tree (safe tags only); a YAML error becomes one
    :class:`WaiverError` with its line and column, worded as every YAML
    door words it (:mod:`checker.yamldoc`)."""
    try:
        return compose_document(text, MAX_YAML_NODES, "a waiver file")
    except YamlProblem as exc:
        raise WaiverError(file, exc.place, exc.message) from None


#: Most values a waiver file may hold once its YAML aliases are expanded
#: (a waiver is about ten).
MAX_YAML_NODES = 1_000_000


def append_waiver(path: str | os.PathLike[str], finding_id: str, reason: str, author: str,
                  expires: _dt.date | None = None, on: _dt.date | None = None) -> Waiver:
    """Append a waiver for ``finding_id`` to the waiver file at ``path``
    (created with a header if missing) and return it as read back.

    The existing file is validated first and must not waive the id already.
    The entry is appended as text, so everything already in the file stays
    byte for byte; the result is validated before it replaces the file,
    through a temporary file beside it (an interrupted run leaves the old
    file). ``on`` is the waiver's date (default: :func:`today`).
    """
    file = os.fspath(path)
    fid = finding_id.strip()
    if not ID_PATTERN.match(fid):
        raise UsageError(f"{finding_id!r} is not a finding id (12 hex digits, as 'couplint check' prints in "
                         f"[brackets])")
    fid = fid.lower()
    reason, author = reason.strip(), author.strip()
    if not reason:
        raise UsageError("--reason must not be empty: say why the finding is acceptable")
    if not author:
        raise UsageError("--author must not be empty")
    day = on if on is not None else today()
    if expires is not None and expires < day:
        raise UsageError(f"--expires {expires} is before today ({day}); the waiver would never apply")

    target = os.path.realpath(file)  # a symlinked waiver file stays a symlink
    exists = os.path.lexists(file)
    old_text = read_text(file, WaiverError, "a waiver file") if exists else ""
    old = parse_waivers(old_text, file) if exists else None
    if old is not None:
        for i, w in enumerate(old.waivers):
            if w.id == fid:
                raise WaiverError(file, f"waivers[{i}].id", f"{fid} is already waived (by {w.author}, {w.date}: "
                                                            f"{w.reason}); edit that entry instead",
                                  int(w.source.rsplit(":", 1)[1]))
    base = old_text if exists else NEW_FILE_HEADER
    newline = "\r\n" if "\r\n" in base else "\n"
    pad = " " * (old.item_indent if old is not None and old.item_indent is not None else 2)
    lines = [f"{pad}- id: {_scalar(fid)}", f"{pad}  reason: {_scalar(reason)}",
             f"{pad}  author: {_scalar(author)}", f"{pad}  date: {day.isoformat()}"]
    if expires is not None:
        lines.append(f"{pad}  expires: {expires.isoformat()}")
    separator = newline if base and not base.endswith(("\n", "\r")) else ""
    new_text = base + separator + newline.join(lines) + newline

    layout_hint = ("cannot append a waiver to this file as text: 'waivers:' must be the last key, written "
                   "as a block list ('- id: ...' lines) or left empty ('waivers:' alone, not '[]'); add the "
                   "entry by hand or move 'waivers:' last")
    try:
        new = parse_waivers(new_text, file)
    except WaiverError:
        raise WaiverError(file, "waivers", layout_hint) from None
    expected = Waiver(reason=reason, author=author, date=day, id=fid, expires=expires)
    added = new.waivers[-1] if new.waivers else None
    if (old is not None and new.waivers[:-1] != old.waivers) or added is None or \
            _without_source(added) != expected:
        raise WaiverError(file, "waivers", layout_hint)

    mode = _file_mode(target) if exists else _new_file_mode()

    def emit(handle) -> None:
        handle.write(new_text)
        handle.flush()
        if hasattr(os, "fchmod"):
            os.fchmod(handle.fileno(), mode)

    try:
        write_atomically(target, emit)
    except OSError as exc:  # the old file is intact (see write_atomically)
        raise WaiverError(file, None, f"cannot write the file: {exc.strerror or exc}; it is unchanged") from None
    return added


def _without_source(w: Waiver) -> Waiver:
    return Waiver(reason=w.reason, author=w.author, date=w.date, id=w.id, rule=w.rule, nets=w.nets,
                  layers=w.layers, expires=w.expires)


def _scalar(text: str) -> str:
    """``text`` as a YAML scalar that reads back as exactly ``text``: plain
    when that is safe, else double-quoted."""
    plain = (re.fullmatch(r"[A-Za-z0-9_(][^\n\r\t]*", text) is not None and ": " not in text and " #" not in text
             and not text.endswith((":", " ")))
    if plain:
        try:
            if yaml.safe_load(text) == text:
                return text
        except yaml.YAMLError:
            pass
    return yaml.safe_dump(text, default_style='"', allow_unicode=True, width=float("inf")).rstrip("\n")


def _file_mode(path: str) -> int:
    return os.stat(path).st_mode & 0o7777


def _new_file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def waiver_mark(w: Waiver) -> dict:
    """What a waived finding carries in the JSON report."""
    return {"reason": w.reason, "author": w.author, "date": w.date.isoformat(),
            "expires": w.expires.isoformat() if w.expires else None, "source": w.source}


