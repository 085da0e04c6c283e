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

from checker import limits
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
        # (these two asserted refusals of an ambiguous X15 and of 7 digits with no digit format
        # stated; both are now read: test_ambiguous_zeros_read_as_tz, test_digit_format_inferred)
        # Excellon: a short coordinate with a leading 0 cannot be TZ, one with a trailing 0 cannot be LZ
        ("M48\nINCH\nT1C0.01\n%\nT1\nX015Y0\nX150Y1\nM30\n", 7, "no reading of the implied decimal point fits both"),
        ("M48\nMETRIC,TZ,000.000\nT1C0.01\n%\nT1\nX1234567Y0\nM30\n", 6, "more digits than the format 3.3"),
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
    monkeypatch.setattr(limits, "MB", 1)  # the cap counted in bytes, for a small test file
    with limits.using(limits.Limits(file_mb=32)):
        with pytest.raises(FabError, match=r"^x\.drl: over the cap of 32 MB read per file: not read; "
                                           r"raise it with --limit file-mb=N if the input is genuine$"):
            read(METRIC_DECIMAL, "x.drl")


def test_size_limit_is_stated() -> None:
    assert limits.Limits().file_bytes == 512 * 10 ** 6


def test_missing_file_and_folder(tmp_path: Path) -> None:
    with pytest.raises(FabError, match="no such file"):
        load_excellon(tmp_path / "none.drl")
    with pytest.raises(FabError, match="is a folder"):
        load_excellon(tmp_path)


# --------------------------------------------------------------------------- files as found in the wild

DRILL = Path(__file__).resolve().parent.parent / "fixtures" / "drill"


def gerbonara_holes_told(text: str, unit: str, digits: tuple[int, int], lz: bool,
                         tools_mm: dict[int, float] | None = None) -> list[tuple[float, float, float]]:
    """gerbonara 1.5's reading when it is *told* the unit, digit format and
    zero suppression (and, for tools the file leaves undefined, a diameter):
    for files whose format gerbonara cannot find itself. It then checks the
    arithmetic of the reading, not how the format was found."""
    gx = pytest.importorskip("gerbonara.excellon", reason="gerbonara is the oracle for Excellon positions")
    from gerbonara.apertures import ExcellonTool
    from gerbonara.cam import FileSettings
    from gerbonara.utils import MM, Inch

    u = MM if unit == "mm" else Inch
    # gerbonara names the zeros left out (Gerber convention): Excellon LZ is its zeros="trailing"
    settings = FileSettings(unit=u, number_format=digits, zeros="trailing" if lz else "leading")
    external = {n: ExcellonTool(diameter=d, unit=MM) for n, d in (tools_mm or {}).items()}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SyntaxWarning)
        f = gx.ExcellonFile.from_string(text, settings=settings, external_tools=external)
    return [(c.x, c.y, MM.convert_from(d.aperture.unit, d.aperture.diameter))
            for d in f.drills() for c in [d.converted(MM)]]


def test_fully_stated_file_has_no_notes() -> None:
    # METRIC,TZ,000.000 and decimal points: nothing is taken from a comment,
    # assumed or inferred, so there is nothing to note.
    assert read(METRIC_DECIMAL).notes == []


def test_metric_file_format_comment_fixture() -> None:
    # ;FILE_FORMAT=4:4 gives 4 integer and 4 decimal digits; METRIC,LZ keeps
    # leading zeros, so short values are padded on the right. Hand-worked:
    # X00125000 = 0012.5000 -> 12.5; Y0075 -> 00750000 -> 75.0; X0205 -> 205.0;
    # Y00301250 -> 30.125; X01234567 -> 123.4567 mm.
    path = DRILL / "metric-file-format-4-4.drl"
    before = path.read_bytes()
    d = load_excellon(path)
    assert path.read_bytes() == before  # the input is never modified
    np.testing.assert_allclose(holes(d), [(12.5, 25.0, 0.3), (123.4567, 75.0, 0.3), (205.0, 30.125, 0.3),
                                          (10.0, 10.0, 1.0)], rtol=1e-12)
    assert d.notes == [("line 5: digit format 4.4 taken from the format comment ';FILE_FORMAT=4:4' where no "
                       "command states them")]
    # gerbonara 1.5 reads ;FILE_FORMAT=W:F itself: the same holes
    np.testing.assert_allclose(holes(d), gerbonara_holes(before.decode()), rtol=1e-12)


