r"""Transmission-line (near-end / far-end) crosstalk between two coupled traces.

For runs that are long against the aggressor's edge the lumped victim-node
model of ``checker.physics.crosstalk`` no longer holds: the coupled noise
travels along the victim as two waves, a backward one that arrives at the
victim's near end (NEXT) and a forward one that arrives at its far end
(FEXT). This module gives both from the per-unit-length matrices of the
cross-section.

Per-unit-length matrices
------------------------
``C`` is the Maxwell capacitance matrix of the real cross-section, from the
field solver (``checker.physics.fieldsolve``; positive diagonal, negative
off-diagonal, mutual ``Cm = -C[0, 1]``). ``L`` follows from a second solve of
the *same* geometry with every dielectric replaced by vacuum (capacitance
``C0``), because the magnetic field of a TEM/quasi-TEM line does not see the
(non-magnetic) dielectric:

.. math:: L = \mu_0 \varepsilon_0\, C_0^{-1}

(C. R. Paul, *Analysis of Multiconductor Transmission Lines*, 2nd ed., Wiley,
2008, ch. 3 and 5: per-unit-length parameters; the relation holds for a
homogeneous medium and, via the vacuum problem, for an inhomogeneous one;
chapter numbers from memory). Both solves use the same box and hence the same
grid (the grid depends on the geometry only, not on the permittivities), so
in a homogeneous dielectric ``C = er C0`` holds exactly on the grid and
``L C = I / v**2`` to rounding, whatever the discretisation error.

Roles and conventions
---------------------
Conductor 0 is the **aggressor** (a), conductor 1 the **victim** (v).
``Lm = L[0, 1] > 0`` and ``Cm = -C[0, 1] > 0``; "self" values are diagonal
entries: ``C = C[1, 1]`` (victim, Maxwell form, i.e. including ``Cm``) and
``L = L[1, 1]``. Each line's characteristic impedance and velocity are
taken with the other line at rest (weak coupling):
``Z_i = sqrt(L_ii / C_ii)``, ``v_i = 1 / sqrt(L_ii C_ii)``.

Weak-coupling crosstalk (derivation)
------------------------------------
Write the victim's telegrapher equations with the aggressor's wave
``V_a(t - z/v_a)``, ``I_a = V_a / Z_a`` as a source and neglect the
victim's back-action on the aggressor (weak coupling, Paul 2008, ch. 10 on
weak coupling and the inductive/capacitive split of crosstalk; from memory):

.. math::

    \partial_z V_v = -L_{vv}\,\partial_t I_v - L_m\,\partial_t I_a,\qquad
    \partial_z I_v = -C_{vv}\,\partial_t V_v + C_m\,\partial_t V_a .

The forward and backward victim waves ``2V_f = V_v + Z_v I_v`` and
``2V_b = V_v - Z_v I_v`` then obey

.. math::

    (\partial_z + \partial_t / v_v)\,2V_f = P\,\partial_t V_a,\quad
    (\partial_z - \partial_t / v_v)\,2V_b = -Q\,\partial_t V_a,

    P = C_m Z_v - L_m / Z_a,\qquad Q = C_m Z_v + L_m / Z_a

(the victim's own terms cancel because ``Z_v C_vv = 1/v_v = L_vv / Z_v``).
Integrating along the characteristics with both ends of the victim matched
(no reflections) and the aggressor matched at its far end (a single forward
wave on it):

* far end, equal velocities: :math:`V_f = \tfrac12 P\,\ell\, dV_a/dt`; for a
  ramp of 10-90 % rise time ``tr`` (taken as the full ramp),
  ``dV_a/dt = V1/tr``, so :math:`V_f/V_1 = k_f\,\ell/t_r` with
  ``kf_per_s = P/2`` (s/m).
* near end: :math:`V_b(t) = K_b\,[V_a(t) - V_a(t - \ell s)]` with
  :math:`s = 1/v_a + 1/v_v` and :math:`K_b = Q / (2s)`: a plateau ``Kb V1``
  once the round trip ``ell s`` exceeds ``tr``, i.e. for
  ``ell >= Lsat = tr / s``, and ``Kb V1 ell / Lsat`` below it.

For two equal traces (``Z_a = Z_v = Z``, ``v_a = v_v = v``) these are the
textbook forms

.. math::

    K_b = \tfrac14\Big(\frac{C_m}{C} + \frac{L_m}{L}\Big),\qquad
    \frac{V_f}{V_1} = \tfrac12\Big(\frac{C_m}{C} - \frac{L_m}{L}\Big)
                      \frac{\ell}{v\,t_r},\qquad
    L_{sat} = \frac{t_r v}{2}

(H. W. Johnson & M. Graham, *High-Speed Digital Design: A Handbook of Black
Magic*, Prentice Hall, 1993, ch. 5 on crosstalk; S. H. Hall, G. W. Hall &
J. A. McCall, *High-Speed Digital System Design*, Wiley, 2000, ch. 3;
E. Bogatin, *Signal and Power Integrity -- Simplified*, 3rd ed., Prentice
Hall, 2018, ch. 10 on crosstalk; chapter numbers from memory). Many texts
write the far-end term with the opposite sign inside,
``FEXT = -1/2 (Lm/L - Cm/C) ell/(v tr)``, which is the same thing.

**Sign convention** (stated once, used everywhere here): ``kf_per_s`` is
``P/2 = (Cm Zv - Lm/Za)/2``; negative means the far-end pulse has the
opposite polarity to the aggressor's edge (inductive coupling dominates: the
usual case for microstrip, air above). ``kb`` is always positive (near-end
noise has the polarity of the edge). ``Crosstalk.fext_v`` and ``next_v`` are
magnitudes; the polarity is the sign of ``kf_per_s``.

Why not ``Cm/C_vv - Lm/L_vv`` for unequal traces: in a homogeneous dielectric
the far-end noise vanishes for *any* two lines (both modes travel at
``c0/sqrt(er)``), and ``P`` does vanish there (``L = C^-1 / v^2`` gives
``Cm Z_v = Lm / Z_a`` exactly), whereas the victim-only ratio difference
does not when the traces differ in width (``tests/test_tline.py`` shows
both). ``P`` and ``Q`` are the forms derived above; for equal traces they
reduce to the textbook ones.

Validity and assumptions
------------------------
* Quasi-static TEM, lossless, uniform coupled section; weak coupling
  (``Kb``, ``|kf| ell / tr`` well below 1); victim matched at both ends and
  aggressor matched at its far end. Mismatched ends add reflected copies
  (near-end noise reflected to the far end and vice versa), which this
  module does not model.
* The far-end formula is linear in length while the two lines stay in step:
  ``ell |1/v_a - 1/v_v| << tr`` (identical traces: always). With stronger
  coupling in an inhomogeneous medium the even and odd modes separate and
  the far-end pulse widens and stops growing linearly; use a modal analysis
  then (Paul 2008).
* The edge is a linear ramp of duration ``tr``; the module takes the 10-90 %
  rise time as that duration (common practice).
* The caller supplies ``tr``. A rise time for an aggressor known only by a
  frequency is **not** defined here; the caller passes the net class's
  ``rise_time``, or, when only a frequency f is known, ``tr = 0.35 / f``,
  the inverse of the single-pole bandwidth rule of
  ``checker.physics.crosstalk.edge_frequency_hz`` -- an *assumption* that
  the caller must report.
* ``is_electrically_long``: coupled length beyond the saturation length
  ``tr v / 2`` (Johnson & Graham 1993, Hall et al. 2000, Bogatin 2018, as
  above). Where the lumped model stops being adequate is a separate,
  looser question (common practice puts it at a fraction of that length).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from scipy.constants import epsilon_0, mu_0

from ..model import Stackup
from .fieldsolve import FAST, CrossSection, domain
from .sections import edge_section
from .solvecache import cached_solve

#: Index of the aggressor and the victim in a two-conductor ``LineMatrices``.
AGGRESSOR = 0
VICTIM = 1


@dataclass(frozen=True)
class LineMatrices:
    """Per-unit-length matrices of one or two coupled lines.

    ``C``: Maxwell capacitance matrix, F/m (N x N, N = 1 or 2). ``L``:
    inductance matrix, H/m. With N = 2, conductor 0 is the aggressor and 1
    the victim (module docstring); with N = 1 only the single-line values
    (``c_self``, ``l_self``, ``velocity``, ``z0``) exist.
    """

    C: np.ndarray
    L: np.ndarray

    def __post_init__(self) -> None:
        c = np.array(self.C, dtype=np.float64)
        l = np.array(self.L, dtype=np.float64)  # noqa: E741
        if c.ndim != 2 or c.shape[0] != c.shape[1] or c.shape[0] not in (1, 2) or l.shape != c.shape:
            raise ValueError(f"C and L must both be 1x1 or 2x2, got {c.shape} and {l.shape}")
        if not (np.all(np.isfinite(c)) and np.all(np.isfinite(l))):
            raise ValueError("C and L must be finite")
        if not (np.all(np.diag(c) > 0) and np.all(np.diag(l) > 0)):
            raise ValueError("C and L need positive diagonals")
        if c.shape[0] == 2:
            if c[0, 1] > 0:
                raise ValueError("C must be in Maxwell form (off-diagonal <= 0)")
            for name, m in (("C", c), ("L", l)):
                if not math.isclose(m[0, 1], m[1, 0], rel_tol=1e-9, abs_tol=1e-9 * float(np.max(np.diag(m)))):
                    raise ValueError(f"{name} must be symmetric")
                if np.linalg.det(m) <= 0:
                    raise ValueError(f"{name} must be positive definite")
        c.setflags(write=False)
        l.setflags(write=False)
        object.__setattr__(self, "C", c)
        object.__setattr__(self, "L", l)

    @property
    def n(self) -> int:
        return int(self.C.shape[0])

    @property
    def _v(self) -> int:
        return self.n - 1

    def _need_pair(self) -> None:
        if self.n != 2:
            raise ValueError("coupling needs two conductors (aggressor 0, victim 1)")

    # ---------------------------------------------------------- self values
    @property
    def c_self(self) -> float:
        """Victim's Maxwell self-capacitance ``C[v, v]`` (F/m; includes Cm)."""
        return float(self.C[self._v, self._v])

    @property
    def l_self(self) -> float:
        """Victim's self-inductance ``L[v, v]`` (H/m)."""
        return float(self.L[self._v, self._v])

    @property
    def velocity(self) -> float:
        """Victim's velocity ``1/sqrt(L[v,v] C[v,v])`` (m/s), aggressor at rest."""
        return 1.0 / math.sqrt(self.l_self * self.c_self)

    @property
    def z0(self) -> float:
        """Victim's characteristic impedance ``sqrt(L[v,v]/C[v,v])`` (ohm)."""
        return math.sqrt(self.l_self / self.c_self)

    @property
    def velocity_aggressor(self) -> float:
        """Aggressor's velocity ``1/sqrt(L[0,0] C[0,0])`` (m/s)."""
        return 1.0 / math.sqrt(float(self.L[0, 0] * self.C[0, 0]))

    @property
    def z0_aggressor(self) -> float:
        """Aggressor's characteristic impedance ``sqrt(L[0,0]/C[0,0])`` (ohm)."""
        return math.sqrt(float(self.L[0, 0] / self.C[0, 0]))

    # -------------------------------------------------------------- coupling
    @property
    def c_mutual(self) -> float:
        """Mutual capacitance ``Cm = -C[0, 1]`` (F/m, >= 0)."""
        self._need_pair()
        return float(-self.C[0, 1])

    @property
    def l_mutual(self) -> float:
        """Mutual inductance ``Lm = L[0, 1]`` (H/m)."""
        self._need_pair()
        return float(self.L[0, 1])

    @property
    def kb(self) -> float:
        r"""Near-end (backward) coefficient, dimensionless:
        :math:`K_b = Q/(2s)`, :math:`Q = C_m Z_v + L_m/Z_a`,
        :math:`s = 1/v_a + 1/v_v`; for equal traces
        :math:`\tfrac14(C_m/C + L_m/L)` (module docstring; Johnson & Graham
        1993, Hall et al. 2000, Bogatin 2018)."""
        q = self.c_mutual * self.z0 + self.l_mutual / self.z0_aggressor
        return q / (2.0 * self._delay_sum_s_per_m)

    @property
    def kf_per_s(self) -> float:
        r"""Far-end (forward) coefficient, s/m, signed:
        :math:`k_f = \tfrac12(C_m Z_v - L_m/Z_a)`; for equal traces
        :math:`\tfrac12(C_m/C - L_m/L)/v`. Far-end noise for a ramp of
        duration ``tr`` is ``kf * length / tr * V1``; negative ``kf`` means
        the pulse is of opposite polarity to the aggressor's edge (module
        docstring)."""
        return 0.5 * (self.c_mutual * self.z0 - self.l_mutual / self.z0_aggressor)

    @property
    def _delay_sum_s_per_m(self) -> float:
        return 1.0 / self.velocity_aggressor + 1.0 / self.velocity

    def saturation_length_m(self, rise_time_s: float) -> float:
        """Coupled length beyond which the near-end noise stops growing (m):
        ``tr / (1/v_a + 1/v_v)``, i.e. ``tr v / 2`` for equal velocities
        (module docstring)."""
        _positive("rise_time_s", rise_time_s)
        return float(rise_time_s) / self._delay_sum_s_per_m

    def swapped(self) -> "LineMatrices":
        """The same pair with aggressor and victim exchanged."""
        self._need_pair()
        p = [1, 0]
        return LineMatrices(self.C[np.ix_(p, p)], self.L[np.ix_(p, p)])


