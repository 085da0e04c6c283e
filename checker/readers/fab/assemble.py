"""Join the files of a fabrication package into one :class:`Board`.

``load_package(paths, stackup=..., netlist=..., layers=...)`` is the
fabrication door's counterpart of ``load_board``: it sorts the package
(``package.py``), reads every file with its format's reader, and builds the
same model the JSON door builds.

* **Stackup**: from the stackup YAML given with ``--stackup`` if any, else
  from the package's Gerber job file; with neither it stops — couplint never
  assumes a thickness or a permittivity. Copper layer *i* of the stackup is
  the Gerber file whose ``TF.FileFunction`` says ``L<i>``; a layer without
  a file (or a file without a layer) is an error.
* **Layer roles**: the ``TF.FileFunction`` type field (``Plane``,
  ``Signal``, ``Mixed``), else the role the stackup YAML gives, else
  ``mixed``, with a note. The type field is optional in Gerber X2 and
  many exports leave it out: that is accepted as it is. The declared role
  is a hint for the reports only; the analysis decides planes and
  shielding from each layer's reference-net copper (``checker.shielding``).
* **Copper**: round-aperture draws and arcs become pieces (one source per
  stroke), every other copper object becomes a region; a via pad flashed
  over a plated hole becomes part of that via instead. A negative layer
  (``TF.FilePolarity,Negative``) is a plane: the board outline (or, without
  a Profile file, the bounding box of all copper) minus what the file draws.
* **Nets**: ``TO.N`` where the exporter gave it. Copper without it gets its
  net by connectivity — objects that touch on a layer, joined through plated
  holes, are one net — named after any ``TO.N`` in it, else an IPC-D-356
  test point on it, else ``derived:<layer>@<x>,<y>`` (a name that says it
  was derived) if it joins two or more terminals (pads, plated holes; a
  via's pads and hole are one). Copper that joins fewer and has no name is
  *unconnected copper*: it keeps no net and a note counts it per layer. An empty
  ``TO.N`` or ``N/C`` marks copper the exporter says is on no net.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
from pathlib import Path

import numpy as np
import shapely
from scipy.spatial import cKDTree
from shapely.geometry.polygon import orient

from ...bounds import check_geometry, check_stackup
from ...errors import FabError, UsageError
from ...model import Board
from ..ipc2581 import read_ipc2581
from .build import PAD_AT_HOLE_MM, board_from_layers
from .excellon import read_excellon
from .gerber import read_gerber
from .identify import number_copper
from .ipc356 import read_ipc356
from .jobfile import read_job
from .layer import DrillFile, GerberLayer, JobStackup, Netlist
from .package import Member, Sorted, collect, parse_layer_override
from .stackup_yaml import load_stackup_yaml


def load_package(paths: list[str], stackup: str | None = None, netlist: str | None = None,
                 layers: list[str] | None = None) -> Board:
    """Read the fabrication package named by ``paths`` (one folder, one
    ``.zip``, or a list of files) into a Board. ``stackup``: a stackup YAML
    file (wins over the job file); ``netlist``: an IPC-D-356 file outside
    the package; ``layers``: ``FILE=L<n>[,role]`` / ``FILE=profile`` /
    ``FILE=ignore`` identifications."""
    overrides = dict(parse_layer_override(text) for text in (layers or []))
    found = collect(paths, overrides)
    if found.ipc2581:
        board = _from_ipc2581(found, stackup, netlist, layers)
        check_stackup(board.stackup, board.path)
        check_geometry(board)
        return board
    notes: list[str] = []
    job = _stackup_of(found, stackup, notes)
    check_stackup(job.stackup, job.path)  # before any Gerber is read
    copper = _copper_files(found, job, notes)
    # the small files first, so a bad drill file or netlist fails in seconds, naming itself
    drills = [_plating_by_name(_read(m, read_excellon), notes) for m in found.drills]
    notes += [f"{d.path}: {n}" for d in drills for n in d.notes]
    nets_file = _netlist_of(found, netlist, notes)
    outline = _outline(found.profile, notes)
    gerbers = {n: _read(member, read_gerber) for n, (member, _) in copper.items()}
    drills = [_fit_to_pads(d, gerbers, notes) for d in drills]
    given = {n: role for n, (_, role) in copper.items()}
    files = {n: member.name for n, (member, _) in copper.items()}
    notes += [f"not read: {s}" for s in found.skipped]
    board = board_from_layers(found.name, found.path, job, gerbers, drills, nets_file, outline, notes,
                              given_roles=given, file_names=files)
    check_geometry(board)
    return dataclasses.replace(board, files=tuple(sorted((f, r, h or "") for f, r, h in found.read_as)))


def _from_ipc2581(found: Sorted, stackup: str | None, netlist: str | None, layers: list[str] | None) -> Board:
    """The board of the package's IPC-2581 file: it carries stackup, layers,
    nets and drills itself, so the Gerber-package options do not apply and
    any other file is not read (a note names them)."""
    first = found.ipc2581[0]
    if len(found.ipc2581) > 1:
        raise FabError(found.ipc2581[1].name, None, f"a second IPC-2581 file; the first is {first.name} "
                                                    "(one board per check)")
    for option, value in (("--stackup", stackup), ("--netlist", netlist), ("--layer", layers)):
        if value:
            raise UsageError(f"{option} is for Gerber packages; {first.name} is an IPC-2581 file, which carries "
                             "its own stackup, layers and nets")
    board = _read(first, read_ipc2581)
    others = [name for name, _, _ in found.read_as if name != first.name] + \
        [m.name for m, _ in found.guessed] + [s.split(" (")[0] for s in found.skipped]
    notes = list(board.notes)
    if others:
        notes.append(f"the board is read from the IPC-2581 file {first.name}; "
                     f"not read: {', '.join(sorted(set(others)))}")
    return dataclasses.replace(board, name=found.name if len(found.read_as) > 1 else board.name,
                               notes=tuple(notes), files=((first.name, "IPC-2581 board", "content"),))


def _read(member: Member, reader):
    stream = member.open()
    try:
        return reader(stream, member.name)
    finally:
        stream.close()


# --------------------------------------------------------------------------- stackup and layers


def _stackup_of(found: Sorted, stackup: str | None, notes: list[str]) -> JobStackup:
    if stackup is not None:
        job = load_stackup_yaml(stackup)
        if found.jobs:
            notes.append(f"stackup from {stackup} (--stackup); the job file {found.jobs[0].name} was not used for it")
        return job
    if len(found.jobs) > 1:
        raise FabError(found.jobs[1].name, None, f"a second Gerber job file; the first is {found.jobs[0].name}")
    if not found.jobs:
        raise FabError(found.path, None, "no stackup: the package has no Gerber job file (.gbrjob) and no "
                                         "--stackup FILE was given; couplint does not assume layer "
                                         "thicknesses or permittivities (see docs/fab-package.md)")
    return _read(found.jobs[0], read_job)


def _copper_files(found: Sorted, job: JobStackup, notes: list[str]) -> dict[int, tuple[Member, str | None]]:
    """Copper layer number -> (file, role given), every stackup layer once:
    the files identified by X2, ``--layer`` or the naming rule, then the job
    file's ``FilesAttributes`` for files without attributes, then the
    trade's naming conventions and the content (:mod:`.identify`)."""
    copper = dict(found.copper)
    guessed = list(found.guessed)
    if guessed and job.files:
        by_base = {Path(path).name.lower(): function for path, function, _ in job.files}
        left = []
        for member, guess in guessed:
            function = by_base.get(Path(member.name.rsplit(":", 1)[-1]).name.lower(), "")
            fields = [f.strip() for f in function.split(",")]
            if fields[0] == "Copper" and len(fields) > 1 and re.fullmatch(r"L\d+", fields[1]):
                n = int(fields[1][1:])
                if n in copper:
                    raise FabError(member.name, None, f"copper layer L{n} again (job file FilesAttributes): "
                                                      f"{copper[n][0].name} holds it too")
                role = fields[3].lower() if len(fields) > 3 and fields[3] in ("Plane", "Signal", "Mixed") else None
                copper[n] = (member, role)
                found.read_as.append((member.name, f"copper L{n}", f"job file FilesAttributes: {function}"))
            else:
                left.append((member, guess))
        guessed = left
    wanted = set(job.copper_numbers)
    if guessed:
        roles = [layer.role for layer in job.stackup.layers] if job.roles_given else None
        placed = number_copper([(m.name, g) for m, g in guessed], {n: m.name for n, (m, _) in copper.items()},
                               len(job.copper_numbers), roles, found.path)
        members = {m.name: m for m, _ in guessed}
        for n, (name, guess) in placed.items():
            copper[n] = (members[name], guess.role)
            found.read_as.append((name, f"copper L{n}" + (f", {guess.role}" if guess.role else ""), guess.why))
        notes.append("copper layers without X2 attributes identified from their file names and content; check "
                     "the mapping (couplint prints it as 'package files') and correct it with --layer FILE=L<n>: "
                     + "; ".join(f"{Path(name).name} = L{n}" for n, (name, _) in sorted(placed.items())))
    have = set(copper)
    missing = sorted(wanted - have)
    extra = sorted(have - wanted)
    if extra:
        member = copper[extra[0]][0]
        raise FabError(member.name, None, f"copper layer L{extra[0]}, but the stackup ({job.path}) has "
                                          f"{len(wanted)} copper layers (L{min(wanted)}..L{max(wanted)})")
    if missing:
        unnamed = [s for s in found.skipped if "--layer" in s]
        hint = f"; files not identified: {', '.join(s.split(' (')[0] for s in unnamed)} (name them with --layer " \
               f"FILE=L<n>)" if unnamed else ""
        raise FabError(found.path, None, f"no Gerber file for copper layer(s) "
                                         f"{', '.join(f'L{n}' for n in missing)} of the stackup ({job.path}){hint}")
    return {n: copper[n] for n in job.copper_numbers}