def test_without_the_comment_the_smaller_plausible_reading_is_taken() -> None:
    # The same coordinates with no format stated: 8 digits, more than 3.3.
    # Read as 3.5 (mm default's 3 integer digits, the rest decimals): X01234567
    # -> 012.34567 = 12.34567 mm (hand); 4.4 (123.4567 mm) is also within 1 m and
    # is named in the note, the smaller reading taken (module docstring rule).
    text = "M48\nMETRIC,LZ\nT1C0.3\n%\nT1\nX01234567Y00500000\nM30\n"
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], [12.34567, 5.0], rtol=1e-12)
    assert len(d.notes) == 1
    assert d.notes[0].startswith("line 6: no digit format stated, and coordinates have up to 8 digits, more than "
                                 "the default 3.3 (mm) allows: read as 3.5")
    assert "4.4 would also give a plausible board (largest coordinate 123.457 mm)" in d.notes[0]
    assert "errs toward holes being placed" in d.notes[0]
    # gerbonara told 3.5, LZ, mm: the same arithmetic
    np.testing.assert_allclose(holes(d), gerbonara_holes_told(text, "mm", (3, 5), lz=True), rtol=1e-12)


def test_inch_format_comment_fixture() -> None:
    # ; FORMAT={2:5/ absolute / inch / suppress trailing zeros}: 2.5 digits,
    # inch, trailing zeros left out (= LZ), and no INCH command. Hand-worked:
    # X0125 -> 0125000 -> 01.25000 in = 31.75 mm; Y01 -> 1.0 in = 25.4 mm;
    # X015 -> 1.5 in = 38.1; Y0225 -> 2.25 in = 57.15; X1234567 -> 12.34567 in
    # = 313.580018 mm; Y0055 -> 0.55 in = 13.97 mm; T01C0.0120 = 0.3048 mm.
    path = DRILL / "inch-format-comment.drl"
    text = path.read_text()
    d = load_excellon(path)
    expected = [(31.75, 25.4, 0.3048), (38.1, 57.15, 0.3048), (313.580018, 13.97, 1.016)]
    np.testing.assert_allclose(holes(d), expected, rtol=1e-12)
    assert d.notes == [("line 4: digit format 2.5, unit inch, zero suppression LZ taken from the format comment "
                       "'; FORMAT={2:5/ absolute / inch / supp...' where no command states them")]
    # gerbonara 1.5 reads only the "/ decimal}" form of this comment and refuses
    # the file (no number format); told 2.5, LZ, inch it gives the same holes
    np.testing.assert_allclose(holes(d), gerbonara_holes_told(text, "in", (2, 5), lz=True), rtol=1e-12)


def test_headerless_fixture() -> None:
    # No M48, no units, T1/T2 selected without a diameter. Short coordinates
    # keep a leading 0 (X0135, Y015), which TZ would have left out: LZ.
    # Units: mm gives a largest coordinate of 30 mm, inch 76.2 mm; both within
    # 1 m, the smaller (mm) is taken. Hand-worked in 3.3 LZ mm: X012500 ->
    # 12.5; X0135 -> 013500 -> 13.5; Y015 -> 15.0; X025 -> 25.0; Y0175 -> 17.5;
    # X03 -> 30.0; Y02 -> 20.0. Diameter: the assumed 0.15 mm.
    path = DRILL / "headerless.drl"
    text = path.read_text()
    d = load_excellon(path)
    expected = [(12.5, 15.0, 0.15), (13.5, 15.0, 0.15), (25.0, 17.5, 0.15), (30.0, 20.0, 0.15)]
    np.testing.assert_allclose(holes(d), expected, rtol=1e-12)
    assert d.line.tolist() == [5, 6, 8, 10]
    assert d.notes == [
        ("no M48 header: read as an Excellon program without header (tool sizes and units only as the body "
        "states them)"),
        ("line 10: no LZ or TZ stated, and the coordinate 03 has fewer digits than the format but keeps its leading "
        "zero: read as LZ (leading zeros kept, digits counted from the left)"),
        ("line 5: no units stated (no METRIC, INCH, M71, M72 or format comment): read as mm, largest coordinate "
        "30 mm; inch would also be plausible (largest coordinate 76.2 mm): the smaller reading was taken, as it "
        "errs toward holes being placed on the board's copper rather than dropped beyond it"),
        "line 5: no digit format stated: implied-decimal coordinates read as 3.3 (mm), the common default",
        ("tool(s) T1, T2 selected without a diameter (no header defines them): taken as 0.15 mm, the smallest "
        "mechanical via drill fabricators commonly offer; this is an assumption, not read from the file"),
    ]
    # gerbonara 1.5 refuses the file (T1 undefined, no number format); told mm,
    # 3.3, LZ and the 0.15 mm tools it gives the same holes
    told = gerbonara_holes_told(text, "mm", (3, 3), lz=True, tools_mm={1: 0.15, 2: 0.15})
    np.testing.assert_allclose(holes(d), told, rtol=1e-12)


