"""parallel-length: how far two nets may run side by side at a given gap.

A table of ``gap`` -> ``max_length`` rows: over one coupled run, the length
along which the aggressor and the victim are within ``gap`` of each other
(edge to edge, in plan) may be at most ``max_length``. Every row is checked;
the row with the largest excess is reported. ``coupling`` says which runs
count: ``edge`` (same layer), ``broadside`` (neighbouring layers, gap
measured in plan, overlapping copper counts as gap 0) or ``both``.

Options (defaults)::

    coupling: edge
    table:                 # required
      - {gap: 0.2 mm, max_length: 5 mm}
      - {gap: 0.5 mm, max_length: 20 mm}

Fails: a clock 0.15 mm from a reference line for 12 mm. Passes: the same
clock at 0.6 mm.
"""

from __future__ import annotations

from .options import Option

KIND = "parallel-length"
SCOPE = "run"
OPTIONS = {
    "coupling": Option("choice", default="edge", choices=("edge", "broadside", "both"),
                       help="which coupled runs count"),
    "table": Option("table", required=True,
                    columns=(("gap", "length"), ("max_length", "length")),
                    help="rows of gap -> longest run allowed at that gap or closer"),
}
