"""The JSON report: summary, findings (each with its waiver and baseline
status), the review (waivers, baseline) and every coupled net pair.

Same input, same bytes: no clock time, keys in a fixed order, floats rounded
to six significant digits.
"""

from __future__ import annotations

import argparse
import io
import json
import re
import secrets
from typing import TYPE_CHECKING, Iterator, TextIO

import numpy as np

from .. import __version__, progress
from ..coupling import KIND_NAMES
from ..reportformat import REPORT_VERSION
from ..review import review_dict
from ..waivers import waiver_mark
from . import CAUTION

if TYPE_CHECKING:  # the runner renders reports: a type only
    from ..runner import Result



def summary(result: Result) -> dict:
    """Counts a reader (or CI) needs first."""
    a = result.analysis
    review = result.review
    by_rule = {rule.name: 0 for rule in a.ruleset.rules}
    by_severity = {"error": 0, "warning": 0}
    for f in result.findings:
        by_rule[f.rule] += 1
        by_severity[f.severity] += 1
    out = {
        "verdict": result.verdict(),
        "fail_on": result.fail_on,
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
        "failing": len(result.failing()),
        "waived": sum(1 for f in result.findings if f.id in review.waived),
    }
    if review.baseline is not None:
        statuses = [review.status.get(f.id, "new") for f in result.findings]
        out["new"] = statuses.count("new")
        out["unchanged"] = statuses.count("unchanged")
        out["fixed"] = len(review.fixed)
    selection = getattr(result, "selection", None)
    if selection is not None:  # --only: what was asked for, and how many findings it hid
        out["selection"] = {"only": [f"{k}={p}" for k, p in selection.terms], "hidden": result.unselected}
    return out


def finding_dict(result: Result, f) -> dict:
    """A finding with its review: the waiver that covers it (or ``null``)
    and, with a baseline, ``status`` ``new`` or ``unchanged``."""
    review = result.review
    d = f.to_dict()
    w = review.waived.get(f.id)
    d["waiver"] = waiver_mark(w) if w is not None else None
    if review.baseline is not None:
        d["status"] = review.status.get(f.id, "new")
    return d


def _fmt(values: np.ndarray) -> list[str]:
    """JSON numbers to six significant digits; ``null`` for NaN (values are
    finite otherwise); zeros, common here, take a short cut."""
    return ["null" if v != v else ("0" if v == 0 else "%.6g" % v) for v in values.tolist()]


#: Net pairs the JSON report lists by default besides those with a finding
#: (``--pairs all`` lists every coupled pair).
DEFAULT_PAIRS = 10_000


def parse_pairs(text: str) -> int | None:
    """``--pairs``: a whole number, or ``all`` (None: no bound)."""
    if text.strip().lower() == "all":
        return None
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number or 'all', got {text[:40]!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"expected 0 or more, got {value}")
    return value


def pair_order(result: Result, limit: int | None = DEFAULT_PAIRS) -> np.ndarray:
    """Indices into ``analysis.net_pairs`` of the pairs the report lists, in
    report order (worst noise first, then largest C12, then net order):
    every pair that a finding names, plus the first ``limit`` in that order;
    ``limit`` None lists them all."""
    p = result.analysis.net_pairs
    if len(p) == 0:
        return np.zeros(0, dtype=np.int64)
    worst = np.fmax(p.noise_ab_v, p.noise_ba_v)
    worst = np.where(np.isnan(worst), -1.0, worst)
    order = np.lexsort((p.net_b, p.net_a, -p.c12_pf, -worst))
    if limit is None or limit >= order.size:
        return order
    keep = np.zeros(order.size, dtype=bool)
    keep[:limit] = True
    index = result.analysis.board.net_index()
    ends = {(index.get(f.aggressor, -1), index.get(f.victim, -1)) for f in result.findings}
    named = [(min(a, b), max(a, b)) for a, b in ends if a >= 0 and b >= 0]
    if named:
        wanted = np.array(named, dtype=np.int64)
        lo, hi = np.minimum(p.net_a, p.net_b)[order], np.maximum(p.net_a, p.net_b)[order]
        width = int(max(lo.max(initial=0), hi.max(initial=0), wanted.max())) + 1
        keep |= np.isin(lo.astype(np.int64) * width + hi, wanted[:, 0] * width + wanted[:, 1])
    return order[keep]


