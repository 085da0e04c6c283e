"""Write fabrication packages the way other exporters often do, for test fixtures only.

``scripts/write_fab.py`` writes tidy Gerber X2 packages. Real exports are
often less tidy; this script reproduces, on invented boards, the traits the
readers must take as they come:

``fixtures/fab/wild-ten-layer/`` — the invented ten-layer board
  ``fixtures/ten_layer_wild.json`` (made by :func:`ten_layer_board`) as a
  package **without any X2 attribute**:

  * copper files named by the trade's extension convention: ``.gtl`` (top),
    ``.g1`` ... ``.g4`` (inner signal layers in order), ``.gp1`` ...
    ``.gp4`` (inner plane layers in order), ``.gbl`` (bottom); no ``TO.N``,
    so nets come from connectivity and the netlist;
  * solder mask (``.gts``, ``.gbs``), legend (``.gto``) and paste (``.gtp``)
    files, which must be recognised and skipped;
  * the outline as ``.gko`` whose segment ends miss each other by 7 nm;
  * the plated holes in an inch drill file whose format is stated only in a
    ``;FILE_FORMAT=2:4`` comment: each hole lands up to 1.27 um per axis off
    its pad (2.54 um grid);
  * the mounting holes in a headerless metric drill file (no ``M48``) with
    8-digit coordinates in ``;FILE_FORMAT=4:4``, named ``-NPTH``;
  * the IPC-D-356A netlist behind an 800-line comment header;
  * no job file: the stackup comes with ``--stackup`` from
    ``fixtures/fab/wild-ten-layer-stackup.yaml`` (layer roles included,
    which interleave the ``.g`` and ``.gp`` series).

``fixtures/fab/wild-no-er/`` — the six-layer fixture board as an X2
  package whose job file gives thicknesses but no ``DielectricConstant``
  for any dielectric or mask.

    python scripts/write_wild.py          # regenerate both

All data is invented; the names of the files follow the trade's common
extension convention, nothing else of any program's output.
"""

from __future__ import annotations

import json
import math
import re
import sys
import tempfile
from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "scripts"))
sys.path.insert(0, str(ROOT))

from write_fab import write_fab  # noqa: E402

TEN_JSON = ROOT / "fixtures" / "ten_layer_wild.json"
TEN_DIR = ROOT / "fixtures" / "fab" / "wild-ten-layer"
TEN_STACKUP = ROOT / "fixtures" / "fab" / "wild-ten-layer-stackup.yaml"
NO_ER_DIR = ROOT / "fixtures" / "fab" / "wild-no-er"

#: The outline's segment ends are moved apart by this much (mm).
OUTLINE_GAP_MM = 7e-6

#: Comment lines in front of the netlist's records.
NETLIST_HEADER_LINES = 800

#: Mounting holes (mm) of the headerless drill file, diameter 3.2 mm.
MOUNTING_HOLES = ((4.0, 4.0), (56.0, 4.0), (56.0, 36.0), (4.0, 36.0))

_X2_LINE = re.compile(r"^(%T[FAOD][^%]*%|G04 #@!.*)$")


# --------------------------------------------------------------------------- the board


