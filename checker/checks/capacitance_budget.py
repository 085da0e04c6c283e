"""capacitance-budget: total mutual capacitance allowed between two nets.

Adds up the estimated mutual capacitance C12 of every coupled run between an
aggressor net and a victim net, on every layer and layer pair (broadside and
edge), and fails when the total exceeds ``max_c12``.

Options (defaults)::

    max_c12: (required)    # e.g. 0.5 pF

Fails: 1.2 pF between a switching node and a sensor input with a 0.5 pF
budget. Passes: 0.1 pF.
"""

from __future__ import annotations

from .options import Option

KIND = "capacitance-budget"
SCOPE = "net-pair"
OPTIONS = {
    "max_c12": Option("capacitance", required=True, minimum=0.0, exclusive_minimum=True,
                      help="largest total mutual capacitance per net pair"),
}
