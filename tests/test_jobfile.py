"""Gerber job file reader (checker/readers/fab/jobfile.py).

Format source: Ucamco, "Gerber Job Format" specification, sections
GeneralSpecs, FilesAttributes and MaterialStackup (from memory); the file
is JSON (RFC 8259). The combined dielectric follows the series-capacitor
rule for layers in a uniform normal field, eps_eff = sum(t) / sum(t_i /
eps_i) (textbook electrostatics); expected values are hand calculations
written beside them. The job file below is invented.
"""

from __future__ import annotations

import copy
import io
import json
import zipfile
from pathlib import Path

import pytest

from checker import limits
from checker.errors import FabError
from checker.model import Stackup
from checker.readers.fab import jobfile
from checker.readers.fab.jobfile import load_job, read_job

JOB = {
    "Header": {"GenerationSoftware": {"Vendor": "Invented", "Application": "sample-writer", "Version": "1"},
               "CreationDate": "2024-05-01T10:00:00"},
    "GeneralSpecs": {"ProjectId": {"Name": "sensor-frontend", "GUID": "0", "Revision": "A"},
                     "Size": {"X": 40.0, "Y": 30.0}, "LayerNumber": 4, "BoardThickness": 1.6},
    "FilesAttributes": [
        {"Path": "frontend-L1.gbr", "FileFunction": "Copper,L1,Top", "FilePolarity": "Positive"},
        {"Path": "frontend-L2.gbr", "FileFunction": "Copper,L2,Inr", "FilePolarity": "Negative"},
        {"Path": "frontend-mask.gbr", "FileFunction": "Soldermask,Top"},
    ],
    "MaterialStackup": [
        {"Type": "Legend", "Name": "Top legend"},                                           # 0
        {"Type": "SolderPaste", "Name": "Top paste"},                                       # 1
        {"Type": "SolderMask", "Thickness": 0.02, "DielectricConstant": "3,5", "Name": "Top mask"},  # 2
        {"Type": "Copper", "Thickness": 0.035, "Name": "TOP"},                             # 3
        {"Type": "Dielectric", "Thickness": 0.1, "Material": "FR4", "DielectricConstant": 4.0,
         "LossTangent": 0.02, "Name": "PP1"},                                               # 4
        {"Type": "Dielectric", "Thickness": 0.1, "Material": "FR4", "DielectricConstant": "4,5",
         "LossTangent": "0,02", "Name": "PP2"},                                             # 5
        {"Type": "Copper", "Thickness": 0.0175, "Name": "IN1"},                            # 6
        {"Type": "Dielectric", "Thickness": 1.0, "DielectricConstant": 4.6, "Name": "Core"},  # 7
        {"Type": "Copper", "Thickness": 0.0175, "Name": "IN2"},                            # 8
        {"Type": "Dielectric", "Thickness": 0.2, "DielectricConstant": "4.2"},             # 9
        {"Type": "Copper", "Thickness": 0.035, "Name": "BOT"},                             # 10
        {"Type": "SolderMask", "Thickness": 0.015, "DielectricConstant": 3.8, "LossTangent": 0.03},  # 11
        {"Type": "Legend", "Name": "Bottom legend"},                                       # 12
    ],
}


def read(data, name: str = "board.gbrjob"):
    raw = data if isinstance(data, (bytes, str)) else json.dumps(data, indent=2)
    raw = raw.encode("utf-8") if isinstance(raw, str) else raw
    return read_job(io.BytesIO(raw), name)


def test_general_specs_and_files() -> None:
    # Gerber Job Format: GeneralSpecs.Size (mm), LayerNumber, BoardThickness (mm);
    # FilesAttributes entries Path / FileFunction / FilePolarity.
    job = read(JOB)
    assert job.path == "board.gbrjob"
    assert job.size_mm == (40.0, 30.0) and job.layer_count == 4 and job.board_thickness_mm == 1.6
    assert job.files == (("frontend-L1.gbr", "Copper,L1,Top", "Positive"),
                         ("frontend-L2.gbr", "Copper,L2,Inr", "Negative"),
                         ("frontend-mask.gbr", "Soldermask,Top", ""))


def test_copper_layers_in_order_without_roles() -> None:
    # MaterialStackup is ordered top to bottom; the job file gives no roles.
    job = read(JOB)
    s = job.stackup
    assert isinstance(s, Stackup)
    assert s.names == ("TOP", "IN1", "IN2", "BOT")
    assert [layer.thickness_mm for layer in s.layers] == [0.035, 0.0175, 0.0175, 0.035]
    assert {layer.role for layer in s.layers} == {"mixed"} and job.roles_given is False
    assert job.copper_numbers == (1, 2, 3, 4)


