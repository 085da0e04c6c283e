"""From a board and a rule set to coupled pairs, capacitances and noise.

This module joins the layers: the finder (pure geometry) gives coupled piece
pairs, the physics turns them into mutual capacitance and the capacitance of
each net to ground, and the net classes of the rule set give the electrical
attributes that turn capacitance into coupled noise. The checks then read the
resulting :class:`Analysis`; they never search geometry themselves.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .coupling import BROADSIDE, EDGE, KIND_NAMES, RELAY, VictimNoise, node_total_pf  # noqa: F401 (re-exported)
from .finder.pairs import PairTable, find_broadside, find_edge
from .finder.runs import run_labels
from .guards import (
    MAX_THIRD_NET_SOLVES,
    GuardedRows,
    Guards,
    SolveBudget,
    concat_guards,
    find_guard_pieces,
    grounding,
    guard_chains,
    guard_factors,
)
from .islands import Island, by_conductor, find_islands, island_links, relays
from .model import NO_NET, Board, Pieces
from .netrelays import net_relay_rows
from .ownruns import own_mutual_pf
from .physics import crosstalk
from .physics.accurate import ExactBroadside, ExactEdge, ExactGround
from .physics.broadside import (
    FAR_OFFSET_STEP,
    FAR_TABLE_MARGIN,
    FAR_TABLE_RESOLUTION,
    FAR_WIDTH_KNOTS,
    BroadsideModel,
    broadside_c12_pf,
)
from .physics.edge import EdgeModel, GroundModel, self_rise_per_m
from .returnpath import ReturnGaps, return_gaps
from .ruleset import NetClass, Rule, RuleSet
from .shielding import (
    ReferenceCopper,
    effective_stackup,
    exposed_pieces,
    reference_copper,
    reference_mask,
    role_notes,
    search_band_mm,
    split_shielded,
)
from .stackup import reference_of, separation_mm
from .victimnoise import rule_noise

#: Smallest edge-to-edge gap (mm) the edge-coupling closed forms are asked
#: about. Copper of two nets closer than this on one layer is a short or a
#: clearance error for the design-rule check, not a coupling estimate.
EDGE_GAP_FLOOR_MM = 0.01


@dataclass
class Couplings:
    """Every coupled piece pair of a board as parallel arrays.

    Rows are canonical: ``net_a < net_b`` (the piece on side a belongs to
    the lower net index). ``kind`` is ``BROADSIDE`` or ``EDGE``.
    """

    kind: np.ndarray
    a: np.ndarray
    b: np.ndarray
    net_a: np.ndarray
    net_b: np.ndarray
    layer_a: np.ndarray
    layer_b: np.ndarray
    angle_deg: np.ndarray
    parallel: np.ndarray
    length_mm: np.ndarray
    offset_mm: np.ndarray
    gap_mm: np.ndarray
    overlap_mm2: np.ndarray
    x: np.ndarray
    y: np.ndarray
    c12_pf: np.ndarray
    #: broadside rows: the share of the coupled length that no reference
    #: copper of the layers between shields (1 on edge rows), already
    #: applied to ``c12_pf``; and the layer between whose reference copper
    #: shields the rest (-1: none)
    open_fraction: np.ndarray
    shield_layer: np.ndarray
    #: relay rows: the floating island (index into ``Analysis.islands``)
    #: that passes the coupling on; -1 on other rows
    island: np.ndarray
    #: edge rows: the guard in the gap (index into ``Analysis.guards``, -1
    #: none) and the factor it applied to ``c12_pf`` (1: not credited)
    guard: np.ndarray
    guard_factor: np.ndarray
    #: edge rows: the net of the credited conductor in the gap (a stitched
    #: guard, or a driven third net), NO_NET where none was credited
    gap_net: np.ndarray

    def __len__(self) -> int:
        return int(self.a.shape[0])

    def take(self, index: np.ndarray) -> "Couplings":
        return Couplings(*(getattr(self, n)[index] for n in self.__dataclass_fields__))


@dataclass
class NetElectrical:
    """Electrical attributes per net (arrays indexed by net), from the first
    net class that gives each attribute; NaN where no class gives it."""

    swing_v: np.ndarray
    frequency_hz: np.ndarray
    resistance_ohm: np.ndarray
    node_capacitance_f: np.ndarray
    #: the aggressor's declared waveform (its class's ``frequency``,
    #: ``rise_time`` and ``duty``; NaN where not given) and the victim's
    #: filter corner (``bandwidth`` or its RC; NaN: unfiltered)
    clock_hz: np.ndarray = field(default_factory=lambda: np.zeros(0))
    rise_time_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    duty: np.ndarray = field(default_factory=lambda: np.zeros(0))
    corner_hz: np.ndarray = field(default_factory=lambda: np.zeros(0))


@dataclass
class NetPairs:
    """Per coupled net pair (``net_a < net_b``): totals over every run."""

    net_a: np.ndarray
    net_b: np.ndarray
    broadside_length_mm: np.ndarray
    edge_length_mm: np.ndarray
    area_mm2: np.ndarray
    c12_pf: np.ndarray
    #: the part of ``c12_pf`` relayed through floating copper or a
    #: high-impedance third net (RELAY rows)
    relay_pf: np.ndarray
    #: coupled noise (V) with net_a as aggressor onto net_b, and the reverse;
    #: NaN where the classes do not give the attributes the model needs
    noise_ab_v: np.ndarray
    noise_ba_v: np.ndarray
    noise_small_r_ab_v: np.ndarray
    noise_small_r_ba_v: np.ndarray
    #: index of each coupled pair row's net pair (into these arrays)
    row_pair: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0, np.int64))
    #: per net pair, a bit mask of the layer groups it couples on (bit k =
    #: ``layer_groups[k]``), and the groups: (kind, layer_a, layer_b)
    layer_mask: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0, np.int64))
    layer_groups: tuple[tuple[int, int, int], ...] = ()
    #: index into ``layer_groups`` of each coupled pair row
    row_group: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0, np.int64))
    #: the part of ``relay_pf`` through floating copper (islands) alone
    island_relay_pf: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    #: per net (not per pair): its traces' capacitance to ground computed
    #: alone, the sum of its mutual capacitances to every net it couples to
    #: (relays included), and its node capacitance from its class, pF
    #: (:func:`node_total_pf` makes the node's whole capacitance of them)
    trace_c2g_pf: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    coupled_pf: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    node_pf: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    #: per net: the part of ``trace_c2g_pf`` that is the rise of its pieces' diagonal with neighbours beside
    #: them (``self_rise_pf``; it shrinks with the coupling in a what-if)
    rise_pf: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))

    def __len__(self) -> int:
        return int(self.net_a.shape[0])


@dataclass
class Analysis:
    """Everything the checks and the reports read about one board."""

    board: Board
    ruleset: RuleSet
    couplings: Couplings
    net_pairs: NetPairs
    electrical: NetElectrical
    c2g_pf: np.ndarray  # per net: traces to reference plane + node capacitance
    classes: list[tuple[str, ...]]  # per net: names of the classes it belongs to
    notes: list[str]
    layer_pairs: list[tuple[int, int]]
    pairs_examined: int
    #: "fast" (field-solved tables, interpolated) or "accurate" (a direct
    #: solve of every distinct cross-section): which produced every number
    mode: str = "fast"
    #: the C12' models used, by (kind, layer, layer): what-if answers ask
    #: them again at other spacings
    models: dict = field(default_factory=dict, repr=False)
    #: work out the extra-spacing what-if answers (``--what-if``): it solves
    #: wider tables, so it is off by default
    what_if: bool = False
    #: every victim each noise-budget rule looks at, passing or not (the
    #: reports list it per victim)
    victim_noise: list[VictimNoise] = field(default_factory=list)
    #: per noise-budget rule name: the noise it judges (``checker.victimnoise``)
    noise: dict = field(default_factory=dict, repr=False)
    #: answers worked out on first use and kept (the what-if tables reaching wider spacings): a cache,
    #: filling it changes no number of the analysis
    memo: dict = field(default_factory=dict, repr=False)
    #: the reference copper that decided shielding (``checker.shielding``)
    reference: ReferenceCopper | None = field(default=None, repr=False)
    #: stretches of traces over gaps in their nearest reference copper
    #: (``checker.returnpath``); the reference-gap rule reads them
    return_gaps: ReturnGaps | None = field(default=None, repr=False)
    #: floating copper islands (``checker.islands``); relay rows point here
    islands: list = field(default_factory=list, repr=False)
    #: guard traces found in the gaps of edge-coupled pairs (``checker.guards``)
    guards: Guards = field(default_factory=Guards.empty, repr=False)
    _pair_groups: tuple[np.ndarray, np.ndarray] | None = field(default=None, repr=False)

    # --- helpers the checks share -------------------------------------
    def class_mask(self, names: tuple[str, ...]) -> np.ndarray:
        """Per net: True where the net is in one of ``names`` (empty = any)."""
        if not names:
            return np.ones(len(self.board.nets), dtype=bool)
        wanted = set(names)
        return np.array([bool(wanted.intersection(c)) for c in self.classes], dtype=bool)

    def orient(self, rule: Rule, net_a: np.ndarray, net_b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """For rows of (net_a, net_b): whether ``rule`` applies, and which net
        is the aggressor. Where both orientations match, net_a is taken as
        the aggressor (the finding is the same either way)."""
        agg = self.class_mask(rule.aggressor)
        vic = self.class_mask(rule.victim)
        ab = agg[net_a] & vic[net_b]
        ba = agg[net_b] & vic[net_a]
        aggressor = np.where(ab, net_a, net_b)
        return ab | ba, aggressor

    def runs(self, rows: np.ndarray) -> np.ndarray:
        """Run label per coupled row in ``rows`` (index array): rows whose
        pieces touch along a polyline or share a piece, for one net pair."""
        c = self.couplings
        return run_labels(self.board.pieces, c.a[rows], c.b[rows], c.net_b[rows], c.net_a[rows])

    def pair_runs(self, pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The continuous runs of the net pairs ``pairs``, grouped in one go:
        their coupled rows, each row's run label, and per run its length (mm)
        and its net pair."""
        rows = self.rows_of_pairs(np.unique(pairs))
        if rows.size == 0:
            return rows, rows, np.zeros(0), rows
        labels = self.runs(rows)
        length = np.bincount(labels, weights=self.couplings.length_mm[rows])
        owner = np.zeros(length.size, np.int64)
        owner[labels] = self.net_pairs.row_pair[rows]
        return rows, labels, length, owner

    def longest_run_mm(self, pairs: np.ndarray) -> np.ndarray:
        """Per net pair (indexed like ``net_pairs``): the length of its
        longest continuous run, for the pairs in ``pairs`` (0 elsewhere)."""
        best = np.zeros(len(self.net_pairs))
        _, _, length, owner = self.pair_runs(pairs)
        np.maximum.at(best, owner, length)
        return best

    def rows_of_pairs(self, pairs: np.ndarray) -> np.ndarray:
        """Indices of the coupled rows of the net pairs ``pairs``, via a
        grouping by net pair computed once (no scan per call)."""
        if self._pair_groups is None:
            order = np.argsort(self.net_pairs.row_pair, kind="stable")
            starts = np.searchsorted(self.net_pairs.row_pair[order], np.arange(len(self.net_pairs) + 1))
            self._pair_groups = (order, starts)
        order, starts = self._pair_groups
        pairs = np.atleast_1d(pairs)
        return np.concatenate([order[starts[k]:starts[k + 1]] for k in pairs]) if pairs.size else order[:0]

    def net_name(self, index: int) -> str:
        return self.board.nets[index].name

    def layer_name(self, index: int) -> str:
        return self.board.stackup.layers[index].name


