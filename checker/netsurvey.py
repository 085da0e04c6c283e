"""Which nets of a board each net class catches, which nets no class catches
although their names say what they are, and a starter rule file built from
that (``couplint classes BOARD``, ``couplint init BOARD``).

A rule set is only as good as its net classes: a clock no pattern catches is
never an aggressor, an analog input no pattern catches is never judged. The
survey lists, per class of the rule set, the board's nets its patterns catch
(and which pattern), and then the nets in no class whose names look like a
clock, a switching node or an analog input. The name hints are common
naming practice (``CLK``, ``SCK``, ``XTAL``, ``OSC``; ``SW``, ``PHASE``,
``LX``; ``AIN``, ``ADC``, ``SENSE``, ``VREF``, ``THERM``, ``NTC``), not a
standard: a hint says "look at this net", never "this net is a clock".
Reference nets (``settings.reference_nets``) are left out of the hints.
"""

from __future__ import annotations

import datetime
import re
from dataclasses import dataclass, field

from .model import Board
from .ruleset import NetClass, RuleSet, compile_pattern
from .shielding import reference_mask
from .units import UNITS

#: Name hints (common naming practice, not a standard): what a net in no
#: class is named like. Searched case-insensitively in the whole name.
NAME_HINTS: dict[str, re.Pattern[str]] = {
    "a clock": re.compile(r"CLK|SCK|SCLK|XTAL|OSC|MCLK|BCLK|LRCLK|REFCLK", re.I),
    "a switching node": re.compile(r"(^|[_\-])(SW|LX|PHASE|PH)([_\-0-9]|$)", re.I),
    "an analog input": re.compile(r"AIN|ADC|SENSE|SNS|VREF|THERM|NTC|ANALOG|(^|[_\-])AN[0-9]", re.I),
}

#: Names that say a net is digital (a converter's data or control line, a
#: bus): no analog-input hint for them, whatever else the name holds.
DIGITAL_NAMES = re.compile(r"DOUT|DIN|DRDY|SDO|SDI|MISO|MOSI|SCL|SDA|SYNC|RST|RESET|(^|[_\-])CS([_\-0-9]|$)", re.I)

#: Which class of the shipped default set a hinted net would join in a
#: starter file.
HINT_CLASS = {"a clock": "clocks", "a switching node": "switch-nodes", "an analog input": "sensitive-analog"}


@dataclass
class ClassCatch:
    """One net class on one board: the nets each of its patterns catches."""

    net_class: NetClass
    #: pattern -> the board's nets it catches, sorted
    by_pattern: dict[str, list[str]]

    @property
    def nets(self) -> list[str]:
        return sorted({n for names in self.by_pattern.values() for n in names})


@dataclass
class Survey:
    """The net classes of a rule set applied to a board's nets (module docstring)."""

    board_name: str
    board_path: str
    catches: list[ClassCatch]
    #: hint ("a clock", ...) -> nets in no class named like that, sorted
    hinted: dict[str, list[str]] = field(default_factory=dict)
    #: nets in no class and with no hint (not reference nets)
    other: list[str] = field(default_factory=list)
    reference: list[str] = field(default_factory=list)


def survey(board: Board, ruleset: RuleSet) -> Survey:
    """The :class:`Survey` of ``board``'s nets under ``ruleset``."""
    names = [n.name for n in board.nets]
    is_ref: list[bool] = list(reference_mask(names, ruleset.settings.reference_nets)) if names else []
    reference = sorted(n for n, r in zip(names, is_ref) if r)
    catches = []
    caught: set[str] = set()
    for c in ruleset.classes:
        by_pattern = {}
        for pattern in c.patterns:
            test = compile_pattern(pattern).search  # as NetClass.matches tests each pattern
            found = sorted(filter(test, names))
            by_pattern[pattern] = found
            caught.update(found)
        catches.append(ClassCatch(c, by_pattern))
    hinted: dict[str, list[str]] = {hint: [] for hint in NAME_HINTS}
    other: list[str] = []
    for n in sorted(set(names) - caught - set(reference)):
        hint = next((h for h, rx in NAME_HINTS.items()
                     if rx.search(n) and not (h == "an analog input" and DIGITAL_NAMES.search(n))), None)
        (hinted[hint] if hint else other).append(n)
    return Survey(board.name, board.path, catches, {h: v for h, v in hinted.items() if v}, other, reference)


def _shown(names: list[str], most: int = 12) -> str:
    if not names:
        return "none"
    head = ", ".join(names[:most])
    return head + (f" and {len(names) - most} more" if len(names) > most else "")


