"""The JSON report's net-pair list is bounded by default: every pair a
finding names, plus the N worst by noise then C12; ``--pairs all`` lists
every coupled pair. Nothing else of the report changes."""

from __future__ import annotations

import json

from checker.cli import main


def report(capsys, *extra) -> dict:
    code = main(["demo", "--format", "json", *extra])
    out, err = capsys.readouterr()
    assert code == 1, err
    return json.loads(out)


def key(nets) -> frozenset:
    return frozenset(nets)


def test_pairs_bound_keeps_finding_pairs_and_the_worst(capsys) -> None:
    everything = report(capsys, "--pairs", "all")
    bounded = report(capsys, "--pairs", "2")
    all_pairs = [key(p["nets"]) for p in everything["net_pairs"]]
    listed = [key(p["nets"]) for p in bounded["net_pairs"]]
    assert everything["net_pairs_listed"] == {"listed": len(all_pairs), "coupled": len(all_pairs),
                                              "which": "every coupled net pair"}
    assert bounded["net_pairs_listed"]["listed"] == len(listed) < len(all_pairs)
    assert bounded["net_pairs_listed"]["coupled"] == len(all_pairs)
    # the order is the full list's order, with pairs left out
    assert listed == [k for k in all_pairs if k in set(listed)]
    assert all_pairs[:2] == listed[:2]  # the two worst
    named = {key((f["aggressor"], f["victim"])) for f in bounded["findings"]}
    assert named & set(all_pairs) <= set(listed)  # every finding's pair that couples is listed
    for k in ("findings", "victim_noise", "summary"):
        assert bounded[k] == everything[k]


def test_default_lists_all_when_few(capsys) -> None:
    default = report(capsys)
    assert default["net_pairs_listed"]["which"] == "every coupled net pair"
    assert report(capsys, "--pairs", "0")["net_pairs_listed"]["listed"] < default["net_pairs_listed"]["listed"]
