"""Rule files: the strict YAML loader, the shipped rule sets, and what they load into.

A rule file (format: ``docs/rule-file.md``) names net classes by net-name
patterns, gives aggressor classes a voltage swing and a frequency (or rise
time) and victim classes a resistance to ground, and lists rules: each one a
rule kind from :data:`checker.checks.REGISTRY` with its options, applied from
some aggressor classes to some victim classes.

Loading is strict: an unknown key, a wrong type, a unit the quantity does not
take, a value out of range, a name that does not exist, a duplicate mapping
key or a YAML syntax error is reported as one
:class:`checker.errors.RuleError` whose message is
``<file>: <key path>: <what is wrong and what is allowed>``, for example::

    rules.yaml: rules[2].max_length: unknown length unit 'cm' (accepted: mm, um, mil, in)

A file may ``extends`` a shipped set (``rules/<name>.yaml``, or package data
``checker/rulesets/<name>.yaml`` in an installed copy) or another file. The
merged, validated set is a :class:`RuleSet`; every quantity in it is in the
internal units of :mod:`checker.units` (mm, F, V, Hz, s, ohm, deg).

>>> rs = default_ruleset()
>>> rs.classify(["MCU_CLK", "VREF_ADC", "GND"])
[('clocks',), ('sensitive-analog',), ()]
"""

from __future__ import annotations

import atexit
import contextlib
import fnmatch
import hashlib
import importlib.resources
import json
import math
import os
import pathlib
import re
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

import yaml

from .checks import REGISTRY
from .checks.options import Option
from .describe import describe_words
from .errors import RuleError
from .inputfile import decode_utf8, read_bytes
from .shielding import DEFAULT_REFERENCE_NETS
from .units import DEFAULT_UNIT, UNITS, UnitError, parse_quantity
from .yamldoc import YamlProblem, compose_document, construct
from .yamlkeys import first_repeated_key

#: The only rule-file format version this loader reads.
SUPPORTED_VERSION = 1

#: Rule names, net-class names and shipped set names.
NAME_PATTERN = re.compile(r"^[a-z][a-z0-9-]*$")

#: Net-name patterns with this prefix are regular expressions (``re.search``).
REGEX_PREFIX = "re:"

#: The word for "every net" in a rule's ``aggressor`` / ``victim``.
ANY = "any"

SEVERITIES: tuple[str, ...] = ("error", "warning")

TOP_LEVEL_KEYS: tuple[str, ...] = ("version", "extends", "settings", "net_classes", "differential_pairs", "rules",
                                   "disable")

#: Keys every rule may have besides the options of its kind.
COMMON_RULE_KEYS: tuple[str, ...] = ("name", "kind", "aggressor", "victim", "severity", "description")

#: setting key -> (Settings field, schema). Defaults are in internal units.
SETTINGS_SCHEMA: dict[str, tuple[str, Option]] = {
    "broadside_search": ("broadside_search_mm", Option(
        "length", default=0.5, minimum=0.0, exclusive_minimum=True,
        help="lateral search distance for broadside (neighbouring-layer) pairs")),
    "edge_search": ("edge_search_mm", Option(
        "length", default=1.0, minimum=0.0, exclusive_minimum=True,
        help="same-layer search distance (edge-to-edge gap)")),
    "parallel_angle": ("parallel_angle_deg", Option(
        "angle", default=10.0, minimum=0.0, maximum=45.0, exclusive_minimum=True,
        help="pieces within this angle of each other run parallel")),
    "planes_shield": ("planes_shield", Option(
        "bool", default=True,
        help="reference-net copper on the layers between two traces shields them "
             "(false: count every broadside run as unshielded)")),
    "reference_nets": ("reference_nets", Option(
        "patterns", default=DEFAULT_REFERENCE_NETS,
        help="net-name patterns of the nets that are AC ground: their copper shields")),
    "guard_stitch_fraction": ("guard_stitch_fraction", Option(
        "ratio", default=0.05, minimum=0.0, maximum=1.0, exclusive_minimum=True,
        help="a guard trace counts as grounded when its stitching vias are at most this fraction of a "
             "wavelength apart (at the faster neighbouring net's frequency)")),
    "solder_mask": ("solder_mask", Option(
        "choice", default="flat", choices=("flat", "conformal"),
        help="how the solder mask of the stackup lies in the cross-sections: filling the outer copper band "
             "with a flat top (flat: errs toward more coupling) or following the copper with one thickness "
             "(conformal: closer where the mask is as thin over the laminate as over the copper)")),
    "bandwidth_factor": ("bandwidth_factor", Option(
        "ratio", default=0.35, minimum=0.0, maximum=1.0, exclusive_minimum=True,
        help="aggressor frequency = factor / rise_time")),
}

#: Settings whose maximum is itself not allowed (Option has no such flag).
_EXCLUSIVE_MAXIMUM_SETTINGS = frozenset({"parallel_angle"})

