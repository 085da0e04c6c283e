"""Stackup YAML reader (checker/readers/fab/stackup_yaml.py).

The entries are those of the board JSON format's ``stackup`` key
(docs/board-format.md, section Stackup) and the board JSON door checks
them; YAML syntax and line marks as YAML 1.1 / PyYAML's safe loader
defines them. Unit conversions are hand calculations (1 mil = 0.0254 mm,
1 um = 0.001 mm). Samples are invented.
"""

from __future__ import annotations

import io
from pathlib import Path

import pytest

from checker.errors import FabError
from checker.model import CopperLayer, Dielectric
from checker.readers import read_board_dict
from checker.readers.fab import stackup_yaml
from checker.readers.fab.stackup_yaml import load_stackup_yaml, read_stackup_yaml

SAMPLE = """\
# team stackup, invented
units: mm
description: four layers, 1.6 mm
stackup:
  - {mask: top-mask, thickness: 0.015, er: 3.8}
  - {copper: TOP, role: signal, thickness: 0.035}
  - {dielectric: prepreg, thickness: 0.2, er: 4.2, loss_tangent: 0.02}
  - {copper: GND, role: plane, thickness: 0.035}
  - {dielectric: core, thickness: 1.0, er: 4.5}
  - {copper: PWR, role: plane, thickness: 0.035}
  - {dielectric: null, thickness: 0.2, er: 4.2}
  - {copper: BOT, role: mixed, thickness: 0.035}
  - {mask: bottom-mask, thickness: 0.015, er: 3.8, loss_tangent: 0.025}
"""


def read(text: str | bytes, name: str = "team-stackup.yaml"):
    raw = text.encode("utf-8") if isinstance(text, str) else text
    return read_stackup_yaml(io.BytesIO(raw), name)


def test_sample_loads_with_roles() -> None:
    job = read(SAMPLE)
    s = job.stackup
    assert s.layers == (CopperLayer("TOP", "signal", 0.035), CopperLayer("GND", "plane", 0.035),
                        CopperLayer("PWR", "plane", 0.035), CopperLayer("BOT", "mixed", 0.035))
    assert s.dielectrics == (Dielectric(0.2, 4.2, 0.02, "prepreg"), Dielectric(1.0, 4.5, None, "core"),
                             Dielectric(0.2, 4.2, None, None))
    assert s.mask_top == Dielectric(0.015, 3.8, None, "top-mask")
    assert s.mask_bottom == Dielectric(0.015, 3.8, 0.025, "bottom-mask")
    assert job.roles_given is True and job.copper_numbers == (1, 2, 3, 4) and job.layer_count == 4
    assert job.path == "team-stackup.yaml" and job.files == ()


def test_block_style_anchors_and_mil_units() -> None:
    # Block-style YAML and an alias to a repeated entry; 1.4 mil = 0.03556 mm,
    # 4 mil = 0.1016 mm (hand, 1 mil = 0.0254 mm).
    text = """\
units: mil
stackup:
  - copper: TOP
    role: signal
    thickness: 1.4
  - &prepreg
    dielectric: prepreg
    thickness: 4
    er: 4.2
  - {copper: IN1, role: plane, thickness: 1.4}
  - *prepreg
  - {copper: BOT, role: signal, thickness: 1.4}
"""
    s = read(text).stackup
    assert [layer.thickness_mm for layer in s.layers] == pytest.approx([0.03556] * 3, abs=1e-15)
    assert [d.thickness_mm for d in s.dielectrics] == pytest.approx([0.1016, 0.1016], abs=1e-15)


def test_same_stackup_as_the_json_door() -> None:
    # The YAML file holds exactly the board format's stackup list: the
    # board JSON door must build the same model from it.
    import yaml

    data = yaml.safe_load(SAMPLE)
    board = read_board_dict({"format": "couplint-board", "version": 1, "units": "mm", "stackup": data["stackup"],
                             "nets": [], "tracks": [{"layer": "TOP", "net": None, "width": 0.1,
                                                     "points": [[0, 0], [1, 0]]}]}, "b.json")
    assert read(SAMPLE).stackup == board.stackup


