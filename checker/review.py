"""What a reviewer adds to a list of findings: waivers, a baseline, a verdict.

A :class:`Review` travels with a :class:`checker.runner.Result`; every output
format reads it. Findings are never removed: a waived finding stays in every
report, marked, and only stops counting towards failure.

* A **waiver file** (YAML, format: ``docs/waivers.md``) lists accepted
  findings, each with a reason, an author and a date. :func:`load_waivers`
  reads it strictly: anything wrong is one :class:`checker.errors.WaiverError`
  naming the file, the key path (``waivers[3].date``) and the YAML line.
* :func:`append_waiver` adds one entry by finding id, as text appended to the
  file (the user's comments and layout stay byte for byte), atomically.
* A **baseline** is an earlier couplint JSON report (:func:`load_baseline`);
  findings are then ``new`` or ``unchanged`` by stable id, and baseline
  findings that are gone are ``fixed``.
* :func:`build_review` applies both to one board's findings.

"Today" (for expiry) is a parameter everywhere; :func:`today` reads it from
the ``COUPLINT_TODAY`` environment variable (``YYYY-MM-DD``) if set, so a CI
run can be reproduced on another day.
"""

from __future__ import annotations

import datetime as _dt
import fnmatch
import json
import os
import re
from dataclasses import dataclass, field
from typing import Any

import yaml

from . import limits
from .atomic import write_atomically
from .errors import BaselineError, RuleError, UsageError, WaiverError
from .findings import SEVERITIES, Finding
from .reportformat import REPORT_VERSION
from .ruleset import NAME_PATTERN, check_duplicate_keys, join_key
from .yamldoc import YamlProblem, compose_document

#: ``--fail-on`` choices: the lowest severity that fails, or ``new`` (only
#: findings absent from the baseline fail).
FAIL_ON = ("warning", "error", "new")

#: The only waiver-file format version this module reads and writes.
WAIVER_FILE_VERSION = 1

#: The file ``couplint waive`` writes when none is named.
DEFAULT_WAIVER_FILE = "waivers.yaml"

#: Environment variable that overrides today's date (``YYYY-MM-DD``).
TODAY_ENV = "COUPLINT_TODAY"

#: A finding id: 12 hex digits (see :func:`checker.findings.finding_id`).
ID_PATTERN = re.compile(r"^[0-9a-fA-F]{12}$")

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


@dataclass(frozen=True)
class Baseline:
    """An earlier couplint JSON report: its findings as JSON objects."""

    path: str
    findings: tuple[dict, ...]


@dataclass
class Review:
    """Waivers and baseline applied to one board's findings."""

    #: finding id -> the waiver that covers it
    waived: dict[str, Waiver] = field(default_factory=dict)
    #: waivers past their expiry date (not applied; reported)
    expired: list[Waiver] = field(default_factory=list)
    #: waivers that matched no finding (reported)
    unused: list[Waiver] = field(default_factory=list)
    #: the waiver file, if any
    waiver_file: str | None = None
    #: finding id -> "new" or "unchanged" (only with a baseline)
    status: dict[str, str] = field(default_factory=dict)
    #: findings of the baseline that are gone now (their JSON objects)
    fixed: list[dict] = field(default_factory=list)
    #: the baseline report, if any
    baseline: str | None = None
    #: every waiver of the file -> the ids of the findings it matches
    #: (expired ones included: what they would cover)
    covers: dict[Waiver, list[str]] = field(default_factory=dict)

    def failing(self, findings: list[Finding], fail_on: str = "warning") -> list[Finding]:
        """The findings that make the run fail under ``fail_on``: not
        waived, and at or above the severity (``new``: absent from the
        baseline, any severity)."""
        out = []
        for f in findings:
            if f.id in self.waived:
                continue
            if fail_on == "new":
                if self.status.get(f.id, "new") != "new":
                    continue
            elif SEVERITIES.index(f.severity) > SEVERITIES.index(fail_on):
                continue
            out.append(f)
        return out

    def verdict(self, findings: list[Finding], fail_on: str = "warning") -> str:
        """``fail``, ``pass with known findings`` (``--fail-on new``: nothing
        new fails, but unwaived findings of warning or worse that the
        baseline already had remain), ``pass with waivers`` or ``pass``.
        Every verdict but ``fail`` exits 0."""
        if self.failing(findings, fail_on):
            return "fail"
        if fail_on == "new" and self.failing(findings, "warning"):
            return "pass with known findings"
        if any(f.id in self.waived for f in findings):
            return "pass with waivers"
        return "pass"


