"""Fabrication packages as other exporters write them (fixtures by scripts/write_wild.py).

``fixtures/fab/wild-ten-layer/``: an invented ten-layer board with no X2
attribute anywhere, copper files named by the trade's extension convention
(``.gtl``, ``.g1``-``.g4`` signal, ``.gp1``-``.gp4`` plane, ``.gbl``; a
common convention, from memory), mask/legend/paste files beside them, an
outline whose segment ends miss by 7 nm, plated holes in an inch drill file
whose format is given only by a ``;FILE_FORMAT=2:4`` comment (holes up to
1.27 um per axis off their pads), a headerless mounting-hole drill file and
an IPC-D-356A netlist behind an 800-line comment header. The stackup comes
from ``--stackup``.

``fixtures/fab/wild-no-er/``: the six-layer fixture as an X2 package whose
job file gives no ``DielectricConstant`` (optional in the Gerber job format).

Independent references: gerbonara 1.5 (the registry's general-purpose
Gerber / Excellon / IPC-D-356 library) reads the same Gerber, drill and
netlist files; the outline's area and the series-permittivity values are
hand calculations written beside them; the board's own JSON file
(``fixtures/ten_layer_wild.json``), read by the JSON door, gives the
findings the package must give.
"""

from __future__ import annotations

import json
import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest
import shapely
from test_gerber import assert_same_copper, copper_by_net
from test_gerber_fixture_oracle import oracle_copper_by_net

from checker.cli import main
from checker.readers import load_board
from checker.readers.fab import jobfile
from checker.readers.fab.assemble import load_package
from checker.readers.fab.gerber import load_gerber

ROOT = Path(__file__).resolve().parents[1]
TEN = ROOT / "fixtures" / "fab" / "wild-ten-layer"
TEN_STACKUP = ROOT / "fixtures" / "fab" / "wild-ten-layer-stackup.yaml"
TEN_JSON = ROOT / "fixtures" / "ten_layer_wild.json"
NO_ER = ROOT / "fixtures" / "fab" / "wild-no-er"

#: The extension convention's meaning for each copper file (the trade's
#: naming convention; .g<k> / .gp<k> interleaved by the stackup's roles:
#: signal layers IN3, IN4, IN7, IN8, plane layers GND, PWR, GND2, GND3).
EXPECTED_LAYERS = {"gtl": 1, "gp1": 2, "g1": 3, "g2": 4, "gp2": 5, "gp3": 6, "g3": 7, "g4": 8, "gp4": 9, "gbl": 10}


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def ten():
    return load_package([str(TEN)], stackup=str(TEN_STACKUP))


def test_ten_layer_set_without_attributes_reads_with_only_the_stackup(ten):
    rows = {Path(f).suffix.lstrip("."): (read_as, how) for f, read_as, how in ten.files}
    for ext, n in EXPECTED_LAYERS.items():
        assert rows[ext][0].startswith(f"copper L{n}"), (ext, rows[ext])
        assert rows[ext][1].startswith("extension ."), rows[ext]
    for ext in ("gts", "gbs", "gto", "gtp"):
        assert rows[ext][0] == "not read", ext
    assert rows["gko"][0] == "board outline"
    assert [layer.name for layer in ten.stackup.layers] == \
        ["TOP", "GND", "IN3", "IN4", "PWR", "GND2", "IN7", "IN8", "GND3", "BOT"]


def test_ten_layer_copper_matches_gerbonara_layer_by_layer():
    # oracle: gerbonara 1.5 reads each copper file (no X2: every object on an
    # unknown net); the union of the layer's copper agrees in area and place
    for ext in EXPECTED_LAYERS:
        path = TEN / f"ten-layer-wild.{ext}"
        mine = shapely.union_all(list(copper_by_net(load_gerber(path)).values()))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            oracle = shapely.union_all(list(oracle_copper_by_net(path).values()))
        assert_same_copper({None: mine}, {None: oracle})


