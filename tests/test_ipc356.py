"""IPC-D-356 netlist reader (checker/readers/fab/ipc356.py).

Source of every format rule: IPC-D-356A, "Bare Substrate Electrical Test
Data Format" — the fixed-column test record (317 / 327: net name columns
4-17, reference designator 21-26, pin 28-31, hole D 33-38, access A 39-41,
X 42-49, Y 50-57) and the P / C / 999 records, cited from memory. The
expected values are hand conversions (1 in = 25.4 mm), and the parsed
records are compared with gerbonara 1.5's IPC-D-356 reader (an
independent library, used as an oracle). Samples are invented.
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
from checker.readers.fab.ipc356 import load_ipc356, read_ipc356

# Written out column by column (IPC-D-356A test record, from memory):
#            1         2         3         4         5         6         7
#   1234567890123456789012345678901234567890123456789012345678901234567890123
SAMPLE_MM = """\
C  invented netlist for a sensor front end
P  JOB   SENSOR-FRONTEND
P  UNITS CUST 1
P  NNAME1     VERY_LONG_ANALOG_REFERENCE_NET
317GND              VIA   -     D0300PA00X+012000Y+008500X0550Y0000R000 S3
327CLK_ADC          U1    -12         A01X+001500Y-002250X0300Y0600R090 S1
317NNAME1           J2    -3   MD1000UA00X+040000Y+030000X1800Y0000R000 S3
327N/C              R5    -2          A04X-000100Y+000200X0600Y0500R000 S2
999
"""


def rec(code: str, net: str, ref: str, pin: str, rest: str, mid: str = " ") -> str:
    """A test record with each field in its IPC-D-356A column; ``rest``
    starts at column 33 (hole, access, X, Y ...)."""
    return f"{code}{net:<14}   {ref:<6}-{pin:<4}{mid}{rest}"


def read(text: str, name: str = "board.ipc"):
    return read_ipc356(io.BytesIO(text.encode("utf-8")), name)


def test_the_sample_lines_put_each_field_in_its_standard_column() -> None:
    # A check on the test data itself (IPC-D-356A columns, 1-based).
    line = SAMPLE_MM.splitlines()[4]
    assert line[0:3] == "317" and line[3:17].strip() == "GND" and line[17:20] == "   "
    assert line[20:26] == "VIA   " and line[26] == "-" and line[32:38] == "D0300P"
    assert line[38:41] == "A00" and line[41:49] == "X+012000" and line[49:57] == "Y+008500"


def test_millimetre_records() -> None:
    # CUST 1: millimetres in 0.001 mm. X+012000 -> 12.000 mm, Y+008500 ->
    # 8.500 mm, D0300 -> 0.300 mm, Y-002250 -> -2.250 mm (hand).
    nl = read(SAMPLE_MM)
    assert nl.path == "board.ipc"
    p = nl.points
    assert [(q.x, q.y) for q in p] == [(12.0, 8.5), (1.5, -2.25), (40.0, 30.0), (-0.1, 0.2)]
    assert [q.hole for q in p] == [0.3, None, 1.0, None]
    assert [q.line for q in p] == [5, 6, 7, 8]


def gerbonara_points(text: str) -> list[tuple]:
    """(net, x mm, y mm, access, hole mm, ref des, pin, plated) of each
    test record as gerbonara 1.5 reads it."""
    g = pytest.importorskip("gerbonara.ipc356", reason="gerbonara is the oracle for IPC-D-356 records")
    from gerbonara.utils import MM

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        netlist = g.Netlist.from_string(text, filename="oracle.ipc")
    out = []
    for r in netlist.test_records:
        mm = lambda v, r=r: None if v is None else MM.convert_from(r.unit, v)  # noqa: E731
        out.append((r.net_name, mm(r.x), mm(r.y), r.access_layer or None, mm(r.hole_dia), r.ref_des or "",
                    r.pin or "", r.is_plated))
    return out


def ours(text: str) -> list[tuple]:
    return [(q.net, q.x, q.y, q.access, q.hole, q.refdes, q.pin, q.plated) for q in read(text).points]


def test_records_agree_with_gerbonara_mm() -> None:
    theirs = gerbonara_points(SAMPLE_MM)
    assert len(theirs) == 4
    for a, b in zip(ours(SAMPLE_MM), theirs):
        net, x, y, access, hole, ref, pin, plated = b
        assert (a[0], a[3], a[6], a[7]) == (net, access, pin, plated)
        assert a[5] == (ref or "VIA")  # gerbonara reports no ref des for a via; we keep "VIA" as written
        np.testing.assert_allclose([a[1], a[2]], [x, y], atol=1e-12)
        assert (a[4] is None) == (hole is None) and (hole is None or abs(a[4] - hole) < 1e-12)


def test_net_names_aliases_and_no_connect() -> None:
    # IPC-D-356A: a net name longer than 14 characters is given in a
    # "P  NNAMEn" record and the test records use NNAMEn; N/C = no net.
    nets = [q.net for q in read(SAMPLE_MM).points]
    assert nets == ["GND", "CLK_ADC", "VERY_LONG_ANALOG_REFERENCE_NET", None]


def test_access_codes() -> None:
    # IPC-D-356A access: A00 both sides, A01 the primary (top) side, Ann layer nn.
    assert [q.access for q in read(SAMPLE_MM).points] == [None, 1, None, 4]


def test_reference_designator_pin_and_plating() -> None:
    # IPC-D-356A: ref des columns 21-26, pin 28-31, P plated / U unplated after D.
    p = read(SAMPLE_MM).points
    assert [(q.refdes, q.pin, q.plated) for q in p] == [
        ("VIA", "", True), ("U1", "12", None), ("J2", "3", False), ("R5", "2", None)]


@pytest.mark.parametrize("cust", ["0", "2"])
def test_inch_records(cust: str) -> None:
    # CUST 0 and CUST 2: inch in 0.0001 in. X+014500 -> 1.4500 in = 36.83 mm;
    # Y-000250 -> -0.0250 in = -0.635 mm; D0150 -> 0.0150 in = 0.381 mm (hand).
    text = (f"P  UNITS CUST {cust}\n"
            + rec("317", "SIG_A", "VIA", "", "D0150PA00X+014500Y-000250") + "\n"
            "999\n")
    (q,) = read(text).points
    assert q.x == pytest.approx(36.83, abs=1e-12) and q.y == pytest.approx(-0.635, abs=1e-12)
    assert q.hole == pytest.approx(0.381, abs=1e-12)
    ((net, x, y, access, hole, *_),) = gerbonara_points(text)
    assert (net, access) == ("SIG_A", None)
    np.testing.assert_allclose([q.x, q.y, q.hole], [x, y, hole], atol=1e-12)


def test_alias_defined_after_use_and_blank_net() -> None:
    text = ("P  UNITS CUST 1\n"
            + rec("327", "NNAME7", "U3", "1", "      A01X+001000Y+001000") + "\n"
            + rec("327", "", "U3", "2", "      A01X+002000Y+001000") + "\n"
            "P  NNAME7     ANALOG_SUPPLY_FILTERED_3V3\n"
            "999\n")
    assert [q.net for q in read(text).points] == ["ANALOG_SUPPLY_FILTERED_3V3", None]


def test_short_lines_other_records_and_text_after_the_end() -> None:
    # A record cut after Y still reads (the feature size is optional here);
    # other operation codes (e.g. 367, 378, 389) are skipped; nothing after 999 is read.
    text = ("P  UNITS CUST 1\n"
            + rec("367", "GND", "VIA", "", "D0300PA00X+001000Y+001000") + "\n"
            + rec("317", "GND", "VIA", "", "D0300PA00X+002000Y+003000") + "\n"
            "378GND             A01X+000000Y+000000X+001000Y+000000\n"
            "999\n"
            "garbage after the end\n")
    (q,) = read(text).points
    assert (q.x, q.y) == (2.0, 3.0)


def test_crlf_and_byte_order_mark() -> None:
    nl = read("\ufeff" + SAMPLE_MM.replace("\n", "\r\n"))
    assert len(nl.points) == 4 and nl.points[0].line == 5


def test_zip_member_and_path(tmp_path: Path) -> None:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as z:
        z.writestr("board.ipc", SAMPLE_MM)
    with zipfile.ZipFile(buffer) as z, z.open("board.ipc") as member:
        assert len(read_ipc356(member, "pkg.zip:board.ipc").points) == 4
    path = tmp_path / "board.ipc"
    path.write_text(SAMPLE_MM, encoding="utf-8")
    before = path.read_bytes()
    assert len(load_ipc356(path).points) == 4
    assert path.read_bytes() == before


# --------------------------------------------------------------------------- errors

U = "P  UNITS CUST 1\n"  # line 1


@pytest.mark.parametrize(
    ("text", "line", "message"),
    [
        ("317GND              VIA   -     D0300PA00X+012000Y+008500\n999\n", 1,
         "a test record before the units are given"),
        ("P  UNITS CUST 3\n999\n", 1, "unsupported units 'CUST 3'"),
        ("P  UNITS SI\n999\n", 1, "unsupported units 'SI'"),
        (U + "317GND              VIA   -     D0300PA00X+012000Y+008500\n", 2, "no 999 end record"),
        (U + "hello\n999\n", 2, "unknown record 'hello'"),
        (U + "317GND\tVIA\t-\tD0300PA00X+012000Y+008500\n999\n", 2, "a tab in a fixed-column test record"),
        (U + "317GND              VIA   -1\n999\n", 2, "has no X and Y coordinates"),
        (U + "317GND              VIA   -     D0300PA00Y+012000X+008500\n999\n", 2, "has no X and Y"),
        (U + "317A_VERY_LONG_NET_NAME VIA -   D0300PA00X+012000Y+008500\n999\n", 2, "columns 18-20 must be blank"),
        ("P  NNAME1     FIRST\nP  NNAME1     SECOND\n999\n", 2, "NNAME1 is already the net 'FIRST' (line 1)"),
        ("P  NNAME1\n999\n", 1, "NNAME1 gives no net name"),
        ("P  UNITS CUST 0\n317GND              VIA   -     D0300PA00X+999999999Y+008500\n999\n", 2,
         "more than 10 m from the origin"),
        (U + "317GND              VIA   -     D9999999999999PA00X+1Y+1\n999\n", 2, "far too many digits"),
    ],
)
def test_bad_input_gives_one_error_with_file_and_line(text: str, line: int, message: str) -> None:
    with pytest.raises(FabError) as info:
        read(text, "net.ipc")
    err = info.value
    assert err.file == "net.ipc" and err.line == line
    assert str(err).startswith(f"net.ipc: line {line}: ")
    assert message in str(err)


def test_empty_and_not_utf8() -> None:
    with pytest.raises(FabError, match=r"^n\.ipc: the file is empty$"):
        read("\n \n", "n.ipc")
    raw = (U + "C  r\xe9sum\xe9\n999\n").encode("latin-1")
    with pytest.raises(FabError, match=r"^n\.ipc: line 2: not UTF-8 text"):
        read_ipc356(io.BytesIO(raw), "n.ipc")


def test_size_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(limits, "MB", 1)  # the cap counted in bytes, for a small test file
    with limits.using(limits.Limits(file_mb=10)):
        with pytest.raises(FabError, match=r"^n\.ipc: over the cap of 10 MB read per file"):
            read(SAMPLE_MM, "n.ipc")


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(FabError, match="no such file"):
        load_ipc356(tmp_path / "none.ipc")
    with pytest.raises(FabError, match="is a folder"):
        load_ipc356(tmp_path)
