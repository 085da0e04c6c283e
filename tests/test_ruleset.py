"""Tests for the rule-file loader (checker.ruleset) and the shipped default set."""

from __future__ import annotations

import copy
import pathlib
import pickle
import re
import textwrap

import pytest
import yaml

from checker import ruleset
from checker.checks import REGISTRY
from checker.errors import RuleError
from checker.ruleset import (
    NetClass,
    Rule,
    RuleSet,
    Settings,
    default_ruleset,
    load_ruleset,
    shipped_ruleset_names,
    shipped_ruleset_path,
)
from checker.units import UNITS

REPO = pathlib.Path(__file__).resolve().parent.parent
DATA = pathlib.Path(__file__).resolve().parent / "data" / "rules"

#: A complete, valid file the error cases below start from.
GOOD = """\
version: 1
net_classes:
  clocks:
    nets: ["*CLK*"]
    swing: 3.3 V
    frequency: 25 MHz
  analog:
    nets: ["AIN*"]
    resistance: 10 kohm
rules:
  - name: cross
    kind: crossing-angle
    aggressor: clocks
    victim: analog
"""


def write(tmp_path: pathlib.Path, text: str, name: str = "rules.yaml") -> pathlib.Path:
    path = tmp_path / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def load_error(path: pathlib.Path | str) -> RuleError:
    with pytest.raises(RuleError) as info:
        load_ruleset(path)
    return info.value


def with_rule(body: str) -> str:
    """GOOD plus one more rule (its lines indented as a list item)."""
    return GOOD + textwrap.indent(textwrap.dedent(body), "  ")


# ---------------------------------------------------------------- default set


def test_default_set_loads_with_the_documented_values():
    rs = default_ruleset()
    assert rs.path == str(shipped_ruleset_path("default"))
    assert rs.settings == Settings(broadside_search_mm=0.5, edge_search_mm=1.0, parallel_angle_deg=10.0,
                                   planes_shield=True, bandwidth_factor=0.35,
                                   reference_nets=("GND", "GND*", "*_GND", "*GND", "AGND*", "DGND*", "PGND*",
                                                   "VSS*", "0V", "[0-9]V[0-9]*", "+[0-9]*V*", "VCC", "VCC_*",
                                                   "VDD", "VDD_*"))
    classes = {c.name: c for c in rs.classes}
    assert list(classes) == ["clocks", "switch-nodes", "sensitive-analog", "filtered-analog"]
    assert classes["filtered-analog"].patterns == ("*_LPF",)
    assert classes["filtered-analog"].bandwidth_hz == 10.0 and classes["filtered-analog"].victim_corner_hz() == 10.0
    assert classes["clocks"].patterns == ("*CLK*", "*SCK*")
    assert classes["clocks"].swing_v == 3.3 and classes["clocks"].frequency_hz == 25e6
    assert classes["switch-nodes"].patterns == ("SW_*", "*_SW", "*PHASE*")
    assert classes["switch-nodes"].swing_v == 12.0
    assert classes["switch-nodes"].rise_time_s == pytest.approx(5e-9)
    assert classes["sensitive-analog"].patterns == ("*SENSE*", "*VREF*", "AIN*", "THERM*")
    assert classes["sensitive-analog"].resistance_ohm == 1e5
    assert classes["sensitive-analog"].node_capacitance_f == pytest.approx(10e-12)

    by_kind = {r.kind: r for r in rs.rules}
    assert sorted(by_kind) == sorted(REGISTRY), "one rule of each kind"
    for rule in rs.rules:
        assert rule.aggressor == ("clocks", "switch-nodes")
        # reference-gap takes no victim classes (its victim is the reference net with the gap)
        assert rule.victim == (() if rule.kind == "reference-gap" else ("sensitive-analog",))
    assert dict(by_kind["crossing-angle"].options) == {"min_angle": 60.0, "max_length": 2.0}
    assert dict(by_kind["spacing-ratio"].options) == {"measure": "centre/width", "min_ratio": 3.0,
                                                       "min_length": 1.0}
    assert by_kind["parallel-length"].options["coupling"] == "edge"
    assert by_kind["parallel-length"].options["table"] == ({"gap": 0.2, "max_length": 5.0},
                                                           {"gap": 0.5, "max_length": 20.0})
    assert by_kind["capacitance-budget"].options["max_c12"] == pytest.approx(0.5e-12)
    assert by_kind["noise-budget"].options["max_noise"] == pytest.approx(0.010)
    assert dict(by_kind["reference-gap"].options) == {"max_length": 1.0}


def test_default_set_classifies_demo_style_net_names():
    rs = default_ruleset()
    assert rs.classify(["MCU_CLK", "SPI1_SCK", "SW_BUCK", "VIN_SW", "BUCK_PHASE", "VREF_ADC",
                        "AIN0", "THERM1", "I_SENSE", "GND", "clk_lower"]) == [
        ("clocks",), ("clocks",), ("switch-nodes",), ("switch-nodes",), ("switch-nodes",),
        ("sensitive-analog",), ("sensitive-analog",), ("sensitive-analog",), ("sensitive-analog",), (), (),
    ]


