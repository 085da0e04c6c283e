"""The assembly step every fabrication door shares: already-read copper
layers, drills, netlist and outline -> one :class:`~checker.model.Board`.

``board_from_layers`` is called by the Gerber package door
(:mod:`.assemble`) and by the IPC-2581 door (:mod:`checker.readers.ipc2581`)
once each has read its files into per-layer objects (:mod:`.layer`). It
decides layer roles, subtracts negative planes, joins copper into nets by
connectivity (objects that touch on a layer, joined through plated holes),
names the nets (``TO.N``, an IPC-D-356 test point, else
``derived:<layer>@<x>,<y>``) and turns vias' pads into vias; see
:mod:`.assemble` for the rules as a user meets them.
"""

from __future__ import annotations

import dataclasses
import math
from collections import Counter
from typing import Any, cast

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree
from shapely.geometry.polygon import orient

from ...errors import FabError
from ...model import NO_NET, Board, LayerRole, Net, Pieces, Region, Stackup, Vias
from .layer import NET_UNKNOWN, DrillFile, GerberLayer, JobStackup, Netlist

#: Two copper objects closer than this (mm) touch (coordinates are exact to
#: 1 nm in a Gerber file with 6 decimals; this absorbs the rounding).
TOUCH_TOLERANCE_MM = 1e-4


#: A pad belongs to a plated hole whose centre is within this (mm). Drill
#: files in inch with 4 decimals put a hole up to 1.27 um per axis (1.8 um
#: on the diagonal) off a pad written in mm; 5 um takes that and any
#: exporter's rounding, and is far below the smallest drill.
PAD_AT_HOLE_MM = 5e-3


#: Resolution of the round ends of traces when a negative plane subtracts them.
_ROUND_SEGMENTS = 16


#: Explicitly on no net: TO.N with an empty value, or N/C (Gerber X2).
_NO_NET_NAMES = ("", "N/C")


def board_from_layers(name: str, path: str, job: JobStackup, gerbers: dict[int, GerberLayer],
                      drills: list[DrillFile], netlist: Netlist | None, outline: shapely.Polygon | None,
                      notes: list[str], given_roles: dict[int, str | None] | None = None,
                      file_names: dict[int, str] | None = None) -> Board:
    """The Board of already-read layers: the one assembly step every
    fabrication door shares (Gerber package, IPC-2581).

    ``gerbers`` maps each of ``job.copper_numbers`` to its copper layer;
    ``given_roles`` the role a user or a layer-function field gave
    (``plane`` / ``signal`` / ``mixed``, else ``None``); ``file_names`` what
    a note calls each layer's source. ``notes`` are kept, in order, ahead of
    the assembly's own."""
    given_roles = given_roles or {}
    file_names = file_names or {n: g.path for n, g in gerbers.items()}
    notes = list(job.notes) + list(notes)
    stack = _with_roles(job, given_roles, file_names, gerbers, notes)
    notes += [f"{g.path}: {w}" for g in gerbers.values() for w in g.warnings]
    return _Builder(name, path, job, stack, gerbers, drills, netlist, outline, notes).build()


def _with_roles(job: JobStackup, given_roles: dict[int, str | None], file_names: dict[int, str],
                gerbers: dict[int, GerberLayer], notes: list[str]) -> Stackup:
    layers = []
    assumed = []
    for layer, number in zip(job.stackup.layers, job.copper_numbers):
        given = given_roles.get(number)
        ff = gerbers[number].file_function
        from_file = ff[3].lower() if ff is not None and len(ff) > 3 and ff[3] in ("Plane", "Signal", "Mixed") else None
        role = given or from_file or (layer.role if job.roles_given else None)
        if role is None:
            role = "plane" if gerbers[number].negative else "mixed"
            if not gerbers[number].negative:
                assumed.append(layer.name)
        elif from_file and job.roles_given and from_file != layer.role and not given:
            notes.append(f"layer {layer.name}: role {from_file} from {file_names[number]} (TF.FileFunction), "
                         f"not {layer.role} as the stackup file says")
        layers.append(dataclasses.replace(layer, role=cast(LayerRole, role)))
    if assumed:
        notes.append(f"layer role not given for {', '.join(assumed)} (no TF.FileFunction type, no stackup role): "
                     "taken as mixed (a hint for reports only: planes and shielding follow each layer's "
                     "reference-net copper); declare one with --layer FILE=L<n>,plane|signal|mixed")
    names = [layer.name for layer in layers]
    if len(set(names)) != len(names) or not all(names):
        layers = [dataclasses.replace(layer, name=f"L{n}") for layer, n in zip(layers, job.copper_numbers)]
        notes.append("the stackup's copper layer names are missing or repeated: layers are named L1, L2, ...")
    return dataclasses.replace(job.stackup, layers=tuple(layers))


