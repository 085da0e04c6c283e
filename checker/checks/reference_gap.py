"""reference-gap: fast nets must not cross voids or splits in their reference copper.

A signal's return current flows in the reference copper nearest the trace,
right beside it; where that copper has a void or a split, the current
detours around the gap, and the larger loop couples into everything along
the detour (keeping fast traces off plane gaps is common practice). For
each trace layer, the reference layer is the nearest copper layer above or
below that carries any reference copper (the rule file's
``settings.reference_nets``), by vertical distance; on a tie both are
checked. A *stretch* is a continuous part of a net's centreline over no
reference copper of that layer (a hole, an antipad, another net's copper
cut out of a pour, a split between two pour shapes, or beyond a pour's
edge); ``checker.returnpath`` measures them. Each stretch of an
``aggressor`` net longer than ``max_length`` is one finding, placed at the
stretch; its victim is the reference net whose copper has the gap (the
nearest one; at a split the message names both sides). The rule's
``victim`` is not used: leave it out (``any``); any other value is an
error.

A layer with no reference copper on any other layer is not checked. Any
reference copper makes a layer a candidate: a layer with only a few ground
traces is the reference of its neighbours, and traces beside it away from
those traces count as crossing a gap.

Options (defaults)::

    max_length: 1 mm   # longest stretch over a gap tolerated

The default tolerates a trace leaving its own via over the via's antipad
(a radius of 0.3 to 0.6 mm is typical, from memory) and crossing a single
antipad of another via; it is a project choice, not a published value.
Set 0 mm to report every gap.

Fails: a 25 MHz clock on an inner layer crossing a 2 mm wide slot in the
ground plane under it at 90 degrees (2 mm over the gap). Passes: the same
clock routed around the end of the slot, over solid ground.
"""

from __future__ import annotations

import numpy as np

from .options import Option

KIND = "reference-gap"
SCOPE = "net"
#: the rule's ``victim`` is not used (the finding's victim is a reference net)
USES_VICTIM = False
OPTIONS = {
    "max_length": Option("length", default=1.0, minimum=0.0,
                         help="longest stretch of a trace over a gap in its reference copper"),
}


def check(rule, ctx):
    """Yield a finding per gap stretch of an aggressor net longer than ``max_length``."""
    from ..model import NO_NET
    from .common import make_finding, ratio_over

    g = ctx.return_gaps
    if g is None or len(g) == 0:
        return
    max_length = rule.options["max_length"]
    agg = ctx.class_mask(rule.aggressor)
    for k in np.flatnonzero(agg[g.net] & (g.length_mm > max_length)):
        net, layer, ref_layer = int(g.net[k]), int(g.layer[k]), int(g.ref_layer[k])
        ref_net, other = int(g.ref_net[k]), int(g.other_ref_net[k])
        length = float(g.length_mm[k])
        layers = tuple(ctx.layer_name(i) for i in sorted((layer, ref_layer)))
        where = (f"the split between {ctx.net_name(ref_net)} and {ctx.net_name(other)}" if other != NO_NET
                 else f"a gap in the {ctx.net_name(ref_net)} copper")
        yield make_finding(
            ctx, rule, aggressor=net, victim=ref_net, layers=layers,
            bbox=(float(g.xmin[k]), float(g.ymin[k]), float(g.xmax[k]), float(g.ymax[k])),
            at=(float(g.x[k]), float(g.y[k])),
            value=length, limit=max_length, unit="mm", excess=ratio_over(length, max_length),
            message=(f"{ctx.net_name(net)} on {ctx.layer_name(layer)} runs {length:.2f} mm over {where} "
                     f"of layer {ctx.layer_name(ref_layer)}, its nearest reference layer (allowed "
                     f"{max_length:g} mm): no return path beside it there"),
            length_mm=length,
        )