def test_shipped_lookup():
    assert "default" in shipped_ruleset_names()
    assert shipped_ruleset_path("default") == REPO / "rules" / "default.yaml"
    with pytest.raises(RuleError, match=r"no shipped rule set with this name \(shipped: .*default"):
        shipped_ruleset_path("no-such-set")
    with pytest.raises(RuleError, match="not a shipped rule set name"):
        shipped_ruleset_path("../rules/default")


# ---------------------------------------------------------------- conversions


def test_quantities_convert_to_internal_units(tmp_path):
    path = write(tmp_path, """\
        version: 1
        settings:
          broadside_search: 10 mil
          edge_search: 1000 um
          bandwidth_factor: 0.5
        net_classes:
          fast:
            nets: ["F*"]
            swing: 500 mV
            rise_time: 200 ps
          slow:
            nets: ["S*"]
            swing: 5 V
            frequency: 2 GHz
          victim:
            nets: ["V*"]
            resistance: 100 kohm
            node_capacitance: 250 fF
        rules:
          - name: cross
            kind: crossing-angle
            max_length: 0.1 in
          - name: budget
            kind: capacitance-budget
            max_c12: 0.5 pF
          - name: table
            kind: parallel-length
            table:
              - {gap: 4 mil, max_length: 200 mil}
              - {gap: 0.5 mm, max_length: 20 mm}
        """)
    rs = load_ruleset(path)
    assert rs.settings.broadside_search_mm == pytest.approx(0.254)
    assert rs.settings.edge_search_mm == pytest.approx(1.0)
    assert rs.settings.bandwidth_factor == 0.5
    fast, slow, victim = rs.classes
    assert fast.swing_v == pytest.approx(0.5) and fast.rise_time_s == pytest.approx(200e-12)
    assert slow.swing_v == 5.0 and slow.frequency_hz == 2e9
    assert victim.resistance_ohm == 1e5
    assert victim.node_capacitance_f == pytest.approx(250e-15)
    assert fast.node_capacitance_f == 0.0  # default
    rules = {r.name: r for r in rs.rules}
    assert rules["cross"].options["max_length"] == pytest.approx(2.54)
    assert rules["cross"].options["min_angle"] == 60.0  # default filled in
    assert rules["budget"].options["max_c12"] == pytest.approx(0.5e-12)
    table = rules["table"].options["table"]
    assert table[0]["gap"] == pytest.approx(0.1016) and table[0]["max_length"] == pytest.approx(5.08)
    assert table[1] == {"gap": 0.5, "max_length": 20.0}
    # common keys default
    assert rules["cross"].aggressor == () and rules["cross"].victim == ()
    assert rules["cross"].severity == "error" and rules["cross"].description == ""


def test_aggressor_frequency():
    by_rise = NetClass("a", ("A*",), 3.3, None, 1e-9, None)
    by_freq = NetClass("b", ("B*",), 3.3, 25e6, None, None)
    neither = NetClass("c", ("C*",), None, None, None, 1e3, 1e-12)
    assert by_rise.aggressor_frequency_hz(0.35) == pytest.approx(3.5e8)
    assert by_rise.aggressor_frequency_hz(0.5) == pytest.approx(5e8)
    assert by_freq.aggressor_frequency_hz(0.35) == 25e6
    assert neither.aggressor_frequency_hz(0.35) is None


# ---------------------------------------------------------------- classify


def test_classify_glob_and_regex_in_file_order(tmp_path):
    path = write(tmp_path, """\
        version: 1
        net_classes:
          clocks:
            nets: ["*CLK*", "re:^SPI[0-9]_SCK$"]
          spi:
            nets: ["SPI?_*"]
          sensors:
            nets: ["re:(?i)sense"]
        """)
    rs = load_ruleset(path)
    assert rs.classify(["SYS_CLK", "SPI1_SCK", "SPI1_SCKX", "SPI12_SCK", "SPI2_MOSI", "i_sense_p",
                        "clk", "SPI3_CLK_SENSE"]) == [
        ("clocks",),
        ("clocks", "spi"),
        ("spi",),          # regex is anchored by the user: SCKX does not match ^...$
        (),                # one digit only in both patterns
        ("spi",),
        ("sensors",),      # (?i) makes a regex case-insensitive
        (),                # globs are case-sensitive
        ("clocks", "spi", "sensors"),
    ]
    assert rs.net_class("spi").patterns == ("SPI?_*",)
    with pytest.raises(KeyError):
        rs.net_class("nope")


# ---------------------------------------------------------------- extends


