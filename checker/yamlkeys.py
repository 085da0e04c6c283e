"""Repeated keys in a YAML mapping: PyYAML keeps the last value silently, so
every YAML input of couplint (rule, waiver and stackup files) looks for them
first, with this one walk over the node tree."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import yaml

_MERGE_TAG = "tag:yaml.org,2002:merge"


@dataclass(frozen=True)
class RepeatedKey:
    """Where a key appears the second time in one mapping: its key path (as
    ``join`` builds it), the key, line and column (1-based), and the line of
    its first appearance."""

    path: str
    key: str
    line: int
    column: int
    first_line: int


def first_repeated_key(node: yaml.Node, join: Callable[[str, str], str]) -> RepeatedKey | None:
    """The first key given twice in one mapping anywhere under ``node``
    (document order; merge keys ``<<`` are followed, an aliased node is
    walked once), or ``None``. ``join(path, key)`` builds key paths."""
    return _walk(node, "", join, set())


def _walk(node: yaml.Node, path: str, join, seen: set[int]) -> RepeatedKey | None:
    if id(node) in seen:  # an alias to a node already walked
        return None
    seen.add(id(node))
    if isinstance(node, yaml.MappingNode):
        first: dict[tuple[str, str], int] = {}
        for key_node, value_node in node.value:
            if key_node.tag == _MERGE_TAG:
                found = _walk(value_node, path, join, seen)
                if found is not None:
                    return found
                continue
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else "?"
            if isinstance(key_node, yaml.ScalarNode):
                ident = (key_node.tag, key_node.value)
                line = key_node.start_mark.line + 1
                if ident in first:
                    return RepeatedKey(join(path, key), key, line, key_node.start_mark.column + 1, first[ident])
                first[ident] = line
            found = _walk(value_node, join(path, key), join, seen)
            if found is not None:
                return found
    elif isinstance(node, yaml.SequenceNode):
        for i, item in enumerate(node.value):
            found = _walk(item, f"{path}[{i}]", join, seen)
            if found is not None:
                return found
    return None
