"""crossing-angle: traces on neighbouring layers must cross, not run together.

Where an aggressor and a victim overlap in plan on two copper layers with
no reference copper between them (neighbours, or farther apart over a void
or an empty layer), the overlapped run may be at most ``max_length`` long
unless the two cross at ``min_angle`` or more. Only the unshielded part of a
run counts: where reference copper of the layers between covers the run,
it does not (``docs/shielding.md``). Orthogonal
routing on adjacent signal layers is common practice; it keeps the overlap
area, and so the broadside mutual capacitance, to a crossing's footprint.

Options (defaults)::

    min_angle: 60 deg      # crossings at this angle or steeper always pass
    max_length: 2 mm       # longest overlapped run allowed below min_angle

Fails: a 0.2 mm clock running 10 mm directly over a sensor trace one layer
down. Passes: the same clock crossing the sensor trace at 90 degrees.
"""

from __future__ import annotations

import numpy as np

from ..coupling import BROADSIDE
from .options import Option

KIND = "crossing-angle"
SCOPE = "broadside"
OPTIONS = {
    "min_angle": Option("angle", default=60.0, minimum=0.0, maximum=90.0,
                        help="crossings at this angle or steeper pass"),
    "max_length": Option("length", default=2.0, minimum=0.0,
                         help="longest overlapped run allowed below min_angle"),
}


def check(rule, ctx):
    """Yield a finding per overlapped broadside run below ``min_angle`` that
    is longer than ``max_length``."""
    from .common import applicable_rows, iter_runs, make_finding, ratio_over, run_place

    c = ctx.couplings
    min_angle, max_length = rule.options["min_angle"], rule.options["max_length"]
    mask = (c.kind == BROADSIDE) & (c.overlap_mm2 > 0) & (c.angle_deg < min_angle)
    rows, aggressor = applicable_rows(ctx, rule, mask)
    open_mm = c.length_mm * c.open_fraction  # the unshielded part of each row
    for run in iter_runs(ctx, rows, aggressor):
        length = float(open_mm[run.rows].sum())
        if length <= max_length:
            continue
        worst = int(run.rows[np.argmax(open_mm[run.rows])])
        bbox, at, layers = run_place(ctx, run.rows, worst)
        angle = float(np.average(c.angle_deg[run.rows], weights=c.length_mm[run.rows]))
        yield make_finding(
            ctx, rule, aggressor=run.aggressor, victim=run.victim, layers=layers, bbox=bbox, at=at,
            value=length, limit=max_length, unit="mm", excess=ratio_over(length, max_length),
            message=(f"{ctx.net_name(run.aggressor)} overlaps {ctx.net_name(run.victim)} for {length:.2f} mm "
                     f"on {'/'.join(layers)} at {angle:.0f} deg (allowed {max_length:g} mm below {min_angle:g} deg)"),
            length_mm=length, area_mm2=float((c.overlap_mm2 * c.open_fraction)[run.rows].sum()),
            c12_pf=float(c.c12_pf[run.rows].sum()),
        )