def test_consecutive_dielectrics_combine_in_series() -> None:
    # PP1 (0.1 mm, 4.0) + PP2 (0.1 mm, "4,5" with a decimal comma):
    # t = 0.2 mm, eps = 0.2 / (0.1/4 + 0.1/4.5) = 36 / 8.5 = 4.2352941... (hand)
    d = read(JOB).stackup.dielectrics
    assert d[0].thickness_mm == pytest.approx(0.2, abs=1e-15)
    assert d[0].er == pytest.approx(36 / 8.5, rel=1e-12)
    # equal loss tangents stay 0.02 (series rule of complex permittivities)
    assert d[0].loss_tangent == pytest.approx(0.02, rel=1e-12)
    assert d[0].name == "PP1 + PP2"
    assert (d[1].thickness_mm, d[1].er, d[1].loss_tangent, d[1].name) == (1.0, 4.6, None, "Core")
    assert (d[2].er, d[2].name) == (4.2, None)  # "4.2" read from a string


def test_series_loss_tangent_by_hand() -> None:
    # Two equal halves, eps 4 / tan 0 and eps 4 / tan 0.02. With
    # 1/eps* = sum w_i (1 + j tan_i) / (eps_i (1 + tan_i^2)), tan_eff =
    # sum(w t /(eps(1+t^2))) / sum(w /(eps(1+t^2))) = 0.02/1.0004 / (1 + 1/1.0004)
    # = 0.02 / 2.0004 (hand).
    job = copy.deepcopy(JOB)
    job["MaterialStackup"][4].update(DielectricConstant=4, LossTangent=0)
    job["MaterialStackup"][5].update(DielectricConstant=4, LossTangent=0.02)
    d = read(job).stackup.dielectrics[0]
    assert d.er == 4.0
    assert d.loss_tangent == pytest.approx(0.02 / 2.0004, rel=1e-12)


def test_solder_masks_above_and_below() -> None:
    s = read(JOB).stackup
    assert (s.mask_top.thickness_mm, s.mask_top.er, s.mask_top.name) == (0.02, 3.5, "Top mask")
    assert (s.mask_bottom.thickness_mm, s.mask_bottom.er, s.mask_bottom.loss_tangent) == (0.015, 3.8, 0.03)


def test_minimal_job_file() -> None:
    # Only MaterialStackup is needed; copper without a Name is called L<n>.
    job = read({"MaterialStackup": [{"Type": "Copper", "Thickness": 0.035},
                                    {"Type": "Dielectric", "Thickness": 1.5, "DielectricConstant": 4.5},
                                    {"Type": "Copper", "Thickness": 0.035}]})
    assert job.stackup.names == ("L1", "L2") and job.stackup.mask_top is None
    assert (job.size_mm, job.layer_count, job.board_thickness_mm, job.files) == (None, None, None, ())


def test_zip_member_and_path_unchanged(tmp_path: Path) -> None:
    text = json.dumps(JOB)
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as z:
        z.writestr("board.gbrjob", text)
    with zipfile.ZipFile(buffer) as z, z.open("board.gbrjob") as member:
        assert len(read_job(member, "pkg.zip:board.gbrjob").stackup.layers) == 4
    path = tmp_path / "board.gbrjob"
    path.write_text(text, encoding="utf-8")
    before = path.read_bytes()
    assert load_job(path).path == str(path)
    assert path.read_bytes() == before


# --------------------------------------------------------------------------- errors


def changed(edit) -> dict:
    job = copy.deepcopy(JOB)
    edit(job)
    return job


M = "MaterialStackup"


