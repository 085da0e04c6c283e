"""`couplint classes` and `couplint init` (checker/netsurvey.py): which nets
each net class catches, which nets no class catches although their names
say what they are, and a starter rule file that loads and restates the base
set's classes.

The expectations are worked out by hand from the net names of the boards
(the shipped demo board, and an invented board built here with names chosen
to exercise each name hint); the name hints themselves are common naming
practice, not a standard.
"""

from __future__ import annotations

import json

import pytest

from checker.cli import demo_board_path, main
from checker.netsurvey import format_quantity, survey
from checker.readers import load_board
from checker.ruleset import default_ruleset, load_ruleset


def named_board(tmp_path, names):
    """The demo board with extra nets of the given names (each on a short track of its own)."""
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    layer = data["tracks"][0]["layer"]
    for i, name in enumerate(names):
        data["nets"].append({"name": name})
        data["tracks"].append({"layer": layer, "net": name, "width": 0.15,
                               "points": [[1.0 + i, 40.0], [1.0 + i, 41.0]]})
    path = tmp_path / "named.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def test_each_class_lists_what_each_of_its_patterns_catches():
    s = survey(load_board(demo_board_path()), default_ruleset())
    catches = {c.net_class.name: c for c in s.catches}
    # by hand from the demo's net names and the default set's patterns
    assert catches["clocks"].by_pattern == {"*CLK*": ["CLK_ADC", "CLK_AUX", "CLK_LOG", "CLK_RTC"],
                                            "*SCK*": ["SPI_SCK"]}
    assert catches["switch-nodes"].nets == ["SW_BUCK"]
    assert catches["sensitive-analog"].nets == ["AIN1", "AIN2", "AIN3", "SENSE_N", "SENSE_P", "THERM2_LPF",
                                                "THERM_IN", "VREF_2V5"]
    assert s.reference == ["3V3", "GND"] and s.other == ["I2C_SDA"] and s.hinted == {}


def test_nets_in_no_class_named_like_an_aggressor_or_a_victim_are_hinted(tmp_path):
    path = named_board(tmp_path, ["XTAL_IN", "OSC32_OUT", "BUCK2_LX", "PH_A", "ADC_IN3", "NTC_BED",
                                  "ADC_DOUT", "SPI2_MOSI", "LED_RED"])
    s = survey(load_board(path), default_ruleset())
    assert s.hinted == {"a clock": ["OSC32_OUT", "XTAL_IN"], "a switching node": ["BUCK2_LX", "PH_A"],
                        "an analog input": ["ADC_IN3", "NTC_BED"]}
    assert {"ADC_DOUT", "SPI2_MOSI", "LED_RED"} <= set(s.other)  # digital by name, or no hint


def test_classes_command_prints_the_survey(tmp_path, capsys):
    path = named_board(tmp_path, ["XTAL_IN"])
    assert main(["classes", str(path)]) == 0
    out = capsys.readouterr().out
    assert "  clocks (aggressor): 5 net(s)" in out and "    *SCK*: SPI_SCK" in out
    assert "in no class, named like a clock (a name hint, common naming practice; check each): XTAL_IN" in out
    assert "  sensitive-analog (victim): 8 net(s)" in out


@pytest.mark.parametrize("value, kind, text", [
    (3.3, "voltage", "3.3 V"), (0.01, "voltage", "10 mV"), (25e6, "frequency", "25 MHz"), (10.0, "frequency", "10 Hz"),
    (5e-9, "time", "5 ns"), (2.5e-10, "time", "250 ps"), (1e5, "resistance", "100 kohm"),
    (4.7e6, "resistance", "4.7 Mohm"),
    (1e-11, "capacitance", "10 pF"), (2.2e-9, "capacitance", "2.2 nF"), (0.5, "ratio", "0.5"),
])
def test_format_quantity_writes_what_the_rule_reader_reads_back(value, kind, text):
    from checker.units import parse_quantity

    assert format_quantity(value, kind) == text
    assert parse_quantity(text, kind) == pytest.approx(value, rel=1e-12)


def test_init_writes_a_starter_file_that_loads_and_restates_the_classes(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = named_board(tmp_path, ["XTAL_IN"])
    assert main(["init", str(path)]) == 0
    text = (tmp_path / "couplint-rules.yaml").read_text(encoding="utf-8")
    assert "extends: default" in text and "ILLUSTRATIVE" in text
    assert '      - "*CLK*"  # catches CLK_ADC, CLK_AUX, CLK_LOG, CLK_RTC' in text
    assert '      # - "XTAL_IN"  # named like a clock, in no class: uncomment if it is one' in text
    started = load_ruleset(tmp_path / "couplint-rules.yaml")
    default = default_ruleset()
    assert started.classes == default.classes and started.rules == default.rules  # the same classes, restated
    # uncommenting the hinted net puts it in the class
    (tmp_path / "mine.yaml").write_text(text.replace('# - "XTAL_IN"', '- "XTAL_IN"'), encoding="utf-8")
    mine = load_ruleset(tmp_path / "mine.yaml")
    assert mine.net_class("clocks").matches("XTAL_IN")
    # an existing file is kept unless --force
    assert main(["init", str(path)]) == 2
    assert "the file exists; couplint init keeps it" in capsys.readouterr().err
    assert main(["init", str(path), "--force", "--rules", "default"]) == 0
    assert main(["init", str(path), "--out", "no/such/folder/r.yaml"]) == 2