def net_pair_lines(result: Result, chunk: int = 50_000, limit: int | None = None) -> Iterator[list[str]]:
    """The coupled net pairs of :func:`pair_order` (``limit`` None: every
    one) as one compact JSON object per line, in chunks, worst noise first,
    then largest C12, then net order.

    ``noise_mv_on`` maps each net of the pair to the noise the other couples
    onto it (``null`` where the net classes lack the model's inputs).
    Formatted with f-strings over arrays, a chunk at a time: a large board
    has millions of pairs, and the standard encoder with indentation is far
    too slow and a whole list of lines too big.
    """
    a = result.analysis
    p = a.net_pairs
    if len(p) == 0:
        return
    order = pair_order(result, limit)
    names = [json.dumps(n.name, ensure_ascii=False) for n in a.board.nets]
    groups = [_group_name(a, g) for g in p.layer_groups]
    layer_lists: dict[int, str] = {}

    def layers_of(mask: int) -> str:
        if mask not in layer_lists:
            layer_lists[mask] = json.dumps([g for k, g in enumerate(groups) if mask >> k & 1])
        return layer_lists[mask]

    columns = (p.broadside_length_mm, p.edge_length_mm, p.area_mm2, p.c12_pf, p.relay_pf, p.noise_ab_v * 1e3,
               p.noise_ba_v * 1e3)
    for start in range(0, order.size, chunk):
        part = order[start:start + chunk]
        na, nb = p.net_a[part].tolist(), p.net_b[part].tolist()
        masks = p.layer_mask[part].tolist()
        cols = [_fmt(v[part]) for v in columns]
        yield [
            f'{{"nets": [{names[i]}, {names[j]}], "layers": {layers_of(lm)}, "broadside_length_mm": {bl}, '
            f'"edge_length_mm": {el}, "overlap_area_mm2": {ar}, "c12_pf": {c}, "relayed_c12_pf": {rl}, '
            f'"noise_mv_on": {{{names[j]}: {ab}, {names[i]}: {ba}}}}}'
            for i, j, lm, bl, el, ar, c, rl, ab, ba in zip(na, nb, masks, *cols)
        ]


def victim_noise_rows(result: Result) -> list[dict]:
    """Per noise-budget rule and victim, passing or not: noise, budget and the
    model that gave the number, worst first within each rule."""
    rows = sorted(result.analysis.victim_noise, key=lambda v: (v.rule, -v.noise_mv, v.victim))
    return [{"rule": v.rule, "victim": v.victim, "noise_mv": _round6(v.noise_mv), "budget_mv": _round6(v.budget_mv),
             "model": v.model, "passes": v.passes, "worst_aggressor": v.worst_aggressor,
             "aggressors": v.aggressors, "c_total_pf": _finite6(v.c_total_pf),
             "c_ground_mutual_pf": _finite6(v.c_ground_mutual_pf),
             "unfiltered_mv": _finite6(v.unfiltered_mv)} for v in rows]


def _finite6(value: float) -> float | None:
    return _round6(value) if np.isfinite(value) else None


#: what each number of the report is, and in which form (the report says so itself)
QUANTITIES = {
    "c12_pf": "mutual capacitance between two nets in mutual (SPICE) form: -C_ij of the Maxwell capacitance "
              "matrix of each coupled cross-section times its coupled length, summed over the runs, plus what "
              "floating copper and high-impedance third nets relay (relayed_c12_pf)",
    "relayed_c12_pf": "the part of c12_pf passed on through floating copper (zero net charge) or a "
                      "high-impedance third net (node eliminated at the aggressor's frequency)",
    "noise_mv_on": "one aggressor's share of the lumped noise on the victim: w R C_ij V / sqrt(1 + (w R C_tot)^2), "
                   "Kirchhoff's current law at the victim node with all its neighbours at AC ground",
    "victim_noise.noise_mv": "the victim's noise: the magnitudes of its aggressors' shares added (phases aligned, "
                             "the worst case), an electrically long run's larger of NEXT and FEXT in place of its "
                             "share; never above the capacitive divider sum_k V_k C_ik / C_tot for the lumped shares",
    "victim_noise.c_total_pf": "the victim node's whole capacitance C_tot = C_ig + sum_k C_ik (the Maxwell "
                               "diagonal, every neighbour at ground), taken as max(its traces' capacitance to "
                               "ground computed alone, raised by what same-layer neighbours add to each piece's "
                               "diagonal and less what its own side-by-side pieces share, sum_k C_ik) + its node "
                               "capacitance: a lower bound, so the noise errs high",
    "victim_noise.unfiltered_mv": "a filtered victim (class bandwidth or RC): its noise with the filter left out; "
                                  "null for an unfiltered one",
    "victim_noise.c_ground_mutual_pf": "its capacitance to ground in mutual form, C_tot - sum_k C_ik (the row sum "
                                       "of the Maxwell matrix)",
}