def electrical_attributes(board: Board, ruleset: RuleSet, classes: list[tuple[str, ...]]) -> NetElectrical:
    """Per-net electrical attributes from the net classes (first class wins
    per attribute, in rule-file order)."""
    n = len(board.nets)
    out = NetElectrical(np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan), np.zeros(n),
                        np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan))
    by_name: dict[str, NetClass] = {c.name: c for c in ruleset.classes}
    factor = ruleset.settings.bandwidth_factor
    for i, names in enumerate(classes):
        node_c = None
        for name in names:
            cls = by_name[name]
            if np.isnan(out.swing_v[i]) and cls.swing_v is not None:
                out.swing_v[i] = cls.swing_v
            f = cls.aggressor_frequency_hz(factor)
            if np.isnan(out.frequency_hz[i]) and f is not None:
                out.frequency_hz[i] = f
            if np.isnan(out.resistance_ohm[i]) and cls.resistance_ohm is not None:
                out.resistance_ohm[i] = cls.resistance_ohm
            if node_c is None and cls.node_capacitance_f:
                node_c = cls.node_capacitance_f
            for arr, value in ((out.clock_hz, cls.frequency_hz), (out.rise_time_s, cls.rise_time_s),
                               (out.duty, cls.duty), (out.corner_hz, cls.victim_corner_hz())):
                if np.isnan(arr[i]) and value is not None:
                    arr[i] = value
        out.node_capacitance_f[i] = node_c or 0.0
    return out