def test_ambiguous_zeros_read_as_tz() -> None:
    # Was refused (no LZ/TZ, X15 shorter than 2.4). Now TZ, the common
    # practice: X15 -> 0.0015 in = 0.0381 mm, Y25 -> 0.0635 mm (hand); gerbonara
    # 1.5 reads a bare INCH the same way (2.4, leading zeros left out).
    text = "M48\nINCH\nT1C0.01\n%\nT1\nX15Y25\nM30\n"
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], [0.0381, 0.0635], rtol=1e-12)
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), rtol=1e-12)
    assert any(n.startswith("line 6: no LZ or TZ stated, and the coordinate 15 has fewer digits than the format: "
                            "read as TZ") and "common practice" in n for n in d.notes)


def test_a_short_coordinate_with_a_leading_zero_shows_lz() -> None:
    # X015 keeps a leading 0 that TZ would leave out: LZ. X015 -> 01.5 in =
    # 38.1 mm, Y02 -> 02.0 in = 50.8 mm (hand); gerbonara told INCH,LZ agrees.
    text = "M48\nINCH\nT1C0.01\n%\nT1\nX015Y02\nM30\n"
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], [38.1, 50.8], rtol=1e-12)
    np.testing.assert_allclose(holes(d), gerbonara_holes(text.replace("INCH\n", "INCH,LZ\n")), rtol=1e-12)
    assert "read as LZ (leading zeros kept, digits counted from the left)" in d.notes[0]


def test_digit_format_inferred() -> None:
    # Was refused (7 digits, METRIC,TZ with no digit format). TZ counts digits
    # from the right; 3 integer digits (mm default) leave 4 decimals:
    # X1234567 -> 123.4567 mm (hand). 4.3 would give 1234.567 mm, beyond 1 m.
    d = read("M48\nMETRIC,TZ\nT1C0.01\n%\nT1\nX1234567Y0\nM30\n")
    assert d.x.tolist() == [123.4567] and d.y.tolist() == [0.0]
    assert d.notes == [("line 6: no digit format stated, and coordinates have up to 7 digits, more than the default "
                       "3.3 (mm) allows: read as 3.4 (the mm default's 3 integer digits, the rest decimals); the "
                       "largest coordinate is 123.457 mm")]


def test_digit_format_inferred_fewer_integer_digits_when_beyond_1_m() -> None:
    # INCH,TZ, 7 digits: 2.5 would read X9234567 as 92.34567 in = 2.35 m, not a
    # plausible board; 1.6 gives 9.234567 in = 234.5580018 mm; Y500000 ->
    # 0.5 in = 12.7 mm (hand).
    d = read("M48\nINCH,TZ\nT1C0.01\n%\nT1\nX9234567Y500000\nM30\n")
    np.testing.assert_allclose([d.x[0], d.y[0]], [234.5580018, 12.7], rtol=1e-12)
    assert "read as 1.6, as 2.5 (the inch default's 2 integer digits, the rest decimals) would put a coordinate " \
           "2.35 m from the origin" in d.notes[0]


def test_commands_win_over_comments() -> None:
    # METRIC,TZ,000.000 states 3.3: the comment's 4:4 is overridden, X1500 ->
    # 1.500 mm, Y25 -> 0.025 mm (hand; gerbonara 1.5 agrees: its METRIC line
    # comes after the comment and replaces its format).
    text = ";FILE_FORMAT=4:4\nM48\nMETRIC,TZ,000.000\nT1C0.3\n%\nT1\nX1500Y25\nM30\n"
    d = read(text)
    np.testing.assert_allclose([d.x[0], d.y[0]], [1.5, 0.025], rtol=1e-12)
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), rtol=1e-12)
    assert d.notes == ["line 3: the digit format 3.3 overrides the format comment's 4.4: commands win over comments"]
    # a comment's unit that the unit command contradicts is not used, so a
    # diameter before METRIC is refused as before
    with pytest.raises(FabError, match=r"^x\.drl: line 3: tool diameter before the units are set"):
        read("; FORMAT={-:-/ absolute / inch / decimal}\nM48\nT1C0.01\nMETRIC\n%\nM30\n", "x.drl")
    d = read("; FORMAT={-:-/ absolute / inch / decimal}\nM48\nMETRIC\nT1C0.3\n%\nT1\nX1.5Y2.5\nM30\n")
    assert holes(d) == [(1.5, 2.5, 0.3)]
    assert d.notes == [("line 1: the format comment's unit (inch) is overridden by the unit command on line 3 (mm): "
                       "commands win over comments")]