def survey_lines(s: Survey) -> list[str]:
    """The survey as plain text lines (``couplint classes``)."""
    lines = [f"net classes on {s.board_name} ({s.board_path}):"]
    for catch in s.catches:
        c = catch.net_class
        role = ", ".join(r for r, on in (
            ("aggressor", c.swing_v is not None), ("victim", c.resistance_ohm is not None),
            ("victim's filter", c.bandwidth_hz is not None or c.filter_resistance_ohm is not None)) if on) \
            or "names only"
        lines.append(f"  {c.name} ({role}): {len(catch.nets)} net(s)")
        for pattern, found in catch.by_pattern.items():
            lines.append(f"    {pattern}: {_shown(found)}")
    for hint, found in s.hinted.items():
        lines.append(f"in no class, named like {hint} (a name hint, common naming practice; check each): "
                     f"{_shown(found, 30)}")
    lines.append(f"in no class, no hint: {len(s.other)} net(s)" + (f": {_shown(s.other)}" if s.other else ""))
    lines.append(f"reference nets (settings.reference_nets): {_shown(s.reference)}")
    return lines


# --------------------------------------------------------------------------- the starter file

_QUANTITY_ATTRS = (("swing", "swing_v", "voltage"), ("frequency", "frequency_hz", "frequency"),
                   ("rise_time", "rise_time_s", "time"), ("resistance", "resistance_ohm", "resistance"),
                   ("node_capacitance", "node_capacitance_f", "capacitance"), ("duty", "duty", "ratio"),
                   ("bandwidth", "bandwidth_hz", "frequency"),
                   ("filter_resistance", "filter_resistance_ohm", "resistance"),
                   ("filter_capacitance", "filter_capacitance_f", "capacitance"))


def format_quantity(value: float, kind: str) -> str:
    """``value`` (internal unit of ``kind``) written with the unit that
    gives a number from 1 to under 1000 where there is one (``2.5e-08``
    time -> ``25 ns``), as a rule file takes it back exactly enough.

    >>> format_quantity(1e5, "resistance"), format_quantity(3.3, "voltage"), format_quantity(0.25, "ratio")
    ('100 kohm', '3.3 V', '0.25')
    """
    table = UNITS[kind]
    if kind == "ratio":
        return f"{value:g}"
    ascending = sorted(table.items(), key=lambda kv: kv[1])
    unit, factor = ascending[0]
    for u, f in ascending:  # the largest unit in which the number is still at least 1
        if abs(value) / f >= 1:
            unit, factor = u, f
    return f"{float(f'{value / factor:.6g}'):g} {unit}"


def starter_rules(s: Survey, base: str = "default", when: datetime.date | None = None) -> str:
    """A commented rule file (YAML text) for the surveyed board: it extends
    ``base`` and restates each class with its patterns, what each catches on
    this board, and the hinted nets of no class as commented entries of the
    class they would join; every electrical value is marked illustrative."""
    when = when or datetime.date.today()
    out = [
        f"# couplint rule file for the board {s.board_name} ({s.board_path}),",
        f"# written by `couplint init` on {when.isoformat()}.",
        "#",
        f"# It starts from the rule set {base!r} (extends), whose rules and settings apply",
        "# unless changed here. Below, each net class is restated with its patterns and the nets",
        "# of this board each pattern catches. Nets no class catches but whose names look like a",
        "# clock, a switching node or an analog input (a name hint, common naming practice) are",
        "# listed, commented out, in the class they would join: uncomment the ones that belong.",
        "# Every electrical value is ILLUSTRATIVE, copied from the base set: set each for your",
        "# design (logic levels, clock frequencies, edge rates, source impedances). Estimates,",
        "# not a field-solver sign-off; see docs/rule-file.md.",
        "",
        "version: 1",
        f"extends: {base}",
        "",
        "net_classes:",
    ]
    for catch in s.catches:
        c = catch.net_class
        out.append(f"  {_yaml_key(c.name)}:")
        out.append("    nets:")
        for pattern, found in catch.by_pattern.items():
            note = f"catches {_shown(found, 8)}" if found else "catches no net of this board"
            out.append(f"      - {_yaml_str(pattern)}  # {note}")
        for hint, class_name in HINT_CLASS.items():
            if class_name == c.name:
                for net in s.hinted.get(hint, []):
                    out.append(f"      # - {_yaml_str(net)}  # named like {hint}, in no class: uncomment if it is one")
        for key, attr, kind in _QUANTITY_ATTRS:
            value = getattr(c, attr)
            if value is None or (attr == "node_capacitance_f" and value == 0):
                continue
            out.append(f"    {key}: {format_quantity(value, kind)}  # illustrative: set for your design")
    out.append("")
    return "\n".join(out)


_PLAIN = re.compile(r"^[A-Za-z_][A-Za-z0-9_\-]*$")


def _yaml_key(name: str) -> str:
    return name if _PLAIN.match(name) else _yaml_str(name)


def _yaml_str(text: str) -> str:
    """``text`` as a double-quoted YAML scalar (every character kept)."""
    escaped = text.replace("\\", "\\\\").replace('"', '\\"')
    escaped = "".join(ch if ch.isprintable() else f"\\u{ord(ch):04x}" for ch in escaped)
    return f'"{escaped}"'

