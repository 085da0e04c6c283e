"""noise-budget: coupled noise allowed on a victim net.

For each victim net, estimates the noise each aggressor couples onto it with
the lumped capacitive-coupling model (see :mod:`checker.physics.crosstalk`)
from the aggressor class's ``swing`` and ``frequency`` (or ``rise_time``)
and the victim class's ``resistance`` and ``node_capacitance``; the victim's
noise is the sum over its aggressors (worst case: all in phase). Fails when
it exceeds ``max_noise``. Aggressor nets whose class gives no swing, and
victims whose class gives no resistance, are skipped.

Options (defaults)::

    max_noise: (required)  # e.g. 10 mV
    model: full            # full | small-r (the small-R limit w*R*C12*V1)

Fails: 40 mV on a 100 kohm sensor input with a 10 mV budget.
"""

from __future__ import annotations

from .options import Option

KIND = "noise-budget"
SCOPE = "victim"
OPTIONS = {
    "max_noise": Option("voltage", required=True, minimum=0.0, exclusive_minimum=True,
                        help="largest coupled noise on a victim"),
    "model": Option("choice", default="full", choices=("full", "small-r"),
                    help="full lumped model or its small-R limit"),
}