class _Builder:
    """Turns the read files into Board columns; one instance per load."""

    def __init__(self, name: str, path: str, job: JobStackup, stackup: Stackup, gerbers: dict[int, GerberLayer],
                 drills: list[DrillFile], netlist: Netlist | None, outline, notes: list[str]) -> None:
        self.name = name
        self.path = path
        self.job = job
        self.stackup = stackup
        self.numbers = job.copper_numbers
        self.layers = [gerbers[n] for n in self.numbers]
        self.drills = drills
        self.netlist = netlist
        self.outline = outline
        self.notes = notes
        self.net_names: list[str] = []
        self.net_index: dict[str, int] = {}
        self.hole_nets: np.ndarray | None = None  # set by _connect

    def net(self, name: str) -> int:
        if name not in self.net_index:
            self.net_index[name] = len(self.net_names)
            self.net_names.append(name)
        return self.net_index[name]

    # ---- build ----------------------------------------------------------------

    def build(self) -> Board:
        self._negative_planes()
        holes = self._plated_holes()
        # per layer: the net label of each trace piece and shape, as global net
        # indices, NO_NET for "on no net", NET_UNKNOWN_GLOBAL for "find out"
        piece_nets = [self._known(layer, layer.traces.net) for layer in self.layers]
        shape_nets = [self._known(layer, np.array([s.net for s in layer.shapes], dtype=np.int64))
                      for layer in self.layers]
        self.pad_hole = self._pads_at_holes(holes)
        if any((a == _UNKNOWN).any() for a in piece_nets + shape_nets):
            self._connect(piece_nets, shape_nets, holes)
        else:
            self.hole_nets = self._hole_nets_from_copper(holes, piece_nets, shape_nets)
        self._note_holes_without_net(holes)
        vias, pad_used = self._vias(holes, shape_nets)
        pieces, sources = self._pieces(piece_nets)
        regions = self._regions(shape_nets, pad_used)
        if len(pieces) == 0 and not regions:
            raise FabError(self.path, None, "no copper in the package's copper layers")
        nets = tuple(Net(name) for name in self.net_names)
        return Board(name=self.name, path=self.path, stackup=self.stackup, nets=nets, pieces=pieces,
                     sources=tuple(sources), regions=tuple(regions), vias=vias, outline=self.outline,
                     notes=tuple(self.notes))

    def _known(self, layer: GerberLayer, local: np.ndarray) -> np.ndarray:
        table = np.array([NO_NET if n in _NO_NET_NAMES else self.net(n) for n in layer.net_names] + [_UNKNOWN],
                         dtype=np.int64)
        local = np.asarray(local, dtype=np.int64)
        return table[np.where(local == NET_UNKNOWN, len(layer.net_names), local)]

    # ---- negative planes ---------------------------------------------------------

    def _negative_planes(self) -> None:
        negatives = [i for i, layer in enumerate(self.layers) if layer.negative]
        if not negatives:
            return
        frame = self.outline
        if frame is None:
            drawn = [_copper_union(layer) for layer in self.layers]
            frame = shapely.envelope(shapely.union_all([d for d in drawn if d is not None and not d.is_empty]))
            self.notes.append("negative plane layer(s) without a board outline (Profile file): the plane is taken "
                              "to fill the bounding box of all copper")
        for i in negatives:
            layer = self.layers[i]
            voids = _copper_union(layer)
            plane = frame if voids is None else shapely.difference(frame, voids)
            from .layer import GerberShape, GerberTraces  # local: only negative layers need them
            parts = [p for p in shapely.get_parts(plane) if p.area > 0]
            self.layers[i] = dataclasses.replace(
                layer, negative=False, traces=_no_traces(GerberTraces),
                shapes=[GerberShape("region", orient(p, 1.0), NET_UNKNOWN, 0, "Plane") for p in parts])
            self.notes.append(f"layer {self.stackup.layers[i].name}: negative file {layer.path}: plane copper is "
                              f"the {'outline' if self.outline is not None else 'copper bounding box'} minus "
                              "what the file draws")

    # ---- holes and connectivity -----------------------------------------------------

    def _plated_holes(self) -> dict:
        """Plated hits as arrays: x, y, diameter, first/last stackup index,
        function, where."""
        n = len(self.numbers)
        pos = {number: i for i, number in enumerate(self.numbers)}
        cols: dict[str, list] = {k: [] for k in ("x", "y", "d", "first", "last", "function", "where")}
        through = []
        for f in self.drills:
            if f.plated is False:
                continue
            if f.span is None:
                first, last = 0, n - 1
                if len(f.x):
                    through.append(f.path)
            else:
                a, b = sorted(f.span)
                if a not in pos or b not in pos:
                    raise FabError(f.path, None, f"TF.FileFunction spans layers {a} to {b}, but the stackup has "
                                                 f"copper layers {self.numbers[0]}..{self.numbers[-1]}")
                first, last = pos[a], pos[b]
            keep = np.ones(len(f.x), dtype=bool) if f.hole_plated is None else np.asarray(f.hole_plated, dtype=bool)
            k = int(keep.sum())
            cols["x"].append(f.x[keep])
            cols["y"].append(f.y[keep])
            cols["d"].append(f.diameter[keep])
            cols["first"].append(np.full(k, first))
            cols["last"].append(np.full(k, last))
            cols["function"] += [fn for fn, kept in zip(f.function, keep.tolist()) if kept]
            cols["where"] += [f"{f.path}: line {int(line)}" for line in f.line[keep]]
        if through:
            self.notes.append(f"drill file(s) without TF.FileFunction span ({', '.join(through)}): holes taken as "
                              "plated through the whole board")
        out = {k: (np.concatenate(v) if v and k not in ("function", "where") else v) for k, v in cols.items()}
        for column in ("x", "y", "d"):
            out[column] = np.asarray(out[column], dtype=np.float64) if len(out[column]) else np.zeros(0)
        for column in ("first", "last"):
            out[column] = (np.asarray(out[column], dtype=np.int64) if len(out[column])
                           else np.zeros(0, dtype=np.int64))
        return out

    def _connect(self, piece_nets: list[np.ndarray], shape_nets: list[np.ndarray], holes: dict) -> None:
        """Give every object of unknown net the net of its connected copper
        (modifies the arrays in place)."""
        offsets = []  # node id of each layer's first piece and first shape
        total = 0
        for layer in self.layers:
            offsets.append((total, total + len(layer.traces)))
            total += len(layer.traces) + len(layer.shapes)
        hole0 = total
        total += len(holes["x"])
        edges_a: list[np.ndarray] = []
        edges_b: list[np.ndarray] = []
        geoms_of: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        for i, layer in enumerate(self.layers):
            geoms, radius, node = _layer_geometry(layer, offsets[i])
            on = np.flatnonzero((holes["first"] <= i) & (holes["last"] >= i))
            if len(on):
                geoms = np.concatenate([geoms, shapely.points(holes["x"][on], holes["y"][on])])
                radius = np.concatenate([radius, holes["d"][on] / 2])
                node = np.concatenate([node, hole0 + on])
            geoms_of.append((geoms, radius, node))
            if len(geoms) < 2:
                continue
            a, b = _touching(geoms, radius)
            edges_a.append(node[a])
            edges_b.append(node[b])
        a = np.concatenate(edges_a) if edges_a else np.zeros(0, dtype=np.int64)
        b = np.concatenate(edges_b) if edges_b else np.zeros(0, dtype=np.int64)
        graph = coo_matrix((np.ones(len(a), dtype=np.int8), (a, b)), shape=(total, total))
        _, label = connected_components(graph, directed=False)

        label_net = np.concatenate([np.concatenate([piece_nets[i], shape_nets[i]]) for i in range(len(self.layers))]
                                   + [np.full(len(holes["x"]), _UNKNOWN, dtype=np.int64)])
        names = self._component_names(label, label_net, offsets, hole0, holes, geoms_of)
        for i, _layer in enumerate(self.layers):
            p0, s0 = offsets[i]
            for arr, start in ((piece_nets[i], p0), (shape_nets[i], s0)):
                unknown = np.flatnonzero(arr == _UNKNOWN)
                if len(unknown):
                    arr[unknown] = names[label[start + unknown]]
        self.hole_nets = names[label[hole0:]] if len(holes["x"]) else np.zeros(0, dtype=np.int64)

    def _component_names(self, label, label_net, offsets, hole0, holes, geoms_of) -> np.ndarray:
        """Global net index per component (NO_NET for unconnected copper)."""
        count = int(label.max()) + 1 if len(label) else 0
        names = np.full(count, _UNKNOWN, dtype=np.int64)
        known = label_net >= 0
        shorts = []
        votes: dict[int, Counter] = {}
        for comp, net in zip(label[known].tolist(), label_net[known].tolist()):
            votes.setdefault(comp, Counter())[net] += 1
        for comp, counter in votes.items():
            best = sorted(counter.items(), key=lambda kv: (-kv[1], self.net_names[kv[0]]))
            names[comp] = best[0][0]
            if len(best) > 1:
                shorts.append(" / ".join(self.net_names[k] for k, _ in best))
        if shorts:
            self.notes.append(f"copper of different nets touches ({len(shorts)} place(s), e.g. {shorts[0]}); "
                              "copper of unknown net there takes the net with most objects")
        needs = np.zeros(count, dtype=bool)
        needs[label[label_net == _UNKNOWN]] = True
        needs &= names == _UNKNOWN
        if self.netlist is not None and needs.any():
            self._names_from_netlist(label, names, needs, geoms_of)
        self._derived_names(label, names, needs & (names == _UNKNOWN), offsets, hole0, holes)
        return names

    def _names_from_netlist(self, label, names, needs, geoms_of) -> None:
        """Name the components that need a name from the netlist's test points:
        a point names every component whose copper on the point's access layer
        (any layer for A00) it lies on; each point votes once per component."""
        assert self.netlist is not None  # called only with a netlist
        points = [p for p in self.netlist.points if p.net is not None]
        if not points:
            return
        xy = np.array([(p.x, p.y) for p in points], dtype=np.float64)
        access = np.array([0 if p.access is None else p.access for p in points], dtype=np.int64)
        net_names = sorted({str(p.net) for p in points})
        net_of = {name: k for k, name in enumerate(net_names)}
        point_net = np.array([net_of[str(p.net)] for p in points], dtype=np.int64)
        pairs = []
        for i, (geoms, radius, node) in enumerate(geoms_of):
            mine = np.flatnonzero((access == 0) | (access == self.numbers[i]))
            if not len(geoms) or not len(mine):
                continue
            at, hit = _points_on(geoms, radius, shapely.points(xy[mine]))
            pairs.append(np.column_stack((mine[at], label[node[hit]])))
        if not pairs:
            return
        pt_comp = np.unique(np.concatenate(pairs), axis=0)  # one vote per point and component
        pt_comp = pt_comp[needs[pt_comp[:, 1]]]
        votes: dict[int, Counter] = {}
        tally, count = np.unique(np.column_stack((pt_comp[:, 1], point_net[pt_comp[:, 0]])), axis=0,
                                 return_counts=True)
        for (comp, net), n in zip(tally.tolist(), count.tolist()):
            votes.setdefault(comp, Counter())[net_names[net]] += n
        conflicts = 0
        for comp, counter in votes.items():
            best = sorted(counter.items(), key=lambda kv: (-kv[1], kv[0]))
            names[comp] = self.net(best[0][0])
            conflicts += len(best) > 1
        if conflicts:
            self.notes.append(f"{conflicts} piece(s) of connected copper carry test points of more than one net in "
                              f"{self.netlist.path}; each took the net with most points")

    def _derived_names(self, label, names, todo, offsets, hole0, holes) -> None:
        """Name the components no TO.N or test point named: ``derived:...``
        if they join two or more terminals (pads, plated holes), else they
        are unconnected copper."""
        if not todo.any():
            return
        # per layer, then joined into arrays below
        comp: Any = []
        layer: Any = []
        x: Any = []
        y: Any = []
        term_comp, term_key = [label[hole0:]], [_keys(holes["x"], holes["y"])]
        for i, gl in enumerate(self.layers):
            p0, s0 = offsets[i]
            t = gl.traces
            comp.append(label[p0:p0 + len(t)])
            layer.append(np.full(len(t), i))
            x.append(np.minimum(t.x1, t.x2))
            y.append(np.minimum(t.y1, t.y2))
            bounds = np.array([sh.polygon.bounds for sh in gl.shapes]).reshape(-1, 4)
            comp.append(label[s0:s0 + len(gl.shapes)])
            layer.append(np.full(len(gl.shapes), i))
            x.append(bounds[:, 0])
            y.append(bounds[:, 1])
            pads = np.array([k for k, sh in enumerate(gl.shapes) if sh.kind == "pad" and sh.at is not None],
                            dtype=np.int64)
            px = np.array([gl.shapes[k].at[0] for k in pads.tolist()], dtype=np.float64)
            py = np.array([gl.shapes[k].at[1] for k in pads.tolist()], dtype=np.float64)
            at_hole = self.pad_hole[i][pads] if len(pads) else pads  # a pad at a hole is that hole's terminal
            on = at_hole >= 0
            px[on], py[on] = holes["x"][at_hole[on]], holes["y"][at_hole[on]]
            term_comp.append(label[s0 + pads])
            term_key.append(_keys(px, py))
        comp, layer, x, y = (np.concatenate(v) for v in (comp, layer, x, y))
        # a net joins at least two terminals (pads or plated holes; a via's pads
        # and its hole are one terminal): copper reaching fewer is floating
        terminals = np.unique(np.column_stack((np.concatenate(term_comp), np.concatenate(term_key))), axis=0)
        reaches = np.bincount(terminals[:, 0], minlength=len(names)) >= 2 if len(terminals) else \
            np.zeros(len(names), dtype=bool)
        mine = np.flatnonzero(todo[comp])
        order = mine[np.lexsort((np.round(y[mine], 3), np.round(x[mine], 3), layer[mine], comp[mine]))]
        firsts = order[np.r_[True, comp[order][1:] != comp[order][:-1]]] if len(order) else order
        names[todo] = NO_NET  # a hole with no copper around it stays on no net
        derived = 0
        unconnected: Counter = Counter()
        for k in firsts.tolist():
            c = int(comp[k])
            where = self.stackup.layers[int(layer[k])].name
            if reaches[c]:
                names[c] = self.net(f"derived:{where}@{x[k]:.3f},{y[k]:.3f}")
                derived += 1
            else:
                unconnected[where] += 1
        if derived:
            self.notes.append(f"{derived} net(s) without a name in the package were found by connectivity and "
                              "named derived:<layer>@<x>,<y> (their lowest-left copper)")
        if unconnected:
            self.notes.append("unconnected copper (no net name, no test point, fewer than two pads or holes): " +
                              ", ".join(f"{n} island(s) on {name}" for name, n in sorted(unconnected.items())))

    # ---- vias, pieces, regions --------------------------------------------------------

    def _pads_at_holes(self, holes: dict) -> list[np.ndarray]:
        """Per layer, per shape: the plated hole (index into ``holes``) whose
        centre is within :data:`PAD_AT_HOLE_MM` of the shape's flash point and
        whose span includes the layer, the nearest if several; -1 for none
        and for shapes that are not flashes."""
        out = []
        tree = cKDTree(np.column_stack((holes["x"], holes["y"]))) if len(holes["x"]) else None
        for i, layer in enumerate(self.layers):
            match = np.full(len(layer.shapes), -1, dtype=np.int64)
            flashes = [k for k, sh in enumerate(layer.shapes) if sh.kind == "pad" and sh.at is not None]
            if tree is not None and flashes:
                at = np.array([layer.shapes[k].at for k in flashes], dtype=np.float64)
                dist, near = tree.query(at, k=8, distance_upper_bound=PAD_AT_HOLE_MM)
                for row, k in enumerate(flashes):
                    for d, h in zip(dist[row].tolist(), near[row].tolist()):
                        if math.isinf(d):
                            break
                        if holes["first"][h] <= i <= holes["last"][h]:
                            match[k] = h
                            break
            out.append(match)
        return out

    def _hole_nets_from_copper(self, holes: dict, piece_nets: list[np.ndarray],
                               shape_nets: list[np.ndarray]) -> np.ndarray:
        """The net of each plated hole when every copper object has a known
        net: the net of the copper its centre lies on (a pad at it first,
        else any pad, region or trace the centre is within, with
        :data:`TOUCH_TOLERANCE_MM`), on the layers it spans; NO_NET if none."""
        n = len(holes["x"])
        nets = np.full(n, NO_NET, dtype=np.int64)
        if not n:
            return nets
        for i, _layer in enumerate(self.layers):  # a pad at the hole decides
            at = self.pad_hole[i]
            k = np.flatnonzero(at >= 0)
            known = shape_nets[i][k] >= 0
            free = nets[at[k[known]]] == NO_NET
            nets[at[k[known][free]]] = shape_nets[i][k[known][free]]
        points = shapely.points(holes["x"], holes["y"])
        for i, layer in enumerate(self.layers):
            todo = np.flatnonzero((nets == NO_NET) & (holes["first"] <= i) & (holes["last"] >= i))
            if not len(todo):
                continue
            geoms, radius, node = _layer_geometry(layer, (0, len(layer.traces)))
            if not len(geoms):
                continue
            net_of = np.concatenate([piece_nets[i], shape_nets[i]])
            at, hit = _points_on(geoms, radius, points[todo])
            good = net_of[node[hit]] >= 0
            at, hit = at[good], hit[good]
            # lowest object index first: deterministic when copper of two nets overlaps
            order = np.lexsort((hit, at))
            at, hit = at[order], hit[order]
            first = np.r_[True, at[1:] != at[:-1]] if len(at) else np.zeros(0, dtype=bool)
            nets[todo[at[first]]] = net_of[node[hit[first]]]
        return nets

    def _note_holes_without_net(self, holes: dict) -> None:
        n = len(holes["x"])
        if not n or self.hole_nets is None:
            return
        lost = int(np.count_nonzero(self.hole_nets < 0))
        if lost:
            self.notes.append(f"{lost} of {n} plated hole(s) lie on no copper of a known net and got no net "
                              f"(a pad counts as the hole's when their centres are within "
                              f"{PAD_AT_HOLE_MM * 1000:g} um)")

    def _vias(self, holes: dict, shape_nets: list[np.ndarray]) -> tuple[Vias, set]:
        """Vias from plated via holes (and holes of unknown function); the pad
        is the largest flash at the hole (:meth:`_pads_at_holes`) on the
        layers it spans; the net is the hole's (:attr:`hole_nets`)."""
        keep = np.array([k for k, f in enumerate(holes["function"]) if f in ("", "ViaDrill") or f.startswith("Via")],
                        dtype=np.int64)
        is_via = np.zeros(len(holes["x"]), dtype=bool)
        is_via[keep] = True
        pad_size = np.zeros(len(holes["x"]))
        used: set[tuple[int, int]] = set()
        for i, layer in enumerate(self.layers):
            for k in np.flatnonzero(self.pad_hole[i] >= 0).tolist():
                h = int(self.pad_hole[i][k])
                s = layer.shapes[k]
                x0, y0, x1, y1 = s.polygon.bounds
                pad_size[h] = max(pad_size[h], min(x1 - x0, y1 - y0))
                if is_via[h] and s.function in (None, "ViaPad") and _is_round(s.polygon):
                    used.add((i, k))  # the via's round pad stands for it; any other shape stays copper
        d = holes["d"][keep]
        assert self.hole_nets is not None  # _connect named the holes
        vias = Vias(holes["x"][keep].astype(np.float64), holes["y"][keep].astype(np.float64), d.astype(np.float64),
                    np.maximum(pad_size[keep], d).astype(np.float64), holes["first"][keep].astype(np.int32),
                    holes["last"][keep].astype(np.int32), self.hole_nets[keep].astype(np.int32))
        return vias, used

    def _pieces(self, piece_nets: list[np.ndarray]) -> tuple[Pieces, list[str]]:
        cols: dict[str, list[np.ndarray]] = {k: [] for k in Pieces.__dataclass_fields__}
        sources: list[str] = []
        for i, layer in enumerate(self.layers):
            t = layer.traces
            if len(t) == 0:
                continue
            for k in ("x1", "y1", "x2", "y2", "width", "ordinal"):
                cols[k].append(getattr(t, k))
            cols["net"].append(piece_nets[i])
            cols["layer"].append(np.full(len(t), i))
            cols["source"].append(np.asarray(t.stroke, dtype=np.int64) + len(sources))
            sources += [f"{layer.path}: line {int(line)}" for line in t.stroke_line]
        if not cols["x1"]:
            return Pieces.empty(), sources
        return Pieces.from_columns(*(np.concatenate(cols[k]) for k in Pieces.__dataclass_fields__)), sources

    def _regions(self, shape_nets: list[np.ndarray], pad_used: set) -> list[Region]:
        out = []
        for i, layer in enumerate(self.layers):
            for k, s in enumerate(layer.shapes):
                if (i, k) in pad_used:
                    continue
                net = int(shape_nets[i][k])
                for part in shapely.get_parts(s.polygon):
                    if part.area > 0:
                        where = f"{layer.path}: line {s.line}" if s.line else layer.path
                        out.append(Region(i, net if net >= 0 else NO_NET, orient(part, 1.0), where))
        return out


