"""Excellon drill reader (checker/readers/fab/excellon.py).

Sources named beside each test: the Excellon format as in IPC-NC-349 and
the Excellon CNC-7 conventions (header M48 ... %, METRIC/INCH with LZ/TZ,
tool definitions, hits, G85, routing, M30) and the Gerber Layer Format
Specification's attribute comments for drill files (``; #@! TF...``,
``; #@! TA...``), all cited from memory. Positions are checked against
hand calculations and, where it reads the construct, against gerbonara
1.5's Excellon reader (an independent library, used as an oracle). All
samples are invented.
"""

from __future__ import annotations

import io
import warnings
import zipfile
from pathlib import Path

import numpy as np
import pytest

from checker.errors import FabError
from checker.readers.fab import excellon
from checker.readers.fab.excellon import load_excellon, read_excellon


def read(text: str, name: str = "drill.drl"):
    return read_excellon(io.BytesIO(text.encode("utf-8")), name)


def gerbonara_holes(text: str) -> list[tuple[float, float, float]]:
    """(x, y, diameter) in mm of every hit, as gerbonara 1.5 reads them."""
    gx = pytest.importorskip("gerbonara.excellon", reason="gerbonara is the oracle for Excellon positions")
    from gerbonara.utils import MM

    with warnings.catch_warnings():  # gerbonara warns about forms it accepts (bare INCH, G90 late)
        warnings.simplefilter("ignore", SyntaxWarning)
        f = gx.ExcellonFile.from_string(text)
    out = []
    for d in f.drills():
        c = d.converted(MM)
        out.append((c.x, c.y, MM.convert_from(d.aperture.unit, d.aperture.diameter)))
    return out


def gerbonara_slots(text: str) -> list[tuple[float, float, float, float]]:
    gx = pytest.importorskip("gerbonara.excellon", reason="gerbonara is the oracle for Excellon positions")
    from gerbonara.utils import MM

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SyntaxWarning)
        f = gx.ExcellonFile.from_string(text)
    return [(c.x1, c.y1, c.x2, c.y2) for c in (s.converted(MM) for s in f.slots())]


def holes(d) -> list[tuple[float, float, float]]:
    return list(zip(d.x.tolist(), d.y.tolist(), d.diameter.tolist()))


METRIC_DECIMAL = """\
M48
; #@! TF.FileFunction,Plated,1,4,PTH
FMAT,2
METRIC,TZ,000.000
; #@! TA.AperFunction,Plated,PTH,ViaDrill
T1C0.300F200S65
; #@! TA.AperFunction,Plated,PTH,ComponentDrill,PressFit
T2C1.000
%
G90
G05
T1
X1.5Y2.5
X3.
Y-4.25
T02
X10.0Y20.0
M30
"""


# --------------------------------------------------------------------------- what is read


def test_metric_decimal_hits_tools_and_attributes() -> None:
    # Excellon: T<n>C<diameter> in the header, T<n> selects, X..Y.. hits,
    # coordinates modal (X only keeps Y); X2 attribute comments per the
    # Gerber Layer Format Specification, drill-file section (from memory).
    d = read(METRIC_DECIMAL)
    assert d.path == "drill.drl"
    assert d.plated is True and d.span == (1, 4)
    assert holes(d) == [(1.5, 2.5, 0.3), (3.0, 2.5, 0.3), (3.0, -4.25, 0.3), (10.0, 20.0, 1.0)]
    assert d.function == ["ViaDrill", "ViaDrill", "ViaDrill", "ComponentDrill"]
    assert d.line.tolist() == [13, 14, 15, 17]  # file lines of the hits (1-based)
    assert len(d.slot_x1) == 0 and d.slot_line.dtype.kind == "i"


def test_metric_decimal_agrees_with_gerbonara() -> None:
    ours = holes(read(METRIC_DECIMAL))
    theirs = gerbonara_holes(METRIC_DECIMAL)
    np.testing.assert_allclose(ours, theirs, atol=1e-9)


def inch_file(zeros: str, body: str) -> str:
    return f"M48\nINCH,{zeros}\nT1C0.0120\n%\nT1\n{body}M30\n"