def test_decimal_format_comment_gives_the_unit() -> None:
    # ; FORMAT={-:-/ absolute / metric / decimal}: mm, coordinates with a
    # decimal point, no METRIC command (gerbonara 1.5 reads it the same).
    text = ";FORMAT={-:-/ absolute / metric / decimal}\nM48\nT1C0.3\n%\nT1\nX1.5Y2.5\nM30\n"
    d = read(text)
    assert holes(d) == [(1.5, 2.5, 0.3)]
    np.testing.assert_allclose(holes(d), gerbonara_holes(text), rtol=1e-12)


def test_vague_leading_word_is_not_used() -> None:
    # "; Format : 2.4 / Absolute / Inch / Trailing": digits and unit are taken;
    # "Trailing" does not say kept or left out and is not used. Y025 keeps a
    # leading 0, so LZ: X15 -> 15.0000 in = 381 mm, Y025 -> 2.5 in = 63.5 mm
    # (hand). gerbonara 1.5 takes "Trailing" as trailing zeros kept (TZ) and
    # reads 0.0381, 0.0635 mm, which Y025's leading 0 contradicts.
    d = read("; Format : 2.4 / Absolute / Inch / Trailing\nM48\nT1C0.01\n%\nT1\nX15Y025\nM30\n")
    np.testing.assert_allclose([d.x[0], d.y[0]], [381.0, 63.5], rtol=1e-12)
    assert d.notes[0] == ("line 1: the format comment's 'Trailing' does not say whether those zeros are kept or left "
                          "out: not used")


def test_headerless_units_from_a_later_command() -> None:
    # M72 on line 3 sets inch for the whole file: X012500 in 2.4 with a leading
    # 0 kept (LZ) = 1.25 in = 31.75 mm; Y015000 = 1.5 in = 38.1 mm (hand).
    d = read("T1\nX012500Y015000\nM72\nX0125Y015\nM30\n")
    np.testing.assert_allclose(holes(d), [(31.75, 38.1, 0.15)] * 2, rtol=1e-12)
    assert "line 2: values come before the first unit command (line 3): read in its unit, inch" in d.notes


@pytest.mark.parametrize(
    ("text", "unit", "diameter_mm"),
    [
        # C0.0135 read as mm is a 13.5 um drill, below 0.05 mm: inch (0.3429 mm, hand)
        ("T1C0.0135\nX1.Y1.\nM30\n", "inch", 0.3429),
        # C0.8 read as inch is a 20.32 mm drill, above 10 mm: mm
        ("T1C0.8\nX1.Y1.\nM30\n", "mm", 0.8),
    ],
)
def test_headerless_units_from_the_only_plausible_reading(text: str, unit: str, diameter_mm: float) -> None:
    # X1. is 1 in = 25.4 mm or 1 mm as written (hand); plausible drills 0.05 to 10 mm (module docstring)
    d = read(text)
    assert d.diameter[0] == pytest.approx(diameter_mm, rel=1e-12)
    assert d.x[0] == pytest.approx(25.4 if unit == "inch" else 1.0, rel=1e-12)
    assert f"read as {unit}, the only plausible reading" in d.notes[1]


def test_headerless_tool_defined_in_the_body_and_percent_first() -> None:
    # Excellon: %, then M71 (metric) and T1C0.3, which defines and selects the
    # tool in the body; X1.5Y2.5 as written, in mm (hand). No tool is assumed.
    d = read("%\nM71\nT1C0.3\nX1.5Y2.5\nM30\n")
    assert holes(d) == [(1.5, 2.5, 0.3)]
    assert not any("assumption" in n for n in d.notes)


def test_percent_before_m48_is_accepted() -> None:
    # Excellon: % is the rewind stop; some exporters write it before M48.
    # X1.Y1. with a decimal point is 1 mm, 1 mm as written (hand).
    d = read("%\nM48\nMETRIC\nT1C0.3\n%\nT1\nX1.Y1.\nM30\n")
    assert holes(d) == [(1.0, 1.0, 0.3)]


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        # neither unit plausible: C0.01 as mm is 10 um, C0.8 as inch is 20 mm
        ("T1C0.01\nX1.Y1.\nT2C0.8\nX2.Y2.\nM30\n", 1, "neither reading is a plausible board"),
        # a Gerber file is not read as a drill program without header
        ("G04 invented*\n%FSLAX26Y26*%\n%MOMM*%\nX100Y200D03*\nM02*\n", 1, "expected the header start M48"),
        # the first pass needs a second one (7 digits), and the error after it is the one reported
        ("M48\nMETRIC\nT1C0.3\n%\nT1\nX1234567Y0\nM25\nM30\n", 7, "unknown or unsupported command 'M25'"),
        # headerless, but cut short
        ("T1\nX1.Y1.\n", 2, "no end of program (M30)"),
    ],
)
def test_in_the_wild_errors(text: str, line: int, message: str) -> None:
    with pytest.raises(FabError) as info:
        read(text, "w.drl")
    assert info.value.file == "w.drl" and info.value.line == line
    assert str(info.value).startswith(f"w.drl: line {line}: ") and message in str(info.value)