def _signal_layers(board: Board, is_reference: np.ndarray) -> list[int]:
    """Layers with copper of a net that is not a reference net."""
    p = board.pieces
    if not len(p):
        return []
    net = p.net.astype(np.int64)
    live = (net != NO_NET)
    live[live] = ~is_reference[net[live]]
    return [int(k) for k in np.unique(p.layer[live])]


def analysis_steps(board: Board, ruleset: RuleSet) -> int:
    """How many times :func:`analyse` calls its ``progress`` callback."""
    is_ref = reference_mask([n.name for n in board.nets], ruleset.settings.reference_nets)
    k = len(_signal_layers(board, is_ref))
    return k * (k - 1) // 2 + k + 1


def find_couplings(board: Board, ruleset: RuleSet, notes: list[str], progress=None,
                   accurate: bool = False, models: dict | None = None,
                   ref: ReferenceCopper | None = None, islands: list[Island] | None = None,
                   frequency_hz: np.ndarray | None = None, guards: list | None = None,
                   driven: np.ndarray | None = None
                   ) -> tuple[Couplings, list[tuple[int, int]], int]:
    """Search every pair of layers (broadside) and every layer (edge) that
    carry copper of nets other than the reference nets; ``progress(description)``
    is called before each search. Broadside runs are split into shielded and
    open stretches by the reference copper of the layers between
    (``checker.shielding``). The C12' models used are left in ``models`` by
    (kind, layer, layer)."""
    models = {} if models is None else models
    guards = [] if guards is None else guards
    s = ruleset.settings
    ref = ref if ref is not None else reference_copper(board, s.reference_nets)
    if frequency_hz is None:
        frequency_hz = np.full(len(board.nets), np.nan)
    stackup = board.stackup
    pieces = board.pieces
    # reference-net copper is ground, not an aggressor or a victim
    net = pieces.net.astype(np.int64)
    ground = net != NO_NET
    ground[ground] = ref.is_reference[net[ground]]
    signal = replace(pieces, net=np.where(ground, NO_NET, pieces.net).astype(np.int32)) if ground.any() else pieces
    layers = _signal_layers(board, ref.is_reference)
    layer_pairs = [(u, l) for n, u in enumerate(layers) for l in layers[n + 1:]]
    tasks = [("broadside", u, l) for u, l in layer_pairs] + [("edge", k, k) for k in layers]
    tables: list[tuple] = []  # (kind, pair table, C12 pF, open fraction, shield layer, guards or None)
    third_budget = SolveBudget(MAX_THIRD_NET_SOLVES)
    searched: list[tuple[int, int]] = []
    covered: list[str] = []
    shielded_rows = 0
    if s.planes_shield:
        ref.prepare_between(layer_pairs)  # the distinct unions at once, on the cores a check may use
    for kind, u, l in tasks:
        if progress is not None:
            where = stackup.layers[u].name + (f"/{stackup.layers[l].name}" if u != l else "")
            progress(f"{kind} coupling on {where}")
        if kind == "broadside":
            band = search_band_mm(stackup, u, l, s.broadside_search_mm)
            shield = ref.between(u, l) if s.planes_shield else None
            space = ref.open_space(u, l) if shield is not None else None
            # a pair's window reaches the band, the vertical distance and the other trace's width
            # beyond a piece: grow by all of them, so no pair the window rule would open is dropped
            widest = float(signal.width[(signal.layer == u) | (signal.layer == l)].max())
            sub = _exposed(signal, u, l, shield, space, band + separation_mm(stackup, u, l) + widest,
                           ref.open_mask(u, l) if shield is not None else None)
            if sub is None:
                if shield is not None:
                    covered.append(f"{stackup.layers[u].name}/{stackup.layers[l].name}")
                continue
            searched.append((u, l))
            t = find_broadside(sub, u, l, band, s.parallel_angle_deg)
            split = split_shielded(board, ref, t, u, l) if shield is not None else None
            if split is not None:
                keep = split.open_fraction > 0
                shielded_rows += int(np.count_nonzero(~keep))
                t, fraction = t.take(keep), split.open_fraction[keep]
                shield_layer = split.shield_layer[keep]
            else:
                fraction, shield_layer = np.ones(len(t)), np.full(len(t), -1, np.int32)
            c12 = _broadside_c12(board, t, u, l, band, accurate, notes, models) * fraction
            tables.append((BROADSIDE, t, c12, fraction, shield_layer, None))
        else:
            t = find_edge(signal, u, s.edge_search_mm, s.parallel_angle_deg)
            c12 = _edge_c12(board, t, u, notes, accurate, models)
            guard = _guard_edge_rows(board, ref, ground, t, u, frequency_hz, s.guard_stitch_fraction,
                                     guards, notes, driven, np.isfinite(frequency_hz), third_budget)
            tables.append((EDGE, t, c12 * guard.factor, np.ones(len(t)), np.full(len(t), -1, np.int32),
                           guard))
    if covered:
        notes.append("shielded everywhere by reference copper between the layers (no broadside pair to "
                     "measure): " + ", ".join(covered))
    if shielded_rows:
        notes.append(f"{shielded_rows} broadside piece pairs lie wholly over reference copper of the layers "
                     "between them (shielded, C12 = 0)")
    examined = sum(t.candidates for _, t, *_ in tables)
    couplings = _assemble(board, tables, ruleset.pairs)
    if islands is not None:
        couplings = _with_relays(board, couplings, ref, signal, islands, s.edge_search_mm, notes, ruleset.pairs,
                                 s.planes_shield)
    return couplings, searched, examined