#: class attribute -> (NetClass field, schema). ``nets`` is read separately.
CLASS_SCHEMA: dict[str, tuple[str, Option]] = {
    "swing": ("swing_v", Option(
        "voltage", minimum=0.0, exclusive_minimum=True, help="aggressor: voltage swing V1")),
    "frequency": ("frequency_hz", Option(
        "frequency", minimum=0.0, exclusive_minimum=True, help="aggressor: frequency")),
    "rise_time": ("rise_time_s", Option(
        "time", minimum=0.0, exclusive_minimum=True, help="aggressor: rise time")),
    "resistance": ("resistance_ohm", Option(
        "resistance", minimum=0.0, exclusive_minimum=True,
        help="victim: resistance to ground of the victim node")),
    "node_capacitance": ("node_capacitance_f", Option(
        "capacitance", default=0.0, minimum=0.0,
        help="victim: lumped capacitance of the node besides its traces")),
    "duty": ("duty", Option(
        "ratio", minimum=0.0, maximum=1.0, exclusive_minimum=True,
        help="aggressor: share of the period spent high, for its trapezoidal spectrum (default 0.5)")),
    "bandwidth": ("bandwidth_hz", Option(
        "frequency", minimum=0.0, exclusive_minimum=True,
        help="victim: -3 dB bandwidth of what reads the node (a single-pole filter)")),
    "filter_resistance": ("filter_resistance_ohm", Option(
        "resistance", minimum=0.0, exclusive_minimum=True,
        help="victim: R of an RC low-pass between the node and what reads it (with filter_capacitance)")),
    "filter_capacitance": ("filter_capacitance_f", Option(
        "capacitance", minimum=0.0, exclusive_minimum=True,
        help="victim: C of that RC low-pass (with filter_resistance)")),
}
CLASS_KEYS: tuple[str, ...] = ("nets", *CLASS_SCHEMA)


# --------------------------------------------------------------------------
# What a rule file loads into
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Settings:
    """Search and physics settings of a rule set (internal units)."""

    broadside_search_mm: float
    edge_search_mm: float
    parallel_angle_deg: float
    planes_shield: bool
    bandwidth_factor: float
    #: net-name patterns of the reference (AC ground) nets
    reference_nets: tuple[str, ...] = DEFAULT_REFERENCE_NETS
    #: stitching of guard traces: the largest via spacing, as a fraction of a wavelength
    guard_stitch_fraction: float = 0.05
    #: solder mask in the cross-sections: "flat" or "conformal" (``Stackup.mask_style``)
    solder_mask: str = "flat"


@dataclass(frozen=True)
class NetClass:
    """A named group of nets, with the electrical facts the noise estimate needs.

    ``patterns`` are ``fnmatch.fnmatchcase`` globs matched against the whole
    net name, or, after ``re:``, regular expressions applied with
    ``re.search`` (anchor them with ``^`` / ``$`` yourself). Both are case
    sensitive. SI units: V, Hz, s, ohm, F.

    >>> c = NetClass("clocks", ("*CLK*", "re:^SPI[0-9]_SCK$"), 3.3, None, 1e-9, None)
    >>> c.matches("SYS_CLK"), c.matches("SPI1_SCK"), c.matches("SPI1_SCKX")
    (True, True, False)
    >>> f"{c.aggressor_frequency_hz(0.35):.4g} Hz"
    '3.5e+08 Hz'
    """

    name: str
    patterns: tuple[str, ...]
    swing_v: float | None
    frequency_hz: float | None
    rise_time_s: float | None
    resistance_ohm: float | None
    node_capacitance_f: float = 0.0
    duty: float | None = None
    bandwidth_hz: float | None = None
    filter_resistance_ohm: float | None = None
    filter_capacitance_f: float | None = None
    _compiled: tuple[re.Pattern[str], ...] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_compiled", tuple(compile_pattern(p) for p in self.patterns))

    def matches(self, net_name: str) -> bool:
        """True when ``net_name`` matches any of the class's patterns."""
        return any(rx.search(net_name) for rx in self._compiled)

    def aggressor_frequency_hz(self, bandwidth_factor: float) -> float | None:
        """The one frequency of the lumped model: ``frequency``, or
        ``bandwidth_factor / rise_time``, the higher where both are given
        (the lumped noise rises with frequency: the higher errs high), else
        None."""
        edge = bandwidth_factor / self.rise_time_s if self.rise_time_s is not None else None
        if self.frequency_hz is not None:
            return max(self.frequency_hz, edge) if edge is not None else self.frequency_hz
        return edge

    def victim_corner_hz(self) -> float | None:
        """The corner of the victim's single-pole filter: ``bandwidth``, or
        1 / (2 pi R C) of ``filter_resistance`` and ``filter_capacitance``,
        else None (unfiltered)."""
        if self.bandwidth_hz is not None:
            return self.bandwidth_hz
        if self.filter_resistance_ohm is not None and self.filter_capacitance_f is not None:
            return 1.0 / (2.0 * math.pi * self.filter_resistance_ohm * self.filter_capacitance_f)
        return None