def _positive(name: str, value: float) -> None:
    if not (value > 0 and math.isfinite(value)):
        raise ValueError(f"{name} must be positive and finite, got {value}")


def vacuum(section: CrossSection) -> CrossSection:
    """``section`` with every dielectric slab's and block's ``er`` set to 1
    (same faces, so the same grid)."""
    return dataclasses.replace(section, slabs=tuple(dataclasses.replace(s, er=1.0) for s in section.slabs),
                               blocks=tuple(dataclasses.replace(b, er=1.0) for b in section.blocks))


def line_matrices(section: CrossSection, resolution: float = FAST) -> LineMatrices:
    """C and L per unit length of ``section`` (one or two signal conductors).

    Solves the cross-section twice with ``checker.physics.fieldsolve.solve``:
    as given (``C``) and with every dielectric replaced by vacuum (``C0``),
    then ``L = mu0 eps0 C0^-1`` (Paul 2008; module docstring). Both solves
    use the box the solver would choose for ``section`` (fixed explicitly,
    since the automatic box between two planes depends on the permittivity
    contrast), hence the same grid.

    Parameters
    ----------
    section : CrossSection
        Conductor 0 the aggressor, 1 the victim (if two). Lengths in mm.
    resolution : float
        Solver resolution (``fieldsolve.FAST`` or ``FINE``).

    Returns
    -------
    LineMatrices
        ``C`` F/m, ``L`` H/m.
    """
    if section.box is None:
        section = dataclasses.replace(section, box=domain(section))
    c = cached_solve(section, resolution).maxwell
    c0 = cached_solve(vacuum(section), resolution).maxwell
    if c.shape[0] not in (1, 2):
        raise ValueError(f"need one or two signal conductors, got {c.shape[0]}")
    l = mu_0 * epsilon_0 * np.linalg.inv(c0)  # noqa: E741
    l = 0.5 * (l + l.T)  # noqa: E741  (C0 is symmetric by construction; remove rounding)
    return LineMatrices(c, l)


