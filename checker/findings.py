"""Findings: small immutable values every output format renders.

A finding's ``id`` is a hash of the rule, the nets, the layers and the
geometry rounded to a coarse grid, so the same violation keeps its id when
the board is exported again with tiny coordinate changes, and a waiver or a
baseline can refer to it.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass

SEVERITIES = ("error", "warning")

#: A finding id as written: 12 hex digits (reports write them in lower case).
ID_PATTERN = re.compile(r"^[0-9a-fA-F]{12}$")

#: Grid (mm) the geometry is rounded to before it enters a finding's id.
ID_GRID_MM = 0.1


@dataclass(frozen=True)
class Finding:
    """One rule violation at one place.

    ``value`` is compared against ``limit`` in ``unit``; ``excess`` says how
    many times worse than the limit it is (>= 1, whichever way the rule
    compares). ``bbox`` is (xmin, ymin, xmax, ymax) and ``at`` (x, y) the
    worst spot, both in mm. Quantities that do not apply to a rule are
    ``None``.
    """

    id: str
    rule: str
    kind: str
    severity: str
    aggressor: str
    victim: str
    layers: tuple[str, ...]
    bbox: tuple[float, float, float, float]
    at: tuple[float, float]
    value: float
    limit: float
    unit: str
    message: str
    excess: float
    length_mm: float | None = None
    area_mm2: float | None = None
    c12_pf: float | None = None
    noise_mv: float | None = None
    #: what would meet the limit, computed by the same model (budget rules):
    #: the fraction of today's C12 that meets it, and a sentence saying so
    keep_fraction: float | None = None
    #: the extra lateral spacing (mm) of the coupled traces that meets it
    extra_spacing_mm: float | None = None
    #: noise budgets: which model gave the number (lumped, small-r, transmission-line)
    noise_model: str | None = None
    suggestion: str | None = None
    #: what shields the coupling and what relays it (reference copper
    #: between the layers, floating islands), in words
    coupling_path: str | None = None

    def sort_key(self) -> tuple:
        """Worst first: errors before warnings, then by how far over the
        limit, then by place, so the order is total and stable."""
        return (SEVERITIES.index(self.severity), -self.excess, self.rule,
                self.aggressor, self.victim, self.id)

    def to_dict(self) -> dict:
        d = {name: getattr(self, name) for name in self.__dataclass_fields__}
        d["layers"] = list(self.layers)
        d["bbox"] = [round(v, 4) for v in self.bbox]
        d["at"] = [round(v, 4) for v in self.at]
        for key in ("value", "limit", "excess", "length_mm", "area_mm2", "c12_pf", "noise_mv", "keep_fraction",
                    "extra_spacing_mm"):
            if d[key] is not None:
                d[key] = _round_sig(d[key])
        return d


def finding_id(rule: str, aggressor: str, victim: str, layers: tuple[str, ...],
               bbox: tuple[float, float, float, float]) -> str:
    """Stable id: the first 12 hex digits of SHA-256 over the rule, the nets,
    the layers and the bbox centre rounded to ``ID_GRID_MM``.

    Only the centre enters, so a run that grows or shrinks a little at one
    end keeps its id unless its middle moves by more than the grid.
    """
    cx = round(((bbox[0] + bbox[2]) / 2) / ID_GRID_MM)
    cy = round(((bbox[1] + bbox[3]) / 2) / ID_GRID_MM)
    key = json.dumps([rule, aggressor, victim, list(layers), cx, cy], separators=(",", ":"))
    return hashlib.sha256(key.encode()).hexdigest()[:12]


def sort_findings(findings: list[Finding]) -> list[Finding]:
    return sorted(findings, key=Finding.sort_key)


def _round_sig(value: float, digits: int = 6) -> float:
    """Round to ``digits`` significant digits so reports are byte-stable."""
    if value == 0 or value != value or value in (float("inf"), float("-inf")):
        return value
    return float(f"{value:.{digits}g}")