def _with_relays(board: Board, c: Couplings, ref: ReferenceCopper, signal: Pieces, islands: list[Island],
                 edge_search_mm: float, notes: list[str], pairs, planes_shield: bool = True) -> Couplings:
    """``c`` with one RELAY row per pair of nets a floating island couples
    (``checker.islands``)."""
    if not islands:
        return c
    links = by_conductor(island_links(board, ref, islands, signal, edge_search_mm, notes, planes_shield), islands)
    r = relays(links, len(islands), notes)
    conductors = len({i.node for i in islands})
    notes.append(f"floating copper: {len(islands)} island(s) on no net ({conductors} conductor(s): islands joined "
                 f"by a plated hole on no net are one), each conductor with zero net charge; {len(r)} net pair(s) "
                 "coupled through them")
    if not len(r):
        return c
    p = board.pieces
    n = len(r)
    z = np.zeros(n)
    spot = np.array([[islands[s].x, islands[s].y] for s in r.island]).reshape(-1, 2)
    extra = Couplings(
        kind=np.full(n, RELAY, np.int8), a=r.piece_a, b=r.piece_b, net_a=r.net_a, net_b=r.net_b,
        layer_a=p.layer[r.piece_a].astype(np.int32), layer_b=p.layer[r.piece_b].astype(np.int32),
        angle_deg=z, parallel=np.zeros(n, bool), length_mm=z.copy(), offset_mm=z.copy(), gap_mm=z.copy(),
        overlap_mm2=z.copy(), x=spot[:, 0], y=spot[:, 1], c12_pf=r.c_pf, open_fraction=np.ones(n),
        shield_layer=np.full(n, -1, np.int32), island=r.island.astype(np.int64), guard=np.full(n, -1, np.int64),
        guard_factor=np.ones(n), gap_net=np.full(n, NO_NET, np.int64))
    partner = _partners(board, pairs)
    extra = extra.take(np.flatnonzero(partner[extra.net_a] != extra.net_b))
    return Couplings(**{name: np.concatenate([getattr(c, name), getattr(extra, name)])
                        for name in Couplings.__dataclass_fields__})


def _with_net_relays(board: Board, c: Couplings, electrical: NetElectrical, c2g_pf: np.ndarray,
                     notes: list[str], pairs) -> Couplings:
    """``c`` with one RELAY row per pair of nets a high-impedance third net
    couples (``checker.netrelays``)."""
    cols = net_relay_rows(c, electrical.resistance_ohm, electrical.frequency_hz, c2g_pf, c.kind != RELAY,
                          [net.name for net in board.nets], notes, electrical.node_capacitance_f * 1e12)
    if cols is None:
        return c
    p = board.pieces
    n = cols["c12_pf"].size
    z = np.zeros(n)
    at = cols["row"]
    extra = Couplings(
        kind=np.full(n, RELAY, np.int8), a=cols["a"], b=cols["b"], net_a=cols["net_a"], net_b=cols["net_b"],
        layer_a=p.layer[cols["a"]].astype(np.int32), layer_b=p.layer[cols["b"]].astype(np.int32),
        angle_deg=z, parallel=np.zeros(n, bool), length_mm=z.copy(), offset_mm=z.copy(), gap_mm=z.copy(),
        overlap_mm2=z.copy(), x=c.x[at], y=c.y[at], c12_pf=cols["c12_pf"], open_fraction=np.ones(n),
        shield_layer=np.full(n, -1, np.int32), island=np.full(n, -1, np.int64), guard=np.full(n, -1, np.int64),
        guard_factor=np.ones(n), gap_net=cols["gap_net"])
    partner = _partners(board, pairs)
    extra = extra.take(np.flatnonzero(partner[extra.net_a] != extra.net_b))
    return Couplings(**{name: np.concatenate([getattr(c, name), getattr(extra, name).astype(getattr(c, name).dtype)])
                        for name in Couplings.__dataclass_fields__})


