"""Finding and sorting the files of a fabrication package
(checker.readers.fab.package): formats are sniffed from content, copper
layers identified by TF.FileFunction (Gerber Layer Format Specification,
section 5.6.3 "FileFunction", from memory), by couplint's own naming rule
(docs/fab-package.md), or by --layer; never guessed."""

from __future__ import annotations

import zipfile

import pytest

from checker.errors import FabError, UsageError
from checker.readers.fab.package import collect, is_package, parse_layer_override

COPPER = b"%TF.FileFunction,Copper,L{n},{side},Signal*%\n%FSLAX46Y46*%\n%MOMM*%\nM02*\n"
SOLDERMASK = b"%TF.FileFunction,Soldermask,Top*%\n%FSLAX46Y46*%\n%MOMM*%\nM02*\n"
PROFILE = b"%TF.FileFunction,Profile,NP*%\n%FSLAX46Y46*%\n%MOMM*%\nM02*\n"
BARE = b"%FSLAX46Y46*%\n%MOMM*%\nM02*\n"
DRILL = b"M48\nMETRIC\nT01C0.300\n%\nT01\nX1.0Y1.0\nM30\n"
JOB = b'{"Header": {}, "GeneralSpecs": {"LayerNumber": 2}, "MaterialStackup": []}'
NETLIST = b"C  invented test netlist\nP  UNITS CUST 1\n317GND    VIA   -     D0300PA00X 001000Y 001000\n999\n"


def package(tmp_path, files: dict[str, bytes]):
    for name, data in files.items():
        (tmp_path / name).write_bytes(data)
    return tmp_path


def copper(n: int, side: str = "Inr") -> bytes:
    return COPPER.replace(b"{n}", str(n).encode()).replace(b"{side}", side.encode())


def test_formats_are_sniffed_from_content_not_names(tmp_path):
    folder = package(tmp_path, {"a.txt": copper(1, "Top"), "b.txt": copper(2, "Bot"), "c.bin": DRILL,
                                "d.dat": JOB, "e.foo": NETLIST, "f.gbr": SOLDERMASK, "g.gbr": PROFILE,
                                "readme.md": b"# notes\n"})
    found = collect([str(folder)])
    assert {n: m.name.rsplit("/", 1)[-1] for n, (m, _) in found.copper.items()} == {1: "a.txt", 2: "b.txt"}
    assert [m.name.rsplit("/", 1)[-1] for m in found.drills] == ["c.bin"]
    assert [m.name.rsplit("/", 1)[-1] for m in found.jobs] == ["d.dat"]
    assert [m.name.rsplit("/", 1)[-1] for m in found.netlists] == ["e.foo"]
    assert found.profile is not None and found.profile.name.endswith("g.gbr")
    assert any("f.gbr" in s and "Soldermask" in s for s in found.skipped)
    assert any("readme.md" in s for s in found.skipped)
    assert found.copper[1][1] == "signal"


def test_naming_rule_and_override_identify_files_without_file_function(tmp_path):
    folder = package(tmp_path, {"board-L1.gbr": BARE, "board_L2.gbr": BARE, "mystery.gbr": BARE})
    found = collect([str(folder)])
    assert sorted(found.copper) == [1, 2] and found.copper[1][1] is None
    assert any("mystery.gbr" in s and "--layer" in s for s in found.skipped)
    found = collect([str(folder)], {"mystery.gbr": "L3,plane"})
    assert found.copper[3][1] == "plane"


def test_a_layer_given_twice_is_an_error_naming_both_files(tmp_path):
    folder = package(tmp_path, {"x.gbr": copper(2), "y.gbr": copper(2)})
    with pytest.raises(FabError) as caught:
        collect([str(folder)])
    assert "L2 again" in str(caught.value) and "x.gbr" in str(caught.value) and "y.gbr" in str(caught.value)


def test_zip_and_file_list_give_the_same_sorting(tmp_path):
    files = {"top.gbr": copper(1, "Top"), "bot.gbr": copper(2, "Bot"), "holes.drl": DRILL, "job.gbrjob": JOB}
    (tmp_path / "pkg").mkdir()
    folder = package(tmp_path / "pkg", files)
    archive = tmp_path / "pkg.zip"
    with zipfile.ZipFile(archive, "w") as z:
        for name, data in files.items():
            z.writestr(f"out/{name}", data)
    from_zip = collect([str(archive)])
    from_list = collect([str(folder / n) for n in files])
    for found in (from_zip, from_list):
        assert sorted(found.copper) == [1, 2] and len(found.drills) == 1 and len(found.jobs) == 1
    assert from_zip.copper[1][0].name == f"{archive}:out/top.gbr"
    with from_zip.copper[1][0].open() as stream:
        assert stream.read() == files["top.gbr"]