def ten_layer_board() -> dict:
    """The invented ten-layer board (neutral JSON): signal pairs on
    neighbouring inner layers with no plane between (IN3/IN4, IN7/IN8), a
    clock beside a reference on TOP, four plane layers with clearances
    around the vias of other nets, through vias only."""
    stackup = [
        {"mask": "top-mask", "thickness": 0.02, "er": 3.8},
        {"copper": "TOP", "role": "signal", "thickness": 0.035},
        {"dielectric": "pp-1", "thickness": 0.1, "er": 4.2},
        {"copper": "GND", "role": "plane", "thickness": 0.035},
        {"dielectric": "core-1", "thickness": 0.2, "er": 4.4},
        {"copper": "IN3", "role": "signal", "thickness": 0.018},
        {"dielectric": "pp-2", "thickness": 0.12, "er": 4.2},
        {"copper": "IN4", "role": "signal", "thickness": 0.018},
        {"dielectric": "core-2", "thickness": 0.2, "er": 4.4},
        {"copper": "PWR", "role": "plane", "thickness": 0.035},
        {"dielectric": "pp-3", "thickness": 0.1, "er": 4.2},
        {"copper": "GND2", "role": "plane", "thickness": 0.035},
        {"dielectric": "core-3", "thickness": 0.2, "er": 4.4},
        {"copper": "IN7", "role": "signal", "thickness": 0.018},
        {"dielectric": "pp-4", "thickness": 0.12, "er": 4.2},
        {"copper": "IN8", "role": "signal", "thickness": 0.018},
        {"dielectric": "core-4", "thickness": 0.2, "er": 4.4},
        {"copper": "GND3", "role": "plane", "thickness": 0.035},
        {"dielectric": "pp-5", "thickness": 0.1, "er": 4.2},
        {"copper": "BOT", "role": "signal", "thickness": 0.035},
        {"mask": "bottom-mask", "thickness": 0.02, "er": 3.8},
    ]
    # Via positions are moved off the 2.54 um inch grid by a few um, so the inch
    # drill file rounds them by up to 1.27 um per axis. Tracks jog to their vias
    # so no via pad touches another net's track on the layers it passes.
    jitter = iter([(1.3, 0.7), (2.1, 0.9), (-1.1, 1.1), (1.7, 1.3), (1.9, 0.3), (0.7, 1.1), (1.1, 0.7),
                   (0.9, 0.9), (0.7, 1.9), (1.3, 2.1), (2.1, 1.3), (1.7, 0.9), (1.1, 1.7), (1.9, 1.3),
                   (1.3, 1.9)])

    def at(x: float, y: float) -> list[float]:
        dx, dy = next(jitter)
        return [round(x + dx * 1e-3, 4), round(y + dy * 1e-3, 4)]

    ends = {
        "CLK_40M": (at(10, 19), at(40, 19)), "SENSE_BRIDGE": (at(12, 21.4), at(38, 21.4)),
        "SPI_SCK": (at(10, 9), at(45, 9)), "AIN_LEVEL": (at(12, 11.35), at(44, 11.35)),
        "REF_2V5": (at(8, 30), at(34, 30)), "3V3": (at(50, 20), at(50, 30)),
    }
    gnd = [at(55, 5), at(55, 35), at(5, 20)]
    vias = [(tuple(p), net) for net, pair in ends.items() for p in pair] + [(tuple(p), "GND") for p in gnd]
    tracks = [
        {"layer": "IN3", "net": "CLK_40M", "width": 0.15,
         "points": [ends["CLK_40M"][0], [11, 20], [39, 20], ends["CLK_40M"][1]]},
        {"layer": "IN4", "net": "SENSE_BRIDGE", "width": 0.2,
         "points": [ends["SENSE_BRIDGE"][0], [13, 20.4], [37, 20.4], ends["SENSE_BRIDGE"][1]]},
        {"layer": "IN7", "net": "SPI_SCK", "width": 0.15,
         "points": [ends["SPI_SCK"][0], [11, 10], [44, 10], ends["SPI_SCK"][1]]},
        {"layer": "IN8", "net": "AIN_LEVEL", "width": 0.15,
         "points": [ends["AIN_LEVEL"][0], [13, 10.35], [43, 10.35], ends["AIN_LEVEL"][1]]},
        {"layer": "TOP", "net": "CLK_40M", "width": 0.15,
         "points": [ends["CLK_40M"][1], [42, 19], [42, 30.5], [12, 30.5]]},
        {"layer": "TOP", "net": "REF_2V5", "width": 0.2, "points": [ends["REF_2V5"][0], ends["REF_2V5"][1]]},
        {"layer": "BOT", "net": "3V3", "width": 0.4, "points": [ends["3V3"][0], ends["3V3"][1]]},
        {"layer": "BOT", "net": "GND", "width": 0.4, "points": [gnd[0], gnd[1]]},
    ]
    planes = {"GND": "GND", "PWR": "3V3", "GND2": "GND", "GND3": "GND"}
    regions = []
    for layer, net in planes.items():
        holes = [_octagon(x, y, 0.45) for (x, y), via_net in vias if via_net != net]
        regions.append({"layer": layer, "net": net, "outline": [[1, 1], [59, 1], [59, 39], [1, 39]],
                        "holes": holes})
    nets = sorted({n for _, n in vias})
    return {
        "format": "couplint-board", "version": 1, "name": "ten-layer-wild",
        "description": "Invented ten-layer test board for the fabrication readers (not a real product).",
        "units": "mm", "stackup": stackup, "nets": [{"name": n} for n in nets], "tracks": tracks,
        "regions": regions,
        "vias": [{"at": [x, y], "drill": 0.3, "pad": 0.6, "from": "TOP", "to": "BOT", "net": net}
                 for (x, y), net in vias],
        "outline": [[0, 1], [1, 0], [59, 0], [60, 1], [60, 39], [59, 40], [1, 40], [0, 39]],
    }