def same_layer_section(stackup: Stackup, layer: int, wa: float, wb: float, gap_mm: float) -> CrossSection:
    """Two traces side by side on copper layer ``layer`` (edge-coupled):
    trace 0 the aggressor (width ``wa``), trace 1 the victim (``wb``),
    ``gap_mm`` edge to edge; the cross-section of
    :func:`checker.physics.edge.edge_section` (planes, dielectrics and
    solder mask as for the edge-coupling tables), so both models see one
    geometry."""

    return edge_section(stackup, layer, wa, wb, gap_mm)


@dataclass(frozen=True)
class Crosstalk:
    """Coupled noise on a victim, from either model.

    ``model``: ``"lumped"`` or ``"transmission-line"``. ``next_v``,
    ``fext_v``: magnitudes (V) of the near-end and far-end noise (the
    polarity of the far-end pulse is the sign of ``LineMatrices.kf_per_s``).
    ``saturation_length_m``: coupled length beyond which NEXT stops growing.
    ``coupled_length_m``, ``rise_time_s``: the inputs used.
    """

    model: str
    next_v: float
    fext_v: float
    saturation_length_m: float
    coupled_length_m: float
    rise_time_s: float

    def __post_init__(self) -> None:
        if self.model not in ("lumped", "transmission-line"):
            raise ValueError(f"model must be 'lumped' or 'transmission-line', got {self.model!r}")