@pytest.mark.parametrize(
    ("edit", "place", "message"),
    [
        (lambda j: j[M][9].pop("Thickness"), "MaterialStackup[9]", "needs its thickness"),
        (lambda j: j[M][3].update(Thickness=0), "MaterialStackup[3].Thickness", "must be > 0, got 0"),
        (lambda j: j[M][3].update(Thickness="0.035"), "MaterialStackup[3].Thickness", 'must be a number, got "0.035"'),
        (lambda j: j[M][7].update(DielectricConstant=0.5), "MaterialStackup[7].DielectricConstant",
         "must be >= 1, got 0.5"),
        (lambda j: j[M][7].update(DielectricConstant="4.2 at 1 GHz"), "MaterialStackup[7].DielectricConstant",
         "must be a number (or a number in a string)"),
        (lambda j: j[M][7].update(DielectricConstant=True), "MaterialStackup[7].DielectricConstant",
         "must be a number, got true"),
        (lambda j: j[M][4].update(LossTangent=-0.1), "MaterialStackup[4].LossTangent", "must be >= 0"),
        # the sanity bounds of checker/bounds.py, at the entry's own key: a loss tangent of 1e308 once
        # overflowed the series rule (complex division by zero) before any bound was checked
        (lambda j: j[M][4].update(LossTangent=1e308), "MaterialStackup[4].LossTangent",
         "1e+308 is above the sanity bound (0 to 1)"),
        (lambda j: j[M][7].update(DielectricConstant=1e6), "MaterialStackup[7].DielectricConstant",
         "1e+06 is above the sanity bound (1 to 100)"),
        (lambda j: j[M][7].update(Type="SolderMask"), "MaterialStackup[7].Type",
         "only Dielectric entries can lie between copper layers"),
        (lambda j: j[M].pop(7), "MaterialStackup[7]", "two copper layers with no Dielectric entry between them"),
        (lambda j: j[M][8].update(Name="TOP"), "MaterialStackup[8].Name", "already used by MaterialStackup[3]"),
        (lambda j: j[M][1].update(Type="Dielectric", Thickness=0.1, DielectricConstant=3),
         "MaterialStackup[1].Type", "a Dielectric above the top copper layer cannot be modelled"),
        (lambda j: j[M].insert(1, {"Type": "SolderMask", "Thickness": 0.01, "DielectricConstant": 3}),
         "MaterialStackup[3]", "a second SolderMask above the top copper layer"),
        (lambda j: j[M][0].pop("Type"), "MaterialStackup[0]", "missing required key 'Type'"),
        (lambda j: j[M].__setitem__(0, 3), "MaterialStackup[0]", "must be a JSON object"),
        (lambda j: j.__setitem__(M, [{"Type": "Legend"}]), "MaterialStackup", "has no Copper entry"),
        (lambda j: j.__setitem__(M, {}), "MaterialStackup", "must be a JSON array"),
        (lambda j: j["GeneralSpecs"].update(LayerNumber=6), "GeneralSpecs.LayerNumber",
         "says 6 copper layers but MaterialStackup has 4 Copper entries"),
        (lambda j: j["GeneralSpecs"].update(LayerNumber=4.0), "GeneralSpecs.LayerNumber", "must be a whole number"),
        (lambda j: j["GeneralSpecs"].update(BoardThickness=-1), "GeneralSpecs.BoardThickness", "must be > 0"),
        (lambda j: j["GeneralSpecs"]["Size"].pop("Y"), "GeneralSpecs.Size", "missing required key 'Y'"),
        (lambda j: j["GeneralSpecs"]["Size"].update(X=2e4), "GeneralSpecs.Size.X", "more than 10 m"),
        (lambda j: j["FilesAttributes"][1].pop("FileFunction"), "FilesAttributes[1]",
         "missing required key 'FileFunction'"),
        (lambda j: j["FilesAttributes"][0].update(Path=7), "FilesAttributes[0].Path", "must be a string, got 7"),
    ],
)
def test_bad_stackup_gives_one_error_with_the_json_path(edit, place: str, message: str) -> None:
    with pytest.raises(FabError) as info:
        read(changed(edit), "job.gbrjob")
    err = info.value
    assert err.file == "job.gbrjob" and err.place == place and err.line is None
    assert str(err).startswith(f"job.gbrjob: {place}: ")
    assert message in str(err)


def test_series_rule_takes_thicknesses_near_the_smallest_float() -> None:
    # PP1 (er 4.0) and PP2 (er 4.5) of equal thickness: 2 / (1/4 + 1/4.5) = 72/17 by hand, whatever the
    # thickness; at 5e-324 mm each t/er rounds to 0 (once a ZeroDivisionError), so the rule must scale
    def both(t):
        return changed(lambda j: (j[M][4].update(Thickness=t), j[M][5].update(Thickness=t)))
    for t in (0.1, 5e-324):
        d = read(both(t)).stackup.dielectrics[0]
        assert d.er == pytest.approx(72 / 17, rel=1e-12)
        assert d.thickness_mm == 2 * t


def test_dielectric_without_thickness_names_the_flag_that_supplies_it() -> None:
    # the one value no default may stand for: the message says which option gives it
    with pytest.raises(FabError, match=r"give the stackup with --stackup FILE"):
        read(changed(lambda j: j[M][7].pop("Thickness")))


