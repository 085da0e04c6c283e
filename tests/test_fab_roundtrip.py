"""One model, two doors: the same board read from its neutral JSON file and
from its fabrication package (Gerber X2 + Excellon + job file [+ IPC-D-356],
written by scripts/write_fab.py) gives identical findings — the same ids and
values within 1e-6 relative.

The JSON board declares two differential pairs; a Gerber package cannot
carry pairing, so the package is checked with a rule file that declares the
same pairs (``differential_pairs``), as a team would."""

from __future__ import annotations

import json
import pathlib
import sys

import numpy as np
import pytest

from checker.readers import load_board
from checker.readers.fab.assemble import load_package
from checker.ruleset import load_ruleset
from checker.runner import check_board

ROOT = pathlib.Path(__file__).resolve().parent.parent
SIX = ROOT / "fixtures" / "six_layer_fab.json"
sys.path.insert(0, str(ROOT / "scripts"))
from write_fab import write_fab  # noqa: E402


@pytest.fixture(scope="module")
def rules(tmp_path_factory):
    data = json.loads(SIX.read_text())
    pairs = [[n["name"], n["pair"]] for n in data["nets"] if n.get("pair")]
    path = tmp_path_factory.mktemp("rules") / "pairs.yaml"
    path.write_text(f"version: 1\nextends: default\ndifferential_pairs: {json.dumps(pairs)}\n")
    return load_ruleset(path)


@pytest.fixture(scope="module")
def from_json(rules):
    return check_board(load_board(SIX), rules)


def same_findings(a, b) -> None:
    assert [f.id for f in a.findings] == [f.id for f in b.findings]
    for x, y in zip(a.findings, b.findings):
        assert (x.rule, x.aggressor, x.victim, x.layers, x.severity) == (y.rule, y.aggressor, y.victim, y.layers,
                                                                         y.severity)
        for key in ("value", "limit", "length_mm", "area_mm2", "c12_pf", "noise_mv", "keep_fraction"):
            u, v = getattr(x, key), getattr(y, key)
            assert (u is None) == (v is None), key
            if u is not None:
                assert v == pytest.approx(u, rel=1e-6, abs=1e-12), (x.id, key)


def test_committed_six_layer_package_gives_the_json_findings(rules, from_json):
    board = load_package([str(ROOT / "fixtures" / "fab" / "six_layer")])
    assert board.stackup.names == load_board(SIX).stackup.names
    assert [layer.role for layer in board.stackup.layers] == [layer.role for layer in load_board(SIX).stackup.layers]
    assert len(from_json.findings) > 0
    same_findings(from_json, check_board(board, rules))


def test_same_pieces_and_nets_as_the_json_door():
    a = load_board(SIX)
    b = load_package([str(ROOT / "fixtures" / "fab" / "six_layer")])
    assert len(a.pieces) == len(b.pieces)
    key = lambda board: sorted(  # noqa: E731
        (board.nets[n].name if n >= 0 else "", int(l), round(float(x1), 6), round(float(y1), 6), round(float(x2), 6),
         round(float(y2), 6), round(float(w), 6))
        for n, l, x1, y1, x2, y2, w in zip(board.pieces.net, board.pieces.layer, board.pieces.x1, board.pieces.y1,
                                           board.pieces.x2, board.pieces.y2, board.pieces.width))
    assert key(a) == key(b)
    assert len(a.vias) == len(b.vias)
    assert sorted(zip(np.round(a.vias.x, 6), np.round(a.vias.y, 6), a.vias.first_layer, a.vias.last_layer)) == \
        sorted(zip(np.round(b.vias.x, 6), np.round(b.vias.y, 6), b.vias.first_layer, b.vias.last_layer))


@pytest.mark.parametrize("options", [
    {"holes": "cutin"},
    {"holes": "clear", "sr": False},
    {"net_attributes": False, "ipc356": True, "sr": True},
    {"negative_planes": True, "sr": True},
])
def test_written_variants_give_the_json_findings(tmp_path, rules, from_json, options):
    """The same board written with cut-in holes, without SR, without any TO.N
    (nets recovered by connectivity and named from the IPC-D-356 netlist), and
    with negative plane layers."""
    write_fab(SIX, tmp_path, **options)
    board = load_package([str(tmp_path)])
    same_findings(from_json, check_board(board, rules))


def test_zip_of_the_package_reads_the_same(tmp_path, rules, from_json):
    import zipfile

    folder = ROOT / "fixtures" / "fab" / "six_layer"
    archive = tmp_path / "six.zip"
    with zipfile.ZipFile(archive, "w") as z:
        for p in sorted(folder.iterdir()):
            z.write(p, f"fab/{p.name}")
    same_findings(from_json, check_board(load_package([str(archive)]), rules))