def test_bad_packages_get_one_clear_message(tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(FabError, match="holds no files"):
        collect([str(tmp_path / "empty")])
    (tmp_path / "bad.zip").write_bytes(b"not a zip")
    with pytest.raises(FabError, match="not a readable .zip"):
        collect([str(tmp_path / "bad.zip")])
    with pytest.raises(FabError, match="no such file"):
        collect([str(tmp_path / "missing.gbr")])
    with pytest.raises(UsageError, match="no file of that name"):
        collect([str(package(tmp_path / "empty", {"a.gbr": copper(1)}))], {"nothere.gbr": "L1"})
    (tmp_path / "empty" / "d.drl").write_bytes(DRILL)
    with pytest.raises(UsageError, match="not a Gerber layer"):
        collect([str(tmp_path / "empty")], {"d.drl": "L2"})


@pytest.mark.parametrize("text, expected", [
    ("a.gbr=L3", ("a.gbr", "L3")), ("a.gbr=L3,Plane", ("a.gbr", "L3,plane")),
    ("dir/x=y.gbr=profile", ("dir/x=y.gbr", "profile")), ("a.gbr=IGNORE", ("a.gbr", "ignore")),
])
def test_layer_overrides_parse(text, expected):
    assert parse_layer_override(text) == expected


@pytest.mark.parametrize("text", ["a.gbr", "a.gbr=3", "a.gbr=L3,ground", "=L1"])
def test_bad_layer_overrides_are_usage_errors(text):
    with pytest.raises(UsageError):
        parse_layer_override(text)


def test_is_package():
    assert not is_package(["board.json"])
    assert is_package(["fab.zip"]) and is_package(["a.gbr", "b.gbr"]) and is_package(["top.gbr"])


def test_netlist_sniff_takes_long_headers_and_digit_net_names_but_not_csv(tmp_path):
    # IPC-D-356A records are fixed-column lines (operation code in columns
    # 1-3, net name from column 4, so "3173V3" is net 3V3); a comma-separated
    # list of numbers is not one, and a net called LED_G04 must not make the
    # file look like a Gerber file (G04 is a Gerber comment code)
    header = b"".join(b"C  note %04d\n" % k for k in range(7000))  # 84 kB: past the 64 KiB sniff window
    body = b"P  UNITS CUST 1\n3173V3     VIA   -     D0300PA00X 001000Y 001000\n" \
           b"317LED_G04  VIA   -     D0300PA00X 002000Y 001000\n999\n"
    folder = package(tmp_path, {"a.net": header + body, "pnp.csv": b"100,20.5,30.1\n317,1,2\n999,0,0\n"})
    found = collect([str(folder)])
    assert [m.name.rsplit("/", 1)[-1] for m in found.netlists] == ["a.net"]
    assert any("pnp.csv" in s for s in found.skipped)


def test_touching_copper_pairs_match_a_brute_force_distance_check() -> None:
    """assemble._touching (bounding-box candidates, then GEOS distance-within
    with polygons prepared) finds exactly the pairs a brute-force
    shapely.distance over every pair finds, on traces, pads and pours with
    holes."""
    import numpy as np
    import shapely

    from checker.readers.fab.build import TOUCH_TOLERANCE_MM, _points_on, _touching

    rng = np.random.default_rng(11)
    n = 120
    x, y = rng.uniform(0, 20, n), rng.uniform(0, 20, n)
    angle, length = rng.uniform(0, 2 * np.pi, n), rng.uniform(0.2, 4, n)
    lines = shapely.linestrings(np.stack([np.stack([x, y], 1),
                                          np.stack([x + length * np.cos(angle), y + length * np.sin(angle)], 1)], 1))
    pads = shapely.buffer(shapely.points(rng.uniform(0, 20, (40, 2))), rng.uniform(0.2, 0.8, 40), quad_segs=4)
    holes = shapely.union_all(shapely.buffer(shapely.points(rng.uniform(5, 15, (30, 2))), 0.5))
    pour = shapely.difference(shapely.box(4, 4, 16, 16), holes)
    geoms = np.concatenate([lines, pads, np.array([pour], dtype=object)])
    radius = np.concatenate([rng.uniform(0.05, 0.3, n), np.zeros(41)])
    a, b = _touching(geoms, radius)
    got = set(zip(a.tolist(), b.tolist()))
    i, j = np.triu_indices(len(geoms), 1)
    want_mask = shapely.distance(geoms[i], geoms[j]) <= radius[i] + radius[j] + TOUCH_TOLERANCE_MM
    want = set(zip(i[want_mask].tolist(), j[want_mask].tolist()))
    assert got == want and len(want) > 50
    points = shapely.points(rng.uniform(0, 20, (200, 2)))
    at, hit = _points_on(geoms, radius, points)
    pi, gi = np.meshgrid(np.arange(200), np.arange(len(geoms)), indexing="ij")
    on = shapely.distance(geoms[gi.ravel()], points[pi.ravel()]) <= radius[gi.ravel()] + TOUCH_TOLERANCE_MM
    assert set(zip(at.tolist(), hit.tolist())) == set(zip(pi.ravel()[on].tolist(), gi.ravel()[on].tolist()))