def _guard_edge_rows(board: Board, ref: ReferenceCopper, ground: np.ndarray, t: PairTable, layer: int,
                     frequency_hz: np.ndarray, stitch_fraction: float, guards: list, notes: list[str],
                     driven: np.ndarray | None = None, is_aggressor: np.ndarray | None = None,
                     third_budget: SolveBudget | None = None) -> GuardedRows:
    """Guards in the gaps of the edge rows ``t`` (``checker.guards``): their
    grounding is judged once per guard track and appended to ``guards``
    (one ``Guards`` table per layer); the factor on each row's C12. Driven
    third nets in the gaps take their solves from ``third_budget`` (shared
    by the board's layers)."""
    third_budget = SolveBudget(MAX_THIRD_NET_SOLVES) if third_budget is None else third_budget
    p = board.pieces
    piece, covered = find_guard_pieces(board, ground, t, layer)
    offset = sum(len(g) for g in guards)
    index = np.full(len(t), -1, np.int64)
    has = np.flatnonzero(piece >= 0)
    credited = np.zeros(len(t), bool)
    factor = np.ones(len(t))
    gap_net = np.full(len(t), NO_NET, np.int64)
    if has.size:
        refs = np.flatnonzero(ground & (p.layer == layer) & (p.length > 0))
        members = guard_chains(board, ground, refs)
        chain = members[np.searchsorted(refs, piece[has])]
        labels, inv = np.unique(chain, return_inverse=True)
        f = np.fmax(frequency_hz[p.net[t.a[has]]], frequency_hz[p.net[t.b[has]]])
        fastest = np.full(labels.size, np.nan)
        np.fmax.at(fastest, inv, f)
        chains = [refs[members == lab] for lab in labels.tolist()]
        table = grounding(board, ref.is_reference, chains, fastest, stitch_fraction)
        guards.append(table)
        index[has] = offset + inv
        credited[has] = np.array([table.state[k] == "stitched" for k in inv.tolist()], bool)
        factor = guard_factors(board, t, layer, piece, covered, credited, notes)
        credited &= factor < 1.0  # a guard whose solve was skipped is not credited
        gap_net = np.where(credited, p.net[np.maximum(piece, 0)], NO_NET).astype(np.int64)
    # a driven third net in the gap (no resistance given: not a high-impedance node), where no guard counts
    if driven is not None and is_aggressor is not None and len(t):
        # only rows that feed a noise estimate (one net an aggressor, the other a victim node) are
        # worth the solves; elsewhere the third net is left out (the estimate errs high)
        net = p.net.astype(np.int64)
        na, nb = net[t.a], net[t.b]
        worth = np.flatnonzero((~credited) & ((is_aggressor[na] & ~driven[nb]) | (is_aggressor[nb] & ~driven[na])))
        if worth.size:
            live = (net != NO_NET) & ~ground
            live[live] = driven[net[live]]
            sub = t.take(worth)
            third, share = find_guard_pieces(board, live, sub, layer, exclude_own=True)
            use = third >= 0
            if use.any():
                more = guard_factors(board, sub, layer, third, share, use, notes, third_budget)
                factor[worth] = np.where(use, more, factor[worth])
                gap_net[worth] = np.where(use & (more < 1.0), net[np.maximum(third, 0)], gap_net[worth])
    return GuardedRows(index, covered, factor, gap_net)


def _exposed(signal: Pieces, u: int, l: int, shield, space, grow_mm: float, mask=None) -> Pieces | None:
    """``signal`` with only the pieces of layers u and l that reference
    copper between them does not wholly cover (grown by ``grow_mm``) left on
    a net; None when either layer has none."""
    live = signal.net != NO_NET
    iu = np.flatnonzero(live & (signal.layer == u))
    il = np.flatnonzero(live & (signal.layer == l))
    if shield is None:
        return signal if iu.size and il.size else None
    iu, il = exposed_pieces(signal, iu, space, grow_mm, mask), exposed_pieces(signal, il, space, grow_mm, mask)
    if iu.size == 0 or il.size == 0:
        return None
    net = np.full(len(signal), NO_NET, np.int32)
    keep = np.concatenate([iu, il])
    net[keep] = signal.net[keep]
    return replace(signal, net=net)


def _broadside_c12(board: Board, t: PairTable, upper: int, lower: int, search_mm: float,
                   accurate: bool, notes: list[str], models: dict) -> np.ndarray:
    if len(t) == 0:
        return np.zeros(0)
    p = board.pieces
    wa, wb = p.width[t.a], p.width[t.b]
    model: ExactBroadside | BroadsideModel  # a direct solve of each section, or a field-solved table
    if accurate:
        model = ExactBroadside(board.stackup, upper, lower)
    elif lower - upper > 1:
        # layers that are not neighbours couple through openings in the copper between: a coarser
        # table (it reads high), with width knots from each layer's own widths, so that mirrored
        # layer pairs of a symmetric stackup share their solves
        on_u = p.width[(p.layer == upper) & (p.net != NO_NET)]
        on_l = p.width[(p.layer == lower) & (p.net != NO_NET)]
        model = BroadsideModel(board.stackup, upper, lower, on_u, on_l,
                               max_offset_mm=search_mm + float(max(on_u.max(), on_l.max())),
                               resolution=FAR_TABLE_RESOLUTION, max_width_knots=FAR_WIDTH_KNOTS,
                               offset_step_mm=FAR_OFFSET_STEP * separation_mm(board.stackup, upper, lower))
    else:
        model = BroadsideModel(board.stackup, upper, lower, wa, wb,
                               max_offset_mm=search_mm + float(max(wa.max(), wb.max())))
    c12 = broadside_c12_pf(model, wa, wb, t.offset_mm, t.length_mm, t.angle_deg, t.parallel)
    if lower - upper > 1 and not accurate:
        c12 = c12 * FAR_TABLE_MARGIN  # the coarse table can read a little low between its knots
    models[(BROADSIDE, upper, lower)] = model
    if accurate:
        notes.append(_accurate_note(f"broadside {board.stackup.layers[upper].name}/"
                                    f"{board.stackup.layers[lower].name}", model))
    return c12


def _accurate_note(what: str, model) -> str:
    return (f"accurate mode, {what}: {model.solves} direct field solves (resolutions 1 and 2, extrapolated), "
            f"one per distinct cross-section "
            f"(widths and spacing rounded to {model.grid_mm * 1000:g} um)")


