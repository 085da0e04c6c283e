"""spacing-ratio: same-layer neighbours must keep a minimum spacing ratio.

For an aggressor and a victim running side by side on one layer for more
than ``min_length``, the spacing divided by a reference dimension must be at
least ``min_ratio``. ``measure`` picks the ratio:

* ``centre/width``: centre-to-centre distance over the wider trace's width.
  With ``min_ratio: 3`` this is the 3W rule (common practice).
* ``gap/width``: edge-to-edge gap over the wider trace's width.
* ``gap/height``: edge-to-edge gap over the victim's height above its
  nearest reference plane (edge coupling falls off with gap/height).

Options (defaults)::

    measure: centre/width
    min_ratio: 3
    min_length: 1 mm       # shorter side-by-side runs are ignored

Fails: 0.15 mm traces 0.15 mm apart for 5 mm (ratio 2). Passes: the same
traces 0.3 mm apart (ratio 3).
"""

from __future__ import annotations

from .options import Option

KIND = "spacing-ratio"
SCOPE = "edge"
OPTIONS = {
    "measure": Option("choice", default="centre/width",
                      choices=("centre/width", "gap/width", "gap/height"),
                      help="which ratio is compared"),
    "min_ratio": Option("ratio", default=3.0, minimum=0.0, exclusive_minimum=True,
                        help="smallest ratio allowed"),
    "min_length": Option("length", default=1.0, minimum=0.0,
                         help="side-by-side runs shorter than this are ignored"),
}