def test_path_and_input_unchanged(tmp_path: Path) -> None:
    path = tmp_path / "team-stackup.yaml"
    path.write_text(SAMPLE, encoding="utf-8")
    before = path.read_bytes()
    assert load_stackup_yaml(path).path == str(path)
    assert path.read_bytes() == before


# --------------------------------------------------------------------------- errors

HEAD = "units: mm\nstackup:\n"  # lines 1-2
TOP = "  - {copper: TOP, role: signal, thickness: 0.035}\n"  # line 3
DIEL = "  - {dielectric: pp, thickness: 0.2, er: 4.2}\n"  # line 4
BOT = "  - {copper: BOT, role: signal, thickness: 0.035}\n"  # line 5


@pytest.mark.parametrize(
    ("text", "place", "line", "message"),
    [
        (HEAD + TOP + "  - {dielectric: pp, thickness: 0.2, er: 0.5}\n" + BOT,
         "stackup[1].er (line 4)", 4, "must be >= 1, got 0.5"),
        (HEAD + TOP + "  - {dielectric: pp, thickness: 0.2, er: '4,2'}\n" + BOT,
         "stackup[1].er (line 4)", 4, 'must be a number, got "4,2"'),
        (HEAD + "  - {copper: TOP, role: ground, thickness: 0.035}\n" + DIEL + BOT,
         "stackup[0].role (line 3)", 3, 'must be one of "signal", "plane", "mixed", got "ground"'),
        (HEAD + "  - {copper: TOP, role: signal, thickness: 0.035, weight: 1oz}\n" + DIEL + BOT,
         "stackup[0] (line 3)", 3, "unknown key 'weight' (allowed here: copper, role, thickness)"),
        (HEAD + "  - {copper: TOP, thickness: 0.035}\n" + DIEL + BOT,
         "stackup[0] (line 3)", 3, "missing required key 'role'"),
        (HEAD + TOP + BOT, "stackup[1] (line 4)", 4, "expected a dielectric here"),
        (HEAD + TOP + DIEL + "  - {copper: TOP, role: plane, thickness: 0.035}\n",
         "stackup[2].copper (line 5)", 5, "layer name 'TOP' is already used by stackup[0]"),
        (HEAD + TOP + "  - {mask: m, thickness: 0.01, er: 3.5}\n" + BOT,
         "stackup[1] (line 4)", 4, "a solder mask can only be the first entry"),
        (HEAD + TOP + DIEL, "stackup[1] (line 4)", 4, "the stackup must end with a copper layer"),
        ("units: cm\nstackup:\n" + TOP, "units (line 1)", 1, 'must be one of "mm", "mil", "um", "in"'),
        (HEAD + TOP + "  - {dielectric: pp, thickness: .nan, er: 4.2}\n" + BOT,
         "stackup[1].thickness (line 4)", 4, "must be a finite number, got NaN"),
        (HEAD + TOP + "  - {dielectric: pp, thickness: 2024-01-01, er: 4.2}\n" + BOT,
         "stackup[1].thickness (line 4)", 4, "not a JSON value: date"),
        ("unit: mm\nstackup:\n" + TOP, "unit (line 1)", 1, "unknown key 'unit' (allowed here: units, stackup, "
                                                         "description)"),
        ("units: mm\n", "line 1", 1, "missing required key 'stackup'"),
        ("- {copper: TOP, role: signal, thickness: 0.035}\n", "line 1", 1, "must be a mapping with a 'stackup:' list"),
        (HEAD + TOP + "  - {dielectric: pp, thickness: 0.2, thickness: 0.3, er: 4.2}\n" + BOT,
         "stackup[1].thickness (line 4)", 4, "key 'thickness' appears twice (lines 4 and 4)"),
        ("units: mm\nunits: mil\nstackup: []\n", "units (line 2)", 2, "appears twice (lines 1 and 2)"),
        ("units: mm\nstackup:\n  - {copper: TOP\n", "line 4, column 1", 4, "invalid YAML"),
        ("units: mm\nstackup: [\n", "line 3, column 1", 3, "invalid YAML"),
        ("a: &a [*a]\nstackup: []\n", "line 1", 1, "a recursive alias"),
    ],
)
def test_bad_input_gives_one_error_with_place_and_line(text: str, place: str, line: int, message: str) -> None:
    with pytest.raises(FabError) as info:
        read(text, "s.yaml")
    err = info.value
    assert err.file == "s.yaml" and err.place == place and err.line == line
    assert str(err).startswith(f"s.yaml: {place}: ")
    assert message in str(err)