def _edge_c12(board: Board, t: PairTable, layer: int, notes: list[str], accurate: bool = False,
              models: dict | None = None) -> np.ndarray:
    """C12 (pF) of the same-layer pairs ``t`` from the field-solved
    ``EdgeModel`` of ``layer`` (the closed forms of
    ``physics.capacitance.edge_c12_per_m`` are its documented cross-check)."""
    if len(t) == 0:
        return np.zeros(0)
    p = board.pieces
    name = board.stackup.layers[layer].name
    touching = int(np.count_nonzero(t.gap_mm < EDGE_GAP_FLOOR_MM))
    if touching:
        notes.append(
            f"{name}: {touching} piece pairs of different nets are closer than "
            f"{EDGE_GAP_FLOOR_MM} mm or touch (a clearance error); their C12 is taken at {EDGE_GAP_FLOOR_MM} mm")
    gap = np.maximum(t.gap_mm, EDGE_GAP_FLOOR_MM)
    wa, wb = p.width[t.a], p.width[t.b]
    model: ExactEdge | EdgeModel
    if accurate:
        model = ExactEdge(board.stackup, layer)
        per_m = model.c12_per_m(wa, wb, gap)
        notes.append(_accurate_note(f"edge coupling on {name}", model))
    else:
        model = EdgeModel(board.stackup, layer, np.concatenate([wa, wb]),
                          max_gap_mm=float(gap.max()), min_gap_mm=float(gap.min()))
        per_m = model.c12_per_m(wa, wb, gap)
        notes.append(f"edge coupling on {name}: field-solved cross-sections of the stackup "
                     f"({model.solves} solves, {_mask_words(board, layer)})")
    if models is not None:
        models[(EDGE, layer, layer)] = model
    return per_m * t.length_mm * 1e-3 * 1e12


def _mask_words(board: Board, layer: int) -> str:
    st = board.stackup
    mask = st.mask_top if layer == 0 else st.mask_bottom if layer == len(st.layers) - 1 else None
    if layer not in (0, len(st.layers) - 1):
        return "inner layer"
    return "under solder mask" if mask is not None else "bare outer layer, no solder mask given"


def _partners(board: Board, pairs: tuple[tuple[str, str], ...] = ()) -> np.ndarray:
    """Per net, its differential-pair partner (declared on the board or in
    the rule file), or NO_NET."""
    partner = board.partner_of()
    index = board.net_index()
    for p, n in pairs:  # pairs the rule file declares (a fabrication package cannot say)
        if p in index and n in index:
            partner[index[p]], partner[index[n]] = index[n], index[p]
    return partner


def _assemble(board: Board, tables: list[tuple],
              pairs: tuple[tuple[str, str], ...] = ()) -> Couplings:
    net = board.pieces.net
    partner = _partners(board, pairs)
    cols: dict[str, list[np.ndarray]] = {name: [] for name in Couplings.__dataclass_fields__}
    for kind, t, c12, fraction, shield_layer, guarded in tables:
        n = len(t)
        a, b = t.a.astype(np.int64), t.b.astype(np.int64)
        la = np.full(n, t.layer_a, np.int32)
        lb = np.full(n, t.layer_b, np.int32)
        swap = net[a] > net[b]
        a2, b2 = np.where(swap, b, a), np.where(swap, a, b)
        la2, lb2 = np.where(swap, lb, la), np.where(swap, la, lb)
        values = dict(kind=np.full(n, kind, np.int8), a=a2, b=b2, net_a=net[a2].astype(np.int64),
                      net_b=net[b2].astype(np.int64), layer_a=la2, layer_b=lb2, angle_deg=t.angle_deg,
                      parallel=t.parallel, length_mm=t.length_mm, offset_mm=t.offset_mm, gap_mm=t.gap_mm,
                      overlap_mm2=t.overlap_mm2, x=t.x, y=t.y, c12_pf=c12,
                      open_fraction=fraction, shield_layer=shield_layer, island=np.full(n, -1, np.int64),
                      guard=guarded.guard if guarded is not None else np.full(n, -1, np.int64),
                      guard_factor=guarded.factor if guarded is not None else np.ones(n),
                      gap_net=guarded.gap_net if guarded is not None else np.full(n, NO_NET, np.int64))
        for name, v in values.items():
            cols[name].append(np.asarray(v))
    if not tables:
        empty = {name: np.zeros(0) for name in cols}
        for name in ("a", "b", "net_a", "net_b"):
            empty[name] = np.zeros(0, np.int64)
        empty["parallel"] = np.zeros(0, bool)
        empty["shield_layer"] = np.zeros(0, np.int32)
        empty["island"] = np.zeros(0, np.int64)
        empty["guard"] = np.zeros(0, np.int64)
        empty["gap_net"] = np.zeros(0, np.int64)
        return Couplings(**empty)
    c = Couplings(**{name: np.concatenate(v) for name, v in cols.items()})
    # declared differential-pair partners are exempt from each other's checks
    keep = (partner[c.net_a] != c.net_b) & (c.net_a != NO_NET) & (c.net_b != NO_NET)
    return c if keep.all() else c.take(np.flatnonzero(keep))


def net_capacitance_to_ground_pf(board: Board, electrical: NetElectrical, notes: list[str],
                                 accurate: bool = False) -> np.ndarray:
    """Per net: sum over its pieces of C'(to reference planes) x length, plus
    the node capacitance from its class (pF). C' comes from the field-solved
    ``GroundModel`` of each layer (``physics.capacitance.c2g_per_m`` is its
    documented cross-check)."""
    p = board.pieces
    total = np.zeros(len(board.nets))
    for layer in (np.unique(p.layer) if len(p) else []):
        on = np.flatnonzero((p.layer == layer) & (p.net != NO_NET))
        if on.size == 0:
            continue
        name = board.stackup.layers[int(layer)].name
        model = (ExactGround(board.stackup, int(layer)) if accurate
                 else GroundModel(board.stackup, int(layer), p.width[on]))
        per_m = model.c_per_m(p.width[on])
        if reference_of(board.stackup, int(layer)).kind == "none":
            notes.append(f"layer {name} has no reference plane: its traces' capacitance to ground is to the "
                         "solver's far box, about the board's size away (a rough figure)")
        else:
            notes.append(_accurate_note(f"capacitance to ground on {name}", model) if accurate else
                         f"capacitance to ground on {name}: field-solved single-trace cross-sections "
                         f"({model.solves} solves, {_mask_words(board, int(layer))})")
        pf = per_m * p.length[on] * 1e-3 * 1e12
        total += np.bincount(p.net[on], weights=pf, minlength=len(board.nets))
    return total + electrical.node_capacitance_f * 1e12