def _round6(value: float) -> float:
    return float(f"{value:.6g}")


def _group_name(a, group: tuple[int, int, int]) -> str:
    """``TOP/IN1`` for a broadside layer pair, ``IN1`` for edge coupling on one layer."""
    kind, lo, hi = group
    return a.layer_name(lo) if lo == hi else f"{a.layer_name(lo)}/{a.layer_name(hi)}"


def by_layer_group(result: Result) -> list[dict]:
    """Totals per broadside layer pair and per layer (edge coupling)."""

    a = result.analysis
    c, p = a.couplings, a.net_pairs
    n = len(p.layer_groups)

    def total(values: np.ndarray) -> np.ndarray:
        return np.bincount(p.row_group, weights=values, minlength=n)

    count = np.bincount(p.row_group, minlength=n)
    length, area, c12 = total(c.length_mm), total(c.overlap_mm2), total(c.c12_pf)
    return [{
        "coupling": KIND_NAMES[kind],
        "layers": _group_name(a, (kind, lo, hi)),
        "piece_pairs": int(count[g]),
        "coupled_length_mm": float(f"{length[g]:.6g}"),
        "overlap_area_mm2": float(f"{area[g]:.6g}"),
        "c12_pf": float(f"{c12[g]:.6g}"),
    } for g, (kind, lo, hi) in enumerate(p.layer_groups)]


def shielding_dict(result: Result) -> dict:
    """What decided shielding: the reference nets found, each layer's
    reference copper (share of the board, nets, role from the copper), the
    floating islands and the guard traces (``checker.shielding``,
    ``checker.islands``, ``checker.guards``)."""
    a = result.analysis
    b = a.board
    ref = a.reference
    if ref is None:
        return {}
    g = a.guards

    def finite(v: float):
        return _round6(float(v)) if np.isfinite(v) else None

    return {
        "reference_nets": list(ref.reference_names(b)),
        "layers": [{"copper": layer.name, "reference_cover": _round6(float(ref.fraction[k])),
                    "reference_nets": list(ref.nets[k]), "role_from_copper": layer.role}
                   for k, layer in enumerate(b.stackup.layers)],
        "islands": [{"id": i.id, "layer": b.stackup.layers[i.layer].name, "at": [_round6(i.x), _round6(i.y)],
                     "area_mm2": _round6(i.area_mm2)} for i in a.islands],
        "guards": [{"layer": b.stackup.layers[int(g.layer[k])].name, "net": b.nets[int(g.net[k])].name,
                    "source": b.sources[int(g.source[k])] if int(g.source[k]) < len(b.sources) else None,
                    "length_mm": _round6(float(g.length_mm[k])), "state": g.state[k],
                    "longest_free_stretch_mm": finite(g.max_gap_mm[k]), "stitch_limit_mm": finite(g.limit_mm[k]),
                    "grounding_points": int(g.points[k])} for k in range(len(g))],
    }


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
                {"copper": layer.name, "role": layer.role, "thickness_mm": layer.thickness_mm,
                 **({"assumed": list(layer.assumed)} if layer.assumed else {})}
                if layer is not None else
                {"dielectric": d.name, "thickness_mm": d.thickness_mm, "er": d.er,
                 **({"assumed": list(d.assumed)} if d.assumed else {})}
                for layer, d in _interleave(b.stackup)
            ],
            **({"files": [{"file": f, "read_as": r, "how": h} for f, r, h in b.files]} if b.files else {}),
        },
        "ruleset": {"path": a.ruleset.path, "sha256": a.ruleset.sha256},
        "settings": {
            "mode": a.mode,
            "broadside_search_mm": s.broadside_search_mm,
            "edge_search_mm": s.edge_search_mm,
            "parallel_angle_deg": s.parallel_angle_deg,
            "planes_shield": s.planes_shield,
            "bandwidth_factor": s.bandwidth_factor,
            "reference_nets": list(s.reference_nets),
            "guard_stitch_fraction": s.guard_stitch_fraction,
            "solder_mask": s.solder_mask,
        },
        "shielding": shielding_dict(result),
        "summary": summary(result),
        "layer_groups": by_layer_group(result),
        "findings": [finding_dict(result, f) for f in result.findings],
        "review": review_dict(result.review),
        "victim_noise": victim_noise_rows(result),
        "net_pairs": _NET_PAIRS,
        "quantities": QUANTITIES,
        "notes": sorted(set(result.notes)),
        "caution": CAUTION,
    }