# --------------------------------------------------------------------------
# Dates
# --------------------------------------------------------------------------


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


# --------------------------------------------------------------------------
# Waiver files: reading
# --------------------------------------------------------------------------


def load_waivers(path: str | os.PathLike[str]) -> WaiverFile:
    """Read and validate a waiver file. Raises :class:`WaiverError`."""
    file = os.fspath(path)
    return parse_waivers(_read_text(file), file)


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


def _read_text(file: str) -> str:
    """The file's text, exactly (no newline translation)."""
    try:
        raw = limits.read_file(file)
    except limits.TooLarge as exc:
        raise WaiverError(file, None, str(exc)) from None
    except FileNotFoundError:
        raise WaiverError(file, None, "no such file") from None
    except IsADirectoryError:
        raise WaiverError(file, None, "is a folder, not a waiver file") from None
    except OSError as exc:
        raise WaiverError(file, None, f"cannot read the file: {exc.strerror or exc}") from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise WaiverError(file, None, f"not UTF-8 text (bad byte at offset {exc.start})") from None


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


# --------------------------------------------------------------------------
# Waiver files: appending
# --------------------------------------------------------------------------


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
    old_text = _read_text(file) if exists else ""
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


# --------------------------------------------------------------------------
# Baseline
# --------------------------------------------------------------------------

#: Keys a baseline finding must have, with the JSON type each must be.
_BASELINE_FINDING_KEYS = (("id", str), ("rule", str), ("severity", str), ("aggressor", str), ("victim", str),
                          ("layers", list), ("message", str))

#: Keys of a report finding that describe the review of that run, not the
#: finding; dropped from ``fixed`` findings.
_REVIEW_KEYS = ("waiver", "status")