# --------------------------------------------------------------------------- looks_like_drill

GERBER = b"G04 invented*\n%FSLAX26Y26*%\n%MOMM*%\n%ADD10C,0.1*%\nD10*\nX0Y0D02*\nX100Y0D01*\nM02*\n"
IPC356 = (b"C  invented netlist\nP  JOB   BOARD\nP  UNITS CUST 1\n"
          b"317GND       VIA   D0150PA00X 000100Y 000200X0300Y0000R000 S0\n999\n")


@pytest.mark.parametrize(
    ("head", "expected"),
    [
        (METRIC_DECIMAL.encode(), True),  # M48 header
        ((DRILL / "headerless.drl").read_bytes(), True),  # comments, %, T1, hits, M30
        (b"T01\nX012500Y015000\nT02\nX1.5Y2.5\nM30\n", True),
        (b"\xef\xbb\xbfM72\nG90\nT1C0.3\nX1.Y1.\nR3X1.\nG05\n", True),  # BOM, no M30 (head cut)
        (b"T1\nX012500Y015000\nX0125", True),  # the last line cut short by the end of head
        (b"T1\nX012500Y015000\nX01Q", True),  # ditto, even unreadable
        (GERBER, False),
        (IPC356, False),
        (b"X1.Y1.\nM30\n", False),  # no tool
        (b"T1\nM30\n", False),  # no hit
        (b"; only comments\n", False),
        (b"T1\nX1.Y1.\nhello\nM30\n", False),  # a line no drill program has
        (b"", False),
    ],
)
def test_looks_like_drill(head: bytes, expected: bool) -> None:
    # Excellon body commands (tool selection, hits, M30, %, M71/M72, G90, G05);
    # Gerber lines end in '*', IPC-D-356 records start with C, P, 317, 999.
    assert excellon.looks_like_drill(head) is expected


def test_type_comments_set_the_plating_of_the_tools_after_them():
    # One file holding plated and non-plated tools, each group after its
    # ;TYPE= comment (a common exporter layout for a merged drill file; the
    # comment form from memory). Hand-worked: T1 holes plated, T3 not.
    text = ("M48\nMETRIC\n;TYPE=PLATED\nT1C0.300\n;TYPE=NON_PLATED\nT3C3.200\n%\n"
            "T1\nX10.0Y10.0\nX12.0Y10.0\nT3\nX5.0Y5.0\nM30\n")
    drill = read(text)
    assert drill.plated is None
    assert drill.hole_plated.tolist() == [True, True, False]
    only_plated = read("M48\nMETRIC\n;TYPE=PLATED\nT1C0.300\n%\nT1\nX10.0Y10.0\nM30\n")
    assert only_plated.plated is True and only_plated.hole_plated is None
    only_np = read("M48\nMETRIC\n;TYPE=NON_PLATED\nT1C3.2\n%\nT1\nX1.0Y1.0\nM30\n")
    assert only_np.plated is False
    # an X2 file function says more than the comment
    x2 = read("M48\n; #@! TF.FileFunction,Plated,1,2,PTH\nMETRIC\n;TYPE=NON_PLATED\nT1C0.3\n%\nT1\nX1.0Y1.0\nM30\n")
    assert x2.plated is True and x2.hole_plated is None


def test_a_comment_digit_format_meant_for_an_overridden_unit_is_not_used() -> None:
    # ;FORMAT={2:4/ ... / inch ...} then METRIC,TZ: the 2.4 was meant for inch;
    # the metric coordinates are read by the metric default 3.3 (module
    # docstring; common practice), X1500 -> 1.500 mm (hand), not 0.15 mm (2.4).
    d = read("; FORMAT={2:4/ absolute / inch / suppress trailing zeros}\nM48\nMETRIC,TZ\nT1C0.3\n%\nT1\nX1500Y2500\n"
             "M30\n")
    np.testing.assert_allclose([d.x[0], d.y[0]], [1.5, 2.5], rtol=1e-12)
    assert any("is not used either" in n for n in d.notes)
