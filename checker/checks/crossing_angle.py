"""crossing-angle: traces on neighbouring layers must cross, not run together.

Where an aggressor and a victim overlap in plan on two neighbouring copper
layers (no plane between them), the overlapped run may be at most
``max_length`` long unless the two cross at ``min_angle`` or more. Orthogonal
routing on adjacent signal layers is common practice; it keeps the overlap
area, and so the broadside mutual capacitance, to a crossing's footprint.

Options (defaults)::

    min_angle: 60 deg      # crossings at this angle or steeper always pass
    max_length: 2 mm       # longest overlapped run allowed below min_angle

Fails: a 0.2 mm clock running 10 mm directly over a sensor trace one layer
down. Passes: the same clock crossing the sensor trace at 90 degrees.
"""

from __future__ import annotations

from .options import Option

KIND = "crossing-angle"
SCOPE = "broadside"
OPTIONS = {
    "min_angle": Option("angle", default=60.0, minimum=0.0, maximum=90.0,
                        help="crossings at this angle or steeper pass"),
    "max_length": Option("length", default=2.0, minimum=0.0,
                         help="longest overlapped run allowed below min_angle"),
}
