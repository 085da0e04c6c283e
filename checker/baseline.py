"""A baseline: an earlier couplint JSON report of the same board, read
strictly (:func:`load_baseline`), so findings can be classed ``new`` or
``unchanged`` by stable id and the baseline's findings that are gone
``fixed`` (:func:`checker.review.build_review`).
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from typing import Any

from .describe import describe_words
from .errors import BaselineError
from .findings import ID_PATTERN, SEVERITIES
from .inputfile import read_text
from .reportformat import REPORT_VERSION


@dataclass(frozen=True)
class Baseline:
    """An earlier couplint JSON report: its findings as JSON objects."""

    path: str
    findings: tuple[dict, ...]


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
    text = read_text(file, BaselineError, "a couplint JSON report", bom=True)
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
        raise fail("findings", f"expected a list of findings, got {describe_words(findings, json=True)}")
    out = []
    for i, f in enumerate(findings):
        place = f"findings[{i}]"
        if not isinstance(f, dict):
            raise fail(place, f"expected a finding object, got {describe_words(f, json=True)}")
        _no_duplicate(f, place, fail)
        for key, kind in _BASELINE_FINDING_KEYS:
            if key not in f:
                raise fail(place, f"missing \"{key}\"")
            if not isinstance(f[key], kind):
                raise fail(f"{place}.{key}", f"expected {'text' if kind is str else 'a list'}, "
                                             f"got {describe_words(f[key], json=True)}")
        if not ID_PATTERN.match(f["id"]) or f["id"] != f["id"].lower():
            raise fail(f"{place}.id", f"{f['id']!r} is not a finding id (12 lowercase hex digits)")
        if f["severity"] not in SEVERITIES:
            raise fail(f"{place}.severity", f"{f['severity']!r} is not a severity ({', '.join(SEVERITIES)})")
        for j, layer in enumerate(f["layers"]):
            if not isinstance(layer, str):
                raise fail(f"{place}.layers[{j}]", f"expected a layer name, got {describe_words(layer, json=True)}")
        out.append({k: v for k, v in f.items() if k not in _REVIEW_KEYS})
    return Baseline(file, tuple(out))


class _Object(dict):
    """A JSON object; ``duplicate`` names a key given twice."""

    duplicate: str | None = None


def _no_duplicate(obj: dict, place: str, fail) -> None:
    dup = getattr(obj, "duplicate", None)
    if dup is not None:
        raise fail(f"{place}.{dup}" if place else dup, "the key appears twice in this object")