def test_extends_override_replace_disable_and_add():
    rs = load_ruleset(DATA / "child.yaml")
    # settings merge key by key: child's edge_search, base's parallel_angle, default broadside_search
    assert rs.settings.edge_search_mm == 3.0
    assert rs.settings.parallel_angle_deg == 15.0
    assert rs.settings.broadside_search_mm == 0.5
    # classes merge by name; the child's class replaces the whole base class, in the base's position
    assert [c.name for c in rs.classes] == ["clocks", "analog", "power"]
    analog = rs.net_class("analog")
    assert analog.patterns == ("re:^VREF[0-9]?$",) and analog.resistance_ohm == 1e6
    assert rs.classify(["AIN0", "VREF1", "SYS_CLK", "SW_A"]) == [(), ("analog",), ("clocks",), ("power",)]
    # rules merge by name: cross replaced wholly (its min_angle and aggressor), spacing disabled, noise added
    assert [r.name for r in rs.rules] == ["cross", "budget", "noise"]
    cross = rs.rules[0]
    assert cross.aggressor == ("clocks", "power") and cross.options["min_angle"] == 80.0
    assert rs.rules[1].options["max_c12"] == pytest.approx(1e-12)
    assert rs.rules[2].options["max_noise"] == pytest.approx(5e-3)


def test_extends_relative_to_the_extending_file():
    rs = load_ruleset(DATA / "nested" / "grandchild.yaml")
    assert rs.settings.planes_shield is False
    assert rs.settings.edge_search_mm == 3.0  # from child.yaml
    assert [r.name for r in rs.rules] == ["cross", "budget", "noise"]


def test_extends_shipped_default(tmp_path):
    path = write(tmp_path, """\
        version: 1
        extends: default
        net_classes:
          sensitive-analog:
            nets: ["ADC_*"]
            resistance: 1 kohm
        rules:
          - name: coupled-noise
            kind: noise-budget
            aggressor: clocks
            victim: sensitive-analog
            max_noise: 1 mV
        disable: [same-layer-spacing, parallel-run-length]
        """)
    rs = load_ruleset(path)
    base = default_ruleset()
    assert rs.settings == base.settings
    assert rs.net_class("sensitive-analog").resistance_ohm == 1e3
    assert rs.net_class("sensitive-analog").node_capacitance_f == 0.0  # whole class replaced
    assert [r.name for r in rs.rules] == ["adjacent-layer-crossing", "coupling-capacitance", "coupled-noise",
                                          "fast-net-over-plane-gap", "guard-not-grounded"]
    assert rs.rules[2].aggressor == ("clocks",) and rs.rules[2].options["max_noise"] == pytest.approx(1e-3)


def test_error_in_extended_file_names_that_file():
    err = load_error(DATA / "extends-broken-parent.yaml")
    assert err.file == str(DATA / "broken-parent.yaml")
    assert err.place == "rules[0].max_length"
    assert "unknown length unit 'furlongs'" in err.message


def test_extends_cycle_detected():
    err = load_error(DATA / "cycle-a.yaml")
    assert err.place == "extends"
    assert "cycle" in err.message
    assert "cycle-a.yaml -> " in err.message and "cycle-b.yaml" in err.message


def test_extends_self_is_a_cycle(tmp_path):
    path = write(tmp_path, "version: 1\nextends: rules.yaml\n")
    err = load_error(path)
    assert (err.file, err.place) == (str(path), "extends")
    assert "cycle" in err.message


def test_child_rule_may_use_parent_class_and_parent_is_checked_alone(tmp_path):
    write(tmp_path, GOOD, "base.yaml")
    child = write(tmp_path, """\
        version: 1
        extends: base.yaml
        rules:
          - name: more
            kind: spacing-ratio
            victim: [analog, clocks]
        """, "child.yaml")
    assert [r.name for r in load_ruleset(child).rules] == ["cross", "more"]


# ---------------------------------------------------------------- errors