def load_baseline(path: str | os.PathLike[str]) -> Baseline:
    """Read an earlier couplint JSON report. Raises :class:`BaselineError`
    naming the file and the JSON place."""
    file = os.fspath(path)
    try:
        raw = limits.read_file(file)
    except limits.TooLarge as exc:
        raise BaselineError(file, None, str(exc)) from None
    except FileNotFoundError:
        raise BaselineError(file, None, "no such file") from None
    except IsADirectoryError:
        raise BaselineError(file, None, "is a folder, not a couplint JSON report") from None
    except OSError as exc:
        raise BaselineError(file, None, f"cannot read the file: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise BaselineError(file, None, f"not UTF-8 text (bad byte at offset {exc.start})") from None
    if not text.strip():
        raise BaselineError(file, None, "the file is empty (expected a report from 'couplint check --format json')")

    def pairs(items: list[tuple[str, Any]]) -> dict:
        out = _Object(items)
        if len(out) != len(items):
            seen: set[str] = set()
            out.duplicate = next(k for k, _ in items if k in seen or seen.add(k))  # type: ignore[func-returns-value]
        return out

    try:
        data = json.loads(text, object_pairs_hook=pairs)
    except json.JSONDecodeError as exc:
        raise BaselineError(file, f"line {exc.lineno}, column {exc.colno}", f"invalid JSON: {exc.msg}") from None
    except RecursionError:
        raise BaselineError(file, None, "invalid JSON: nested far too deeply (a couplint report nests a few "
                                        "levels)") from None
    except ValueError:  # Python refuses to convert an integer of thousands of digits
        raise BaselineError(file, None, "invalid JSON: a number with thousands of digits") from None

    def fail(place: str | None, message: str) -> BaselineError:
        return BaselineError(file, place, message)

    if not isinstance(data, dict) or data.get("report") != "couplint":
        raise fail("report" if isinstance(data, dict) else None,
                   "not a couplint JSON report (expected an object with \"report\": \"couplint\", as written by "
                   "'couplint check --format json')")
    _no_duplicate(data, "", fail)
    version = data.get("report_version")
    if not isinstance(version, int) or isinstance(version, bool) or not 1 <= version <= REPORT_VERSION:
        raise fail("report_version", f"{json.dumps(version)} is not a report version this couplint reads "
                                     f"(1 to {REPORT_VERSION})")
    if "findings" not in data:
        raise fail(None, "missing \"findings\"")
    findings = data["findings"]
    if not isinstance(findings, list):
        raise fail("findings", f"expected a list of findings, got {_json_kind(findings)}")
    out = []
    for i, f in enumerate(findings):
        place = f"findings[{i}]"
        if not isinstance(f, dict):
            raise fail(place, f"expected a finding object, got {_json_kind(f)}")
        _no_duplicate(f, place, fail)
        for key, kind in _BASELINE_FINDING_KEYS:
            if key not in f:
                raise fail(place, f"missing \"{key}\"")
            if not isinstance(f[key], kind):
                raise fail(f"{place}.{key}", f"expected {'text' if kind is str else 'a list'}, "
                                             f"got {_json_kind(f[key])}")
        if not ID_PATTERN.match(f["id"]) or f["id"] != f["id"].lower():
            raise fail(f"{place}.id", f"{f['id']!r} is not a finding id (12 lowercase hex digits)")
        if f["severity"] not in SEVERITIES:
            raise fail(f"{place}.severity", f"{f['severity']!r} is not a severity ({', '.join(SEVERITIES)})")
        for j, layer in enumerate(f["layers"]):
            if not isinstance(layer, str):
                raise fail(f"{place}.layers[{j}]", f"expected a layer name, got {_json_kind(layer)}")
        out.append({k: v for k, v in f.items() if k not in _REVIEW_KEYS})
    return Baseline(file, tuple(out))


class _Object(dict):
    """A JSON object; ``duplicate`` names a key given twice."""

    duplicate: str | None = None


def _no_duplicate(obj: dict, place: str, fail) -> None:
    dup = getattr(obj, "duplicate", None)
    if dup is not None:
        raise fail(f"{place}.{dup}" if place else dup, "the key appears twice in this object")


def _json_kind(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    if isinstance(value, str):
        return f"the text {value!r}"
    return "an object" if isinstance(value, dict) else "a list"


# --------------------------------------------------------------------------
# Applying
# --------------------------------------------------------------------------


def build_review(findings: list[Finding], waivers: WaiverFile | None = None, baseline: Baseline | None = None,
                 on: _dt.date | None = None) -> Review:
    """Apply a waiver file and a baseline to one board's findings.

    A finding is waived by the first waiver in the file that matches it and
    has not expired, waivers by id taking precedence over waivers by rule
    and patterns. An expired waiver is not applied and is listed in
    ``expired``; one that matches no finding is listed in ``unused``. ``on``
    is the date expiry is judged on (default :func:`today`, only read when
    there are waivers).
    """
    review = Review()
    if waivers is not None:
        review.waiver_file = waivers.path
        day = on if on is not None else today()
        active: list[Waiver] = []
        for w in waivers.waivers:
            review.covers[w] = [f.id for f in findings if w.matches(f)]
            if w.expired(day):
                review.expired.append(w)
            elif not review.covers[w]:
                review.unused.append(w)
            else:
                active.append(w)
        for w in sorted(active, key=lambda w: w.id is None):  # stable: file order within each group
            for fid in review.covers[w]:
                review.waived.setdefault(fid, w)
    if baseline is not None:
        review.baseline = baseline.path
        before = {f["id"] for f in baseline.findings}
        now = {f.id for f in findings}
        review.status = {f.id: "unchanged" if f.id in before else "new" for f in findings}
        review.fixed = [f for f in baseline.findings if f["id"] not in now]
    return review


def waiver_mark(w: Waiver) -> dict:
    """What a waived finding carries in the JSON report."""
    return {"reason": w.reason, "author": w.author, "date": w.date.isoformat(),
            "expires": w.expires.isoformat() if w.expires else None, "source": w.source}


def waiver_entry(w: Waiver, review: Review | None = None) -> dict:
    """A whole waiver (what it matches, then :func:`waiver_mark`), and with
    a review the ids of the findings it matches."""
    d = {"id": w.id, "rule": w.rule, "nets": list(w.nets) if w.nets else None, "layers": w.layers,
         **waiver_mark(w)}
    if review is not None:
        d["findings"] = sorted(review.covers.get(w, []))
    return d


def review_dict(review: Review) -> dict:
    """The ``review`` section of the JSON report."""
    return {
        "waiver_file": review.waiver_file,
        "expired": [waiver_entry(w, review) for w in review.expired],
        "unused": [waiver_entry(w) for w in review.unused],
        "baseline": review.baseline,
        "fixed": list(review.fixed),
    }
