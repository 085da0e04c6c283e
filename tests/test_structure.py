"""The package's layers, read from its source: no import circle, no import
upward, no private name borrowed across modules.

Every ``import`` in ``checker/`` counts, at module level or inside a
function (a late import must not hide a circle); only imports under ``if
TYPE_CHECKING:`` (annotations, never run) are left out. The layers, lowest
first, are :data:`LAYERS`; a module may import its own layer or a lower one,
and within a layer the imports must not go round in a circle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "checker"

#: (layer name, module-name prefixes), lowest first; the longest matching prefix places a module.
#: Checks are pure functions handed an analysis and a rule: they import neither; the rule-file
#: grammar is the registry of check kinds (their options), and the analysis reads a loaded rule set.
LAYERS: list[tuple[str, tuple[str, ...]]] = [
    ("base", ("checker", "checker.errors", "checker.limits", "checker.units", "checker.atomic", "checker.describe",
              "checker.yamldoc", "checker.yamlkeys", "checker.progress", "checker.cores", "checker.bounds",
              "checker.reportformat", "checker.findings", "checker.inputfile")),
    ("model", ("checker.model", "checker.stackup")),
    ("readers", ("checker.readers",)),
    ("finder", ("checker.finder",)),
    ("physics", ("checker.physics",)),
    ("analysis parts", ("checker.coupling", "checker.shielding", "checker.occupancy", "checker.islands",
                        "checker.netrelays", "checker.ownruns", "checker.guards", "checker.returnpath",
                        "checker.longruns", "checker.victimnoise", "checker.whatif")),
    ("checks", ("checker.checks",)),
    ("rule files", ("checker.ruleset",)),
    ("analysis", ("checker.analysis",)),
    ("review", ("checker.review", "checker.waivers", "checker.baseline", "checker.selection")),
    ("report", ("checker.report",)),
    ("session", ("checker.runner", "checker.session", "checker.batch", "checker.netsurvey")),
    ("command line", ("checker.cli", "checker.__main__")),
]


def module_names() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


MODULES = module_names()


def layer_of(module: str) -> int:
    best, rank = -1, None
    for i, (_, prefixes) in enumerate(LAYERS):
        for prefix in prefixes:
            if (module == prefix or module.startswith(prefix + ".")) and len(prefix) > best:
                best, rank = len(prefix), i
    assert rank is not None, f"{module} is in no layer of LAYERS: place it"
    return rank


def _type_checking_only(tree: ast.Module) -> set[int]:
    """ids of the import nodes under ``if TYPE_CHECKING:``."""
    skip = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skip |= {id(n) for stmt in node.body for n in ast.walk(stmt)}
    return skip


def imports_of(module: str) -> list[tuple[str, list[str], int]]:
    """(imported checker module, names taken from it, line) for every import
    the module runs."""
    path = MODULES[module]
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip = _type_checking_only(tree)
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    out = []
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.Import):
            out += [(a.name, [], node.lineno) for a in node.names if a.name.startswith("checker")]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[:len(package.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("checker"):
                continue
            names = [a.name for a in node.names]
            submodules = [f"{target}.{n}" for n in names if f"{target}.{n}" in MODULES]
            out += [(m, [], node.lineno) for m in submodules]
            rest = [n for n in names if f"{target}.{n}" not in MODULES]
            if rest or not submodules:
                out.append((target, rest, node.lineno))
    return out


def graph() -> dict[str, set[str]]:
    return {m: {t for t, _, _ in imports_of(m) if t in MODULES and t != m} for m in MODULES}


def circles(g: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan,
    iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    found = []
    counter = 0
    for root in sorted(g):
        if root in index:
            continue
        work = [(root, iter(sorted(g[root])))]
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on.add(root)
        while work:
            v, children = work[-1]
            w = next(children, None)
            if w is not None:
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on.add(w)
                    work.append((w, iter(sorted(g[w]))))
                elif w in on:
                    low[v] = min(low[v], index[w])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[v])
            if low[v] == index[v]:
                component = []
                while True:
                    w = stack.pop()
                    on.discard(w)
                    component.append(w)
                    if w == v:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return found


def test_the_graph_is_read_at_all():
    g = graph()
    assert len(g) > 80
    assert "checker.analysis" in g["checker.runner"]  # a module-level import
    assert "checker.session" in g["checker.cli"]  # one inside a function counts too
    assert "checker.runner" not in g["checker.report.terminal"]  # a type-only import does not


def test_circle_finder_finds_a_circle():
    assert circles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert circles({"a": {"b"}, "b": set()}) == []


def test_no_import_circle():
    assert circles(graph()) == []


def test_no_module_imports_a_layer_above_its_own():
    upward = []
    for module in MODULES:
        mine = layer_of(module)
        for target, _, line in imports_of(module):
            if target in MODULES and layer_of(target) > mine:
                upward.append(f"{MODULES[module].relative_to(PACKAGE.parent)}:{line}: {module} "
                              f"({LAYERS[mine][0]}) imports {target} ({LAYERS[layer_of(target)][0]})")
    assert upward == []


def test_no_private_name_is_borrowed_across_modules():
    borrowed = []
    for module in MODULES:
        for target, names, line in imports_of(module):
            for name in names:
                if name.startswith("_") and not name.startswith("__") and target != module:
                    borrowed.append(f"{MODULES[module].relative_to(PACKAGE.parent)}:{line}: {target}.{name}")
    assert borrowed == []


@pytest.mark.parametrize("module", sorted(MODULES))
def test_every_module_has_a_layer(module):
    layer_of(module)


def test_the_contributor_guide_maps_every_module():
    """DEVELOPERS.md's map of the package names every module file."""
    guide = (PACKAGE.parent / "DEVELOPERS.md").read_text(encoding="utf-8")
    missing = [str(path.relative_to(PACKAGE.parent)) for path in sorted(PACKAGE.rglob("*.py"))
               if path.name not in ("__init__.py", "__main__.py")
               and not __import__("re").search(rf"(?<![\w.]){__import__('re').escape(path.name)}\b", guide)]
    assert missing == []