def _interleave(stackup):
    """(layer, None), (None, dielectric), ... top to bottom."""
    for i, layer in enumerate(stackup.layers):
        yield layer, None
        if i < len(stackup.dielectrics):
            yield None, stackup.dielectrics[i]


#: stands in for the net-pair list while the rest is encoded; random per
#: process, so no text in a board or rule file can collide with it
_NET_PAIRS = f"@@net_pairs-{secrets.token_hex(16)}@@"
_FINDINGS = f"@@findings-{secrets.token_hex(16)}@@"


def _lines(items: list[str]) -> str:
    """A JSON array with one item per line, indented as the report is."""
    return "[\n    " + ",\n    ".join(items) + "\n  ]" if items else "[]"


class _EscapingControls:
    r"""A text sink that writes DEL and the C1 controls (U+007F-U+009F) as
    ``\u00XX`` escapes: ``json.dumps`` escapes only C0, and a report piped
    to a terminal must not carry raw control characters from a net name.
    Outside strings JSON text is ASCII, so escaping everywhere is exact."""

    _CONTROLS = re.compile("[\x7f-\x9f]")

    def __init__(self, out: TextIO) -> None:
        self.out = out

    def write(self, text: str) -> None:
        self.out.write(self._CONTROLS.sub(lambda m: f"\\u{ord(m.group()):04x}", text))


def write(result: Result, out: TextIO, pairs: int | None = DEFAULT_PAIRS) -> None:
    """Write the report: indented JSON, with the findings and the (possibly
    huge) list of net pairs one compact object per line, the net pairs
    streamed in chunks. ``pairs``: how many net pairs to list besides those
    with a finding (:func:`pair_order`; None: all)."""
    out = _EscapingControls(out)  # type: ignore[assignment]
    stage = progress.Stage("writing the JSON report", unit="parts", scale=1, total=4)
    report = build_report(result)
    stage.at(1, "findings")
    listed = int(pair_order(result, pairs).size)
    note = {
        "listed": listed, "coupled": len(result.analysis.net_pairs),
        "which": "every coupled net pair" if listed == len(result.analysis.net_pairs) else
                 f"the net pairs a finding names and the {pairs} worst (noise, then C12); '--pairs all' lists all",
    }
    keys = list(report)
    at = keys.index("net_pairs")
    report = {**{k: report[k] for k in keys[:at]}, "net_pairs_listed": note, **{k: report[k] for k in keys[at:]}}
    findings, report["findings"] = report["findings"], _FINDINGS
    head = json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False)
    start, rest = head.split(json.dumps(_FINDINGS), 1)
    before, after = rest.split(json.dumps(_NET_PAIRS), 1)
    out.write(start)
    out.write(_lines([json.dumps(f, ensure_ascii=False, allow_nan=False) for f in findings]))
    out.write(before)
    out.write("[")
    first = True
    stage.at(2, f"net pairs (of {listed:,})")
    for lines in net_pair_lines(result, limit=pairs):
        out.write(("\n    " if first else ",\n    ") + ",\n    ".join(lines))
        first = False
        stage.at(3, f"net pairs (of {listed:,})")
    out.write("]" if first else "\n  ]")
    out.write(after)
    out.write("\n")


def render(result: Result, pairs: int | None = DEFAULT_PAIRS) -> str:
    """The whole report as one string (see :func:`write`)."""
    buffer = io.StringIO()
    write(result, buffer, pairs)
    return buffer.getvalue()
