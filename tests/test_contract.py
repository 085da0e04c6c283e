"""The contract every rule kind keeps, on every board the project ships:
the shipped default rule set (one rule of each registered kind) run on each
fixture (neutral JSON, fabrication packages, IPC-2581).

What every finding must be, whatever the kind: a known severity and its
rule's name and kind; a stable 12-hex-digit id, unique; an extent with
xmin <= xmax and ymin <= ymax and the worst spot inside it; layers of the
board; finite value and limit, ``excess`` at least 1 (the limit is
exceeded); two distinct nets of the board, or a net and its reference net
for a kind that compares one net with the copper under it. And a check
changes nothing it was handed: the analysis's tables are the same after the
rules ran as before, and a second run gives the same findings.
"""

from __future__ import annotations

import copy
import math
import re
from pathlib import Path

import numpy as np
import pytest

from checker.checks import REGISTRY
from checker.cli import demo_board_path
from checker.findings import SEVERITIES
from checker.ruleset import default_ruleset
from checker.runner import run_checks
from checker.session import load_board_of

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"

BOARDS: list[tuple[str, list[str], str | None]] = [
    ("demo", [str(demo_board_path())], None),
    *((p.name, [str(p)], None) for p in sorted(FIXTURES.glob("*.json"))),
    *((p.name, [str(p)], None) for p in sorted((FIXTURES / "ipc2581").glob("*.xml"))),
    ("fab/six_layer", [str(FIXTURES / "fab" / "six_layer")], None),
    ("fab/four_layer_mixed", [str(FIXTURES / "fab" / "four_layer_mixed")], None),
    ("fab/wild-ten-layer", [str(FIXTURES / "fab" / "wild-ten-layer")],
     str(FIXTURES / "fab" / "wild-ten-layer-stackup.yaml")),
    *((p.name, [str(p)], None) for p in sorted((FIXTURES / "fab").glob("shielding-*"))),
]

ONE_NET_KINDS = {"reference-gap"}  # the finding's victim is the reference net the net runs over


def test_the_default_rule_set_has_every_kind():
    assert {r.kind for r in default_ruleset().rules} == set(REGISTRY)


def _snapshot(analysis) -> dict:
    """The analysis's tables, copied: what a check must not change."""
    out = {}
    for name in ("couplings", "net_pairs"):
        table = getattr(analysis, name)
        out[name] = {k: np.array(v, copy=True) for k, v in vars(table).items() if isinstance(v, np.ndarray)}
    out["notes"] = list(analysis.notes)
    out["models"] = sorted(map(repr, analysis.models))
    out["victim_noise"] = copy.deepcopy(list(getattr(analysis, "victim_noise", [])))
    return out


@pytest.fixture(scope="module", params=BOARDS, ids=[b[0] for b in BOARDS])
def checked(request):
    from checker.analysis import analyse

    _, paths, stackup = request.param
    board = load_board_of(paths, stackup=stackup)
    analysis = analyse(board, default_ruleset(), what_if=True)  # the what-if answers read too
    before = _snapshot(analysis)
    findings, _ = run_checks(analysis)
    return board, analysis, before, findings


def test_every_finding_keeps_the_contract(checked):
    board, analysis, _, findings = checked
    rules = {r.name: r for r in analysis.ruleset.rules}
    nets = {n.name for n in board.nets}
    layers = set(board.stackup.names)
    ids = [f.id for f in findings]
    assert len(ids) == len(set(ids)), "finding ids are unique"
    for f in findings:
        assert re.fullmatch(r"[0-9a-f]{12}", f.id)
        assert f.severity in SEVERITIES
        assert f.rule in rules and rules[f.rule].kind == f.kind and f.severity == rules[f.rule].severity
        x0, y0, x1, y1 = f.bbox
        assert all(math.isfinite(v) for v in f.bbox) and x0 <= x1 and y0 <= y1
        tol = 1e-6
        assert x0 - tol <= f.at[0] <= x1 + tol and y0 - tol <= f.at[1] <= y1 + tol, (f.id, f.at, f.bbox)
        assert f.layers and set(f.layers) <= layers
        assert math.isfinite(f.value) and math.isfinite(f.limit) and f.excess >= 1.0
        assert f.aggressor in nets and f.victim in nets
        if f.kind not in ONE_NET_KINDS:
            assert f.aggressor != f.victim
        assert f.message


def test_checks_change_nothing_they_are_handed(checked):
    _, analysis, before, findings = checked
    after = _snapshot(analysis)
    for table in ("couplings", "net_pairs"):
        assert before[table].keys() == after[table].keys()
        for column in before[table]:
            np.testing.assert_array_equal(before[table][column], after[table][column], err_msg=f"{table}.{column}")
    assert after["notes"] == before["notes"]
    assert after["models"] == before["models"]
    assert after["victim_noise"] == before["victim_noise"]


def test_a_second_run_gives_the_same_findings(checked):
    _, analysis, _, findings = checked
    assert run_checks(analysis).findings == findings