class FrozenOptions(Mapping[str, Any]):
    """A read-only mapping (picklable, unlike ``types.MappingProxyType``)."""

    __slots__ = ("_data",)

    def __init__(self, data: Mapping[str, Any]) -> None:
        self._data = dict(data)

    def __getitem__(self, key: str) -> Any:
        return self._data[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._data)

    def __len__(self) -> int:
        return len(self._data)

    def __repr__(self) -> str:
        return f"FrozenOptions({self._data!r})"

    def __getstate__(self) -> dict[str, Any]:
        return self._data

    def __setstate__(self, state: dict[str, Any]) -> None:
        self._data = state


@dataclass(frozen=True)
class Rule:
    """One rule: a kind, the classes it applies between, and its options.

    ``aggressor`` / ``victim``: class names; ``()`` means any net.
    ``options``: every option of the kind, defaults filled in, in internal
    units; a table option is a tuple of dicts (one per row).
    """

    name: str
    kind: str
    aggressor: tuple[str, ...]
    victim: tuple[str, ...]
    severity: str
    description: str
    options: Mapping[str, Any]


@dataclass(frozen=True)
class RuleSet:
    """A loaded, merged and validated rule set.

    ``path``: the file it was loaded from, as given. ``sha256``: hash of the
    canonical JSON of :meth:`to_dict` (the resolved content, not the file's
    bytes), so two files that resolve to the same set hash the same.
    """

    path: str
    sha256: str
    settings: Settings
    classes: tuple[NetClass, ...]
    rules: tuple[Rule, ...]
    pairs: tuple[tuple[str, str], ...] = ()

    def classify(self, net_names: Sequence[str]) -> list[tuple[str, ...]]:
        """Per net, the names of all classes it matches, in file order."""
        return [tuple(c.name for c in self.classes if c.matches(n)) for n in net_names]

    def net_class(self, name: str) -> NetClass:
        """The class called ``name`` (``KeyError`` if there is none)."""
        for c in self.classes:
            if c.name == name:
                return c
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        """The resolved set as plain JSON-able data (internal units)."""
        return _canonical(self.settings, self.classes, self.rules, self.pairs)


# --------------------------------------------------------------------------
# Public entry points
# --------------------------------------------------------------------------


def load_ruleset(path: str | os.PathLike[str]) -> RuleSet:
    """Load, merge (``extends``) and validate the rule file at ``path``.

    Raises :class:`checker.errors.RuleError` for every problem with the file
    or a file it extends.
    """
    file = os.fspath(path)
    resolved = _load_file(pathlib.Path(file), file, chain=())
    settings = Settings(**{
        attr: resolved.settings.get(key, opt.default) for key, (attr, opt) in SETTINGS_SCHEMA.items()
    })
    classes = tuple(resolved.classes.values())
    rules = tuple(resolved.rules.values())
    pairs = tuple(resolved.pairs)
    digest = hashlib.sha256(_canonical_json(settings, classes, rules, pairs).encode("utf-8")).hexdigest()
    return RuleSet(path=file, sha256=digest, settings=settings, classes=classes, rules=rules, pairs=pairs)


def default_ruleset() -> RuleSet:
    """The shipped ``default`` rule set."""
    return load_ruleset(shipped_ruleset_path("default"))


def ruleset_named(given: str | os.PathLike[str] | None) -> RuleSet:
    """The rule set ``--rules`` names: a rule file, else a shipped rule set
    of that name (``--rules default``), else the shipped ``default`` when
    nothing is given. A name that is neither an existing file nor a shipped
    set is one error naming both possibilities."""
    if given is None or given == "":
        return default_ruleset()
    text = os.fspath(given)
    path = pathlib.Path(text)
    shipped = _find_shipped(text) if not path.exists() and NAME_PATTERN.match(text) else None
    if shipped is not None:
        return load_ruleset(shipped)
    if not path.exists():
        names = ", ".join(shipped_ruleset_names()) or "none"
        raise RuleError(text, None, f"no such file, and no shipped rule set of that name (shipped: {names})")
    return load_ruleset(path)


def shipped_ruleset_path(name: str) -> pathlib.Path:
    """The file of the shipped rule set ``name``.

    Looks in the source tree's ``rules/`` directory (only when this package
    sits in a source checkout, i.e. next to ``pyproject.toml``), then in the
    package data ``checker/rulesets/`` of an installed copy. Raises
    :class:`RuleError` when there is no such set.
    """
    if not isinstance(name, str) or not NAME_PATTERN.match(name):
        raise RuleError(str(name), None, "not a shipped rule set name (lowercase letters, digits and '-')")
    candidate = _find_shipped(name)
    if candidate is not None:
        return candidate
    shipped = ", ".join(shipped_ruleset_names()) or "none"
    raise RuleError(name, None, f"no shipped rule set with this name (shipped: {shipped})")