def _octagon(x: float, y: float, r: float) -> list[list[float]]:
    return [[round(x + r * math.cos(math.radians(22.5 + 45 * k)), 4),
             round(y + r * math.sin(math.radians(22.5 + 45 * k)), 4)] for k in range(8)]


# --------------------------------------------------------------------------- the traits


def strip_x2(text: str) -> str:
    """A Gerber file without its X2 attribute lines (``%TF``, ``%TA``,
    ``%TO``, ``%TD`` and ``G04 #@!`` comments)."""
    return "".join(line + "\n" for line in text.splitlines() if not _X2_LINE.match(line.strip()))


def gapped_outline(text: str, gap_mm: float) -> str:
    """Move every segment's start ``gap_mm`` along x from the previous
    segment's end: draws become D02 + D01 pairs that miss each other."""
    step = round(gap_mm * 1_000_000)  # format 4.6 mm: nanometres
    out, last = [], None
    for line in text.splitlines():
        m = re.fullmatch(r"X(-?\d+)Y(-?\d+)D0([12])\*", line.strip())
        if m and m.group(3) == "1" and last is not None:
            out.append(f"X{last[0] + step}Y{last[1]}D02*")
        if m:
            last = (int(m.group(1)), int(m.group(2)))
        out.append(line)
    return "\n".join(out) + "\n"


def inch_drill(mm_text: str, keep_attributes: bool = False) -> str:
    """The plated drill file rewritten in inch, implied decimals, trailing
    zeros kept, the digit format stated only in a comment; with
    ``keep_attributes`` its X2 comments (``; #@!``) stay."""
    out = [";FILE_FORMAT=2:4", "M48", "INCH,TZ"]
    body = False
    for line in mm_text.splitlines():
        s = line.strip()
        if keep_attributes and s.startswith("; #@!"):
            out.append(s)
            continue
        if s.startswith(";") or s in ("M48", "METRIC", "FMAT,2"):
            continue
        tool = re.fullmatch(r"T(\d+)C([\d.]+)", s)
        if tool:
            out.append(f"T{tool.group(1)}C{float(tool.group(2)) / 25.4:.4f}")
            continue
        hit = re.fullmatch(r"X(-?[\d.]+)Y(-?[\d.]+)", s)
        if hit and body:
            out.append("X{}Y{}".format(*(_inch_digits(float(v)) for v in hit.groups())))
            continue
        if s == "%":
            body = True
        out.append(s)
    return "\n".join(out) + "\n"


def _inch_digits(mm: float) -> str:
    """mm -> inch in 2.4 implied decimals, trailing zeros kept (``TZ``:
    leading zeros left out)."""
    value = round(mm / 25.4 * 10_000)
    return ("-" if value < 0 else "") + str(abs(value))


def headerless_npth(holes: tuple[tuple[float, float], ...], diameter: float) -> str:
    """Mounting holes as a drill file without an ``M48`` header: metric
    units by ``M71``, 8-digit coordinates in the comment's 4:4 format."""
    lines = ["; mounting holes, invented test data", ";FILE_FORMAT=4:4", "M71", f"T1C{diameter:.3f}", "T1"]
    lines += [f"X{round(x * 10_000):08d}Y{round(y * 10_000):08d}" for x, y in holes]
    return "\n".join(lines + ["M30"]) + "\n"


def long_header_netlist(text: str, lines: int) -> str:
    lines_out = text.splitlines()
    header = [f"C  export note {k + 1:03d}: invented test data, not a real product" for k in range(lines)]
    return "\n".join(lines_out[:2] + header + lines_out[2:]) + "\n"


def flash_layer(points: list[tuple[float, float]], aperture: str, comment: str) -> str:
    out = [f"G04 {comment}, invented test data*", "%FSLAX46Y46*%", "%MOMM*%", f"%ADD10{aperture}*%", "D10*"]
    out += [f"X{round(x * 1e6)}Y{round(y * 1e6)}D03*" for x, y in points]
    return "\n".join(out + ["M02*"]) + "\n"