# (file text, expected key path, fragment of the message)
ERROR_CASES = [
    pytest.param("version: 1\ncolour: red\n", "colour", "unknown top-level key (accepted: version, extends",
                 id="unknown-top-level-key"),
    pytest.param("rules: []\n", None, "missing required key 'version'", id="version-missing"),
    pytest.param("version: 2\n", "version", "unsupported version 2 (supported: 1)", id="version-2"),
    pytest.param("version: '1'\n", "version", "unsupported version '1'", id="version-text"),
    pytest.param("version: true\n", "version", "unsupported version True", id="version-bool"),
    pytest.param("- version: 1\n", None, "expected a mapping at the top level", id="top-level-list"),
    pytest.param("version: 1\nsettings:\n  edge_gap: 1 mm\n", "settings.edge_gap",
                 "unknown setting (accepted: broadside_search, edge_search", id="unknown-setting"),
    pytest.param("version: 1\nsettings: [1]\n", "settings", "expected a mapping of settings, got a list",
                 id="settings-not-mapping"),
    pytest.param("version: 1\nsettings:\n  planes_shield: sometimes\n", "settings.planes_shield",
                 "expected true or false, got the text 'sometimes'", id="setting-bool-type"),
    pytest.param("version: 1\nsettings:\n  edge_search: 0 mm\n", "settings.edge_search",
                 "must be > 0 mm, got 0 mm", id="setting-exclusive-minimum"),
    pytest.param("version: 1\nsettings:\n  broadside_search: -1 mil\n", "settings.broadside_search",
                 "must be > 0 mm, got -0.0254 mm", id="setting-negative-in-mil"),
    pytest.param("version: 1\nsettings:\n  parallel_angle: 45 deg\n", "settings.parallel_angle",
                 "must be > 0 deg and < 45 deg, got 45 deg", id="setting-exclusive-maximum"),
    pytest.param("version: 1\nsettings:\n  parallel_angle: 10 rad\n", "settings.parallel_angle",
                 "unknown angle unit 'rad' (accepted: deg)", id="setting-unit"),
    pytest.param("version: 1\nsettings:\n  bandwidth_factor: 35 %\n", "settings.bandwidth_factor",
                 "expected a ratio like '1', got '35 %'", id="setting-ratio-percent"),
    pytest.param("version: 1\nsettings:\n  bandwidth_factor: 35\n", "settings.bandwidth_factor",
                 "must be > 0 and <= 1, got 35", id="setting-ratio-range"),
    pytest.param(GOOD.replace("    resistance: 10 kohm", "    resistance: 10 kohm\n    colour: blue"),
                 "net_classes.analog.colour", "unknown net class attribute (accepted: nets, swing, frequency",
                 id="unknown-class-attribute"),
    pytest.param("version: 1\nnet_classes:\n  analog:\n    resistance: 1 kohm\n", "net_classes.analog",
                 "missing required key 'nets'", id="class-without-nets"),
    pytest.param("version: 1\nnet_classes:\n  analog:\n    nets: AIN*\n", "net_classes.analog.nets",
                 "expected a non-empty list of net-name patterns", id="class-nets-not-list"),
    pytest.param("version: 1\nnet_classes:\n  analog:\n    nets: [AIN*, no]\n", "net_classes.analog.nets[1]",
                 "got false (a boolean) (YAML reads yes/no/on/off/true/false as booleans: quote the pattern)",
                 id="class-pattern-bool"),
    pytest.param("version: 1\nnet_classes:\n  clocks:\n    nets: ['*CLK*', 're:SPI[0-9_SCK']\n",
                 "net_classes.clocks.nets[1]", "bad regular expression 'SPI[0-9_SCK': unterminated",
                 id="class-regex-error"),
    pytest.param("version: 1\nnet_classes:\n  Clocks:\n    nets: ['*CLK*']\n", "net_classes.Clocks",
                 "'Clocks' is not a valid net class name", id="class-bad-name"),
    pytest.param("version: 1\nnet_classes:\n  any:\n    nets: ['*']\n", "net_classes.any",
                 "'any' is reserved", id="class-named-any"),
    pytest.param("version: 1\nnet_classes:\n  fast:\n    nets: [F]\n    rise_time: 0 ns\n",
                 "net_classes.fast.rise_time", "must be > 0 ns, got 0 ns", id="class-rise-time-zero"),
    pytest.param("version: 1\nnet_classes:\n  fast:\n    nets: [F]\n    rise_time: -1 ns\n",
                 "net_classes.fast.rise_time", "must be > 0 ns, got -1 ns", id="class-rise-time-negative"),
    pytest.param("version: 1\nnet_classes:\n  v:\n    nets: [V]\n    filter_resistance: 1 kohm\n",
                 "net_classes.v.filter_capacitance", "an RC filter needs both filter_resistance and "
                 "filter_capacitance", id="class-filter-half"),
    pytest.param("version: 1\nnet_classes:\n  v:\n    nets: [V]\n    bandwidth: 10 Hz\n"
                 "    filter_resistance: 1 kohm\n    filter_capacitance: 100 nF\n",
                 "net_classes.v.bandwidth", "give either bandwidth or filter_resistance", id="class-filter-twice"),
    pytest.param("version: 1\nnet_classes:\n  fast:\n    nets: [F]\n    duty: 1.5\n",
                 "net_classes.fast.duty", "must be > 0 and <= 1, got 1.5", id="class-duty-above-one"),
    pytest.param("version: 1\nnet_classes:\n  fast:\n    nets: [F]\n    duty: 1\n",
                 "net_classes.fast.duty", "must be < 1", id="class-duty-one"),
    pytest.param("version: 1\nnet_classes:\n  fast:\n    nets: [F]\n    swing: 3.3 A\n",
                 "net_classes.fast.swing", "unknown voltage unit 'A' (accepted: V, mV)", id="class-unit"),
    pytest.param("version: 1\nnet_classes:\n  v:\n    nets: [V]\n    node_capacitance: -1 pF\n",
                 "net_classes.v.node_capacitance", "must be >= 0 pF, got -1 pF", id="class-negative-capacitance"),
    pytest.param("version: 1\nnet_classes:\n  v:\n    nets: [V]\n    resistance: [1, 2]\n",
                 "net_classes.v.resistance", "expected a resistance like '1 ohm', got [1, 2]", id="class-type"),
    pytest.param("version: 1\nrules: {}\n", "rules", "expected a list of rules, got a mapping", id="rules-not-list"),
    pytest.param("version: 1\nrules: [cross]\n", "rules[0]", "expected a mapping with at least 'name' and 'kind'",
                 id="rule-not-mapping"),
    pytest.param(with_rule("- kind: crossing-angle\n"), "rules[1]", "missing required key 'name'",
                 id="rule-without-name"),
    pytest.param(with_rule("- name: x\n"), "rules[1]", "missing required key 'kind'", id="rule-without-kind"),
    pytest.param(with_rule("- name: Clock_Rule\n  kind: crossing-angle\n"), "rules[1].name",
                 "'Clock_Rule' is not a valid rule name", id="rule-bad-name"),
    pytest.param(with_rule("- name: x\n  kind: spacing\n"), "rules[1].kind",
                 "unknown kind 'spacing' (known: capacitance-budget, crossing-angle, guard-grounding, "
                 "noise-budget, parallel-length, reference-gap, spacing-ratio)", id="unknown-kind"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  min_ratio: 3\n"), "rules[1].min_ratio",
                 "unknown key for kind 'crossing-angle' (common keys: name, kind, aggressor, victim, severity, "
                 "description; options of crossing-angle: min_angle, max_length)", id="unknown-rule-key"),
    pytest.param(with_rule("- name: cross\n  kind: spacing-ratio\n"), "rules[1].name",
                 "duplicate rule name 'cross' (also rules[0])", id="duplicate-rule-name"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  victim: sensors\n"), "rules[1].victim",
                 "no net class named 'sensors' (defined: clocks, analog; or 'any')", id="unknown-class-ref"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  aggressor: [clocks, power]\n"),
                 "rules[1].aggressor[1]", "no net class named 'power'", id="unknown-class-ref-in-list"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  aggressor: [clocks, any]\n"),
                 "rules[1].aggressor[1]", "'any' cannot be combined with class names", id="any-in-list"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  aggressor: []\n"), "rules[1].aggressor",
                 "expected 'any', a net class name or a non-empty list of class names, got a list",
                 id="empty-class-list"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  severity: fatal\n"), "rules[1].severity",
                 "'fatal' is not a severity (accepted: error, warning)", id="bad-severity"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  description: 12\n"), "rules[1].description",
                 "expected text, got the number 12", id="description-type"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length: 2 cm\n"), "rules[1].max_length",
                 "unknown length unit 'cm' (accepted: mm, um, mil, in)", id="unit-not-accepted"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length: 2 pF\n"), "rules[1].max_length",
                 "unknown length unit 'pF' (accepted: mm, um, mil, in)", id="unit-of-another-kind"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length: true\n"), "rules[1].max_length",
                 "expected a length like '1 mm', got true (a boolean)", id="quantity-bool"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length:\n"), "rules[1].max_length",
                 "expected a length like '1 mm', got null", id="quantity-null"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  min_angle: 120 deg\n"), "rules[1].min_angle",
                 "must be >= 0 deg and <= 90 deg, got 120 deg", id="above-maximum"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length: -1 mm\n"), "rules[1].max_length",
                 "must be >= 0 mm, got -1 mm", id="below-minimum"),
    pytest.param(with_rule("- name: x\n  kind: capacitance-budget\n  max_c12: 0 pF\n"), "rules[1].max_c12",
                 "must be > 0 pF, got 0 pF", id="exclusive-minimum"),
    pytest.param(with_rule("- name: x\n  kind: spacing-ratio\n  min_ratio: 0\n"), "rules[1].min_ratio",
                 "must be > 0, got 0", id="ratio-exclusive-minimum"),
    pytest.param(with_rule("- name: x\n  kind: spacing-ratio\n  measure: diagonal\n"), "rules[1].measure",
                 "'diagonal' is not allowed (accepted: centre/width, gap/width, gap/height)", id="bad-choice"),
    pytest.param(with_rule("- name: x\n  kind: noise-budget\n  max_noise: 1 mV\n  model: 3\n"), "rules[1].model",
                 "the number 3 is not allowed (accepted: full, small-r)", id="choice-type"),
    pytest.param(with_rule("- name: x\n  kind: capacitance-budget\n"), "rules[1]",
                 "missing required option 'max_c12' for kind 'capacitance-budget'", id="required-option-missing"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n"), "rules[1]",
                 "missing required option 'table' for kind 'parallel-length'", id="required-table-missing"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table: []\n"), "rules[1].table",
                 "expected a non-empty list of rows, each a mapping with gap, max_length", id="table-empty"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table: [1 mm]\n"), "rules[1].table[0]",
                 "expected a row mapping with gap, max_length, got the text '1 mm'", id="table-row-type"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: 1 mm, max_length: 5 mm}\n    - {gap: 2 mm}\n"),
                 "rules[1].table[1]", "missing column 'max_length' (columns: gap, max_length)",
                 id="table-missing-column"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: 1 mm, max_length: 5 mm, min_length: 1 mm}\n"),
                 "rules[1].table[0].min_length", "unknown column (columns: gap, max_length)",
                 id="table-unknown-column"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: 0.5 mm, max_length: 20 mm}\n    - {gap: 0.2 mm, max_length: 5 mm}\n"),
                 "rules[1].table[1].gap", "0.2 mm is not larger than the row before (0.5 mm); rows must be in "
                 "strictly increasing gap order", id="table-decreasing-gap"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: 0.2 mm, max_length: 5 mm}\n    - {gap: 200 um, max_length: 9 mm}\n"),
                 "rules[1].table[1].gap", "0.2 mm is not larger than the row before (0.2 mm)",
                 id="table-equal-gap"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: 0.2 mm, max_length: 5 cm}\n"),
                 "rules[1].table[0].max_length", "unknown length unit 'cm'", id="table-cell-unit"),
    pytest.param(with_rule("- name: x\n  kind: parallel-length\n  table:\n"
                           "    - {gap: -0.2 mm, max_length: 5 mm}\n"),
                 "rules[1].table[0].gap", "must be >= 0, got -0.2 mm", id="table-cell-negative"),
    pytest.param("version: 1\ndisable: [cross]\n", "disable", "only allowed together with 'extends'",
                 id="disable-without-extends"),
    pytest.param("version: 1\nextends: no-such-set\n", "extends",
                 "no shipped rule set named 'no-such-set' (shipped: default", id="extends-unknown-shipped"),
    pytest.param("version: 1\nextends: missing/base.yaml\n", "extends",
                 "'missing/base.yaml': no such file (looked for", id="extends-missing-file"),
    pytest.param("version: 1\nextends: [default]\n", "extends",
                 "expected a shipped rule set name or a file path, got a list", id="extends-type"),
    pytest.param("version: 1\nextends: default\ndisable: [spacing]\n", "disable[0]",
                 "no inherited rule named 'spacing' (inherited: adjacent-layer-crossing,", id="disable-unknown"),
    pytest.param("version: 1\nextends: default\ndisable: coupled-noise\n", "disable",
                 "expected a list of inherited rule names, got the text", id="disable-type"),
    pytest.param("version: 1\nextends: default\ndisable: [coupled-noise, coupled-noise]\n", "disable[1]",
                 "'coupled-noise' is listed twice", id="disable-twice"),
    pytest.param("version: 1\nextends: default\ndisable: [coupled-noise]\nrules:\n"
                 "  - {name: coupled-noise, kind: noise-budget, max_noise: 1 mV}\n", "disable[0]",
                 "is also defined in this file's rules", id="disable-and-define"),
    # YAML-level problems: the place is the line and column (1-based)
    pytest.param("version: 1\nrules: [\n  {name: x\n", "line 4, column 1", "invalid YAML:", id="yaml-syntax"),
    pytest.param("version: 1\nsettings:\n  edge_search: 1 mm\n   bad: 2\n", "line 4, column 7",
                 "invalid YAML: mapping values are not allowed here", id="yaml-bad-indent"),
    pytest.param("version: 1\n--- \nversion: 1\n", "line 2, column 1",
                 "invalid YAML: expected a single document in the stream (line 1), but found another document",
                 id="yaml-two-documents"),
    pytest.param("version: 1\nx: !!python/object:os.system {}\n", "line 2, column 4",
                 "invalid YAML: could not determine a constructor", id="yaml-unsafe-tag"),
    pytest.param("version: 1\nsettings:\n  edge_search: 1 mm\n  edge_search: 2 mm\n", "settings.edge_search",
                 "duplicate key at line 4, column 3 (first given at line 3", id="duplicate-key"),
    pytest.param(with_rule("- name: x\n  kind: crossing-angle\n  max_length: 1 mm\n  max_length: 2 mm\n"),
                 "rules[1].max_length", "duplicate key at line 18, column 5 (first given at line 17",
                 id="duplicate-key-in-rule"),
    pytest.param("version: 1\nversion: 1\n", "version", "duplicate key at line 2", id="duplicate-top-key"),
    pytest.param("", None, "the file is empty", id="empty-file"),
    pytest.param("# only a comment\n\n", None, "the file is empty", id="comment-only-file"),
    pytest.param("~\n", None, "expected a mapping at the top level (starting with 'version: 1'), got null",
                 id="null-document"),
    pytest.param("version: 1\nx: \x07\n", "line 2, column 4",
                 "invalid YAML: character U+0007: special characters are not allowed",
                 id="yaml-control-character"),
]