def self_rise_pf(board: Board, c: Couplings, models: dict, victims: np.ndarray) -> np.ndarray:
    """Per victim net: how much its Maxwell self-capacitance (pF) rises
    with its same-layer neighbours beside it, over its pieces alone, from
    the edge tables' own solves (``physics.edge.self_rise_per_m``): per piece
    the largest rise among its edge rows (a neighbour on each side raises it
    at least as much as the larger one alone does: a lower bound), summed
    over the net's pieces; a parallel run with a trace on the neighbouring
    layer counts the same way (``BroadsideModel.self_rise_per_m``, over the
    run's open part). Runs between layers that are not neighbours, and
    crossings, add nothing (the bound stays a bound there)."""
    out = np.zeros(len(board.nets))
    p = board.pieces
    rows = np.flatnonzero(c.kind == EDGE)
    if not victims.any():
        return out
    best = np.zeros(len(p))

    def take(own: np.ndarray, rise_pf_of) -> None:
        net = p.net[own].astype(np.int64)
        pick = (net != NO_NET) & victims[np.maximum(net, 0)]
        if pick.any():
            np.maximum.at(best, own[pick], rise_pf_of(pick))

    # neighbouring-layer broadside runs: the rise of each trace's diagonal over the open part of the run
    bs = np.flatnonzero((c.kind == BROADSIDE) & np.asarray(c.parallel, bool)
                        & (np.abs(c.layer_a - c.layer_b) == 1))
    for key in {(int(min(la, lb)), int(max(la, lb))) for la, lb in zip(c.layer_a[bs], c.layer_b[bs])}:
        model = models.get((BROADSIDE, *key))
        if not isinstance(model, BroadsideModel):
            continue
        mine = bs[np.minimum(c.layer_a[bs], c.layer_b[bs]) == key[0]]
        up = np.where(c.layer_a[mine] == key[0], c.a[mine], c.b[mine]).astype(np.int64)
        lo = np.where(c.layer_a[mine] == key[0], c.b[mine], c.a[mine]).astype(np.int64)
        scale = c.length_mm[mine] * 1e-3 * c.open_fraction[mine] * 1e12
        for own, upper_side in ((up, True), (lo, False)):
            take(own, lambda pick, upper_side=upper_side, model=model, up=up, lo=lo, mine=mine, scale=scale:
                 model.self_rise_per_m(p.width[up[pick]], p.width[lo[pick]], c.offset_mm[mine][pick],
                                       upper_side) * scale[pick])
    for layer in np.unique(c.layer_a[rows]).tolist():
        model = models.get((EDGE, layer, layer))
        if not isinstance(model, EdgeModel):
            continue
        mine = rows[c.layer_a[rows] == layer]
        gap = np.maximum(c.gap_mm[mine], EDGE_GAP_FLOOR_MM)
        length_m = c.length_mm[mine] * 1e-3
        for own, other in ((c.a[mine], c.b[mine]), (c.b[mine], c.a[mine])):
            take(own, lambda pick, own=own, other=other, model=model, gap=gap, length_m=length_m: self_rise_per_m(
                model, p.width[own[pick]], p.width[other[pick]], gap[pick]) * length_m[pick] * 1e12)
    has = best > 0
    if has.any():
        out += np.bincount(p.net[has].astype(np.int64), weights=best[has], minlength=len(out))
    return out


def aggregate_net_pairs(board: Board, c: Couplings, electrical: NetElectrical, c2g_pf: np.ndarray,
                        own_pf: np.ndarray | None = None, rise_pf: np.ndarray | None = None) -> NetPairs:
    """Totals per net pair and the lumped-model noise both ways: each
    aggressor's share under Kirchhoff's current law at the victim node with
    all its neighbours (``crosstalk.kcl_noise_v``, :func:`node_total_pf`)."""
    n_nets = max(len(board.nets), 1)
    key = c.net_a * n_nets + c.net_b
    uniq, inv = np.unique(key, return_inverse=True)
    m = uniq.shape[0]

    def total(weights: np.ndarray) -> np.ndarray:
        return np.bincount(inv, weights=weights, minlength=m)

    net_a, net_b = uniq // n_nets, uniq % n_nets
    c12 = total(c.c12_pf)
    node = electrical.node_capacitance_f * 1e12
    # the sum of the pieces alone, less twice what a net's own side-by-side pieces share (checker.ownruns),
    # plus the rise of their self-capacitance with neighbours beside them (self_rise_pf)
    trace = np.maximum(c2g_pf - node - (2.0 * own_pf if own_pf is not None else 0.0)
                       + (rise_pf if rise_pf is not None else 0.0), 0.0)
    # the node's own capacitances: direct rows and island relays (the island is not a row of its own), not
    # what a high-impedance third net relays (its capacitance to the node is a direct row already)
    own = total(np.where((c.kind == RELAY) & (c.island < 0), 0.0, c.c12_pf))
    coupled = (np.bincount(net_a, weights=own, minlength=len(c2g_pf))
               + np.bincount(net_b, weights=own, minlength=len(c2g_pf)))[:len(c2g_pf)]
    c_tot = node_total_pf(trace, coupled, node)
    pairs = NetPairs(
        net_a=net_a, net_b=net_b,
        broadside_length_mm=total(np.where(c.kind == BROADSIDE, c.length_mm, 0.0)),
        edge_length_mm=total(np.where(c.kind == EDGE, c.length_mm, 0.0)),
        area_mm2=total(c.overlap_mm2), c12_pf=c12, relay_pf=total(np.where(c.kind == RELAY, c.c12_pf, 0.0)),
        noise_ab_v=_noise(electrical, net_a, net_b, c12, c_tot, crosstalk.kcl_noise_v),
        noise_ba_v=_noise(electrical, net_b, net_a, c12, c_tot, crosstalk.kcl_noise_v),
        noise_small_r_ab_v=_noise(electrical, net_a, net_b, c12, c_tot, crosstalk.lumped_noise_small_r_v),
        noise_small_r_ba_v=_noise(electrical, net_b, net_a, c12, c_tot, crosstalk.lumped_noise_small_r_v),
        row_pair=inv.astype(np.int64),
        island_relay_pf=total(np.where((c.kind == RELAY) & (c.island >= 0), c.c12_pf, 0.0)),
        trace_c2g_pf=trace, coupled_pf=coupled, node_pf=node,
        rise_pf=rise_pf if rise_pf is not None else np.zeros(len(c2g_pf)),
    )
    pairs.layer_groups, pairs.layer_mask, pairs.row_group = _layer_masks(c, inv, m)
    return pairs