def test_ten_layer_nets_and_findings_match_the_board_it_was_written_from(ten, capsys):
    # reference: the same board through the JSON door (nets by name, via nets, findings)
    board = load_board(TEN_JSON)
    assert sorted(n.name for n in ten.nets) == sorted(n.name for n in board.nets)
    mine = sorted((round(x, 2), round(y, 2), ten.nets[n].name) for x, y, n in zip(ten.vias.x, ten.vias.y, ten.vias.net))
    theirs = sorted((round(x, 2), round(y, 2), board.nets[n].name)
                    for x, y, n in zip(board.vias.x, board.vias.y, board.vias.net))
    assert mine == theirs  # every hole, 1.27 um off its pad, got its pad's net
    assert not any("got no net" in n for n in ten.notes)
    code, out, err = run(capsys, "check", TEN, "--stackup", TEN_STACKUP, "--format", "json")
    assert code == 1, err
    package = json.loads(out)
    code, out, _ = run(capsys, "check", TEN_JSON, "--format", "json")
    reference = json.loads(out)
    key = lambda f: (f["rule"], f["aggressor"], f["victim"], round(f["value"], 3))  # noqa: E731
    assert sorted(map(key, package["findings"])) == sorted(map(key, reference["findings"]))
    assert len(package["findings"]) >= 2


def test_holes_from_the_inch_drill_file_match_gerbonara(ten):
    # oracle: gerbonara 1.5 reads the inch drill file (coordinates in inch);
    # 1 in = 25.4 mm exactly
    from gerbonara import ExcellonFile
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        drill = ExcellonFile.open(TEN / "ten-layer-wild.drl")
    oracle = sorted((round(o.x * 25.4, 6), round(o.y * 25.4, 6)) for o in drill.objects)
    mine = sorted((round(x, 6), round(y, 6)) for x, y in zip(ten.vias.x, ten.vias.y))
    assert mine == oracle and len(mine) == 15
    # and the holes really are off their pads by up to 1.27 um per axis (2.54 um grid / 2)
    board = load_board(TEN_JSON)
    off = np.hypot(np.sort(ten.vias.x) - np.sort(board.vias.x), np.sort(ten.vias.y) - np.sort(board.vias.y))
    assert off.max() > 1e-3 and off.max() <= 1.27e-3 * 2**0.5 + 1e-9


def test_x2_package_with_inch_holes_off_their_pads_keeps_every_via_net(tmp_path):
    # The six-layer X2 fixture with its drill files rewritten in inch 2.4
    # (scripts/write_wild.py inch_drill): every hole moves by up to 1.27 um
    # per axis off its pad. Reference: the package as written (mm holes on
    # their pads): the same via nets, hole for hole.
    import sys
    sys.path.insert(0, str(ROOT / "scripts"))
    from write_wild import inch_drill
    six = ROOT / "fixtures" / "fab" / "six_layer"
    folder = tmp_path / "inch"
    shutil.copytree(six, folder)
    for drill in folder.glob("*.drl"):
        drill.write_text(inch_drill(drill.read_text(), keep_attributes=True))
    exact, moved = load_package([str(six)]), load_package([str(folder)])
    key = lambda b: sorted((round(x, 2), round(y, 2), int(f), int(t), b.nets[n].name if n >= 0 else None)  # noqa: E731
                           for x, y, f, t, n in zip(b.vias.x, b.vias.y, b.vias.first_layer, b.vias.last_layer,
                                                    b.vias.net))
    assert key(moved) == key(exact) and len(key(exact)) == 29
    off = np.hypot(np.sort(moved.vias.x) - np.sort(exact.vias.x), np.sort(moved.vias.y) - np.sort(exact.vias.y))
    assert off.max() > 0.5e-3  # the holes did move off their pads
    # the fixture has one via on no net by design (it joins two floating islands):
    # the note counts it, in both packages alike
    lost = [n for n in moved.notes if "got no net" in n]
    assert lost == [n for n in exact.notes if "got no net" in n] and lost[0].startswith("1 of 29 plated hole(s)")


def test_netlist_behind_a_long_header_is_read_and_names_the_nets(ten):
    # oracle: gerbonara 1.5 reads the same netlist: the net names of its test records
    from gerbonara.ipc356 import Netlist
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        netlist = Netlist.open(TEN / "ten-layer-wild.ipc")
    assert {r.net_name for r in netlist.test_records} <= {n.name for n in ten.nets}
    first_record = next(k for k, line in enumerate((TEN / "ten-layer-wild.ipc").read_text().splitlines(), 1)
                        if line.startswith("317"))
    assert first_record > 800  # the trait: far beyond any fixed sniff window
    assert not any("ten-layer-wild.ipc" in n and "not read" in n for n in ten.notes)


