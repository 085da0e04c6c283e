"""The coupling finder: pure plan-view geometry, no physics.

``find_broadside`` pairs pieces of two layers, ``find_edge`` pieces of one
layer, both returning a :class:`PairTable`; ``run_labels`` groups pairs into
continuous coupled runs. The bulk box search lives in :mod:`.index`.
"""

from .pairs import AREA_EPS_MM2, PairTable, find_broadside, find_edge
from .runs import run_labels

__all__ = ["AREA_EPS_MM2", "PairTable", "find_broadside", "find_edge", "run_labels"]