def _layer_masks(c: Couplings, inv: np.ndarray,
                 m: int) -> tuple[tuple[tuple[int, int, int], ...], np.ndarray, np.ndarray]:
    """The (kind, layer, layer) groups present, which of them each net pair
    couples on (bit masks), and each row's group."""
    lo, hi = np.minimum(c.layer_a, c.layer_b), np.maximum(c.layer_a, c.layer_b)
    key = (c.kind.astype(np.int64) * 4096 + lo) * 4096 + hi
    groups, gidx = np.unique(key, return_inverse=True)
    row_group = gidx.astype(np.int64)
    if groups.size > 62:  # more layer groups than bits: keep the mask for the first 62
        gidx = np.where(gidx < 62, gidx, 62)
    mask = np.zeros(m, np.int64)
    np.bitwise_or.at(mask, inv, np.left_shift(np.int64(1), gidx.astype(np.int64)))
    decoded = tuple((int(g // 4096 // 4096), int(g // 4096 % 4096), int(g % 4096)) for g in groups)
    return decoded, mask, row_group


def _noise(e: NetElectrical, aggressor: np.ndarray, victim: np.ndarray, c12_pf: np.ndarray,
           c_tot_pf: np.ndarray, model) -> np.ndarray:
    """Noise (V) on ``victim`` from ``aggressor`` (``model(R, C1k, C_tot, V,
    f)``, C_tot the victim node's whole capacitance); NaN where an attribute
    is missing."""
    return model(e.resistance_ohm[victim], c12_pf * 1e-12, c_tot_pf[victim] * 1e-12,
                 e.swing_v[aggressor], e.frequency_hz[aggressor])


def analyse(board: Board, ruleset: RuleSet, progress=None, accurate: bool = False,
            what_if: bool = False) -> Analysis:
    """Run the whole physical analysis of ``board`` under ``ruleset``'s
    settings; ``progress(description)``, if given, is called before each of
    the :func:`analysis_steps` steps. The noise each noise-budget rule
    judges is worked out here too (:mod:`checker.victimnoise`), so the rules
    only read; ``what_if``: the rules also answer what extra spacing would
    pass (``--what-if``)."""
    notes: list[str] = list(board.notes)  # what the reader had to say about the input comes first
    ref = reference_copper(board, ruleset.settings.reference_nets)
    notes += role_notes(board.stackup, ref, board)
    # the physics sees each layer's role as its copper decides it (checker.shielding)
    board = replace(board, stackup=replace(effective_stackup(board.stackup, ref),
                                           mask_style=ruleset.settings.solder_mask))
    names = [net.name for net in board.nets]
    classes = ruleset.classify(names)
    electrical = electrical_attributes(board, ruleset, classes)
    models: dict = {}
    islands = find_islands(board)
    guard_tables: list = []
    couplings, layer_pairs, examined = find_couplings(board, ruleset, notes, progress, accurate, models, ref,
                                                      islands, electrical.frequency_hz, guard_tables,
                                                      np.isfinite(electrical.frequency_hz)
                                                      & np.isnan(electrical.resistance_ohm))
    guards = concat_guards(guard_tables)
    if progress is not None:
        progress("capacitance to ground and noise")
    c2g = net_capacitance_to_ground_pf(board, electrical, notes, accurate)
    couplings = _with_net_relays(board, couplings, electrical, c2g, notes, ruleset.pairs)
    victims = np.isfinite(electrical.resistance_ohm)
    own = own_mutual_pf(board, victims, ruleset.settings.edge_search_mm, ruleset.settings.parallel_angle_deg,
                        models)
    if np.any(own > 0):
        notes.append(f"{int(np.count_nonzero(own > 0))} victim net(s) run beside themselves (meanders, parallel "
                     "legs): their capacitance to ground is taken less twice the mutual capacitance of those "
                     "stretches (checker.ownruns); a net over itself on another layer is not looked for")
    rise = self_rise_pf(board, couplings, models, victims)
    net_pairs = aggregate_net_pairs(board, couplings, electrical, c2g, own, rise)
    gaps = return_gaps(board, ref)  # traces over voids and splits of their reference copper
    built = Analysis(board, ruleset, couplings, net_pairs, electrical, c2g, classes, notes,
                     layer_pairs, examined, "accurate" if accurate else "fast", models, what_if=what_if,
                     reference=ref, islands=islands, return_gaps=gaps, guards=guards)
    # the noise-budget rules' physics (per-victim noise, long runs, the fraction that would pass)
    noise = {rule.name: rule_noise(built, rule) for rule in ruleset.rules if rule.kind == "noise-budget"}
    return replace(built, noise=noise, victim_noise=[v for n in noise.values() for v in n.victims_seen])