def _fit_to_pads(drill: DrillFile, gerbers: dict[int, GerberLayer], notes: list[str]) -> DrillFile:
    """A drill file whose digit format was inferred, with other plausible
    readings (``DrillFile.other_readings``), is read the way that puts the
    most holes on a pad (a flash within :data:`PAD_AT_HOLE_MM`); the
    inferred reading stays unless another lands more, with a note."""
    if not drill.other_readings or not len(drill.x):
        return drill
    at = [s.at for g in gerbers.values() for s in g.shapes if s.kind == "pad" and s.at is not None]
    if not at:
        return drill
    tree = cKDTree(np.asarray(at, dtype=np.float64))

    def landed(factor: float) -> int:
        dist, _ = tree.query(np.column_stack((drill.x, drill.y)) * factor, distance_upper_bound=PAD_AT_HOLE_MM)
        return int(np.count_nonzero(np.isfinite(dist)))

    best, best_n = (1.0, "the inferred format"), landed(1.0)
    for factor, words in drill.other_readings:
        n = landed(factor)
        if n > best_n:
            best, best_n = (factor, words), n
    if best[0] == 1.0:
        return drill
    notes.append(f"{drill.path}: read as {best[1]} instead of the inferred format: {best_n} of {len(drill.x)} holes "
                 f"then land on pads, {landed(1.0)} before")
    f = best[0]
    return dataclasses.replace(drill, x=drill.x * f, y=drill.y * f, slot_x1=drill.slot_x1 * f,
                               slot_y1=drill.slot_y1 * f, slot_x2=drill.slot_x2 * f, slot_y2=drill.slot_y2 * f,
                               other_readings=())


