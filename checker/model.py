"""The board model every input door produces and every later layer reads.

Geometry is in millimetres, in board coordinates (x right, y up). Straight
copper pieces are kept as parallel numpy arrays (one row a piece) so the
finder can work on whole layers at once; per-piece Python objects never enter
the hot path.

A *piece* is one straight stretch of a track: the copper rectangle of the
given width centred on the segment (x1, y1)-(x2, y2). Round end caps are not
part of the rectangle; on a polyline they are covered by the neighbouring
piece, and at a free end they add at most width/2 of length, which the
coupling estimates ignore. Arcs are replaced by chords on import (see
``ARC_CHORD_TOLERANCE_MM``), so every later layer sees only pieces.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import shapely

LayerRole = Literal["signal", "plane", "mixed"]
LAYER_ROLES: tuple[str, ...] = ("signal", "plane", "mixed")

#: Largest distance (mm) between an arc and the chords that replace it.
ARC_CHORD_TOLERANCE_MM = 0.002

#: Net index used for copper that belongs to no net.
NO_NET = -1


@dataclass(frozen=True)
class CopperLayer:
    """One copper layer of the stackup.

    ``role``: ``signal`` (routed traces), ``plane`` (a reference plane that
    shields the layers on either side from each other) or ``mixed`` (traces
    and pours; it does not count as a shield).
    """

    name: str
    role: LayerRole
    thickness_mm: float
    #: values the input did not give and a documented default supplied
    #: (``("thickness",)``); reports mark them "common practice, not your board"
    assumed: tuple[str, ...] = ()


@dataclass(frozen=True)
class Dielectric:
    """The insulating layer between two neighbouring copper layers."""

    thickness_mm: float
    er: float
    loss_tangent: float | None = None
    name: str | None = None
    #: values the input did not give and a documented default supplied
    #: (``("er",)``, ``("thickness",)``); reports mark them
    assumed: tuple[str, ...] = ()


@dataclass(frozen=True)
class Stackup:
    """Copper layers top to bottom; ``dielectrics[i]`` lies between
    ``layers[i]`` and ``layers[i + 1]``.

    ``mask_top`` / ``mask_bottom``: the solder mask over the outer surface of
    the first / last copper layer, or ``None`` (bare board). A mask is a
    ``Dielectric`` whose ``thickness_mm`` is the mask's thickness measured
    from the copper layer's outer surface (over the copper); how the field
    models place it is described in ``checker.physics.broadside``.
    ``mask_style``: ``"flat"`` (the outer copper band filled with mask and a
    slab of its thickness over it) or ``"conformal"`` (the mask follows the
    copper: its thickness over the laminate, over each trace's top and down
    each trace's sides); the rule file's ``settings.solder_mask`` sets it.
    """

    layers: tuple[CopperLayer, ...]
    dielectrics: tuple[Dielectric, ...]
    mask_top: Dielectric | None = None
    mask_bottom: Dielectric | None = None
    mask_style: str = "flat"

    def __post_init__(self) -> None:
        if len(self.dielectrics) != max(len(self.layers) - 1, 0):
            raise ValueError("a stackup needs one dielectric between each pair of copper layers")
        if self.mask_style not in ("flat", "conformal"):
            raise ValueError(f"mask_style must be 'flat' or 'conformal', got {self.mask_style!r}")

    def index(self, name: str) -> int:
        """Position of the copper layer called ``name`` (top = 0)."""
        for i, layer in enumerate(self.layers):
            if layer.name == name:
                return i
        raise KeyError(name)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(layer.name for layer in self.layers)


@dataclass(frozen=True)
class Net:
    """A net; ``partner`` names the other half of a declared differential pair."""

    name: str
    partner: str | None = None


@dataclass
class Pieces:
    """Straight copper pieces as parallel arrays (struct of arrays).

    ``net`` indexes ``Board.nets`` (``NO_NET`` for none), ``layer`` indexes
    ``Stackup.layers``, ``source`` indexes ``Board.sources`` (the track or arc
    a piece came from) and ``ordinal`` is the piece's position along that
    source, so consecutive pieces of one polyline have ordinals i and i + 1.
    """

    x1: np.ndarray
    y1: np.ndarray
    x2: np.ndarray
    y2: np.ndarray
    width: np.ndarray
    net: np.ndarray
    layer: np.ndarray
    source: np.ndarray
    ordinal: np.ndarray

    @classmethod
    def empty(cls) -> "Pieces":
        f = np.zeros(0, dtype=np.float64)
        i = np.zeros(0, dtype=np.int32)
        return cls(f, f.copy(), f.copy(), f.copy(), f.copy(), i, i.copy(), i.copy(), i.copy())

    @classmethod
    def from_columns(cls, x1, y1, x2, y2, width, net, layer, source, ordinal) -> "Pieces":
        """Build from any sequences, converting to the canonical dtypes."""
        f = lambda a: np.ascontiguousarray(a, dtype=np.float64)  # noqa: E731
        i = lambda a: np.ascontiguousarray(a, dtype=np.int32)  # noqa: E731
        return cls(f(x1), f(y1), f(x2), f(y2), f(width), i(net), i(layer), i(source), i(ordinal))

    def __len__(self) -> int:
        return int(self.x1.shape[0])

    @property
    def length(self) -> np.ndarray:
        return np.hypot(self.x2 - self.x1, self.y2 - self.y1)

    def take(self, index: np.ndarray) -> "Pieces":
        """The pieces at ``index`` (a new object; arrays are copied)."""
        return Pieces(*(getattr(self, n)[index] for n in self.__dataclass_fields__))


@dataclass(frozen=True)
class Region:
    """A filled copper shape (pour, plane shape); ``net`` is ``NO_NET`` for
    unconnected copper."""

    layer: int
    net: int
    polygon: shapely.Polygon
    source: str


@dataclass
class Vias:
    """Plated holes as parallel arrays; layers are stackup indices."""

    x: np.ndarray
    y: np.ndarray
    drill: np.ndarray
    pad: np.ndarray
    first_layer: np.ndarray
    last_layer: np.ndarray
    net: np.ndarray

    @classmethod
    def empty(cls) -> "Vias":
        f = np.zeros(0, dtype=np.float64)
        i = np.zeros(0, dtype=np.int32)
        return cls(f, f.copy(), f.copy(), f.copy(), i, i.copy(), i.copy())

    def __len__(self) -> int:
        return int(self.x.shape[0])


@dataclass
class Board:
    """Everything couplint knows about one board revision.

    ``sources[k]`` says where source ``k`` of the pieces came from, in the
    input's own terms (for JSON: ``tracks[3]`` or ``arcs[0]``), so a finding
    can point back into the file. ``notes``: what the reader had to say
    about the input (derived net names, unconnected copper, assumed layer
    roles); reports show them with the analysis notes. ``files``: how a
    fabrication package's files were read.
    """

    name: str
    path: str
    stackup: Stackup
    nets: tuple[Net, ...]
    pieces: Pieces
    sources: tuple[str, ...] = ()
    regions: tuple[Region, ...] = ()
    vias: Vias = field(default_factory=Vias.empty)
    outline: shapely.Polygon | None = None
    notes: tuple[str, ...] = ()
    #: for a fabrication package: (file, read as, how it was decided) for
    #: every file, so a user can confirm what was inferred
    files: tuple[tuple[str, str, str], ...] = ()

    def net_index(self) -> dict[str, int]:
        return {net.name: i for i, net in enumerate(self.nets)}

    def partner_of(self) -> np.ndarray:
        """``partner_of()[i]`` is the net index of net i's declared
        differential-pair partner, or ``NO_NET``."""
        index = self.net_index()
        out = np.full(len(self.nets), NO_NET, dtype=np.int64)
        for i, net in enumerate(self.nets):
            if net.partner is not None and net.partner in index:
                out[i] = index[net.partner]
        return out

    def bounds(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of outline, pieces and regions."""
        xs: list[float] = []
        ys: list[float] = []
        p = self.pieces
        if len(p):
            half = float(p.width.max()) / 2
            xs += [float(min(p.x1.min(), p.x2.min())) - half, float(max(p.x1.max(), p.x2.max())) + half]
            ys += [float(min(p.y1.min(), p.y2.min())) - half, float(max(p.y1.max(), p.y2.max())) + half]
        shapes = [r.polygon for r in self.regions]
        if self.outline is not None:
            shapes.append(self.outline)
        for s in shapes:
            x0, y0, x1, y1 = s.bounds
            xs += [x0, x1]
            ys += [y0, y1]
        if not xs:
            return (0.0, 0.0, 0.0, 0.0)
        return (min(xs), min(ys), max(xs), max(ys))
