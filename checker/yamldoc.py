"""Reading one YAML document safely: every YAML input of couplint (rule,
waiver and stackup files) comes through :func:`compose_document`.

What it guards against, before anything recursive sees the document:

- **nesting**: the events are counted first (PyYAML's parser is a state
  machine, not recursive), so a file nested thousands of levels deep is
  refused at the first level past :data:`MAX_DEPTH` in constant time
  instead of overflowing the composer's recursion;
- **alias bombs and recursive aliases**: the node tree is sized with its
  aliases expanded (:func:`expanded_size`), refused beyond a cap;
- **repeated keys** are left to :mod:`checker.yamlkeys` (callers word them).

Problems are raised as :class:`YamlProblem` (line, column, one sentence);
each caller turns it into its own error class with the file name, so the
wording of a YAML error is the same in every door.
"""

from __future__ import annotations

from typing import Any

import yaml

from .describe import shorten

#: Deepest nesting any couplint YAML file may have. The formats need at most
#: five levels (``rules[i].pairs[j][k]``); 32 leaves room and still refuses
#: a nesting bomb long before Python's recursion limit.
MAX_DEPTH = 32


class YamlProblem(Exception):
    """A YAML document that cannot be taken: ``line``/``column`` (1-based,
    either may be None) and ``message`` (one sentence, starting "invalid
    YAML" for a syntax error)."""

    def __init__(self, line: int | None, column: int | None, message: str) -> None:
        self.line = line
        self.column = column
        self.message = message
        super().__init__(message)

    @property
    def place(self) -> str | None:
        """``line L, column C`` (or ``line L``, or None)."""
        if self.line is None:
            return None
        return f"line {self.line}, column {self.column}" if self.column is not None else f"line {self.line}"


def compose_document(text: str, max_nodes: int, what: str) -> yaml.Node | None:
    """The node tree of the single YAML document in ``text`` (safe tags
    only), or None for an empty document. Refuses nesting past
    :data:`MAX_DEPTH` and more than ``max_nodes`` values once aliases are
    expanded (``what`` names the kind of file in that message)."""
    loader = None
    try:
        _check_depth(text)
        loader = yaml.SafeLoader(text)  # its reader checks the characters already here
        node = loader.get_single_node()
    except yaml.YAMLError as exc:
        raise _problem(exc, text) from None
    finally:
        if loader is not None:
            loader.dispose()
    if node is not None:
        expanded_size(node, max_nodes, what)
    return node


class _Constructor(yaml.SafeLoader):
    """SafeLoader whose value errors name the node: an explicit tag with a
    value it cannot take (``!!float`` of nothing, ``!!timestamp x``) makes
    PyYAML's constructors fail with IndexError, KeyError, AttributeError
    and the like; each becomes one YamlProblem at the node's line."""

    def construct_object(self, node: yaml.Node, deep: bool = False) -> Any:
        try:
            return super().construct_object(node, deep=deep)
        except (YamlProblem, yaml.YAMLError):
            raise
        except (ValueError, OverflowError, TypeError, IndexError, KeyError, AttributeError):
            mark = node.start_mark
            value = node.value if isinstance(node, yaml.ScalarNode) else ""
            tag = node.tag.replace("tag:yaml.org,2002:", "!!")
            raise YamlProblem(mark.line + 1, mark.column + 1,
                              f"invalid YAML value: {shorten(str(value), 40)!r} is not a value of the tag "
                              f"{shorten(tag, 60)}") from None


def construct(node: yaml.Node) -> Any:
    """The Python data of a composed node tree (safe tags only)."""
    loader = _Constructor("")
    try:
        return loader.construct_document(node)
    except yaml.MarkedYAMLError as exc:
        raise _problem(exc, "") from None
    except (ValueError, OverflowError, TypeError) as exc:  # a value yaml cannot build, e.g. 2026-13-01
        raise YamlProblem(None, None, f"invalid YAML value: {_short(str(exc))}") from None
    finally:
        loader.dispose()


def expanded_size(root: yaml.Node, max_nodes: int, what: str) -> int:
    """How many nodes the tree holds with every alias expanded; refuses a
    recursive alias (a node inside itself) and more than ``max_nodes``.
    Depth is already bounded by :func:`compose_document`, so the walk's
    recursion is too."""
    memo: dict[int, int] = {}
    active: set[int] = set()

    def size(node: yaml.Node) -> int:
        key = id(node)
        if key in memo:
            return memo[key]
        if key in active:
            raise YamlProblem(node.start_mark.line + 1, None, "a recursive alias (a node that contains itself)")
        active.add(key)
        total = 1
        if isinstance(node, yaml.SequenceNode):
            total += sum(size(item) for item in node.value)
        elif isinstance(node, yaml.MappingNode):
            total += sum(size(k) + size(v) for k, v in node.value)
        active.discard(key)
        memo[key] = total
        if total > max_nodes:
            raise YamlProblem(node.start_mark.line + 1, None,
                              f"more than {max_nodes:,} values once aliases are expanded: not {what}")
        return total

    return size(root)


def _check_depth(text: str) -> None:
    """Walk the parser's events (iteratively) and stop at the first
    collection opened deeper than :data:`MAX_DEPTH`."""
    depth = 0
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        if isinstance(event, yaml.CollectionStartEvent):
            depth += 1
            if depth > MAX_DEPTH:
                mark = event.start_mark
                raise YamlProblem(mark.line + 1, mark.column + 1,
                                  f"nested more than {MAX_DEPTH} levels deep (no couplint file needs that many)")
        elif isinstance(event, yaml.CollectionEndEvent):
            depth -= 1


def _problem(exc: yaml.YAMLError, text: str) -> YamlProblem:
    """One sentence for a PyYAML error, with its line and column."""
    if isinstance(exc, yaml.MarkedYAMLError):
        mark = exc.problem_mark or exc.context_mark
        message = " ".join(str(exc.problem or "").split())
        if exc.context:  # yaml's context reads first: "while parsing X (line 2), expected Y"
            where = f" (line {exc.context_mark.line + 1})" if exc.context_mark is not None else ""
            message = f"{' '.join(exc.context.split())}{where}, {message}"
        if mark is None:
            return YamlProblem(None, None, f"invalid YAML: {_short(message)}")
        return YamlProblem(mark.line + 1, mark.column + 1, f"invalid YAML: {_short(message)}")
    # the reader: a character YAML does not allow
    position = getattr(exc, "position", None)
    reason = getattr(exc, "reason", None) or " ".join(str(exc).split())
    character = getattr(exc, "character", None)
    if isinstance(character, int):  # a code point (the text is decoded already)
        reason = f"character U+{character:04X}: {reason}"
    if isinstance(position, int):
        line = text.count("\n", 0, position) + 1
        column = position - (text.rfind("\n", 0, position) + 1) + 1
        return YamlProblem(line, column, f"invalid YAML: {_short(reason)}")
    return YamlProblem(None, None, f"invalid YAML: {_short(reason)}")


def _short(text: str) -> str:
    return shorten(text, 200)
