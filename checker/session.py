"""One path from input to result, for ``check``, ``demo`` and every board
of a ``batch``: read and validate every input, analyse, run the rules,
apply the review, narrow to the selection.

:func:`prepare` reads everything a check needs (the rule set, the board,
the waiver file, the baseline) and refuses bad input before the possibly
long analysis; :func:`run` does the work; :func:`check` is both. The
callers differ only in how they report progress and what they write.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, replace

from .baseline import Baseline, load_baseline
from .errors import UsageError
from .model import Board
from .review import build_review
from .ruleset import RuleSet, ruleset_named
from .runner import Result, check_board
from .selection import Selection, narrow
from .waivers import WaiverFile, load_waivers, today


@dataclass(frozen=True)
class Request:
    """What one check is asked to do.

    ``board``: one neutral JSON file or IPC-2581 file, or a fabrication
    package given as a folder, a .zip or its files. ``rules``: a rule file
    or the name of a shipped rule set (``None``: the shipped default).
    ``stackup``, ``netlist``, ``layers``: fabrication packages only.
    ``only``: the ``--only`` terms; ``names_checked``: whether a net or
    layer term must match this board (a batch checks only rule terms, once).
    ``today``: the date waiver expiry is judged on (``None``: today, or
    ``$COUPLINT_TODAY``).
    """

    board: tuple[str, ...]
    rules: str | None = None
    waivers: str | None = None
    baseline: str | None = None
    stackup: str | None = None
    netlist: str | None = None
    layers: tuple[str, ...] = ()
    only: tuple[str, ...] = ()
    names_checked: bool = True
    fail_on: str = "warning"
    accurate: bool = False
    what_if: bool = False
    today: _dt.date | None = None


@dataclass(frozen=True)
class Prepared:
    """Every input of a request, read and validated."""

    request: Request
    ruleset: RuleSet
    board: Board
    selection: Selection | None
    waivers: WaiverFile | None
    baseline: Baseline | None
    day: _dt.date | None


def load_board_of(paths: tuple[str, ...] | list[str], stackup: str | None = None, netlist: str | None = None,
                  layers: tuple[str, ...] | list[str] = ()) -> Board:
    """The board of a JSON or IPC-2581 file, or of a fabrication package."""
    from .readers import load_board
    from .readers.fab.package import is_package

    paths = list(paths)
    if len(paths) > 1 and all(p.lower().endswith(".json") for p in paths):
        raise UsageError("check takes one board JSON file (or one fabrication package); for several boards use "
                         "'couplint batch'")
    if not is_package(paths):
        given = [name for name, value in (("--stackup", stackup), ("--netlist", netlist), ("--layer", layers))
                 if value]
        if given:
            raise UsageError(f"{given[0]} is for fabrication packages; {paths[0]} is a board JSON file")
        return load_board(paths[0])
    from .readers.fab.assemble import load_package

    return load_package(paths, stackup=stackup, netlist=netlist, layers=list(layers) or None)


def prepare(request: Request) -> Prepared:
    """Read and validate every input of ``request``, in the order a user
    fixes them: the ``--only`` terms, the rule set, the board, the waiver
    file, the baseline. Raises :class:`~checker.errors.CouplintError`
    naming the file and the place."""
    selection = Selection.parse(list(request.only))
    ruleset = ruleset_named(request.rules)
    board = load_board_of(request.board, request.stackup, request.netlist, request.layers)
    if selection is not None:
        rules = [(r.name, r.kind) for r in ruleset.rules]
        if request.names_checked:
            selection.validate(rules, [n.name for n in board.nets], list(board.stackup.names))
        else:
            selection.validate(rules)
    waivers = load_waivers(request.waivers) if request.waivers else None
    baseline = load_baseline(request.baseline) if request.baseline else None
    day = (request.today or today()) if waivers is not None else None
    return Prepared(request, ruleset, board, selection, waivers, baseline, day)


def run(prepared: Prepared, progress=None) -> Result:
    """Analyse the board, run the rules, apply waivers and baseline to every
    finding, then narrow to the selection. ``progress(step, done, total)``
    as :func:`checker.runner.check_board` calls it."""
    request = prepared.request
    checked = check_board(prepared.board, prepared.ruleset, progress=progress, accurate=request.accurate,
                          what_if=request.what_if)
    # waivers and baseline are judged on every finding (a hidden finding's waiver is not "unused")
    review = build_review(checked.findings, prepared.waivers, prepared.baseline, on=prepared.day)
    findings, review, hidden = narrow(checked.findings, review, prepared.selection)
    return replace(checked, findings=findings, review=review, fail_on=request.fail_on,
                   selection=prepared.selection, unselected=hidden)


def check(request: Request, progress=None) -> Result:
    """:func:`prepare` then :func:`run`."""
    return run(prepare(request), progress)