def transmission_line_crosstalk(m: LineMatrices, coupled_length_m: float, rise_time_s: float,
                                swing_v: float) -> Crosstalk:
    """Near- and far-end noise of a coupled run, weak coupling, matched ends.

    ``NEXT = Kb V1 min(1, len / Lsat)`` and ``FEXT = |kf| len / tr V1``
    (module docstring: Johnson & Graham 1993; Hall, Hall & McCall 2000;
    Bogatin 2018; general-width forms derived there). Assumes the victim
    matched at both ends, the aggressor matched at its far end, and a linear
    edge of duration ``tr``.

    Parameters
    ----------
    m : LineMatrices
        Two conductors, aggressor 0, victim 1.
    coupled_length_m : float
        Length of the parallel run, m (> 0).
    rise_time_s : float
        Aggressor edge, s (> 0): the net class's rise time, or ``0.35 / f``
        when only a frequency is known (an assumption the caller reports).
    swing_v : float
        Aggressor swing V1, V (>= 0; the wave launched on the aggressor).

    Returns
    -------
    Crosstalk
        ``model="transmission-line"``.
    """
    _positive("coupled_length_m", coupled_length_m)
    _positive("rise_time_s", rise_time_s)
    if not (swing_v >= 0 and math.isfinite(swing_v)):
        raise ValueError(f"swing_v must be >= 0 and finite, got {swing_v}")
    lsat = m.saturation_length_m(rise_time_s)
    next_v = m.kb * swing_v * min(1.0, coupled_length_m / lsat)
    fext_v = abs(m.kf_per_s) * coupled_length_m / rise_time_s * swing_v
    return Crosstalk("transmission-line", float(next_v), float(fext_v), float(lsat),
                     float(coupled_length_m), float(rise_time_s))


def is_electrically_long(coupled_length_m: float, rise_time_s: float, velocity: float) -> bool:
    """True when the coupled run is longer than the near-end saturation
    length ``tr v / 2`` (Johnson & Graham 1993; Hall et al. 2000; Bogatin
    2018): the round-trip delay then exceeds the rise time and the near-end
    noise has reached its plateau ``Kb V1``.

    Parameters: length m (>= 0), rise time s (> 0), velocity m/s (> 0).
    """
    if not (coupled_length_m >= 0 and math.isfinite(coupled_length_m)):
        raise ValueError(f"coupled_length_m must be >= 0 and finite, got {coupled_length_m}")
    _positive("rise_time_s", rise_time_s)
    _positive("velocity", velocity)
    return bool(coupled_length_m > 0.5 * rise_time_s * velocity)
