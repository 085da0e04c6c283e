"""Differential pairs declared in a rule file (``differential_pairs``).

A fabrication package (Gerber X2) carries net names but no pairing, so a
team declares its pairs in the rule file; they must then have exactly the
effect a pair declared in a board JSON file has: the two halves are exempt
from each other's checks (docs/rule-file.md, "Differential pairs")."""

from __future__ import annotations

import copy
import json
import pathlib
import textwrap

import pytest

from checker.errors import RuleError
from checker.readers import read_board_dict
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board

ROOT = pathlib.Path(__file__).resolve().parent.parent
FIXTURE = ROOT / "fixtures" / "four_layer_mixed.json"


def write(tmp_path: pathlib.Path, text: str) -> pathlib.Path:
    path = tmp_path / "rules.yaml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def pair_nets(result) -> set[frozenset[str]]:
    a = result.analysis
    return {frozenset((a.net_name(int(x)), a.net_name(int(y))))
            for x, y in zip(a.couplings.net_a, a.couplings.net_b)}


def test_rule_file_pair_exempts_the_two_halves_like_a_board_pair(tmp_path):
    data = json.loads(FIXTURE.read_text())
    unpaired = copy.deepcopy(data)
    for net in unpaired["nets"]:
        net.pop("pair", None)
    board_paired = check_board(read_board_dict(data, "paired.json"), default_ruleset())
    plain = check_board(read_board_dict(unpaired, "plain.json"), default_ruleset())
    # without any declaration the two halves couple (they run side by side on IN1)
    assert frozenset(("DATA_P", "DATA_N")) in pair_nets(plain)
    rules = load_ruleset(write(tmp_path, """\
        version: 1
        extends: default
        differential_pairs: [[DATA_P, DATA_N]]
    """))
    rule_paired = check_board(read_board_dict(unpaired, "plain.json"), rules)
    assert frozenset(("DATA_P", "DATA_N")) not in pair_nets(rule_paired)
    assert [f.id for f in rule_paired.findings] == [f.id for f in board_paired.findings]
    assert len(rule_paired.analysis.couplings) == len(board_paired.analysis.couplings)


def test_pairs_are_inherited_and_change_the_hash(tmp_path):
    base = write(tmp_path, """\
        version: 1
        differential_pairs: [[A_P, A_N]]
    """)
    child = tmp_path / "child.yaml"
    child.write_text(f"version: 1\nextends: {base.name}\ndifferential_pairs: [[B_P, B_N]]\n", encoding="utf-8")
    loaded = load_ruleset(child)
    assert loaded.pairs == (("A_P", "A_N"), ("B_P", "B_N"))
    assert loaded.sha256 != load_ruleset(base).sha256


@pytest.mark.parametrize("value, message", [
    ("[[A, A]]", "differential_pairs[0]: a net cannot pair with itself"),
    ("[[A]]", "differential_pairs[0]: expected two net names"),
    ("A", "differential_pairs: expected a list of [net, net] pairs"),
    ("[[A, B], [B, C]]", "differential_pairs[1]: net 'B' is already in differential_pairs[0]"),
])
def test_bad_pairs_name_the_key(tmp_path, value, message):
    path = write(tmp_path, f"version: 1\ndifferential_pairs: {value}\n")
    with pytest.raises(RuleError) as caught:
        load_ruleset(path)
    assert message in str(caught.value)
