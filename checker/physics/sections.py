"""Cross-sections of the stackup around coupled copper, and what every
table model shares to solve and read them.

* **Sections**: :func:`broadside_section` (two traces on two layers),
  :func:`edge_section` (two traces side by side on one layer),
  :func:`ground_section` / :func:`ground_section_of` (one trace alone) turn
  a :class:`~checker.model.Stackup` and the traces' widths and placement
  into a :class:`~checker.physics.fieldsolve.CrossSection`: the dielectric
  slabs (:func:`surroundings`), the nearest reference planes above and below
  held at ground (:func:`grounds`, from :func:`layer_bands`), and a
  conformal solder mask over outer traces (:func:`mask_blocks`). Every model
  (broadside and edge tables, direct solves, long runs, guards) builds its
  sections here, so they all see the same stackup the same way.
* **Solving**: :func:`solve_shared` solves many sections, each distinct one
  once per process (keyed by :func:`section_signature`, cached on disk by
  ``solvecache``), on the solve threads.
* **Tables**: :func:`width_knots` / :func:`offset_knots` place a table's
  knots; :func:`blend_width_knots` reads between width knots (linear in
  ln width, :func:`_bracket`); :data:`RISE_MARGIN` is the share of a
  self-capacitance rise both table models count.

All lengths in mm; capacitances per unit length in F/m.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict

import numpy as np

from ..cores import SOLVE_THREADS, ordered_map
from ..model import Stackup
from ..progress import Counter
from .fieldsolve import GROUND, Block, CapacitanceResult, Conductor, CrossSection, Slab
from .solvecache import cached_solve

#: Most width knots per layer.
MAX_WIDTH_KNOTS = 4


#: Growth of the offset steps beyond the overlap.
_GROWTH = 1.7


#: Most solves ``solve_shared`` keeps (a few hundred bytes each).
SHARED_CACHE_SIZE = 20_000


#: Lengths in a ``section_signature`` are rounded to this many decimals of a
#: mm (1 nm).
_SIGNATURE_DECIMALS = 6


_shared: OrderedDict[tuple, CapacitanceResult] = OrderedDict()


_shared_lock = threading.Lock()


def _canonical(cs: CrossSection, resolution: float, richardson: bool) -> tuple[tuple | None, tuple[int, ...]]:
    """The key under which ``solve_shared`` shares solves of ``cs`` and the
    signal nets of ``cs`` in the key's conductor order (module docstring,
    "Shared solves"). Key None (not shared) for round conductors, a given
    box, or a signal net drawn as more than one conductor."""
    if not cs.conductors or not all(isinstance(c, Conductor) for c in cs.conductors) or cs.box is not None:
        return None, ()
    rects = [c for c in cs.conductors if isinstance(c, Conductor)]  # all of them (checked above)
    signal = [c.net for c in cs.conductors if c.net != GROUND]
    if len(set(signal)) != len(signal):
        return None, ()
    if any(p.er != q.er and p.x0 < q.x1 and q.x0 < p.x1 and p.y0 < q.y1 and q.y0 < p.y1
           for k, p in enumerate(cs.blocks) for q in cs.blocks[k + 1:]):
        return None, ()  # overlapping blocks of different er: their order matters, not shared

    def r(v: float) -> float:
        return round(float(v), _SIGNATURE_DECIMALS) + 0.0  # + 0.0: no -0.0

    def variant(sy: float, sx: float) -> tuple[tuple, tuple[int, ...]]:
        ys = [sy * c.y0 for c in rects] + [sy * c.y1 for c in rects]
        base = min(ys)

        def y(v: float) -> float:
            return r(sy * v - base)

        drawn = sorted(((*sorted((r(sx * c.x0), r(sx * c.x1))), *sorted((y(c.y0), y(c.y1))), c.net == GROUND),
                        c.net) for c in rects)
        conductors = tuple(geom for geom, _ in drawn)
        order = tuple(net for (*_, ground), net in drawn if not ground)
        slabs = tuple(sorted((*sorted((y(v.y0), y(v.y1))), r(v.er)) for v in cs.slabs))
        planes = tuple(sorted(y(p) for p in cs.planes))
        blocks = tuple(sorted((*sorted((r(sx * b.x0), r(sx * b.x1))), *sorted((y(b.y0), y(b.y1))), r(b.er))
                              for b in cs.blocks))
        return (conductors, slabs, planes, blocks), order

    shape, order = min(variant(sy, sx) for sy in (1.0, -1.0) for sx in (1.0, -1.0))
    return (shape, r(cs.box_margin), float(resolution), bool(richardson)), order


def section_signature(cs: CrossSection, resolution: float, richardson: bool = False) -> tuple | None:
    """The key under which ``solve_shared`` shares solves of ``cs`` (module
    docstring, "Shared solves"): ``cs`` moved so its lowest conductor bottom
    is at y = 0, and of that and its mirror images (y -> -y, x -> -x) the one
    that sorts first, conductors sorted by place (their net numbers left
    out), lengths rounded to 1 nm; with ``resolution`` and ``richardson``.
    None (not shared) for a cross-section with round conductors, a given
    box or a net drawn as several conductors, which the table models do not
    build."""
    return _canonical(cs, resolution, richardson)[0]


def _reorder(result: CapacitanceResult, index: np.ndarray, to_key: bool) -> CapacitanceResult:
    """``result`` with its matrices re-indexed: ``to_key`` takes a solve's
    nets into the key's order (``index[k]`` = the net at key position k);
    otherwise back from the key's order to a section's nets."""

    def move(m):
        if m is None:
            return None
        if to_key:
            return m[np.ix_(index, index)]
        out = np.empty_like(m)
        out[np.ix_(index, index)] = m
        return out

    return CapacitanceResult(move(result.maxwell), result.resolution, result.nodes, move(result.error),
                             move(result.extrapolated))


def solve_shared(sections: list[CrossSection], resolution: float,
                 richardson: bool = False) -> tuple[list[CapacitanceResult], int]:
    """``fieldsolve.solve(cs, resolution, richardson=richardson)`` of each of
    ``sections``, two solves at a time, results in input order; a section
    whose ``section_signature`` was solved before (or earlier in the list)
    takes that result, its matrices re-indexed to its own net numbers,
    instead of being solved again. Returns the results and how many were
    taken rather than solved."""
    canon = [_canonical(cs, resolution, richardson) for cs in sections]
    keys = [k for k, _ in canon]
    results: list[CapacitanceResult | None] = [None] * len(sections)
    todo: dict[tuple | int, int] = {}  # key (or index, unshared) -> first index to solve
    with _shared_lock:
        for i, key in enumerate(keys):
            if key is not None and key in _shared:
                _shared.move_to_end(key)
                results[i] = _reorder(_shared[key], np.array(canon[i][1], np.int64), to_key=False)
            else:
                todo.setdefault(i if key is None else key, i)
    first = sorted(todo.values())
    # at most two solves at once (each holds its sparse factorisation), on the cores a check may use
    done = Counter("field solves", len(first))

    def solve(i: int) -> CapacitanceResult:
        result = cached_solve(sections[i], resolution, richardson=richardson)
        done.add()
        return result

    solved = dict(zip(first, ordered_map(solve, first, most=SOLVE_THREADS)))
    in_key = {i: _reorder(solved[i], np.array(canon[i][1], np.int64), to_key=True)
              for i in first if keys[i] is not None}
    with _shared_lock:
        for i in first:
            if keys[i] is not None:
                _shared[keys[i]] = in_key[i]  # type: ignore[index]  # None keys are skipped above
        while len(_shared) > SHARED_CACHE_SIZE:
            _shared.popitem(last=False)
    for i, key in enumerate(keys):
        if results[i] is None:
            if key is None:
                results[i] = solved[todo[i]]
            else:
                j = todo[key]
                results[i] = solved[j] if i == j else _reorder(in_key[j], np.array(canon[i][1], np.int64),
                                                                  to_key=False)
    return results, len(sections) - len(first)  # type: ignore[return-value]


def layer_bands(stackup: Stackup) -> tuple[np.ndarray, np.ndarray]:
    """(bottom, top) y of every copper layer, mm; top surface of layer 0 at 0."""
    n = len(stackup.layers)
    top = np.zeros(n)
    bot = np.zeros(n)
    y = 0.0
    for i, layer in enumerate(stackup.layers):
        top[i] = y
        y -= layer.thickness_mm
        bot[i] = y
        if i < n - 1:
            y -= stackup.dielectrics[i].thickness_mm
    return bot, top


def check_pair(stackup: Stackup, upper: int, lower: int) -> None:
    n = len(stackup.layers)
    if not (0 <= upper < lower < n):
        raise ValueError(f"need 0 <= upper < lower < {n}, got upper={upper}, lower={lower}")


def grounds(stackup: Stackup, upper: int, lower: int) -> tuple[int | None, int | None]:
    """Nearest plane-role layer above ``upper`` and below ``lower`` (or None)."""
    layers = stackup.layers
    above = next((k for k in range(upper - 1, -1, -1) if layers[k].role == "plane"), None)
    below = next((k for k in range(lower + 1, len(layers)) if layers[k].role == "plane"), None)
    return above, below


def surroundings(stackup: Stackup, upper: int, lower: int) -> tuple[tuple[float, ...], tuple[Slab, ...]]:
    """Ground planes (y, mm) and dielectric slabs of the cross-section of the
    traces on layers ``upper`` .. ``lower`` (``upper == lower`` for one
    layer), as described in the module docstring: the nearest planes above
    ``upper`` and below ``lower``, every dielectric between them, inner
    copper bands filled with resin, and the solder mask (mask-filled outer
    band plus a slab of the mask's thickness) where a board surface lies
    between the grounds."""
    layers = stackup.layers
    n = len(layers)
    bot, top = layer_bands(stackup)
    above, below = grounds(stackup, upper, lower)
    first = above if above is not None else 0
    last = below if below is not None else n - 1
    planes = []
    if above is not None:
        planes.append(float(bot[above]))
    if below is not None:
        planes.append(float(top[below]))

    slabs = []
    for i in range(first, last):
        d = stackup.dielectrics[i]
        slabs.append(Slab(float(top[i + 1]), float(bot[i]), float(d.er)))
    for k in range(first + 1 if above is not None else first, last if below is not None else last + 1):
        if layers[k].thickness_mm <= 0 or k == 0 or k == n - 1:
            continue  # no band, or an outer layer's band (air or mask, below)
        er = 0.5 * (stackup.dielectrics[k - 1].er + stackup.dielectrics[k].er)
        slabs.append(Slab(float(bot[k]), float(top[k]), er))
    conformal = stackup.mask_style == "conformal" and n > 1
    if above is None and stackup.mask_top is not None:
        m = stackup.mask_top
        if conformal:  # the coat over the laminate; the traces get theirs from mask_blocks
            slabs.append(Slab(float(bot[0]), float(bot[0]) + m.thickness_mm, float(m.er)))
        else:
            slabs.append(Slab(float(bot[0]), float(top[0]) + m.thickness_mm, float(m.er)))
    if below is None and stackup.mask_bottom is not None:
        m = stackup.mask_bottom
        if conformal:
            slabs.append(Slab(float(top[n - 1]) - m.thickness_mm, float(top[n - 1]), float(m.er)))
        elif n == 1 and above is None and stackup.mask_top is not None:
            # one copper layer masked on both sides: the band is already filled
            slabs.append(Slab(float(bot[n - 1]) - m.thickness_mm, float(bot[n - 1]), float(m.er)))
        else:
            slabs.append(Slab(float(bot[n - 1]) - m.thickness_mm, float(top[n - 1]), float(m.er)))
    return tuple(planes), tuple(slabs)


def mask_blocks(stackup: Stackup, upper: int, lower: int, conductors) -> tuple[Block, ...]:
    """With ``stackup.mask_style == "conformal"``: the solder mask that
    follows each rectangular conductor on a masked outer layer whose surface
    lies between the section's grounds (layers ``upper`` .. ``lower``) — a
    cap of the mask's thickness t over its top (widened by t each side) and
    a wall of width t down each side to the laminate (module docstring,
    "Solder mask"). Empty otherwise."""
    if stackup.mask_style != "conformal" or len(stackup.layers) < 2:
        return ()
    bot, top = layer_bands(stackup)
    above, below = grounds(stackup, upper, lower)
    n = len(stackup.layers)
    out: list[Block] = []
    for k, m, outward in ((0, stackup.mask_top if above is None else None, 1.0),
                          (n - 1, stackup.mask_bottom if below is None else None, -1.0)):
        if m is None:
            continue
        t, er, y0, y1 = float(m.thickness_mm), float(m.er), float(bot[k]), float(top[k])
        surface = y1 if outward > 0 else y0
        for c in conductors:
            if not isinstance(c, Conductor) or abs(c.y0 - y0) > 1e-9 or abs(c.y1 - y1) > 1e-9:
                continue
            cap = (surface, surface + t) if outward > 0 else (surface - t, surface)
            out.append(Block(c.x0 - t, c.x1 + t, cap[0], cap[1], er))
            if y1 > y0:
                out.append(Block(c.x0 - t, c.x0, y0, y1, er))
                out.append(Block(c.x1, c.x1 + t, y0, y1, er))
    return tuple(out)


def ground_section_of(stackup: Stackup, layer: int, w: float) -> CrossSection:
    """One trace of width ``w`` centred at x = 0 on ``layer``, in the
    surroundings of that layer alone (as ``edge.ground_section``)."""
    bot, top = layer_bands(stackup)
    planes, slabs = surroundings(stackup, layer, layer)
    conductors = (Conductor(-0.5 * w, 0.5 * w, float(bot[layer]), float(top[layer]), 0),)
    return CrossSection(conductors, slabs, planes, blocks=mask_blocks(stackup, layer, layer, conductors))


def broadside_section(stackup: Stackup, upper: int, lower: int, wa: float, wb: float, offset_mm: float) -> CrossSection:
    """The cross-section solved for one (wa, wb, offset), all in mm.

    Trace 0 (width ``wa``) on ``upper`` at x = -offset/2, trace 1 (width
    ``wb``) on ``lower`` at x = +offset/2; grounds, dielectrics and the open
    sides as described in the module docstring.
    """
    check_pair(stackup, upper, lower)
    if not (wa > 0 and wb > 0):
        raise ValueError(f"widths must be positive, got {wa}, {wb}")
    bot, top = layer_bands(stackup)
    planes, slabs = surroundings(stackup, upper, lower)
    x = 0.5 * offset_mm
    conductors = (
        Conductor(-x - wa / 2, -x + wa / 2, float(bot[upper]), float(top[upper]), 0),
        Conductor(x - wb / 2, x + wb / 2, float(bot[lower]), float(top[lower]), 1),
    )
    return CrossSection(conductors, slabs, planes, blocks=mask_blocks(stackup, upper, lower, conductors))


def width_knots(widths, max_knots: int = MAX_WIDTH_KNOTS) -> np.ndarray:
    """Representative widths (mm) for a table (see the module docstring)."""
    w = np.round(np.asarray(widths, dtype=float).ravel(), 3)
    w = w[np.isfinite(w) & (w > 0)]
    if w.size == 0:
        raise ValueError("no positive widths given")
    distinct = np.unique(w)
    if distinct.size <= max_knots:
        return distinct
    knots = set(np.quantile(w, np.linspace(0.0, 1.0, max_knots), method="inverted_cdf").tolist())
    while len(knots) < max_knots:
        k = np.array(sorted(knots))
        gap = np.min(np.abs(distinct[:, None] - k[None, :]), axis=1)
        knots.add(float(distinct[int(np.argmax(gap))]))
    return np.array(sorted(knots))


def offset_knots(wa: float, wb: float, max_offset_mm: float, min_step_mm: float = 0.0) -> np.ndarray:
    """Offsets (mm) solved for one width pair (see the module docstring).

    With ``lo = |wa - wb|/2`` (the narrower trace reaches the wider one's
    edge), ``hi = (wa + wb)/2`` (edges aligned, overlap ends) and ``wn =
    min(wa, wb)``: 0, lo/2, lo, lo + wn/4, lo + wn/2, lo + 3wn/4, hi, then
    steps starting at wn/4 and growing ``_GROWTH`` (1.7) times, up to
    ``max_offset_mm`` (here the table's end, always the last knot). Knots
    closer than wn/20 are merged. ``min_step_mm`` > 0 (layers far apart,
    where C12' changes on the scale of their distance, not of the widths):
    only 0, hi/2 and hi up to hi, and steps from ``min_step_mm`` on.
    """
    lo, hi, wn = 0.5 * abs(wa - wb), 0.5 * (wa + wb), min(wa, wb)
    pts = [0.0, 0.5 * lo, lo, lo + 0.25 * wn, lo + 0.5 * wn, lo + 0.75 * wn, hi]
    step = 0.25 * wn
    if min_step_mm > step:
        pts, step = [0.0, 0.5 * hi, hi], min_step_mm / _GROWTH
    while pts[-1] < max_offset_mm:
        step *= _GROWTH
        pts.append(pts[-1] + step)
    out = np.unique([p for p in pts if p < max_offset_mm])
    keep = np.concatenate(([True], np.diff(out) > 0.05 * wn))
    out = out[keep]
    if out.size > 1 and max_offset_mm - out[-1] < 0.05 * wn:
        out = out[:-1]
    return np.append(out, max_offset_mm)


def _bracket(knots: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower knot index and fraction, linear in ln(width), towards the next
    knot; widths outside the knots are clamped to the nearest one."""
    if knots.size == 1:
        return np.zeros(w.size, dtype=np.int64), np.zeros(w.size)
    wc = np.clip(w, knots[0], knots[-1])
    i = np.clip(np.searchsorted(knots, wc, side="right") - 1, 0, knots.size - 2)
    t = np.log(wc / knots[i]) / np.log(knots[i + 1] / knots[i])
    return i, t


def blend_width_knots(knots_a: np.ndarray, knots_b: np.ndarray, wa: np.ndarray, wb: np.ndarray,
                      evaluate, prepare=None) -> np.ndarray:
    """Bilinear blend (linear in ln width, :func:`_bracket`) over the four
    width-knot corners around each query (``wa`` on ``knots_a``, ``wb`` on
    ``knots_b``; 1-D arrays): the sum of ``weight * evaluate(i, j, sel)``
    over the corners (i, j) with weight > 0, ``sel`` the queries at that
    corner. ``prepare(pairs)``, if given, is told each round's corners first
    (a lazily filled table solves them in one batch)."""
    ia, ta = _bracket(knots_a, wa)
    ib, tb = _bracket(knots_b, wb)
    na, nb = knots_a.size, knots_b.size
    out = np.zeros(wa.size)
    for da, weight_a in ((0, 1.0 - ta), (1, ta)):
        for db, weight_b in ((0, 1.0 - tb), (1, tb)):
            weight = weight_a * weight_b
            key = np.minimum(ia + da, na - 1) * nb + np.minimum(ib + db, nb - 1)
            key[weight == 0] = -1
            corners = [(int(kv // nb), int(kv % nb)) for kv in np.unique(key) if kv >= 0]
            if prepare is not None:
                prepare(corners)
            for i, j in corners:
                sel = np.nonzero(key == i * nb + j)[0]
                out[sel] += weight[sel] * evaluate(i, j, sel)
    return out


def check_layer(stackup: Stackup, layer: int) -> None:
    n = len(stackup.layers)
    if not 0 <= layer < n:
        raise ValueError(f"need 0 <= layer < {n}, got {layer}")


def edge_section(stackup: Stackup, layer: int, wa: float, wb: float, gap_mm: float) -> CrossSection:
    """Two traces side by side on copper layer ``layer``: trace 0 (width
    ``wa``) left of the gap, trace 1 (width ``wb``) right of it, ``gap_mm``
    edge to edge; all mm. Grounds, dielectrics and mask as in the module
    docstring."""
    check_layer(stackup, layer)
    if not (wa > 0 and wb > 0):
        raise ValueError(f"widths must be positive, got {wa}, {wb}")
    if not (gap_mm > 0 and math.isfinite(gap_mm)):
        raise ValueError(f"the gap must be positive and finite, got {gap_mm}")
    bot, top = layer_bands(stackup)
    planes, slabs = surroundings(stackup, layer, layer)
    y0, y1, g = float(bot[layer]), float(top[layer]), 0.5 * gap_mm
    conductors = (Conductor(-g - wa, -g, y0, y1, 0), Conductor(g, g + wb, y0, y1, 1))
    return CrossSection(conductors, slabs, planes, blocks=mask_blocks(stackup, layer, layer, conductors))


def ground_section(stackup: Stackup, layer: int, w: float) -> CrossSection:
    """One trace of width ``w`` (mm) centred at x = 0 on ``layer``."""
    check_layer(stackup, layer)
    if not w > 0:
        raise ValueError(f"width must be positive, got {w}")
    bot, top = layer_bands(stackup)
    planes, slabs = surroundings(stackup, layer, layer)
    conductors = (Conductor(-0.5 * w, 0.5 * w, float(bot[layer]), float(top[layer]), 0),)
    return CrossSection(conductors, slabs, planes, blocks=mask_blocks(stackup, layer, layer, conductors))


#: Share of the solved self-capacitance rise that is counted (``self_rise_per_m``).
RISE_MARGIN = 0.8
