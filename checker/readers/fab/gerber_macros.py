"""Aperture macros (AM) of the Gerber format: parsing the macro body,
arithmetic expressions over ``$n`` variables, and the primitives, flattened
into one shapely outline when an AD command instantiates the macro.

Gerber Layer Format Specification 2021.02, 4.5: a macro body is a sequence
of words, each a comment (code 0, 4.5.1.2), a variable definition
``$n=<expression>`` (4.5.4.3) or a primitive ``code,par,par...`` whose
parameters are expressions (4.5.4.2: ``+ -`` (also unary), ``x`` multiply,
``/`` divide, parentheses, decimal constants, ``$n``). ``$1, $2 ...`` take
the AD command's values; undefined variables are 0 (4.5.4.3). Primitives are
added in order: exposure 1 adds the shape, exposure 0 erases it from what the
macro has drawn so far (4.5.2); every rotation parameter turns the primitive
about the macro origin, not its own centre (4.5.3).

Primitives: 1 circle, 20 vector line (and its deprecated alias 2, 8.2.4),
21 centre line, 22 lower-left line (deprecated, 8.2.5), 4 outline, 5
regular polygon, 6 moire (deprecated, 8.2.6), 7 thermal.

Deviation, documented: the spec forbids redefining a macro variable; this
reader lets the later definition win instead of refusing the file.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np
import shapely
import shapely.affinity

from .gerber_apertures import EMPTY, disc, regular_polygon

#: Deepest nesting of parentheses and unary signs accepted in an expression.
MAX_EXPRESSION_DEPTH = 64
#: Most vertices of an outline primitive (spec 4.5.1.6 allows 5000).
MAX_OUTLINE_VERTICES = 5000
#: Most rings of a moire primitive.
MAX_MOIRE_RINGS = 1000


class MacroError(ValueError):
    """A macro that cannot be read or instantiated; the reader adds file and line."""

    #: the line of the macro word at fault, where known
    line: int | None = None


_TOKEN = re.compile(r"(\d+\.?\d*|\.\d+)|\$(\d+)|([-+xX/()])")


def parse_expression(text: str):
    """Expression text -> a small tree: ``('n', value)``, ``('v', n)``,
    ``('neg', tree)``, ``('sum', [(sign, tree), ...])``,
    ``('prod', [(op, tree), ...])``; sums and products are flat lists, so
    evaluation depth only grows with parentheses and unary signs."""
    tokens = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None:
            raise MacroError(f"cannot read the expression {text!r} at {text[pos:pos + 10]!r}")
        tokens.append(m.groups())
        pos = m.end()
    if not tokens:
        raise MacroError("an empty expression")
    state = {"i": 0}

    def peek():
        return tokens[state["i"]] if state["i"] < len(tokens) else None

    def take():
        tok = peek()
        state["i"] += 1
        return tok

    def expression(depth):
        if depth > MAX_EXPRESSION_DEPTH:
            raise MacroError(f"the expression {text!r} is nested too deeply")
        terms = [(1.0, term(depth))]
        while (tok := peek()) is not None and tok[2] in ("+", "-"):
            take()
            terms.append((1.0 if tok[2] == "+" else -1.0, term(depth)))
        return terms[0][1] if len(terms) == 1 else ("sum", terms)

    def term(depth):
        factors = [("x", factor(depth))]
        while (tok := peek()) is not None and tok[2] in ("x", "X", "/"):
            take()
            factors.append(("/" if tok[2] == "/" else "x", factor(depth)))
        return factors[0][1] if len(factors) == 1 else ("prod", factors)

    def factor(depth):
        tok = take()
        if tok is None:
            raise MacroError(f"the expression {text!r} ends too early")
        number, variable, op = tok
        if number is not None:
            return ("n", float(number))
        if variable is not None:
            return ("v", int(variable))
        if op == "(":
            inner = expression(depth + 1)
            if take() != (None, None, ")"):
                raise MacroError(f"the expression {text!r} has an unclosed parenthesis")
            return inner
        if op in ("+", "-"):
            if depth + 1 > MAX_EXPRESSION_DEPTH:
                raise MacroError(f"the expression {text!r} is nested too deeply")
            inner = factor(depth + 1)
            return inner if op == "+" else ("neg", inner)
        raise MacroError(f"the expression {text!r} has {op!r} where a number or variable belongs")

    tree = expression(0)
    if state["i"] != len(tokens):
        raise MacroError(f"the expression {text!r} has extra text after its end")
    return tree


def evaluate(tree, variables: dict[int, float]) -> float:
    """Value of an expression tree; undefined variables are 0 (4.5.4.3)."""
    kind = tree[0]
    if kind == "n":
        return tree[1]
    if kind == "v":
        return variables.get(tree[1], 0.0)
    if kind == "neg":
        return -evaluate(tree[1], variables)
    if kind == "sum":
        return sum(sign * evaluate(t, variables) for sign, t in tree[1])
    value = 1.0
    for op, t in tree[1]:
        v = evaluate(t, variables)
        if op == "x":
            value *= v
        elif v == 0:
            raise MacroError("division by zero in a macro expression")
        else:
            value /= v
    return value


#: Parameter counts of each primitive code (4.5.1; 8.2.4-8.2.6).
_PARAMETER_COUNTS = {1: (4, 5), 2: (7,), 20: (7,), 21: (6,), 22: (6,), 5: (6,), 6: (9,), 7: (6,)}


@dataclass(frozen=True)
class MacroWord:
    """One parsed word of a macro body: a primitive (``code``, parameter
    trees) or a variable definition (``code`` None, ``variable`` n)."""

    line: int
    code: int | None
    parameters: tuple
    variable: int | None = None


@dataclass(frozen=True)
class ApertureMacro:
    name: str
    line: int
    words: tuple[MacroWord, ...]


_COMMENT = re.compile(r"\s*0(\s|,|$)")
_VARIABLE_DEF = re.compile(r"\$(\d+)=(.*)", re.S)
_PRIMITIVE = re.compile(r"(\d+)(?:,(.*))?", re.S)
_WHITESPACE = re.compile(r"\s+")


def parse_macro(name: str, line: int, body: list[tuple[str, int]]) -> ApertureMacro:
    """The AM body words ``(text, line)`` -> an :class:`ApertureMacro`.
    Raises :class:`MacroError` with ``.line`` set to the offending word's line."""
    words = []
    for text, word_line in body:
        try:
            if _COMMENT.match(text):
                continue
            compact = _WHITESPACE.sub("", text)
            if not compact:
                continue
            if m := _VARIABLE_DEF.fullmatch(compact):
                words.append(MacroWord(word_line, None, (parse_expression(m[2]),), int(m[1])))
                continue
            m = _PRIMITIVE.fullmatch(compact)
            if m is None:
                raise MacroError(f"macro {name}: {compact[:40]!r} is neither a primitive nor a variable definition")
            code = int(m[1])
            if code not in _PARAMETER_COUNTS and code != 4:
                raise MacroError(f"macro {name}: unknown primitive code {code} "
                                 "(known: 0, 1, 2, 4, 5, 6, 7, 20, 21, 22)")
            params = tuple(parse_expression(p) for p in m[2].split(",")) if m[2] is not None else ()
            counts = _PARAMETER_COUNTS.get(code)
            if counts is not None and len(params) not in counts:
                raise MacroError(f"macro {name}: primitive {code} takes {' or '.join(map(str, counts))} "
                                 f"parameters, not {len(params)}")
            if code == 4 and len(params) < 2:
                raise MacroError(f"macro {name}: outline primitive 4 needs exposure, vertex count and points")
            words.append(MacroWord(word_line, code, params))
        except MacroError as exc:
            exc.line = word_line
            raise
    return ApertureMacro(name, line, tuple(words))