def test_netlist_given_with_the_option_is_not_also_called_not_read(tmp_path):
    folder = tmp_path / "pkg"
    shutil.copytree(TEN, folder)
    board = load_package([str(folder)], stackup=str(TEN_STACKUP), netlist=str(folder / "ten-layer-wild.ipc"))
    assert not any("not read" in n and ".ipc" in n for n in board.notes)
    assert not any("was not used" in n for n in board.notes)


def test_outline_with_nanometre_gaps_is_closed(ten):
    # hand calculation: 60 x 40 mm with 1 mm x 1 mm corner chamfers: 2400 - 4 * 0.5 = 2398 mm^2
    assert ten.outline is not None
    assert ten.outline.area == pytest.approx(2398.0, abs=1e-3)
    assert any("segment end(s) within 5 um of another were joined" in n for n in ten.notes)


def test_outline_with_a_real_gap_is_still_refused_with_a_note(tmp_path):
    folder = tmp_path / "pkg"
    shutil.copytree(TEN, folder)
    text = (folder / "ten-layer-wild.gko").read_text().replace("X7Y1000000D02*", "X50000Y1000000D02*")
    (folder / "ten-layer-wild.gko").write_text(text)  # a 50 um gap: an open outline, not rounding
    board = load_package([str(folder)], stackup=str(TEN_STACKUP))
    assert board.outline is None
    assert any("not a closed shape" in n for n in board.notes)


def test_job_file_without_permittivities_reads_with_marked_defaults(capsys):
    job = json.loads((NO_ER / "six-layer-no-er.gbrjob").read_text())
    assert not any("DielectricConstant" in e for e in job["MaterialStackup"])
    board = load_package([str(NO_ER)])
    st = board.stackup
    d = jobfile.DEFAULT_DIELECTRIC_ER
    assert all(x.er == pytest.approx(d, rel=1e-12) for x in st.dielectrics)  # series rule of equal εr: εr
    assert all(x.assumed == ("er",) for x in st.dielectrics)
    assert st.mask_top.er == jobfile.DEFAULT_MASK_ER and st.mask_top.assumed == ("er",)
    assert sum(1 for n in board.notes if "common practice, not your board" in n) == 2
    code, out, err = run(capsys, "check", NO_ER, "--format", "json")
    assert code == 1, err
    report = json.loads(out)
    assert [s.get("assumed") for s in report["board"]["stackup"] if "dielectric" in s] == [["er"]] * 5
    assert any("dielectric εr not given" in n and "4.6 used" in n for n in report["notes"])


def test_headerless_mounting_hole_file_is_read_non_plated_by_its_name(ten):
    # hand-worked: ;FILE_FORMAT=4:4 metric, X00040000 = 0004.0000 mm; the
    # fixture's four mounting holes of 3.2 mm (scripts/write_wild.py MOUNTING_HOLES)
    from checker.readers.fab.excellon import load_excellon
    drill = load_excellon(TEN / "ten-layer-wild-NPTH.drl")
    assert sorted(zip(drill.x.tolist(), drill.y.tolist())) == sorted([(4.0, 4.0), (56.0, 4.0), (56.0, 36.0),
                                                                       (4.0, 36.0)])
    assert drill.diameter.tolist() == [3.2] * 4
    assert any("no M48 header" in n for n in drill.notes)
    # non-plated by the trade's name (-NPTH): no via, the 15 plated holes stay the only ones
    assert len(ten.vias.x) == 15
    assert any("non-plated by its name" in n for n in ten.notes)
    assert not any("NPTH.drl" in n and "not read" in n for n in ten.notes)