def shipped_ruleset_names() -> list[str]:
    """Names of every shipped rule set, sorted."""
    names: set[str] = set()
    for directory in _shipped_dirs():
        if directory.is_dir():
            names.update(p.stem for p in directory.glob("*.yaml") if NAME_PATTERN.match(p.stem))
    return sorted(names)


_resource_files = contextlib.ExitStack()
atexit.register(_resource_files.close)


def _find_shipped(name: str) -> pathlib.Path | None:
    for directory in _shipped_dirs():
        candidate = directory / f"{name}.yaml"
        if candidate.is_file():
            return candidate
    return None


def _shipped_dirs() -> list[pathlib.Path]:
    dirs = []
    source_root = pathlib.Path(__file__).resolve().parent.parent
    if (source_root / "pyproject.toml").is_file():
        dirs.append(source_root / "rules")
    try:
        data = importlib.resources.files("checker") / "rulesets"
    except (ModuleNotFoundError, TypeError):  # pragma: no cover - defensive
        return dirs
    if isinstance(data, pathlib.Path):
        dirs.append(data)
    elif data.is_dir():  # pragma: no cover - zipped installs only
        dirs.append(_resource_files.enter_context(importlib.resources.as_file(data)))
    return dirs


# --------------------------------------------------------------------------
# Loading one file and merging it onto what it extends
# --------------------------------------------------------------------------


@dataclass
class _Resolved:
    """A file merged with everything it extends (settings only as given)."""

    settings: dict[str, Any] = field(default_factory=dict)
    classes: dict[str, NetClass] = field(default_factory=dict)
    rules: dict[str, Rule] = field(default_factory=dict)
    pairs: list[tuple[str, str]] = field(default_factory=list)


@dataclass
class _OwnRule:
    rule: Rule
    place: str
    refs: list[tuple[str, str]]  # (class name, key path) for every class it names


def _load_file(path: pathlib.Path, file: str, chain: tuple[tuple[pathlib.Path, str], ...]) -> _Resolved:
    """``file`` merged onto what it extends; ``chain``: the files that extend it (resolved, shown)."""
    data = _read_yaml(path, file)
    if not isinstance(data, dict):
        raise RuleError(file, None, f"expected a mapping at the top level (starting with 'version: 1'), "
                                    f"got {describe_words(data)}")
    if "version" not in data:
        raise RuleError(file, None, "missing required key 'version' (write 'version: 1')")
    version = data["version"]
    if type(version) is not int or version != SUPPORTED_VERSION:
        raise RuleError(file, "version", f"unsupported version {version!r} (supported: {SUPPORTED_VERSION})")
    for key in data:
        if key not in TOP_LEVEL_KEYS:
            raise RuleError(file, join_key("", key), f"unknown top-level key (accepted: {', '.join(TOP_LEVEL_KEYS)})")

    own_settings = _parse_settings(data.get("settings", {}), file)
    own_classes = _parse_classes(data.get("net_classes", {}), file)
    own_rules = _parse_rules(data.get("rules", []), file)
    own_pairs = _parse_pairs(data.get("differential_pairs", []), file)

    chain = (*chain, (path.resolve(), file))
    if "extends" in data:
        parent_path, parent_file = _extends_target(data["extends"], path, file)
        parent_here = parent_path.resolve()
        seen = [resolved for resolved, _ in chain]
        if parent_here in seen:
            loop = [shown for _, shown in chain[seen.index(parent_here):]] + [parent_file]
            raise RuleError(file, "extends", f"{data['extends']!r} makes an extends cycle ({' -> '.join(loop)})")
        base = _load_file(parent_path, parent_file, chain)
    else:
        base = _Resolved()

    disabled = _parse_disable(data, base, own_rules, file)

    merged = _Resolved(
        settings={**base.settings, **own_settings},
        classes={**base.classes, **own_classes},
        rules={n: r for n, r in base.rules.items() if n not in disabled},
        pairs=_merge_pairs(base.pairs, own_pairs, file),
    )
    for own in own_rules:
        merged.rules[own.rule.name] = own.rule
        for class_name, place in own.refs:
            if class_name not in merged.classes:
                defined = ", ".join(merged.classes) or "none"
                raise RuleError(file, place, f"no net class named {class_name!r} (defined: {defined}; "
                                             f"or 'any')")
    return merged


def _extends_target(value: Any, path: pathlib.Path, file: str) -> tuple[pathlib.Path, str]:
    if not isinstance(value, str) or not value.strip():
        raise RuleError(file, "extends",
                        f"expected a shipped rule set name or a file path, got {describe_words(value)}")
    if NAME_PATTERN.match(value):
        candidate = _find_shipped(value)
        if candidate is not None:
            return candidate, str(candidate)
        shipped = ", ".join(shipped_ruleset_names()) or "none"
        raise RuleError(file, "extends", f"no shipped rule set named {value!r} (shipped: {shipped}; "
                                         f"to extend a file give its path, e.g. '{value}.yaml')")
    target = path.parent / value
    target_file = os.path.normpath(os.path.join(os.path.dirname(file), value))
    if not target.is_file():
        reason = "is not a file" if target.exists() else "no such file"
        raise RuleError(file, "extends", f"{value!r}: {reason} (looked for {target_file}, relative to this file)")
    return target, target_file