def _rotated(g: shapely.Geometry, angle_deg: float) -> shapely.Geometry:
    if angle_deg == 0 or g.is_empty:
        return g
    return shapely.affinity.rotate(g, angle_deg, origin=(0.0, 0.0))


def _exposure(value: float, name: str, code: int) -> bool:
    if value == 1:
        return True
    if value == 0:
        return False
    raise MacroError(f"macro {name}: primitive {code} has exposure {value:g}; it must be 0 (off) or 1 (on)")


def _non_negative(value: float, what: str, name: str) -> float:
    if value < 0:
        raise MacroError(f"macro {name}: {what} must not be negative, not {value:g}")
    return value


def _rectangle(x0: float, y0: float, x1: float, y1: float) -> shapely.Polygon:
    if x1 <= x0 or y1 <= y0:
        return EMPTY
    return shapely.box(x0, y0, x1, y1)


def _primitive(code: int, p: list[float], name: str) -> tuple[bool, shapely.Geometry]:
    """(exposure on?, shape) of one primitive with evaluated parameters."""
    if code == 1:
        on = _exposure(p[0], name, code)
        d = _non_negative(p[1], "circle diameter", name)
        return on, _rotated(disc(p[2], p[3], d / 2), p[4] if len(p) > 4 else 0.0)
    if code in (2, 20):
        on = _exposure(p[0], name, code)
        w = _non_negative(p[1], "line width", name)
        (x0, y0, x1, y1) = p[2:6]
        length = math.hypot(x1 - x0, y1 - y0)
        if w == 0 or length == 0:
            return on, EMPTY
        ux, uy = (x1 - x0) / length * w / 2, (y1 - y0) / length * w / 2
        ring = [(x0 - uy, y0 + ux), (x0 + uy, y0 - ux), (x1 + uy, y1 - ux), (x1 - uy, y1 + ux)]
        return on, _rotated(shapely.Polygon(ring), p[6])
    if code == 21:
        on = _exposure(p[0], name, code)
        w = _non_negative(p[1], "centre line width", name)
        h = _non_negative(p[2], "centre line height", name)
        return on, _rotated(_rectangle(p[3] - w / 2, p[4] - h / 2, p[3] + w / 2, p[4] + h / 2), p[5])
    if code == 22:
        on = _exposure(p[0], name, code)
        w = _non_negative(p[1], "lower-left line width", name)
        h = _non_negative(p[2], "lower-left line height", name)
        return on, _rotated(_rectangle(p[3], p[4], p[3] + w, p[4] + h), p[5])
    if code == 4:
        on = _exposure(p[0], name, code)
        n = p[1]
        if n != int(n) or not 1 <= n <= MAX_OUTLINE_VERTICES:
            raise MacroError(f"macro {name}: outline primitive 4 has {n:g} vertices; "
                             f"it takes 1 to {MAX_OUTLINE_VERTICES}")
        n = int(n)
        if len(p) not in (2 * n + 5, 2 * n + 4):
            raise MacroError(f"macro {name}: outline primitive 4 with {n} vertices takes {2 * n + 5} "
                             f"parameters (exposure, count, {n + 1} points, rotation), not {len(p)}")
        points = np.asarray(p[2:2 * n + 4], dtype=np.float64).reshape(-1, 2)
        rotation = p[2 * n + 4] if len(p) == 2 * n + 5 else 0.0
        return on, _rotated(contour_polygon(points), rotation)
    if code == 5:
        on = _exposure(p[0], name, code)
        n = p[1]
        if n != int(n) or not 3 <= n <= 12:
            raise MacroError(f"macro {name}: polygon primitive 5 has {n:g} vertices; it takes 3 to 12")
        d = _non_negative(p[4], "polygon diameter", name)
        return on, _rotated(regular_polygon(p[2], p[3], d, int(n), 0.0), p[5])
    if code == 6:
        cx, cy = p[0], p[1]
        outer = _non_negative(p[2], "moire outer diameter", name)
        thickness = _non_negative(p[3], "moire ring thickness", name)
        gap = _non_negative(p[4], "moire ring gap", name)
        rings = _non_negative(p[5], "moire ring count", name)
        if rings != int(rings) or rings > MAX_MOIRE_RINGS:
            raise MacroError(f"macro {name}: moire primitive 6 has {rings:g} rings; it takes a whole "
                             f"number up to {MAX_MOIRE_RINGS}")
        cross_t = _non_negative(p[6], "moire crosshair thickness", name)
        cross_l = _non_negative(p[7], "moire crosshair length", name)
        parts = []
        for k in range(int(rings)):
            od = outer - 2 * k * (thickness + gap)
            if od <= 0:
                break
            parts.append(disc(cx, cy, od / 2).difference(disc(cx, cy, od / 2 - thickness))
                         if od / 2 - thickness > 0 else disc(cx, cy, od / 2))
            if thickness + gap == 0:
                break
        if cross_t > 0 and cross_l > 0:
            parts.append(_rectangle(cx - cross_l / 2, cy - cross_t / 2, cx + cross_l / 2, cy + cross_t / 2))
            parts.append(_rectangle(cx - cross_t / 2, cy - cross_l / 2, cx + cross_t / 2, cy + cross_l / 2))
        shape = shapely.union_all(parts) if parts else EMPTY
        return True, _rotated(shape, p[8])
    if code == 7:
        cx, cy = p[0], p[1]
        outer = p[2]
        inner = _non_negative(p[3], "thermal inner diameter", name)
        gap = _non_negative(p[4], "thermal gap", name)
        if not outer > inner:
            raise MacroError(f"macro {name}: thermal primitive 7 needs outer diameter {outer:g} "
                             f"greater than inner diameter {inner:g}")
        ring = disc(cx, cy, outer / 2)
        if inner > 0:
            ring = ring.difference(disc(cx, cy, inner / 2))
        if gap > 0:
            bar = outer
            cross = shapely.union(_rectangle(cx - bar, cy - gap / 2, cx + bar, cy + gap / 2),
                                  _rectangle(cx - gap / 2, cy - bar, cx + gap / 2, cy + bar))
            ring = ring.difference(cross)
        return True, _rotated(ring, p[5])
    raise MacroError(f"macro {name}: unknown primitive code {code}")  # pragma: no cover