@pytest.mark.parametrize(
    ("zeros", "hit", "expected_mm"),
    [
        # LZ: leading zeros kept, digits read from the left in 2.4 format:
        # X015 -> 01.50 in = 38.1 mm; Y025 -> 02.50 in = 63.5 mm (hand)
        ("LZ", "X015Y025", (38.1, 63.5)),
        # TZ: trailing zeros kept, digits read from the right: X015 -> 0.0015 in
        # = 0.0381 mm; Y-5 -> -0.0005 in = -0.0127 mm (hand)
        ("TZ", "X015Y-5", (0.0381, -0.0127)),
        # all six digits: both readings agree, 12.3456 in = 313.57824 mm (hand)
        ("TZ", "X123456Y000100", (313.57824, 0.254)),
    ],
)
def test_inch_implied_decimals(zeros: str, hit: str, expected_mm: tuple[float, float]) -> None:
    # Excellon INCH,LZ / INCH,TZ with the 2.4 implied format (common practice
    # default); 1 in = 25.4 mm exactly.
    text = inch_file(zeros, hit + "\n")
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], expected_mm, rtol=1e-12)
    assert d.diameter[0] == pytest.approx(0.012 * 25.4)
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), rtol=1e-9)


@pytest.mark.parametrize(
    ("header", "hit", "expected_mm"),
    [
        # METRIC,TZ,000.000: X1500 -> 1.500 mm, Y-25 -> -0.025 mm (hand)
        ("METRIC,TZ,000.000", "X1500Y-25", (1.5, -0.025)),
        # METRIC,LZ,000.000: X015 -> 015000 -> 015.000 mm (hand)
        ("METRIC,LZ,000.000", "X015Y0025", (15.0, 2.5)),
        # METRIC,LZ,0000.00: X015 -> 015000 -> 0150.00 mm (hand)
        ("METRIC,LZ,0000.00", "X015Y1", (150.0, 1000.0)),
    ],
)
def test_metric_implied_decimals_with_digit_format(header: str, hit: str, expected_mm: tuple[float, float]) -> None:
    # Excellon METRIC,<zeros>,<digit format>: the format names integer and
    # decimal digits; the zero suppression says which end is padded.
    text = f"M48\n{header}\nT1C0.30\n%\nT1\n{hit}\nM30\n"
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], expected_mm, rtol=1e-12)
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), rtol=1e-9)


def test_inch_decimal_point_and_unit_switch_in_body() -> None:
    # Excellon: a value with a decimal point is read as written; M71 / M72
    # switch to metric / inch. 1.0 in = 25.4 mm, then 2.0 mm (hand).
    d = read("M48\nINCH\nT1C0.01\n%\nT1\nX1.0Y0.5\nM71\nX2.0\nM72\nY1.\nM30\n")
    np.testing.assert_allclose(holes(d), [(25.4, 12.7, 0.254), (2.0, 12.7, 0.254), (2.0, 25.4, 0.254)], rtol=1e-12)


def test_modal_coordinates_keep_the_other_axis() -> None:
    # Excellon: coordinates are modal; X alone keeps the last Y and the
    # other way round (also as gerbonara reads them).
    text = "M48\nMETRIC\nT3C0.5\n%\nT3\nX1.Y1.\nX2.\nY3.\nX4.Y4.\nM30\n"
    d = read(text)
    assert list(zip(d.x.tolist(), d.y.tolist())) == [(1.0, 1.0), (2.0, 1.0), (2.0, 3.0), (4.0, 4.0)]
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), atol=1e-12)


def test_tool_numbers_compare_as_numbers_and_t0_unloads() -> None:
    # Excellon: T1 and T01 name the same tool; T0 means no tool.
    d = read("M48\nMETRIC\nT01C0.3\nT2C0.4\n%\nT1\nX1.Y1.\nT002\nX2.Y2.\nM30\n")
    assert d.diameter.tolist() == [0.3, 0.4]
    with pytest.raises(FabError, match=r"drill\.drl: line 7: a hit before any tool is selected"):
        read("M48\nMETRIC\nT1C0.3\n%\nT1\nT0\nX1.Y1.\nM30\n")


def test_tool_defined_in_the_body() -> None:
    # Excellon: T<n>C<d> in the body defines and selects the tool.
    d = read("M48\nMETRIC\n%\nT5C0.8\nX1.Y2.\nM30\n")
    assert holes(d) == [(1.0, 2.0, 0.8)]


def test_g85_slot() -> None:
    # Excellon G85: X1Y1G85X2Y2 drills a slot from (x1, y1) to (x2, y2);
    # the second point's missing axis is the first's (modal). gerbonara
    # 1.5 does not read G85, so this is checked by hand.
    d = read("M48\nMETRIC\nT1C1.0\n%\nT1\nX0.Y0.G85X5.Y0.\nX1.Y1.G85Y4.\nM30\n")
    assert list(zip(d.slot_x1, d.slot_y1, d.slot_x2, d.slot_y2)) == [(0, 0, 5, 0), (1, 1, 1, 4)]
    assert d.slot_diameter.tolist() == [1.0, 1.0] and d.slot_line.tolist() == [6, 7]
    assert len(d.x) == 0