def _parse_pairs(value: Any, file: str) -> list[tuple[str, str]]:
    """``differential_pairs: [[USB_DP, USB_DN], ...]``: nets that form a
    declared differential pair, exempt from each other's checks (as a pair
    declared in a board JSON file is)."""
    if not isinstance(value, list):
        raise RuleError(file, "differential_pairs", f"expected a list of [net, net] pairs, got {describe_words(value)}")
    pairs: list[tuple[str, str]] = []
    seen: dict[str, int] = {}
    for i, pair in enumerate(value):
        place = f"differential_pairs[{i}]"
        if not (isinstance(pair, list) and len(pair) == 2 and all(isinstance(n, str) and n.strip() for n in pair)):
            raise RuleError(file, place, f"expected two net names, [positive, negative], got {describe_words(pair)}")
        a, b = pair
        if a == b:
            raise RuleError(file, place, f"a net cannot pair with itself ({a!r})")
        for name in (a, b):
            if name in seen:
                raise RuleError(file, place, f"net {name!r} is already in differential_pairs[{seen[name]}]")
            seen[name] = i
        pairs.append((a, b))
    return pairs


def _merge_pairs(base: list[tuple[str, str]], own: list[tuple[str, str]], file: str) -> list[tuple[str, str]]:
    """Inherited pairs plus this file's; a net paired differently here replaces the inherited pair."""
    mine = {n for pair in own for n in pair}
    return [p for p in base if not (set(p) & mine)] + own


def _parse_disable(data: dict[str, Any], base: _Resolved, own_rules: list[_OwnRule], file: str) -> set[str]:
    if "disable" not in data:
        return set()
    value = data["disable"]
    if "extends" not in data:
        raise RuleError(file, "disable", "only allowed together with 'extends' (it removes inherited rules)")
    if not isinstance(value, list):
        raise RuleError(file, "disable", f"expected a list of inherited rule names, got {describe_words(value)}")
    own_names = {o.rule.name for o in own_rules}
    disabled: set[str] = set()
    for i, name in enumerate(value):
        place = f"disable[{i}]"
        if not isinstance(name, str):
            raise RuleError(file, place, f"expected a rule name, got {describe_words(name)}")
        if name not in base.rules:
            inherited = ", ".join(base.rules) or "none"
            raise RuleError(file, place, f"no inherited rule named {name!r} (inherited: {inherited})")
        if name in disabled:
            raise RuleError(file, place, f"{name!r} is listed twice")
        if name in own_names:
            raise RuleError(file, place, f"{name!r} is also defined in this file's rules "
                                         f"(a rule given here replaces the inherited one; drop one of the two)")
        disabled.add(name)
    return disabled


# --------------------------------------------------------------------------
# Sections
# --------------------------------------------------------------------------


def _parse_settings(value: Any, file: str) -> dict[str, Any]:
    if not isinstance(value, dict):
        raise RuleError(file, "settings", f"expected a mapping of settings, got {describe_words(value)}")
    out: dict[str, Any] = {}
    for key, raw in value.items():
        place = join_key("settings", key)
        if key not in SETTINGS_SCHEMA:
            raise RuleError(file, place, f"unknown setting (accepted: {', '.join(SETTINGS_SCHEMA)})")
        _, opt = SETTINGS_SCHEMA[key]
        if opt.kind == "patterns":
            out[key] = () if raw == [] else _parse_patterns(raw, file, place)
            continue
        out[key] = _read_option(raw, opt, file, place,
                                exclusive_maximum=key in _EXCLUSIVE_MAXIMUM_SETTINGS)
    return out


def _parse_classes(value: Any, file: str) -> dict[str, NetClass]:
    if not isinstance(value, dict):
        raise RuleError(file, "net_classes", f"expected a mapping of class name -> class, got {describe_words(value)}")
    out: dict[str, NetClass] = {}
    for name, body in value.items():
        place = join_key("net_classes", name)
        _check_name(name, file, place, "net class name")
        if name == ANY:
            raise RuleError(file, place, f"'{ANY}' is reserved (it means every net in a rule)")
        if not isinstance(body, dict):
            raise RuleError(file, place, f"expected a mapping with 'nets' and the class's attributes, "
                                         f"got {describe_words(body)}")
        for key in body:
            if key not in CLASS_KEYS:
                raise RuleError(file, join_key(place, key),
                                f"unknown net class attribute (accepted: {', '.join(CLASS_KEYS)})")
        if "nets" not in body:
            raise RuleError(file, place, "missing required key 'nets' (a list of net-name patterns)")
        patterns = _parse_patterns(body["nets"], file, join_key(place, "nets"))
        values: dict[str, Any] = {}
        for key, (attr, opt) in CLASS_SCHEMA.items():
            if key in body:
                values[attr] = _read_option(body[key], opt, file, join_key(place, key))
            else:
                values[attr] = opt.default
        if values["duty"] is not None and values["duty"] >= 1.0:
            raise RuleError(file, join_key(place, "duty"),
                            f"must be < 1 (always high couples nothing), got {body['duty']}")
        if (values["filter_resistance_ohm"] is None) != (values["filter_capacitance_f"] is None):
            missing = "filter_capacitance" if values["filter_capacitance_f"] is None else "filter_resistance"
            raise RuleError(file, join_key(place, missing),
                            "an RC filter needs both filter_resistance and filter_capacitance")
        if values["bandwidth_hz"] is not None and values["filter_resistance_ohm"] is not None:
            raise RuleError(file, join_key(place, "bandwidth"),
                            "give either bandwidth or filter_resistance and filter_capacitance, not both")
        out[name] = NetClass(name=name, patterns=patterns, **values)
    return out