def test_one_drill_file_with_plated_and_non_plated_tools(tmp_path):
    # a merged drill file: ;TYPE=PLATED before the via tool, ;TYPE=NON_PLATED
    # before the mounting-hole tool. Reference: the board's JSON file (15 vias
    # and their nets); the four mounting holes must join nothing.
    board = load_board(TEN_JSON)
    folder = tmp_path / "merged"
    shutil.copytree(TEN, folder)
    (folder / "ten-layer-wild.drl").unlink()
    (folder / "ten-layer-wild-NPTH.drl").unlink()
    hits = "\n".join(f"X{x:.4f}Y{y:.4f}" for x, y in zip(board.vias.x, board.vias.y))
    mounting = "\n".join(f"X{x:.4f}Y{y:.4f}" for x, y in ((4, 4), (56, 4), (56, 36), (4, 36)))
    (folder / "merged.drl").write_text(f"M48\nMETRIC\n;TYPE=PLATED\nT1C0.300\n;TYPE=NON_PLATED\nT2C3.200\n%\n"
                                       f"T1\n{hits}\nT2\n{mounting}\nM30\n")
    merged = load_package([str(folder)], stackup=str(TEN_STACKUP))
    assert len(merged.vias.x) == 15
    assert sorted(merged.nets[n].name for n in merged.vias.net) == sorted(board.nets[n].name for n in board.vias.net)
    assert any("15 plated and 4 non-plated hole(s)" in n for n in merged.notes)


def test_outline_snap_joins_loose_ends_only_and_keeps_short_arc_steps():
    # A 50 x 30 mm outline with 1 mm corner radii drawn in ~4 um steps (as an
    # exporter may chord arcs), every segment's start 7 nm off the previous end.
    # Hand calculation: area = 50 * 30 - (4 - pi) * 1^2 = 1499.1416 mm^2 for the
    # true shape; the chords lose only ~1e-8 mm^2. Chaining the 4 um steps
    # together would collapse the corners (the bug this guards against).
    import math

    from checker.readers.fab.assemble import OUTLINE_SNAP_MM, _snap_points
    pts = []
    for cx, cy, a0 in ((49, 1, -math.pi / 2), (49, 29, 0.0), (1, 29, math.pi / 2), (1, 1, math.pi)):
        for t in np.linspace(a0, a0 + math.pi / 2, 393):  # steps of 4.0 um on r = 1 mm
            pts.append((cx + math.cos(t), cy + math.sin(t)))
    pts.append(pts[0])
    p = np.array(pts)
    n = len(p) - 1
    xy = np.concatenate([p[:-1] + 7e-6, p[1:]])  # starts shifted: nothing meets exactly
    snapped, moved = _snap_points(xy, OUTLINE_SNAP_MM)
    faces = shapely.get_parts(shapely.polygonize(list(shapely.linestrings(np.stack([snapped[:n], snapped[n:]], 1)))))
    assert moved == n
    assert max(f.area for f in faces) == pytest.approx(50 * 30 - (4 - math.pi), abs=1e-3)


def test_an_inferred_drill_format_is_checked_against_the_pads(tmp_path):
    # Eight-digit metric coordinates with no format stated anywhere: 3.5 and
    # 4.4 both give a plausible board. The holes were written in 4.4
    # (X00100013 = 10.0013 mm, hand); read as 3.5 they would land nowhere.
    # Reference: the board's JSON file (via positions and nets).
    board = load_board(TEN_JSON)
    folder = tmp_path / "silent"
    shutil.copytree(TEN, folder)
    (folder / "ten-layer-wild.drl").unlink()
    hits = "\n".join(f"X{round(x * 1e4):08d}Y{round(y * 1e4):08d}" for x, y in zip(board.vias.x, board.vias.y))
    (folder / "ten-layer-wild.drl").write_text(f"M48\nMETRIC\nT1C0.300\n%\nT1\n{hits}\nM30\n")
    read = load_package([str(folder)], stackup=str(TEN_STACKUP))
    mine = sorted((round(x, 4), round(y, 4), read.nets[n].name)
                  for x, y, n in zip(read.vias.x, read.vias.y, read.vias.net))
    theirs = sorted((round(x, 4), round(y, 4), board.nets[n].name)
                    for x, y, n in zip(board.vias.x, board.vias.y, board.vias.net))
    assert mine == theirs
    assert any("read as 4.4 instead of the inferred format: 15 of 15 holes then land on pads, 0 before" in n
               for n in read.notes)
