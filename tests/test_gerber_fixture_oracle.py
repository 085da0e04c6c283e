"""couplint's Gerber reader against an independent oracle on whole fixture files.

The oracle is gerbonara 1.5, the package registry's general-purpose Gerber
library. Both read the same copper files:

* the committed invented package ``fixtures/fab/four_layer_mixed/``
  (written without step and repeat; L4 holds a region with a cut-in hole,
  the L3 plane a region, L1 and L4 arcs);
* ``fixtures/six_layer_fab.json`` written into a temporary folder by
  ``scripts/write_fab.py`` with ``sr=False`` (gerbonara 1.5 does not repeat
  SR blocks); its clear-polarity (``%LPC*%``) holes in L2, L5 and L6 are
  kept, L3 and L6 hold arcs.

For every copper layer and every net, the shapely union of the copper is
built on both sides and compared by area and by symmetric difference
within 1e-6 relative; the whole-layer union is compared the same way.

Both sides are polygonised by the same rules, so the comparison does not
depend on circle discretisation: couplint's side is ``copper_by_net`` of
tests/test_gerber.py (round-aperture traces as the reader's own stadium
polygon, shapes as the reader made them); gerbonara's graphic primitives
are converted by ``_gerbonara_primitive`` of the same module (lines as the
same stadium, circles as the reader's ``disc``, arcs chorded by
``checker.readers.arcs`` as every couplint door does).

gerbonara 1.5 drops the object attributes of regions (see
tests/test_write_fab.py), so a region's net is the ``TO.N`` in force at its
``G36`` in the file text; the text scan also checks that gerbonara made one
Region per ``G36`` with the same polarity, so the scan and the oracle cannot
drift apart silently. Neither fixture file is negative (``TF.FilePolarity``
is checked: gerbonara ignores it).
"""

from __future__ import annotations

import re
import sys
import warnings
from pathlib import Path

import pytest
import shapely
from test_gerber import _gerbonara_primitive, assert_same_copper, copper_by_net

from checker.readers.fab.gerber import load_gerber

ROOT = Path(__file__).resolve().parents[1]
FOUR_DIR = ROOT / "fixtures" / "fab" / "four_layer_mixed"
SIX = ROOT / "fixtures" / "six_layer_fab.json"
sys.path.insert(0, str(ROOT / "scripts"))
from write_fab import write_fab  # noqa: E402

#: relative tolerance of every area comparison (the brief's 1e-6); both sides
#: are polygonised by the same functions, so only float rounding separates them
REL = 1e-6


def gerbonara():
    return pytest.importorskip("gerbonara", reason="gerbonara (the oracle) is not installed")


def copper_files(folder: Path) -> list[Path]:
    files = sorted(folder.glob("*-L*.gbr"), key=lambda p: int(re.search(r"-L(\d+)\.gbr$", p.name).group(1)))
    assert files, folder
    return files