def _parse_patterns(value: Any, file: str, place: str) -> tuple[str, ...]:
    if not isinstance(value, list) or not value:
        raise RuleError(file, place, f"expected a non-empty list of net-name patterns "
                                     f"(globs, or regular expressions after '{REGEX_PREFIX}'), "
                                     f"got {describe_words(value)}")
    patterns = []
    for i, pattern in enumerate(value):
        here = f"{place}[{i}]"
        if not isinstance(pattern, str):
            raise RuleError(file, here, f"expected a net-name pattern string, got {describe_words(pattern)}"
                                        f"{_quote_hint(pattern)}")
        if not pattern or pattern == REGEX_PREFIX:
            raise RuleError(file, here, "empty pattern")
        try:
            compile_pattern(pattern)
        except re.error as e:
            raise RuleError(file, here, f"bad regular expression {pattern[len(REGEX_PREFIX):]!r}: {e}") from None
        patterns.append(pattern)
    return tuple(patterns)


def _parse_rules(value: Any, file: str) -> list[_OwnRule]:
    if not isinstance(value, list):
        raise RuleError(file, "rules", f"expected a list of rules, got {describe_words(value)}")
    out: list[_OwnRule] = []
    first_place: dict[str, str] = {}
    for i, raw in enumerate(value):
        own = _parse_rule(raw, file, f"rules[{i}]")
        name = own.rule.name
        if name in first_place:
            raise RuleError(file, f"rules[{i}].name", f"duplicate rule name {name!r} (also {first_place[name]})")
        first_place[name] = f"rules[{i}]"
        out.append(own)
    return out


def _parse_rule(raw: Any, file: str, place: str) -> _OwnRule:
    if not isinstance(raw, dict):
        raise RuleError(file, place, f"expected a mapping with at least 'name' and 'kind', got {describe_words(raw)}")
    for key in ("name", "kind"):
        if key not in raw:
            raise RuleError(file, place, f"missing required key '{key}'")
    name = raw["name"]
    _check_name(name, file, join_key(place, "name"), "rule name")
    kind = raw["kind"]
    if not isinstance(kind, str) or kind not in REGISTRY:
        shown = repr(kind) if isinstance(kind, str) else describe_words(kind)
        raise RuleError(file, join_key(place, "kind"), f"unknown kind {shown} (known: {', '.join(sorted(REGISTRY))})")
    schema: dict[str, Option] = REGISTRY[kind].OPTIONS
    for key in raw:
        if key not in COMMON_RULE_KEYS and key not in schema:
            raise RuleError(file, join_key(place, key),
                            f"unknown key for kind {kind!r} (common keys: {', '.join(COMMON_RULE_KEYS)}; "
                            f"options of {kind}: {', '.join(schema) or 'none'})")
    refs: list[tuple[str, str]] = []
    aggressor = _parse_class_refs(raw.get("aggressor", ANY), file, join_key(place, "aggressor"), refs)
    victim = _parse_class_refs(raw.get("victim", ANY), file, join_key(place, "victim"), refs)
    if victim and not getattr(REGISTRY[kind], "USES_VICTIM", True):
        raise RuleError(file, join_key(place, "victim"),
                        f"kind {kind!r} takes no victim classes (its findings name their own victim; see "
                        f"'couplint kinds {kind}'); leave 'victim' out or set it to '{ANY}'")
    severity = raw.get("severity", "error")
    if not isinstance(severity, str) or severity not in SEVERITIES:
        raise RuleError(file, join_key(place, "severity"),
                        f"{_show(severity)} is not a severity (accepted: {', '.join(SEVERITIES)})")
    description = raw.get("description", "")
    if not isinstance(description, str):
        raise RuleError(file, join_key(place, "description"), f"expected text, got {describe_words(description)}")
    options: dict[str, Any] = {}
    for key, opt in schema.items():
        if key in raw:
            options[key] = _read_option(raw[key], opt, file, join_key(place, key))
        elif opt.required:
            hint = f" ({opt.help})" if opt.help else ""
            raise RuleError(file, place, f"missing required option {key!r} for kind {kind!r}{hint}")
        elif opt.kind == "table":
            options[key] = tuple(dict(row) for row in (opt.default or ()))
        else:
            options[key] = opt.default
    rule = Rule(name=name, kind=kind, aggressor=aggressor, victim=victim, severity=severity,
                description=description, options=FrozenOptions(options))
    return _OwnRule(rule=rule, place=place, refs=refs)