@pytest.mark.parametrize("text, place, fragment", ERROR_CASES)
def test_error_names_file_and_key(tmp_path, text, place, fragment):
    path = tmp_path / "rules.yaml"
    path.write_text(text, encoding="utf-8")
    err = load_error(path)
    assert err.file == str(path)
    assert err.place == place
    assert fragment in err.message
    expected = f"{path}: {place}: {err.message}" if place else f"{path}: {err.message}"
    assert str(err) == expected
    assert "\n" not in str(err)


def test_unit_error_message_exactly_as_documented(tmp_path):
    path = write(tmp_path, with_rule("- name: x\n  kind: crossing-angle\n  max_length: 2 cm\n"))
    assert str(load_error(path)) == (
        f"{path}: rules[1].max_length: unknown length unit 'cm' (accepted: mm, um, mil, in)")


def test_missing_file(tmp_path):
    path = tmp_path / "nope.yaml"
    err = load_error(path)
    assert str(err) == f"{path}: no such file"


def test_directory_and_binary_file(tmp_path):
    assert "is a folder, not a rule file" in load_error(tmp_path).message
    path = tmp_path / "rules.yaml"
    path.write_bytes(b"version: 1\n\xff\xfe\n")
    assert "not UTF-8 text" in load_error(path).message


def test_file_name_is_shown_as_given(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "rules.yaml").write_text(with_rule("- name: x\n  kind: crossing-angle\n  max_length: 2 cm\n"))
    assert str(load_error("rules.yaml")).startswith("rules.yaml: rules[1].max_length: ")


