"""Checks on several cores (checker/cores.py): the ordered maps return what
the serial loop returns, in its order, and a whole check's report is the
same on one core and on two.

The reference here is the serial computation itself (the same function
applied in a plain loop, or the same check with ``--cores 1``): what is
tested is that spreading the work over threads changes nothing.
"""

from __future__ import annotations

import contextvars
import json
import threading
from pathlib import Path

import numpy as np
import pytest
import shapely

from checker import cores
from checker.cli import main
from checker.errors import UsageError

ROOT = Path(__file__).resolve().parents[1]
_probe: contextvars.ContextVar[str] = contextvars.ContextVar("probe", default="unset")


def test_ordered_map_keeps_the_order_of_its_input():
    with cores.using(2):
        assert cores.ordered_map(lambda x: x * x, range(50)) == [x * x for x in range(50)]
        assert cores.ordered_map(lambda x: x, []) == []


def test_ordered_map_runs_on_threads_and_nested_maps_run_serially():
    seen: list[tuple[int, int]] = []  # (outer thread, inner thread) of each inner call

    def inner(_):
        return threading.get_ident()

    def outer(_):
        me = threading.get_ident()
        seen.extend((me, t) for t in cores.ordered_map(inner, range(4)))
        return me

    with cores.using(2):
        outer_threads = set(cores.ordered_map(outer, range(4)))
    assert threading.get_ident() not in outer_threads  # the outer map used worker threads
    assert all(o == i for o, i in seen)  # each nested map ran in its own worker, serially


def test_ordered_map_passes_context_variables_to_its_workers():
    token = _probe.set("set by the caller")
    try:
        with cores.using(2):
            assert cores.ordered_map(lambda _: _probe.get(), range(3)) == ["set by the caller"] * 3
    finally:
        _probe.reset(token)


def test_ordered_map_raises_the_first_error_in_input_order():
    def fail_on_odd(x):
        if x % 2:
            raise ValueError(f"odd {x}")
        return x

    with cores.using(2), pytest.raises(ValueError, match="odd 1"):
        cores.ordered_map(fail_on_odd, range(6))


def test_split_map_equals_the_single_vectorised_call():
    rng = np.random.default_rng(5)
    a = shapely.buffer(shapely.points(rng.random((9000, 2)) * 10), 0.3)
    b = shapely.buffer(shapely.points(rng.random((9000, 2)) * 10), 0.4)
    whole = shapely.intersection(a, b)
    with cores.using(2):
        parts = cores.split_map(shapely.intersection, a, b, least=1000)
    assert parts.shape == whole.shape
    assert all(shapely.equals_exact(parts, whole, tolerance=0.0))


def test_core_count_from_option_environment_and_machine(monkeypatch):
    monkeypatch.delenv(cores.CORES_ENV, raising=False)
    assert 1 <= cores.count() <= cores.MAX_CORES
    monkeypatch.setenv(cores.CORES_ENV, "1")
    assert cores.count() == 1
    with cores.using(3):
        assert cores.count() == 3  # the option wins over the environment
    monkeypatch.setenv(cores.CORES_ENV, "many")
    with pytest.raises(UsageError, match="COUPLINT_CORES: a whole number"):
        cores.count()
    assert cores.parse_cores("99") == cores.MAX_CORES


def test_cores_option_is_refused_when_not_a_positive_count(capsys):
    assert main(["demo", "--cores", "0"]) == 2
    assert "at least 1 core" in capsys.readouterr().err


@pytest.mark.parametrize("package", ["six_layer", "shielding-split_plane"])
def test_report_on_two_cores_is_the_report_on_one(tmp_path, package):
    # the shielding unions, reference copper, return-path stretches and solves run on threads with
    # --cores 2; everything in the report must be what one core computes
    reports = []
    for n in (1, 2):
        out = tmp_path / f"r{n}.json"
        code = main(["check", str(ROOT / "fixtures" / "fab" / package), "--format", "json", "--out", str(out),
                     "--cores", str(n), "--pairs", "all"])
        assert code in (0, 1)
        reports.append(json.loads(out.read_text()))
    one, two = reports
    assert one["findings"] == two["findings"]
    assert one["net_pairs"] == two["net_pairs"]
    assert one == two


def test_batch_shares_the_cores_out_among_its_worker_processes(monkeypatch):
    import argparse

    from checker.batch import _cores_per_check

    monkeypatch.setenv(cores.CORES_ENV, "4")
    args = argparse.Namespace(jobs=2, cores=None, scheduler=None)
    assert _cores_per_check(args, boards=5) == 2  # 4 cores, 2 workers
    assert _cores_per_check(args, boards=1) == 4  # one board: no second worker, every core
    assert _cores_per_check(argparse.Namespace(jobs=8, cores=None, scheduler=None), boards=9) == 1
    assert _cores_per_check(argparse.Namespace(jobs=2, cores=3, scheduler=None), boards=5) == 3  # as given
    assert _cores_per_check(argparse.Namespace(jobs=2, cores=None, scheduler="tcp://x:1"), boards=5) == 1