ROUTED = """\
M48
METRIC,TZ,000.000
T2C1.0
%
T2
G00X20.Y20.
M15
G01X25.Y20.
Y25.
M16
G05
X1.Y1.
M30
"""


def test_routed_slots_agree_with_gerbonara() -> None:
    # Excellon routing: G00 move, M15 tool down, G01 straight cut (a bare
    # coordinate continues it), M16 tool up, G05 back to drilling. Two
    # slots (20,20)-(25,20) and (25,20)-(25,25), then one hit at (1,1) (hand).
    d = read(ROUTED)
    ours = list(zip(d.slot_x1.tolist(), d.slot_y1.tolist(), d.slot_x2.tolist(), d.slot_y2.tolist()))
    assert ours == [(20.0, 20.0, 25.0, 20.0), (25.0, 20.0, 25.0, 25.0)]
    assert d.slot_line.tolist() == [8, 9]
    np.testing.assert_allclose(ours, gerbonara_slots(ROUTED), atol=1e-12)
    assert holes(d) == [(1.0, 1.0, 1.0)]


def test_g00_with_the_tool_up_cuts_nothing() -> None:
    d = read("M48\nMETRIC\nT1C1.0\n%\nT1\nG00X1.Y1.\nG01X5.Y1.\nM15\nG01X5.Y5.\nM17\nM30\n")
    assert d.slot_x1.tolist() == [5.0] and d.slot_y2.tolist() == [5.0]


def test_repeat_hits_agree_with_gerbonara() -> None:
    # Excellon R<n>X<dx>Y<dy>: n more hits, each stepped from the last.
    text = "M48\nMETRIC,TZ,000.000\nT1C0.3\n%\nT1\nX10.Y20.\nR3X1.\nM30\n"
    d = read(text)
    assert d.x.tolist() == [10.0, 11.0, 12.0, 13.0] and d.y.tolist() == [20.0] * 4
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), atol=1e-12)


def test_nonplated_file_function_and_aperture_function_lifetime() -> None:
    # Gerber spec, attributes in drill files: TF.FileFunction,NonPlated,1,2,NPTH;
    # a TA attribute applies to every tool defined after it until TD.
    d = read("M48\n; #@! TF.FileFunction,NonPlated,1,2,NPTH\nMETRIC\n"
             "; #@! TA.AperFunction,NonPlated,NPTH,MechanicalDrill\nT1C3.0\nT2C3.2\n; #@! TD\nT3C1.0\n%\n"
             "T1\nX0.Y0.\nT2\nX1.\nT3\nX2.\nM30\n")
    assert d.plated is False and d.span == (1, 2)
    assert d.function == ["MechanicalDrill", "MechanicalDrill", ""]


def test_no_file_function_means_plating_unknown() -> None:
    d = read("M48\nMETRIC\nT1C0.3\n%\nT1\nX1.Y1.\nM30\n")
    assert d.plated is None and d.span is None and d.function == [""]


def test_crlf_bom_comments_and_m95() -> None:
    # Excellon: ';' starts a comment; M95 also ends the header.
    text = "\ufeff; invented drill file\r\nM48\r\n; tools\r\nMETRIC,0000.00\r\nT1C0.3\r\nM95\r\nT1\r\nX1.Y1.\r\nM00\r\n"
    d = read(text)
    assert holes(d) == [(1.0, 1.0, 0.3)] and d.line.tolist() == [8]


def test_a_zip_member_is_read_without_seeking(tmp_path: Path) -> None:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as z:
        z.writestr("fab/board-PTH.drl", METRIC_DECIMAL)
    with zipfile.ZipFile(buffer) as z, z.open("fab/board-PTH.drl") as member:
        d = read_excellon(member, "fab.zip:fab/board-PTH.drl")
    assert len(d.x) == 4


def test_load_from_a_path_leaves_the_file_unchanged(tmp_path: Path) -> None:
    path = tmp_path / "board.drl"
    path.write_text(METRIC_DECIMAL, encoding="utf-8")
    before = path.read_bytes()
    d = load_excellon(path)
    assert d.path == str(path) and len(d.x) == 4
    assert path.read_bytes() == before


# --------------------------------------------------------------------------- errors