def legend_layer() -> str:
    """A legend: a frame and a few strokes of 'lettering', thin draws only."""
    out = ["G04 legend, invented test data*", "%FSLAX46Y46*%", "%MOMM*%", "%ADD10C,0.15*%", "D10*"]
    frame = [(2, 2), (20, 2), (20, 6), (2, 6), (2, 2)]
    out.append(f"X{frame[0][0] * 10**6}Y{frame[0][1] * 10**6}D02*")
    out += [f"X{x * 10**6}Y{y * 10**6}D01*" for x, y in frame[1:]]
    for k in range(6):  # strokes of a word
        x = 3 + 2.5 * k
        out += [f"X{round(x * 1e6)}Y3000000D02*", f"X{round((x + 1) * 1e6)}Y5000000D01*",
                f"X{round((x + 2) * 1e6)}Y3000000D01*"]
    return "\n".join(out + ["M02*"]) + "\n"


# --------------------------------------------------------------------------- the packages


def write_ten_layer() -> list[Path]:
    board = ten_layer_board()
    TEN_JSON.write_text(json.dumps(board, indent=1) + "\n")
    TEN_STACKUP.write_text("# invented ten-layer stackup for fixtures/fab/wild-ten-layer (not a real product)\n"
                           + yaml.safe_dump({"units": "mm", "stackup": board["stackup"]}, sort_keys=False))
    roles = {e["copper"]: e["role"] for e in board["stackup"] if "copper" in e}
    names = [e["copper"] for e in board["stackup"] if "copper" in e]
    signal_inner = [n for n in names[1:-1] if roles[n] != "plane"]
    plane_inner = [n for n in names[1:-1] if roles[n] == "plane"]
    ext = {names[0]: "gtl", names[-1]: "gbl"}
    ext.update({n: f"g{k + 1}" for k, n in enumerate(signal_inner)})
    ext.update({n: f"gp{k + 1}" for k, n in enumerate(plane_inner)})
    stem = "ten-layer-wild"
    with tempfile.TemporaryDirectory() as tmp:
        write_fab(TEN_JSON, tmp, ipc356=True, net_attributes=False, roles=False, name=stem)
        written = {p.name: p.read_text() for p in Path(tmp).iterdir()}
    TEN_DIR.mkdir(parents=True, exist_ok=True)
    for old in TEN_DIR.iterdir():
        old.unlink()
    files: dict[str, str] = {}
    for n, layer in enumerate(names, 1):
        files[f"{stem}.{ext[layer]}"] = strip_x2(written[f"{stem}-L{n}.gbr"])
    files[f"{stem}.gko"] = gapped_outline(strip_x2(written[f"{stem}-Profile.gbr"]), OUTLINE_GAP_MM)
    drills = [k for k in written if k.endswith(".drl")]
    assert len(drills) == 1, drills  # through vias only
    files[f"{stem}.drl"] = inch_drill(strip_x2(written[drills[0]]))
    files[f"{stem}-NPTH.drl"] = headerless_npth(MOUNTING_HOLES, 3.2)
    files[f"{stem}.ipc"] = long_header_netlist(written[f"{stem}.ipc"], NETLIST_HEADER_LINES)
    vias = [tuple(v["at"]) for v in board["vias"]]
    files[f"{stem}.gts"] = flash_layer(vias + list(MOUNTING_HOLES), "C,0.7", "top solder mask")
    files[f"{stem}.gbs"] = flash_layer(vias + list(MOUNTING_HOLES), "C,0.7", "bottom solder mask")
    files[f"{stem}.gtp"] = flash_layer([(20.0, 36.0), (22.0, 36.0), (24.0, 36.0)], "R,0.8X1.0", "top paste")
    files[f"{stem}.gto"] = legend_layer()
    out = []
    for name, text in sorted(files.items()):
        path = TEN_DIR / name
        path.write_text(text)
        out.append(path)
    return out


def write_no_er() -> list[Path]:
    NO_ER_DIR.mkdir(parents=True, exist_ok=True)
    for old in NO_ER_DIR.iterdir():
        old.unlink()
    paths = write_fab(ROOT / "fixtures" / "six_layer_fab.json", NO_ER_DIR, name="six-layer-no-er")
    job = next(p for p in paths if p.suffix == ".gbrjob")
    data = json.loads(job.read_text())
    for entry in data["MaterialStackup"]:
        entry.pop("DielectricConstant", None)
        entry.pop("LossTangent", None)
    job.write_text(json.dumps(data, indent=2) + "\n")
    return paths


def main() -> int:
    for path in write_ten_layer() + write_no_er():
        print(path.relative_to(ROOT))
    return 0


if __name__ == "__main__":
    sys.exit(main())