def test_optional_values_left_out_get_the_documented_defaults_and_a_note() -> None:
    # The job format makes every MaterialStackup field but Type optional
    # (Ucamco, Gerber Job Format, MaterialStackup; from memory). Left out here:
    # the εr of PP1 (4) and of Core (7), both mask εr values, the bottom mask's
    # thickness and the TOP copper thickness.
    def strip(j):
        for i in (2, 4, 7, 11):
            j[M][i].pop("DielectricConstant")
        j[M][11].pop("Thickness")
        j[M][3].pop("Thickness")
        j[M][4].pop("LossTangent")

    job = read(changed(strip))
    st = job.stackup
    d = jobfile.DEFAULT_DIELECTRIC_ER
    # PP1 (0.1 mm, default εr) + PP2 (0.1 mm, εr 4.5) in series (hand calculation):
    # eps = 0.2 / (0.1/d + 0.1/4.5)
    assert st.dielectrics[0].er == pytest.approx(0.2 / (0.1 / d + 0.1 / 4.5), rel=1e-12)
    assert st.dielectrics[0].assumed == ("er",) and st.dielectrics[0].loss_tangent is None
    assert st.dielectrics[1].er == d and st.dielectrics[1].assumed == ("er",)
    assert st.dielectrics[2].er == 4.2 and st.dielectrics[2].assumed == ()  # given: not marked
    assert st.mask_top.er == jobfile.DEFAULT_MASK_ER and st.mask_top.thickness_mm == 0.02
    assert st.mask_top.assumed == ("er",)
    assert st.mask_bottom.thickness_mm == jobfile.DEFAULT_MASK_MM and st.mask_bottom.assumed == ("thickness", "er")
    assert st.layers[0].thickness_mm == jobfile.DEFAULT_COPPER_MM and st.layers[0].assumed == ("thickness",)
    assert st.layers[1].assumed == ()
    text = "\n".join(job.notes)
    assert "dielectric εr not given for MaterialStackup[4] (PP1), MaterialStackup[7] (Core): 4.6 used" in text
    assert "solder mask εr not given for MaterialStackup[2] (Top mask), MaterialStackup[11]: 4 used" in text
    assert "solder mask thickness not given for MaterialStackup[11]: 0.025 mm used" in text
    assert "copper thickness not given for MaterialStackup[3] (TOP): 0.035 mm used" in text
    assert all("common practice, not your board" in n for n in job.notes) and len(job.notes) == 4


def test_defaults_sit_at_the_high_end_of_the_usual_ranges() -> None:
    # Common-practice ranges (rules of thumb, from memory): FR-4 class laminates
    # 4.2-4.8, LPI solder masks 3.3-4.0, masks 10-30 um over copper; the
    # defaults must lie in the upper half so coupling errs high.
    assert 4.5 <= jobfile.DEFAULT_DIELECTRIC_ER <= 4.8
    assert 3.65 <= jobfile.DEFAULT_MASK_ER <= 4.0
    assert 0.02 <= jobfile.DEFAULT_MASK_MM <= 0.03
    assert jobfile.DEFAULT_COPPER_MM == pytest.approx(0.0348, abs=5e-4)  # 1 oz/ft^2 = 34.8 um (common practice)


def test_no_material_stackup() -> None:
    with pytest.raises(FabError, match=r"^j: no MaterialStackup: this job file does not give the stackup$"):
        read({"GeneralSpecs": {}}, "j")


def test_not_an_object() -> None:
    with pytest.raises(FabError, match=r"^j: must be a JSON object \{\.\.\.\}, got an array$"):
        read([], "j")


def test_json_syntax_error_names_the_line() -> None:
    with pytest.raises(FabError) as info:
        read('{\n  "MaterialStackup": [\n    {"Type": "Copper",}\n  ]\n}\n', "j")
    assert info.value.line == 3 and str(info.value).startswith("j: line 3: invalid JSON:")


def test_repeated_key_nan_and_empty() -> None:
    with pytest.raises(FabError, match=r"^j: MaterialStackup\[0\]: key 'Thickness' appears more than once$"):
        read('{"MaterialStackup": [{"Type": "Copper", "Thickness": 1, "Thickness": 2}]}', "j")
    with pytest.raises(FabError, match=r"^j: invalid JSON: NaN is not a number JSON allows$"):
        read('{"MaterialStackup": [{"Type": "Copper", "Thickness": NaN}]}', "j")
    with pytest.raises(FabError, match=r"^j: MaterialStackup\[0\]\.Thickness: must be a finite number"):
        read('{"MaterialStackup": [{"Type": "Copper", "Thickness": 1e999}]}', "j")
    with pytest.raises(FabError, match=r"^j: the file is empty$"):
        read(b"  \n", "j")


def test_not_utf8_and_size_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    with pytest.raises(FabError, match=r"^j: line 2: not UTF-8 text"):
        read(b'{\n"Header": "\xff"}', "j")
    monkeypatch.setattr(limits, "MB", 1)  # the cap counted in bytes, for a small test file
    with limits.using(limits.Limits(file_mb=100)):
        with pytest.raises(FabError, match=r"^j: over the cap of 100 MB read per file"):
            read(JOB, "j")


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(FabError, match="no such file"):
        load_job(tmp_path / "none.gbrjob")