H = "M48\nMETRIC\nT1C0.3\n%\n"  # a good header: lines 1-4


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        (H + "X1.Y1.\nM30\n", 5, "a hit before any tool is selected"),
        (H + "T7\nX1.Y1.\nM30\n", 5, "unknown tool T7 (defined: T1)"),
        (H + "T1\nX10001.Y1.\nM30\n", 6, "more than 10 m from the origin"),
        ("M48\nINCH\nT1C0.01\n%\nT1\nX394.Y0.\nM30\n", 6, "more than 10 m from the origin"),
        ("M48\nMETRIC\nT1C0.3\n", 1, "the header (M48) has no end (% or M95): the file is cut short"),
        (H + "T1\nX1.Y1.\n", 6, "no end of program (M30): the file is cut short"),
        ("X1.Y1.\n", 1, "expected the header start M48"),
        (H + "T1\nG00X1.Y1.\nM15\nG02X2.Y2.\nM30\n", 8, "circular routing (G02) is not supported"),
        ("M48\nMETRIC\nICI,ON\n%\nM30\n", 3, "incremental coordinates (ICI,ON) are not supported"),
        (H + "G91\nM30\n", 5, "incremental coordinates (G91) are not supported"),
        ("M48\nINCH\nT1C0.01\n%\nT1\nX15Y25\nM30\n", 6, "does not say LZ or TZ"),
        ("M48\nMETRIC,TZ\nT1C0.01\n%\nT1\nX1234567Y0\nM30\n", 6, "more digits than the format 3.3"),
        ("M48\nMETRIC\nT1C0\n%\nM30\n", 3, "diameter must be > 0"),
        ("M48\nMETRIC\nT1C0.3\nT1C0.4\n%\nM30\n", 4, "defined twice with different diameters"),
        ("M48\nT1C0.3\nMETRIC\n%\nM30\n", 2, "before the units are set"),
        ("M48\nMETRIC\nT1\n%\nM30\n", 3, "without a diameter"),
        ("M48\nMETRIC,XZ\n%\nM30\n", 2, "unknown option 'XZ'"),
        (H + "T1\nX1.Y1.Z3\nM30\n", 6, "cannot read the hit"),
        (H + "T1\nM25\nM30\n", 6, "unknown or unsupported command 'M25'"),
        (H + "T1\nY1.\nM30\n", 6, "the X coordinate is not known yet"),
        (H + "T1\nM15\nM30\n", 6, "M15 (tool down) outside rout mode"),
        (H + "T1\nR2X1.\nM30\n", 6, "a repeat (R) before any hit"),
        ("M48\n; #@! TF.FileFunction,Plated,top,4,PTH\nM30\n", 2, "TF.FileFunction: expected"),
        ("M48\nMETRIC\nX1.Y1.\n%\nM30\n", 3, "a hit in the header"),
    ],
)
def test_bad_input_gives_one_error_with_file_and_line(text: str, line: int, message: str) -> None:
    with pytest.raises(FabError) as info:
        read(text, "board-PTH.drl")
    err = info.value
    assert err.file == "board-PTH.drl" and err.line == line
    assert str(err).startswith(f"board-PTH.drl: line {line}: ")
    assert message in str(err)


def test_no_header_at_all() -> None:
    with pytest.raises(FabError, match=r"^x\.drl: no M48 header: not an Excellon drill file$"):
        read("; only a comment\n\n", "x.drl")


def test_empty_file() -> None:
    with pytest.raises(FabError, match=r"^x\.drl: the file is empty$"):
        read(" \n\n", "x.drl")


def test_not_utf8_names_the_line() -> None:
    raw = (H + "T1\nX1.Y1.\n; caf\xe9\nM30\n").encode("latin-1")
    with pytest.raises(FabError, match=r"^x\.drl: line 7: not UTF-8 text"):
        read_excellon(io.BytesIO(raw), "x.drl")


def test_over_the_size_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(excellon, "MAX_FILE_BYTES", 32)
    with pytest.raises(FabError, match=r"^x\.drl: over the size limit of 32 bytes: not read$"):
        read(METRIC_DECIMAL, "x.drl")


def test_size_limit_is_stated() -> None:
    assert excellon.MAX_FILE_BYTES == 256 * 1024 * 1024


def test_missing_file_and_folder(tmp_path: Path) -> None:
    with pytest.raises(FabError, match="no such file"):
        load_excellon(tmp_path / "none.drl")
    with pytest.raises(FabError, match="is a folder"):
        load_excellon(tmp_path)