_NONPLATED_NAME = re.compile(r"(?:^|[^a-z])(npth|non[-_]?plated|unplated)(?:[^a-z]|$)", re.IGNORECASE)


def _plating_by_name(drill: DrillFile, notes: list[str]) -> DrillFile:
    """A drill file whose content does not say its plating and whose name
    says non-plated (``-NPTH``, ``non-plated``, ``unplated``: the trade's
    common naming) is read as non-plated, with a note; any other is plated
    (the assembly's default)."""
    base = Path(drill.path.rsplit(":", 1)[-1]).name
    if drill.plated is None and _NONPLATED_NAME.search(base):
        notes.append(f"{drill.path}: no plating attribute; non-plated by its name ({base}): its holes join nothing")
        return dataclasses.replace(drill, plated=False)
    return drill


def _netlist_of(found: Sorted, netlist: str | None, notes: list[str]) -> Netlist | None:
    if netlist is not None:
        from .ipc356 import load_ipc356
        same = [m for m in found.netlists if os.path.abspath(m.name) == os.path.abspath(netlist)]
        others = [m for m in found.netlists if m not in same]
        if others:
            notes.append(f"netlist from {netlist} (--netlist); {', '.join(m.name for m in others)} in the package "
                         "was not used")
        return load_ipc356(netlist)
    if len(found.netlists) > 1:
        raise FabError(found.netlists[1].name, None, f"a second IPC-D-356 netlist; the first is "
                                                     f"{found.netlists[0].name}")
    return _read(found.netlists[0], read_ipc356) if found.netlists else None


