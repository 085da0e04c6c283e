"""Builders of small neutral-JSON boards the test modules share."""

from __future__ import annotations

from checker.readers.board_json import read_board_dict

#: a three-copper-layer stackup: two signal layers over a plane, 0.2 mm of er 4.2 between
STACKUP = [
    {"copper": "TOP", "role": "signal", "thickness": 0.035},
    {"dielectric": "pp1", "thickness": 0.2, "er": 4.2},
    {"copper": "IN1", "role": "signal", "thickness": 0.035},
    {"dielectric": "pp2", "thickness": 0.2, "er": 4.2},
    {"copper": "GND", "role": "plane", "thickness": 0.035},
]


def track(layer: str, net: str, points, width: float = 0.15) -> dict:
    """One track of the neutral JSON format."""
    return {"layer": layer, "net": net, "width": width, "points": points}


def json_board(tracks: list[dict], *, stackup=STACKUP, nets=None, name: str = "t", **more):
    """A board read from the neutral JSON dict these make (``more``:
    ``outline``, ``regions``, ``vias``); nets default to the tracks' nets."""
    names = list(nets or sorted({t["net"] for t in tracks}))
    data = {"format": "couplint-board", "version": 1, "name": name, "stackup": stackup,
            "nets": [n if isinstance(n, dict) else {"name": n} for n in names], "tracks": tracks}
    data.update({k: v for k, v in more.items() if v is not None})
    return read_board_dict(data, "t.json")