def test_no_traceback_for_any_mangled_value(tmp_path):
    """Replace every value of a full file with wrong-typed values: a RuleError or a load, never a crash."""
    full = yaml.safe_load(GOOD)
    full["settings"] = {"broadside_search": "0.5 mm", "planes_shield": True, "bandwidth_factor": 0.35}
    full["rules"].append({"name": "t", "kind": "parallel-length",
                          "table": [{"gap": "0.2 mm", "max_length": "5 mm"}]})
    full["rules"].append({"name": "n", "kind": "noise-budget", "max_noise": "1 mV", "model": "full"})

    def paths(node, prefix=()):
        yield prefix
        if isinstance(node, dict):
            for k, v in node.items():
                yield from paths(v, (*prefix, k))
        elif isinstance(node, list):
            for i, v in enumerate(node):
                yield from paths(v, (*prefix, i))

    bad_values = [None, True, -1, 0, 1e300, "", "1 cm", "abc", [], [1], {}, {"a": 1}]
    outcomes = {"error": 0, "loaded": 0}
    for where in list(paths(full))[1:]:
        for bad in bad_values:
            data = copy.deepcopy(full)
            node = data
            for step in where[:-1]:
                node = node[step]
            node[where[-1]] = bad
            path = tmp_path / "mangled.yaml"
            path.write_text(yaml.safe_dump(data), encoding="utf-8")
            try:
                load_ruleset(path)
                outcomes["loaded"] += 1
            except RuleError as err:
                assert err.file == str(path) and "\n" not in str(err)
                outcomes["error"] += 1
    assert outcomes["error"] > 200 and outcomes["loaded"] > 0