def contour_polygon(points: np.ndarray) -> shapely.Geometry:
    """The area inside a closed contour (4.10.3), as a valid polygon or
    multipolygon; a contour with cut-ins (4.10.4.7) self-touches along the
    cut, which shapely's ``make_valid(method='structure')`` resolves into
    the polygon with its hole. Degenerate contours give an empty polygon."""
    if len(points) < 3:
        return EMPTY
    if not np.array_equal(points[0], points[-1]):
        points = np.vstack((points, points[:1]))
    if len(points) < 4:
        return EMPTY
    poly = shapely.Polygon(points)
    if poly.is_valid:
        return poly
    fixed = shapely.make_valid(poly, method="structure", keep_collapsed=False)
    return polygonal_part(fixed)


def polygonal_part(g: shapely.Geometry) -> shapely.Geometry:
    """Only the polygons of a geometry (lines and points of a collection dropped)."""
    if g.is_empty or g.geom_type in ("Polygon", "MultiPolygon"):
        return g
    parts = [p for p in shapely.get_parts(g) if p.geom_type in ("Polygon", "MultiPolygon") and not p.is_empty]
    if not parts:
        return EMPTY
    return parts[0] if len(parts) == 1 else shapely.union_all(parts)


def instantiate(macro: ApertureMacro, values: list[float]) -> shapely.Geometry:
    """The flattened outline of ``macro`` with ``$1..$n`` = ``values``."""
    variables = {i + 1: v for i, v in enumerate(values)}
    shape: shapely.Geometry = EMPTY
    for word in macro.words:
        if word.code is None:
            assert word.variable is not None  # a word without a code assigns a variable
            variables[word.variable] = _finite(evaluate(word.parameters[0], variables), macro.name)
            continue
        params = [_finite(evaluate(t, variables), macro.name) for t in word.parameters]
        on, g = _primitive(word.code, params, macro.name)
        g = polygonal_part(g)
        if g.is_empty:
            continue
        if on:
            shape = g if shape.is_empty else shapely.union(shape, g)
        elif not shape.is_empty:
            shape = shapely.difference(shape, g)
    return polygonal_part(shape)


#: Largest magnitude of a macro value (file units): beyond, no aperture fits in 10 m anyway.
MAX_MACRO_VALUE = 1e5


def _finite(value: float, name: str) -> float:
    if not math.isfinite(value) or abs(value) > MAX_MACRO_VALUE:
        raise MacroError(f"macro {name}: an expression gives {value:g}, out of range (at most "
                         f"{MAX_MACRO_VALUE:g} in magnitude)")
    return value
