"""Rule kinds: one module each, registered here by kind name.

Every module has ``KIND`` (the name used in rule files), ``SCOPE`` (what it
looks at: ``broadside`` runs, ``edge`` runs, ``net-pair`` totals or
``victim`` totals; ``run`` for rules that may look at either kind of
run), ``OPTIONS`` (its option schema, see
:class:`checker.checks.options.Option`) and ``check(rule, ctx)``, a generator
of findings. Its docstring is the user documentation of the kind.
"""

from __future__ import annotations

from types import ModuleType

from . import capacitance_budget, crossing_angle, noise_budget, parallel_length, spacing_ratio

REGISTRY: dict[str, ModuleType] = {
    module.KIND: module
    for module in (crossing_angle, spacing_ratio, parallel_length, capacitance_budget, noise_budget)
}