# ---------------------------------------------------------------- sha256 and immutability


def test_sha256_stable_and_content_based(tmp_path):
    a = write(tmp_path, GOOD, "a.yaml")
    first = load_ruleset(a).sha256
    assert re.fullmatch(r"[0-9a-f]{64}", first)
    assert load_ruleset(a).sha256 == first
    # same resolved content, different spelling, comments and path: same hash
    respelled = GOOD.replace("10 kohm", "10000 ohm").replace("version: 1", "# a comment\nversion: 1")
    b = write(tmp_path, respelled + "    min_angle: 60 deg\n", "b.yaml")
    assert load_ruleset(b).sha256 == first
    # a changed value changes it
    c = write(tmp_path, GOOD.replace("10 kohm", "11 kohm"), "c.yaml")
    assert load_ruleset(c).sha256 != first
    d = write(tmp_path, GOOD + "    max_length: 2.5 mm\n", "d.yaml")
    assert load_ruleset(d).sha256 != first


def test_sha256_covers_the_extended_file(tmp_path):
    base = write(tmp_path, GOOD, "base.yaml")
    child = write(tmp_path, "version: 1\nextends: base.yaml\n", "child.yaml")
    before = load_ruleset(child).sha256
    assert before == load_ruleset(base).sha256  # nothing added: same resolved set
    base.write_text(GOOD.replace("25 MHz", "50 MHz"), encoding="utf-8")
    assert load_ruleset(child).sha256 != before


def test_ruleset_is_immutable_and_picklable():
    rs = default_ruleset()
    rule = rs.rules[0]
    with pytest.raises(TypeError):
        rule.options["min_angle"] = 1.0  # type: ignore[index]
    with pytest.raises(AttributeError):
        rule.name = "other"  # type: ignore[misc]
    clone = pickle.loads(pickle.dumps(rs))
    assert clone == rs and clone.classify(["MCU_CLK"]) == [("clocks",)]
    assert isinstance(rs, RuleSet) and isinstance(rule, Rule)
    assert rs.to_dict()["rules"][2]["options"]["table"][0] == {"gap": 0.2, "max_length": 5.0}