def _parse_class_refs(value: Any, file: str, place: str, refs: list[tuple[str, str]]) -> tuple[str, ...]:
    if value == ANY:
        return ()
    if isinstance(value, str):
        _check_name(value, file, place, "net class name")
        refs.append((value, place))
        return (value,)
    if not isinstance(value, list) or not value:
        raise RuleError(file, place, f"expected '{ANY}', a net class name or a non-empty list of class names, "
                                     f"got {describe_words(value)}")
    names: list[str] = []
    for i, item in enumerate(value):
        here = f"{place}[{i}]"
        if item == ANY:
            raise RuleError(file, here, f"'{ANY}' cannot be combined with class names (write {ANY!r} alone)")
        _check_name(item, file, here, "net class name")
        if item in names:
            raise RuleError(file, here, f"{item!r} is listed twice")
        names.append(item)
        refs.append((item, here))
    return tuple(names)


# --------------------------------------------------------------------------
# Values
# --------------------------------------------------------------------------


def _read_option(value: Any, opt: Option, file: str, place: str, *, exclusive_maximum: bool = False) -> Any:
    """``value`` read and checked against ``opt``, in internal units."""
    if opt.kind == "choice":
        if not isinstance(value, str) or value not in opt.choices:
            raise RuleError(file, place, f"{_show(value)} is not allowed (accepted: {', '.join(opt.choices)})")
        return value
    if opt.kind == "bool":
        if not isinstance(value, bool):
            raise RuleError(file, place, f"expected true or false, got {describe_words(value)}")
        return value
    if opt.kind == "table":
        return _read_table(value, opt, file, place)
    if opt.kind in UNITS:
        number = _quantity(value, opt.kind, file, place)
        _check_range(number, opt, file, place, exclusive_maximum)
        return number
    raise ValueError(f"option schema for {place} has unknown kind {opt.kind!r}")  # a bug in a schema, not input


def _quantity(value: Any, kind: str, file: str, place: str) -> float:
    if value is None or isinstance(value, bool):
        example = f"1 {DEFAULT_UNIT[kind]}".strip()
        raise RuleError(file, place, f"expected a {kind} like '{example}', got {describe_words(value)}")
    try:
        return parse_quantity(value, kind)
    except UnitError as e:
        raise RuleError(file, place, str(e)) from None


def _check_range(number: float, opt: Option, file: str, place: str, exclusive_maximum: bool = False) -> None:
    low, high = opt.minimum, opt.maximum
    below = low is not None and (number <= low if opt.exclusive_minimum else number < low)
    above = high is not None and (number >= high if exclusive_maximum else number > high)
    if not (below or above):
        return
    parts = []
    if low is not None:
        parts.append(f"{'>' if opt.exclusive_minimum else '>='} {_fmt(low, opt.kind)}")
    if high is not None:
        parts.append(f"{'<' if exclusive_maximum else '<='} {_fmt(high, opt.kind)}")
    raise RuleError(file, place, f"must be {' and '.join(parts)}, got {_fmt(number, opt.kind)}")


def _read_table(value: Any, opt: Option, file: str, place: str) -> tuple[dict[str, float], ...]:
    columns = dict(opt.columns)
    names = ", ".join(columns)
    if not isinstance(value, list) or not value:
        raise RuleError(file, place, f"expected a non-empty list of rows, each a mapping with {names}, "
                                     f"got {describe_words(value)}")
    rows: list[dict[str, float]] = []
    key_column = opt.columns[0][0]
    for i, raw in enumerate(value):
        here = f"{place}[{i}]"
        if not isinstance(raw, dict):
            raise RuleError(file, here, f"expected a row mapping with {names}, got {describe_words(raw)}")
        for key in raw:
            if key not in columns:
                raise RuleError(file, join_key(here, key), f"unknown column (columns: {names})")
        row: dict[str, float] = {}
        for column, unit_kind in opt.columns:
            if column not in raw:
                raise RuleError(file, here, f"missing column {column!r} (columns: {names})")
            number = _quantity(raw[column], unit_kind, file, join_key(here, column))
            if number < 0:
                raise RuleError(file, join_key(here, column), f"must be >= 0, got {_fmt(number, unit_kind)}")
            row[column] = number
        if rows and row[key_column] <= rows[-1][key_column]:
            raise RuleError(file, join_key(here, key_column),
                            f"{_fmt(row[key_column], opt.columns[0][1])} is not larger than the row before "
                            f"({_fmt(rows[-1][key_column], opt.columns[0][1])}); rows must be in strictly "
                            f"increasing {key_column} order")
        rows.append(row)
    return tuple(rows)