@pytest.fixture(scope="module")
def six_dir(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("six-no-sr")
    write_fab(SIX, out, sr=False)
    return out


@pytest.fixture(scope="module")
def packages(six_dir) -> dict[str, list[Path]]:
    return {"four_layer_mixed": copper_files(FOUR_DIR), "six_layer (sr=False)": copper_files(six_dir)}


# --------------------------------------------------------------------------- the oracle side


def g36_nets(text: str) -> list[tuple[str | None, bool]]:
    """(``TO.N`` in force, dark?) at each ``G36`` of the file text, in order."""
    net, dark, out = None, True, []
    for line in text.splitlines():
        if line.startswith("%TO.N,"):
            net = line[len("%TO.N,"):-2]
        elif line in ("%TD*%", "%TD.N*%"):
            net = None
        elif line in ("%LPD*%", "%LPC*%"):
            dark = line == "%LPD*%"
        elif line.startswith("G36"):
            out.append((net, dark))
    return out


def oracle_copper_by_net(path: Path) -> dict[str | None, shapely.Geometry]:
    """Per-net copper as gerbonara 1.5 reads the file: its objects composed in
    file order, dark ones added to their net, clear ones removed from every
    net (Gerber spec, load polarity). Regions get their net from the text
    scan (gerbonara drops it)."""
    gb = gerbonara()
    text = path.read_text()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        objects = list(gb.GerberFile.from_string(text).objects)
    regions = g36_nets(text)
    region_objects = [o for o in objects if type(o).__name__ == "Region"]
    # one gerbonara Region per G36, with the same polarity, or the scan's nets would be misplaced
    assert [o.polarity_dark for o in region_objects] == [dark for _, dark in regions], path.name
    region_net = {id(o): net for o, (net, _) in zip(region_objects, regions)}
    nets: dict[str | None, shapely.Geometry] = {}
    for obj in objects:
        prims = list(obj.to_primitives("mm"))
        same = [_gerbonara_primitive(p) for p in prims if p.polarity_dark == obj.polarity_dark]
        other = [_gerbonara_primitive(p) for p in prims if p.polarity_dark != obj.polarity_dark]
        g = shapely.union_all(same)
        if other:
            g = g.difference(shapely.union_all(other))
        if id(obj) in region_net:
            net = region_net[id(obj)]
        else:
            attrs = obj.attrs if isinstance(obj.attrs, dict) else {}
            net = attrs.get(".N", (None,))[0]
        if obj.polarity_dark:
            nets[net] = shapely.union(nets[net], g) if net in nets else g
        else:
            nets = {n: shapely.difference(v, g) for n, v in nets.items()}
    return nets


# --------------------------------------------------------------------------- the checks


def test_fixture_copper_per_layer_and_net_matches_gerbonara(packages):
    # oracle: gerbonara 1.5 reading fixtures/fab/four_layer_mixed/*-L*.gbr and the six_layer_fab.json
    # package written with sr=False; per layer and per net the copper area and place agree within 1e-6
    compared = {"net": 0, "layer": 0, "region nets": 0}
    for fixture, files in packages.items():
        for path in files:
            mine = load_gerber(path)
            assert not mine.negative, path.name  # gerbonara ignores TF.FilePolarity
            assert mine.file_function[0] == "Copper", path.name
            ours = copper_by_net(mine)
            oracle = oracle_copper_by_net(path)
            what = f"{fixture}: {path.name}"
            # per net (oracle: gerbonara 1.5; fixture: this file of the package)
            ours_nz = {n: g for n, g in ours.items() if g.area > 0}
            oracle_nz = {n: g for n, g in oracle.items() if g.area > 0}
            assert ours_nz, what  # every copper layer of both fixtures carries copper
            assert set(ours_nz) == set(oracle_nz), what
            for net in oracle_nz:
                try:
                    assert_same_copper({net: ours_nz[net]}, {net: oracle_nz[net]}, rel=REL)
                except AssertionError as exc:
                    raise AssertionError(f"{what}, net {net!r}: {exc}") from None
                compared["net"] += 1
            # the whole layer (oracle: gerbonara 1.5; fixture: this file of the package)
            whole_ours, whole_oracle = shapely.union_all(list(ours.values())), shapely.union_all(list(oracle.values()))
            assert whole_ours.area == pytest.approx(whole_oracle.area, rel=REL), what
            assert shapely.symmetric_difference(whole_ours, whole_oracle).area <= REL * whole_oracle.area, what
            compared["layer"] += 1
            # our reader's region nets are the TO.N in force at each dark G36 (oracle: the file text scan,
            # whose agreement with gerbonara's Region objects oracle_copper_by_net asserts)
            names = lambda i, mine=mine: None if i < 0 else mine.net_names[i]  # noqa: E731
            got = [names(s.net) for s in mine.shapes if s.kind == "region"]
            want = [net for net, dark in g36_nets(path.read_text()) if dark]
            assert got == want, what
            compared["region nets"] += len(want)
    # 4 + 6 copper layers; the nets and regions are counted so an empty comparison cannot pass
    assert compared["layer"] == 10, compared
    assert compared["net"] >= 20 and compared["region nets"] >= 3, compared
    print(f"\ncompared with gerbonara 1.5: {compared}")


def test_the_oracle_comparison_sees_a_one_micron_wider_trace(packages, tmp_path):
    # the comparison can fail: gerbonara 1.5 reading fixtures/fab/four_layer_mixed L1 with its first
    # conductor aperture 1 um wider disagrees with couplint's reading of the committed file beyond 1e-6
    path = packages["four_layer_mixed"][0]
    text = path.read_text()
    assert "%ADD10C,0.2*%" in text
    broken = tmp_path / path.name
    broken.write_text(text.replace("%ADD10C,0.2*%", "%ADD10C,0.201*%"))
    with pytest.raises(AssertionError):
        assert_same_copper(copper_by_net(load_gerber(path)), oracle_copper_by_net(broken), rel=REL)
    # and the untouched file agrees (same oracle, same fixture)
    assert_same_copper(copper_by_net(load_gerber(path)), oracle_copper_by_net(path), rel=REL)


def test_the_oracle_region_nets_follow_the_file_text(packages, tmp_path):
    # the region-net scan can fail: in the four_layer_mixed L4 fixture the region's TO.N renamed in the
    # file moves it to another net for both couplint and the gerbonara 1.5 composition (text scan)
    path = packages["four_layer_mixed"][3]
    text = path.read_text()
    assert text.count("%TO.N,3V3*%") == 1
    renamed = tmp_path / path.name
    renamed.write_text(text.replace("%TO.N,3V3*%", "%TO.N,RENAMED*%"))
    ours, oracle = copper_by_net(load_gerber(renamed)), oracle_copper_by_net(renamed)
    assert "RENAMED" in oracle and "3V3" not in oracle
    assert_same_copper(ours, oracle, rel=REL)
    # against the committed file the nets differ, so the per-net comparison fails
    with pytest.raises(AssertionError):
        assert_same_copper(copper_by_net(load_gerber(path)), oracle, rel=REL)