#: Net label meaning "not known yet" in the builder's global-index arrays.
_UNKNOWN = -2


def _is_round(polygon) -> bool:
    """Whether a pad is a disc (its area at least 97 % of the inscribed
    circle's of its square bounding box): only then may a via's round pad
    of the same diameter stand for it without losing copper."""
    x0, y0, x1, y1 = polygon.bounds
    w, h = x1 - x0, y1 - y0
    return abs(w - h) <= 0.01 * max(w, h) and polygon.area >= 0.97 * math.pi / 4 * w * h and \
        polygon.area <= 1.01 * math.pi / 4 * w * h


def _keys(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """One int64 per position on the ``PAD_AT_HOLE_MM`` grid (x in the high half)."""
    gx = np.round(np.asarray(x, dtype=np.float64) / PAD_AT_HOLE_MM).astype(np.int64)
    gy = np.round(np.asarray(y, dtype=np.float64) / PAD_AT_HOLE_MM).astype(np.int64)
    return (gx << 32) + (gy & 0xFFFFFFFF)


def _touching(geoms: np.ndarray, radius: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index pairs (a < b) of one layer's copper that touches: centre lines
    (traces, hole centres) carry half their width in ``radius``, polygons
    (pads, pours) radius 0; a and b touch when their distance is at most
    ``radius[a] + radius[b] + TOUCH_TOLERANCE_MM``.

    Candidates come from the bounding boxes grown by that reach (one bulk
    STRtree query without a predicate); the exact test is GEOS's
    distance-within with the polygon of a pair first and prepared, so a
    pour of thousands of vertices is indexed once instead of measured
    edge by edge against every trace near it. (A ``dwithin`` predicate in
    the tree query measured large pours unprepared: 283 s of a 297 s load
    of a 100 k-piece six-layer package without net attributes, against
    seconds this way.)"""
    if len(geoms) < 2:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    grow = radius + float(radius.max()) + TOUCH_TOLERANCE_MM
    bounds = shapely.bounds(geoms)
    boxes = shapely.box(bounds[:, 0] - grow, bounds[:, 1] - grow, bounds[:, 2] + grow, bounds[:, 3] + grow)
    a, b = shapely.STRtree(geoms).query(boxes)
    keep = a < b
    a, b = a[keep], b[keep]
    polygon = shapely.get_type_id(geoms) == shapely.GeometryType.POLYGON
    swap = polygon[b] & ~polygon[a]  # the polygon of a mixed pair goes first, to be prepared
    first, second = np.where(swap, b, a), np.where(swap, a, b)
    prepared = geoms.copy()
    shapely.prepare(prepared[polygon])
    touch = shapely.dwithin(prepared[first], geoms[second], radius[a] + radius[b] + TOUCH_TOLERANCE_MM)
    return a[touch], b[touch]


def _points_on(geoms: np.ndarray, radius: np.ndarray, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(point index, copper index) of every point that lies on a layer's
    copper (within ``radius`` of its centre line or inside its polygon, to
    TOUCH_TOLERANCE_MM): bounding-box candidates, then distance-within with
    the copper prepared, as :func:`_touching` does."""
    if not len(geoms) or not len(points):
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    grow = float(radius.max()) + TOUCH_TOLERANCE_MM
    xy = shapely.get_coordinates(points)
    boxes = shapely.box(xy[:, 0] - grow, xy[:, 1] - grow, xy[:, 0] + grow, xy[:, 1] + grow)
    at, hit = shapely.STRtree(geoms).query(boxes)
    prepared = geoms.copy()
    polygon = shapely.get_type_id(geoms) == shapely.GeometryType.POLYGON
    shapely.prepare(prepared[polygon])
    on = shapely.dwithin(prepared[hit], points[at], radius[hit] + TOUCH_TOLERANCE_MM)
    return at[on], hit[on]


def _layer_geometry(layer: GerberLayer, offsets: tuple[int, int]):
    """(geometries, radius, node id) of a layer's pieces (centrelines with
    half their width) and shapes (polygons, radius 0)."""
    t = layer.traces
    p0, s0 = offsets
    if len(t):
        coords = np.stack([np.column_stack((t.x1, t.y1)), np.column_stack((t.x2, t.y2))], axis=1)
        lines = shapely.linestrings(coords)
    else:
        lines = np.empty(0, dtype=object)
    shapes = np.array([s.polygon for s in layer.shapes], dtype=object)
    geoms = np.concatenate([lines, shapes]) if len(shapes) else lines
    radius = np.concatenate([np.asarray(t.width, dtype=np.float64) / 2, np.zeros(len(shapes))])
    node = np.concatenate([p0 + np.arange(len(t)), s0 + np.arange(len(shapes))])
    return geoms, radius, node


def _copper_union(layer: GerberLayer):
    t = layer.traces
    parts = []
    if len(t):
        coords = np.stack([np.column_stack((t.x1, t.y1)), np.column_stack((t.x2, t.y2))], axis=1)
        parts += list(shapely.buffer(shapely.linestrings(coords), np.asarray(t.width) / 2,
                                     quad_segs=_ROUND_SEGMENTS // 4))
    parts += [s.polygon for s in layer.shapes]
    return shapely.union_all(parts) if parts else None


def _no_traces(cls):
    f = np.zeros(0, dtype=np.float64)
    i = np.zeros(0, dtype=np.int64)
    return cls(f, f.copy(), f.copy(), f.copy(), f.copy(), i, i.copy(), i.copy(), i.copy())