def _check_name(name: Any, file: str, place: str, what: str) -> None:
    if not isinstance(name, str) or not NAME_PATTERN.match(name):
        raise RuleError(file, place, f"{_show(name)} is not a valid {what} (lowercase letter first, then "
                                     f"lowercase letters, digits and '-')")


def compile_pattern(pattern: str) -> re.Pattern[str]:
    """A net-name pattern as an expression to ``search`` with: after
    ``re:`` the regular expression as written; otherwise the glob, anchored
    at both ends so it matches the whole name, as ``fnmatch.fnmatchcase``
    does (``fnmatch.translate`` anchors only the end).

    >>> bool(compile_pattern("AIN*").search("AIN1")), bool(compile_pattern("AIN*").search("XAIN1"))
    (True, False)
    """
    if pattern.startswith(REGEX_PREFIX):
        return re.compile(pattern[len(REGEX_PREFIX):])
    return re.compile(r"\A" + fnmatch.translate(pattern))


# --------------------------------------------------------------------------
# YAML
# --------------------------------------------------------------------------


def _read_yaml(path: pathlib.Path, file: str) -> Any:
    """Parse one YAML document with safe tags only, rejecting duplicate keys."""
    raw = read_bytes(str(path), RuleError, "a rule file")
    text = decode_utf8(raw, file, RuleError)
    try:
        node = compose_document(text, MAX_YAML_NODES, "a rule file")
        if node is None:
            raise RuleError(file, None, "the file is empty (a rule file starts with 'version: 1')")
        check_duplicate_keys(node, file)
        return construct(node)
    except YamlProblem as e:
        raise RuleError(file, e.place, e.message) from None


#: Most values a rule file may hold once its YAML aliases are expanded.
MAX_YAML_NODES = 1_000_000


def check_duplicate_keys(node: yaml.Node, file: str) -> None:
    """A RuleError at the first key given twice in one mapping of the document ``node``."""
    found = first_repeated_key(node, join_key)
    if found is not None:
        raise RuleError(file, found.path, f"duplicate key at line {found.line}, column {found.column} "
                                          f"(first given at line {found.first_line}; each key may appear once)")


# --------------------------------------------------------------------------
# Small helpers
# --------------------------------------------------------------------------

_PLAIN_KEY = re.compile(r"^[A-Za-z_][A-Za-z0-9_-]*$")


def join_key(path: str, key: Any) -> str:
    """``path.key``, or ``path['odd key']`` when the key is not a plain word."""
    if isinstance(key, str) and _PLAIN_KEY.match(key):
        return f"{path}.{key}" if path else key
    return f"{path}[{key!r}]"


def _show(value: Any) -> str:
    return repr(value) if isinstance(value, str) else describe_words(value)


def _quote_hint(value: Any) -> str:
    if isinstance(value, bool):
        return " (YAML reads yes/no/on/off/true/false as booleans: quote the pattern)"
    if isinstance(value, (int, float)):
        return " (quote it to make it text)"
    return ""


def _fmt(number: float, kind: str) -> str:
    """An internal-unit number shown in the kind's default unit."""
    if kind not in UNITS:
        return f"{number:g}"
    unit = DEFAULT_UNIT[kind]
    return f"{number / UNITS[kind][unit]:g} {unit}".strip()


def _canonical(settings: Settings, classes: Sequence[NetClass], rules: Sequence[Rule],
               pairs: Sequence[tuple[str, str]] = ()) -> dict[str, Any]:
    out = {
        "version": SUPPORTED_VERSION,
        "settings": asdict(settings),
        "net_classes": [
            {
                "name": c.name,
                "patterns": list(c.patterns),
                "swing_v": c.swing_v,
                "frequency_hz": c.frequency_hz,
                "rise_time_s": c.rise_time_s,
                "resistance_ohm": c.resistance_ohm,
                "node_capacitance_f": c.node_capacitance_f,
                "duty": c.duty,
                "bandwidth_hz": c.bandwidth_hz,
                "filter_resistance_ohm": c.filter_resistance_ohm,
                "filter_capacitance_f": c.filter_capacitance_f,
            }
            for c in classes
        ],
        "rules": [
            {
                "name": r.name,
                "kind": r.kind,
                "aggressor": list(r.aggressor),
                "victim": list(r.victim),
                "severity": r.severity,
                "description": r.description,
                "options": {
                    k: [dict(row) for row in v] if isinstance(v, tuple) else v for k, v in r.options.items()
                },
            }
            for r in rules
        ],
    }
    if pairs:  # only when given, so the hash of a set without pairs is unchanged
        out["differential_pairs"] = [list(p) for p in pairs]
    return out


def _canonical_json(settings: Settings, classes: Sequence[NetClass], rules: Sequence[Rule],
                    pairs: Sequence[tuple[str, str]] = ()) -> str:
    return json.dumps(_canonical(settings, classes, rules, pairs), sort_keys=True, separators=(",", ":"),
                      allow_nan=False, ensure_ascii=True)
