"""JUnit XML: the testsuites / testsuite / testcase schema CI systems read.

One ``<testsuite>`` per board, named by the board's path. Inside it, a
testcase ``load`` (an ``<error>`` when the board could not be loaded or
checked) and one testcase per rule of the rule set, in rule-set order. A
rule's testcase fails (``<failure>``) when the rule has findings that count
towards failure under ``--fail-on``; the failure text lists each of them with
its id, severity, nets, layers and place. Waived findings are not failures:
they are listed in the testcase's ``<system-out>``. When a board could not be
loaded its rule testcases are ``<skipped>``.

No clock times and no timestamps, so the same input gives the same bytes.
Text that XML 1.0 cannot carry at all (control characters) is written as
``\\xNN``; ElementTree escapes ``& < > "``.

The builders take plain data (finding dicts as in the JSON report), so a
batch can assemble the document from worker results; :func:`junit_for_result`
does it for one checked board.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from collections.abc import Iterable, Sequence
from typing import TYPE_CHECKING

from .visible import xml_visible

if TYPE_CHECKING:  # pragma: no cover
    from ..runner import Result

#: The testcase that stands for reading and checking the board file.
LOAD_CASE = "load"

def clean(text: object) -> str:
    """``text`` as a string XML 1.0 can hold: characters it forbids or
    discourages become ``\\xNN`` (:func:`.visible.xml_visible`)."""
    return xml_visible(text)


def describe_finding(f: dict) -> str:
    """One line for a finding dict: id, severity, nets, layers, place, message."""
    layers = "/".join(f.get("layers") or ()) or "-"
    at = f.get("at") or (None, None)
    bbox = f.get("bbox")
    where = f"at ({at[0]}, {at[1]}) mm" if at[0] is not None else ""
    if bbox:
        where += f", bbox ({', '.join(str(v) for v in bbox)}) mm"
    return (f"[{f.get('id')}] {f.get('severity')}: {f.get('aggressor')} -> {f.get('victim')} "
            f"on {layers} {where}: {f.get('message')}")


def board_suite(*, path: str, name: str, rules: Sequence[str], failing: Sequence[dict] = (),
                waived: Sequence[dict] = (), error: str | None = None) -> ET.Element:
    """The ``<testsuite>`` of one board.

    ``rules``: rule names in rule-set order; ``failing``/``waived``: finding
    dicts (``rule`` names the testcase); ``error``: why the board could not be
    loaded or checked (then every rule testcase is skipped).
    """
    suite = ET.Element("testsuite")
    props = ET.SubElement(suite, "properties")
    ET.SubElement(props, "property", name="board", value=clean(name))
    ET.SubElement(props, "property", name="path", value=clean(path))
    classname = clean(path)
    failures = errors = skipped = 0

    load = ET.SubElement(suite, "testcase", name=LOAD_CASE, classname=classname)
    if error is not None:
        errors += 1
        el = ET.SubElement(load, "error", message=clean(error), type="load")
        el.text = clean(error)

    by_rule: dict[str, list[dict]] = {r: [] for r in rules}
    waived_by_rule: dict[str, list[dict]] = {r: [] for r in rules}
    for f in failing:
        by_rule.setdefault(f["rule"], []).append(f)
    for f in waived:
        waived_by_rule.setdefault(f["rule"], []).append(f)
    for rule in by_rule:
        case = ET.SubElement(suite, "testcase", name=clean(rule), classname=classname)
        if error is not None:
            skipped += 1
            ET.SubElement(case, "skipped", message="board not checked")
            continue
        found = by_rule[rule]
        if found:
            failures += 1
            worst = "error" if any(f.get("severity") == "error" for f in found) else "warning"
            el = ET.SubElement(case, "failure", type=worst, message=clean(
                f"{len(found)} failing finding{'s' if len(found) != 1 else ''} of rule {rule}"))
            el.text = clean("\n".join(describe_finding(f) for f in found))
        if waived_by_rule.get(rule):
            out = ET.SubElement(case, "system-out")
            out.text = clean("\n".join("waived: " + describe_finding(f) for f in waived_by_rule[rule]))

    suite.set("name", classname)
    suite.set("tests", str(1 + len(by_rule)))
    suite.set("failures", str(failures))
    suite.set("errors", str(errors))
    suite.set("skipped", str(skipped))
    return suite


def document(suites: Iterable[ET.Element]) -> str:
    """The whole JUnit file for some ``<testsuite>`` elements, with totals."""
    root = ET.Element("testsuites", name="couplint")
    totals = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}
    for suite in suites:
        root.append(suite)
        for key in totals:
            totals[key] += int(suite.get(key, "0"))
    for key, value in totals.items():
        root.set(key, str(value))
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def result_findings(result: "Result") -> tuple[list[dict], list[dict]]:
    """(failing, waived) finding dicts of a checked board."""
    failing_ids = {f.id for f in result.failing()}
    failing = [f.to_dict() for f in result.findings if f.id in failing_ids]
    waived = [f.to_dict() for f in result.findings if f.id in result.review.waived]
    return failing, waived


def suite_for_result(result: "Result") -> ET.Element:
    board = result.analysis.board
    failing, waived = result_findings(result)
    return board_suite(path=board.path, name=board.name,
                       rules=[r.name for r in result.analysis.ruleset.rules],
                       failing=failing, waived=waived)


def junit_for_result(result: "Result") -> str:
    """JUnit XML for one checked board."""
    return document([suite_for_result(result)])


def write(result: "Result", handle) -> None:
    """Write :func:`junit_for_result` to an open text file."""
    handle.write(junit_for_result(result))