# ---------------------------------------------------------------- contract with the rule kinds and the docs


@pytest.mark.parametrize("kind", sorted(REGISTRY))
def test_every_option_schema_is_readable_and_its_defaults_valid(kind):
    for name, opt in REGISTRY[kind].OPTIONS.items():
        assert opt.kind in UNITS or opt.kind in ("choice", "bool", "table"), f"{kind}.{name}"
        if opt.kind == "table":
            assert opt.columns and all(col_kind in UNITS for _, col_kind in opt.columns)
        if opt.kind == "choice":
            assert opt.default in opt.choices
        if not opt.required and opt.kind in UNITS:
            # the default must pass the option's own range check
            ruleset._check_range(opt.default, opt, "schema", name)
        assert name not in ruleset.COMMON_RULE_KEYS


def test_docs_cover_every_kind_option_setting_and_class_attribute():
    doc = (REPO / "docs" / "rule-file.md").read_text(encoding="utf-8")
    for kind, module in REGISTRY.items():
        assert f"### {kind}" in doc, kind
        section = doc.split(f"### {kind}", 1)[1].split("\n### ", 1)[0]
        for name in module.OPTIONS:
            assert f"| `{name}` |" in section, f"{kind}.{name} missing from docs/rule-file.md"
    for key in [*ruleset.SETTINGS_SCHEMA, *ruleset.CLASS_KEYS, *ruleset.TOP_LEVEL_KEYS, *ruleset.COMMON_RULE_KEYS]:
        assert f"`{key}`" in doc, key


def test_impossible_date_value_is_a_rule_error(tmp_path):
    """yaml builds dates itself; an impossible one must be one clear message, not a crash."""
    path = tmp_path / "dated.yaml"
    path.write_text("version: 1\nrules:\n  - {name: x, kind: noise-budget, max_noise: 1 mV, description: 2026-13-01}\n")
    with pytest.raises(RuleError, match="dated.yaml"):
        load_ruleset(path)



@pytest.mark.parametrize("key, line, kind, words", [
    ("settings.edge_search", "settings:\n  edge_search: 1\n", "length", "'1 mm' or '1 um' (accepted: mm, um, mil, in)"),
    ("net_classes.victim.resistance", "net_classes:\n  victim:\n    nets: [V*]\n    resistance: 100\n",
     "resistance", "'100 ohm' or '100 kohm'"),
    ("net_classes.clk.swing", "net_classes:\n  clk:\n    nets: [C*]\n    swing: '3.3'\n", "voltage",
     "'3.3 V' or '3.3 mV'"),
    ("rules[0].max_noise", "rules:\n  - {name: n, kind: noise-budget, max_noise: 10}\n", "voltage",
     "'10 V' or '10 mV'"),
])
def test_a_bare_number_where_a_unit_is_needed_is_refused(tmp_path, key, line, kind, words):
    # max_noise: 10 once meant 10 V (every victim passed): a dimensioned value needs its unit
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\n" + line, encoding="utf-8")
    with pytest.raises(RuleError) as info:
        load_ruleset(path)
    assert info.value.file == str(path) and key in str(info.value.place)
    assert f"a {kind} needs its unit: write {words}" in info.value.message


def test_a_ratio_and_zero_need_no_unit(tmp_path):
    path = tmp_path / "r.yaml"
    path.write_text("version: 1\nsettings:\n  bandwidth_factor: 0.5\n  edge_search: 0.3 mm\n"
                    "net_classes:\n  v:\n    nets: [V*]\n    node_capacitance: 0\n", encoding="utf-8")
    rs = load_ruleset(path)
    assert rs.settings.bandwidth_factor == 0.5 and rs.classes[0].node_capacitance_f == 0.0


def test_a_glob_matches_the_whole_net_name_as_fnmatchcase_does():
    # the reference: fnmatch.fnmatchcase (a glob is matched against the whole name). A glob used to be
    # searched anywhere in the name, so "AIN*" caught "XAIN1" and "SW_*" caught "BUCK_SW_A"
    import fnmatch

    from checker.ruleset import NetClass

    patterns = ["AIN*", "SW_*", "*_SW", "*CLK*", "THERM?", "[AB]IN[0-9]", "GND"]
    names = ["AIN1", "XAIN1", "SW_BUCK", "BUCK_SW_A", "BUCK_SW", "CLK", "SYS_CLK_1", "THERM1", "THERM12",
             "AIN7", "BIN3", "CIN3", "GND", "AGND", "GND_1"]
    for pattern in patterns:
        c = NetClass("c", (pattern,), None, None, None, 1.0)
        for name in names:
            assert c.matches(name) == fnmatch.fnmatchcase(name, pattern), (pattern, name)
