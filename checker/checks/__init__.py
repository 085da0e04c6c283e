"""Rule kinds: one module each, registered here by kind name.

Every module has ``KIND`` (the name used in rule files), ``SCOPE`` (what it
looks at: ``broadside`` runs, ``edge`` runs, ``net-pair`` totals or
``victim`` totals; ``run`` for rules that may look at either kind of
run; ``net`` for one net's own copper against the reference copper),
``OPTIONS`` (its option schema, see
:class:`checker.checks.options.Option`) and ``check(rule, ctx)``, a generator
of findings. Its docstring is the user documentation of the kind. A kind
whose findings name no victim class sets ``USES_VICTIM = False``: the
rule-file loader then refuses a rule that gives ``victim``.
"""

from __future__ import annotations

from types import ModuleType

from . import (
               capacitance_budget,
               crossing_angle,
               guard_grounding,
               noise_budget,
               parallel_length,
               reference_gap,
               spacing_ratio,
)

REGISTRY: dict[str, ModuleType] = {
    module.KIND: module
    for module in (crossing_angle, spacing_ratio, parallel_length, capacitance_budget, noise_budget,
                   reference_gap, guard_grounding)
}