def test_alias_bomb_is_refused_quickly() -> None:
    # Nine levels of nine aliases expand to 9**9 values: refused from the
    # node graph before anything expands it.
    lines = ["l0: &l0 [x, x, x, x, x, x, x, x, x]"]
    for k in range(1, 10):
        lines.append(f"l{k}: &l{k} [" + ", ".join([f"*l{k - 1}"] * 9) + "]")
    with pytest.raises(FabError, match=r"more than 100,000 values once aliases are expanded"):
        read("\n".join(lines) + "\nstackup: []\n", "s.yaml")


def test_empty_not_utf8_and_size_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    with pytest.raises(FabError, match=r"^s\.yaml: the file is empty"):
        read("\n# nothing\n", "s.yaml")
    with pytest.raises(FabError, match=r"^s\.yaml: line 2: not UTF-8 text"):
        read(b"units: mm\ndescription: caf\xe9\n", "s.yaml")
    monkeypatch.setattr(stackup_yaml, "MAX_FILE_BYTES", 50)
    with pytest.raises(FabError, match=r"^s\.yaml: over the size limit of 50 bytes"):
        read(SAMPLE, "s.yaml")


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(FabError, match="no such file"):
        load_stackup_yaml(tmp_path / "none.yaml")
    with pytest.raises(FabError, match="is a folder"):
        load_stackup_yaml(tmp_path)


def test_thicknesses_with_their_units_need_no_units_key() -> None:
    # one quantity syntax with the rule files: "35 um", "0.2 mm", "1.4 mil" (1 mil = 0.0254 mm exactly)
    job = read("stackup:\n"
               "  - {copper: TOP, role: signal, thickness: 35 um}\n"
               "  - {dielectric: core, thickness: 0.2 mm, er: 4.2}\n"
               "  - {copper: BOT, role: signal, thickness: 1.4 mil}\n")
    top, bot = job.stackup.layers
    assert top.thickness_mm == pytest.approx(0.035, rel=1e-12) and bot.thickness_mm == pytest.approx(0.03556, rel=1e-12)
    assert job.stackup.dielectrics[0].thickness_mm == pytest.approx(0.2, rel=1e-12)


def test_a_units_key_gives_bare_numbers_their_unit_and_quantities_keep_theirs() -> None:
    job = read("units: mil\nstackup:\n"
               "  - {copper: TOP, role: signal, thickness: 1.4}\n"
               "  - {dielectric: core, thickness: 0.2 mm, er: 4.2}\n"
               "  - {copper: BOT, role: signal, thickness: 35 um}\n")
    top, bot = job.stackup.layers
    assert top.thickness_mm == pytest.approx(1.4 * 0.0254, rel=1e-12)
    assert job.stackup.dielectrics[0].thickness_mm == pytest.approx(0.2, rel=1e-12)
    assert bot.thickness_mm == pytest.approx(0.035, rel=1e-12)


@pytest.mark.parametrize("value, words", [
    ("0.035", "a length needs its unit: write '0.035 mm' or '0.035 um' (accepted: mm, um, mil, in); or give the "
              "unit of every bare number with a top-level 'units:' key"),
    ("35 furlongs", "unknown length unit 'furlongs' (accepted: mm, um, mil, in)"),
    ("35 pF", "unknown length unit 'pF'"),
])
def test_a_thickness_without_a_usable_unit_is_refused_at_its_line(value: str, words: str) -> None:
    with pytest.raises(FabError) as info:
        read("stackup:\n"
             "  - {copper: TOP, role: signal, thickness: 35 um}\n"
             "  - {dielectric: core, thickness: 0.2 mm, er: 4.2}\n"
             f"  - {{copper: BOT, role: signal, thickness: {value}}}\n")
    assert info.value.place == "stackup[2].thickness (line 4)" and words in info.value.message