#: Outline segment ends closer than this (mm) are joined: exporters round
#: arc end points and chain coordinates differently (gaps of nanometres
#: are common); 5 um is far below any routed feature.
OUTLINE_SNAP_MM = 5e-3


def _outline(profile: Member | None, notes: list[str]) -> shapely.Polygon | None:
    """The board outline: the largest face the profile's draws enclose (and
    its regions), after segment ends within :data:`OUTLINE_SNAP_MM` are
    joined; ``None`` with a note if nothing closes."""
    if profile is None:
        return None
    drawn = _read(profile, read_gerber)
    t = drawn.traces
    ends = np.column_stack((np.concatenate([t.x1, t.x2]), np.concatenate([t.y1, t.y2]))) if len(t) else \
        np.zeros((0, 2))
    snapped = 0
    if len(ends):
        ends, snapped = _snap_points(ends, OUTLINE_SNAP_MM)
    n = len(t)
    lines = shapely.linestrings(np.stack([ends[:n], ends[n:]], axis=1)) if n else np.empty(0, dtype=object)
    lines = lines[~shapely.is_empty(lines)] if n else lines
    faces = [g for g in shapely.get_parts(shapely.polygonize(list(lines))) if g.area > 0] if len(lines) else []
    faces += [p for s in drawn.shapes for p in shapely.get_parts(s.polygon) if p.area > 0]
    if not faces:
        notes.append(f"the board outline in {profile.name} is not a closed shape (segment ends more than "
                     f"{OUTLINE_SNAP_MM * 1000:g} um apart); no outline used")
        return None
    if snapped:
        notes.append(f"board outline {profile.name}: {snapped} segment end(s) within {OUTLINE_SNAP_MM * 1000:g} um "
                     "of another were joined to close it")
    return orient(max(faces, key=lambda g: g.area), 1.0)


def _snap_points(xy: np.ndarray, tolerance: float) -> tuple[np.ndarray, int]:
    """Join the outline's loose ends: ``xy`` holds the segments' start
    points then their end points; an end no other end shares exactly is
    loose, and two loose ends of different segments that are each other's
    nearest, within ``tolerance``, are joined (the second moved onto the
    first). Ends are never chained, so a run of very short segments (an
    arc drawn in steps of a few um) keeps its shape. Returns the points and
    how many moved."""
    n = len(xy) // 2
    _, inverse, counts = np.unique(xy, axis=0, return_inverse=True, return_counts=True)
    loose = np.flatnonzero(counts[inverse.ravel()] == 1)
    if len(loose) < 2:
        return xy, 0
    k = min(3, len(loose))
    dist, near = cKDTree(xy[loose]).query(xy[loose], k=k, distance_upper_bound=tolerance)
    partner = np.full(len(loose), -1)
    for row in range(len(loose)):
        for d, j in zip(dist[row, 1:].tolist(), near[row, 1:].tolist()):
            if math.isinf(d):
                break
            if loose[j] % n != loose[row] % n:  # not the other end of the same segment
                partner[row] = j
                break
    out = xy.copy()
    moved = 0
    for row, j in enumerate(partner.tolist()):
        if j > row and partner[j] == row:  # each other's nearest: one join per pair
            out[loose[j]] = xy[loose[row]]
            moved += 1
    return out, moved


# --------------------------------------------------------------------------- the board


