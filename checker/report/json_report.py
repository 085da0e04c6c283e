"""The JSON report: summary, findings and every coupled net pair.

Same input, same bytes: no clock time, keys in a fixed order, floats rounded
to six significant digits.
"""

from __future__ import annotations

import json
import math

import numpy as np

from .. import __version__
from ..findings import _round_sig
from ..runner import Result
from . import CAUTION

REPORT_VERSION = 1


def summary(result: Result) -> dict:
    """Counts a reader (or CI) needs first."""
    a = result.analysis
    by_rule = {rule.name: 0 for rule in a.ruleset.rules}
    by_severity = {"error": 0, "warning": 0}
    for f in result.findings:
        by_rule[f.rule] += 1
        by_severity[f.severity] += 1
    return {
        "verdict": "fail" if result.findings else "pass",
        "layers": len(a.board.stackup.layers),
        "pieces": len(a.board.pieces),
        "nets": len(a.board.nets),
        "broadside_layer_pairs": [[a.layer_name(u), a.layer_name(l)] for u, l in a.layer_pairs],
        "pairs_examined": a.pairs_examined,
        "coupled_pairs": len(a.couplings),
        "coupled_net_pairs": len(a.net_pairs),
        "findings": len(result.findings),
        "findings_by_rule": by_rule,
        "findings_by_severity": by_severity,
    }


def _num(value: float) -> float | None:
    value = float(value)
    return None if not math.isfinite(value) else _round_sig(value)


def net_pair_rows(result: Result) -> list[dict]:
    """Every coupled net pair, worst noise first, then largest C12."""
    a = result.analysis
    p = a.net_pairs
    rows = []
    for k in range(len(p)):
        na, nb = a.net_name(int(p.net_a[k])), a.net_name(int(p.net_b[k]))
        noise = {f"{na} -> {nb}": _num(p.noise_ab_v[k] * 1e3), f"{nb} -> {na}": _num(p.noise_ba_v[k] * 1e3)}
        worst = np.nanmax([p.noise_ab_v[k], p.noise_ba_v[k]]) if not (
            np.isnan(p.noise_ab_v[k]) and np.isnan(p.noise_ba_v[k])) else -1.0
        rows.append((-float(worst), -float(p.c12_pf[k]), na, nb, {
            "nets": [na, nb],
            "broadside_length_mm": _num(p.broadside_length_mm[k]),
            "edge_length_mm": _num(p.edge_length_mm[k]),
            "overlap_area_mm2": _num(p.area_mm2[k]),
            "c12_pf": _num(p.c12_pf[k]),
            "noise_mv": noise,
        }))
    rows.sort(key=lambda r: r[:4])
    return [r[4] for r in rows]


def build_report(result: Result) -> dict:
    a = result.analysis
    b = a.board
    s = a.ruleset.settings
    return {
        "report": "couplint",
        "report_version": REPORT_VERSION,
        "tool_version": __version__,
        "board": {
            "name": b.name,
            "path": b.path,
            "stackup": [
                {"copper": layer.name, "role": layer.role, "thickness_mm": layer.thickness_mm}
                if layer is not None else
                {"dielectric": d.name, "thickness_mm": d.thickness_mm, "er": d.er}
                for layer, d in _interleave(b.stackup)
            ],
        },
        "ruleset": {"path": a.ruleset.path, "sha256": a.ruleset.sha256},
        "settings": {
            "broadside_search_mm": s.broadside_search_mm,
            "edge_search_mm": s.edge_search_mm,
            "parallel_angle_deg": s.parallel_angle_deg,
            "planes_shield": s.planes_shield,
            "bandwidth_factor": s.bandwidth_factor,
        },
        "summary": summary(result),
        "findings": [f.to_dict() for f in result.findings],
        "net_pairs": net_pair_rows(result),
        "notes": sorted(set(a.notes)),
        "caution": CAUTION,
    }


def _interleave(stackup):
    """(layer, None), (None, dielectric), ... top to bottom."""
    for i, layer in enumerate(stackup.layers):
        yield layer, None
        if i < len(stackup.dielectrics):
            yield None, stackup.dielectrics[i]


def render(result: Result) -> str:
    return json.dumps(build_report(result), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
