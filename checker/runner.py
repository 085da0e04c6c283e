"""Run every rule of a rule set over an analysed board."""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import NamedTuple

from .analysis import Analysis, analyse, analysis_steps
from .checks import REGISTRY
from .errors import BoardError, CouplintError, SolveError
from .findings import Finding, sort_findings
from .model import Board
from .review import Review
from .ruleset import RuleSet
from .selection import Selection


class CheckCrash(CouplintError):
    """A rule kind failed on a board: names the rule and the board."""


@dataclass
class Result:
    """One board's findings with the analysis they came from, the review
    (waivers, baseline) applied to them and the failure policy."""

    analysis: Analysis
    findings: list[Finding]
    seconds: float
    review: Review = field(default_factory=Review)
    fail_on: str = "warning"
    #: what the rules had to say besides their findings (``checks.common.Note``)
    check_notes: list[str] = field(default_factory=list)
    #: ``--only``: the selection the findings were narrowed to, and how many it hid
    selection: Selection | None = None
    unselected: int = 0

    @property
    def notes(self) -> list[str]:
        """The analysis's notes, then the rules'."""
        return list(self.analysis.notes) + list(self.check_notes)

    def failing(self) -> list[Finding]:
        return self.review.failing(self.findings, self.fail_on)

    def verdict(self) -> str:
        return self.review.verdict(self.findings, self.fail_on)


class Checked(NamedTuple):
    """What the rules found, worst first, and what they noted."""

    findings: list[Finding]
    notes: list[str]


def run_checks(analysis: Analysis, progress=None) -> Checked:
    """Every rule's findings, worst first, and notes. A rule only reads the
    analysis: what it yields is all it gives."""
    from .checks.common import Note

    findings: list[Finding] = []
    notes: list[str] = []
    for rule in analysis.ruleset.rules:
        if progress is not None:
            progress(f"rule {rule.name}")
        module = REGISTRY[rule.kind]
        try:
            for item in module.check(rule, analysis):
                if isinstance(item, Note):
                    notes.append(item.text)
                else:
                    findings.append(item)
        except CouplintError:
            raise
        except Exception as exc:  # a crashing rule is reported with its name, not a traceback
            raise CheckCrash(f"{analysis.board.path}: rule {rule.name!r} ({rule.kind}) failed: "
                             f"{type(exc).__name__}: {exc}") from exc
    return Checked(sort_findings(findings), notes)


def check_board(board: Board, ruleset: RuleSet, progress=None, accurate: bool = False,
                what_if: bool = False) -> Result:
    """Analyse ``board`` and apply ``ruleset``. ``progress(description,
    done, total)``, if given, is called before each step of the work;
    ``accurate`` solves every distinct cross-section directly instead of
    interpolating tables (slower)."""
    start = time.perf_counter()
    step = None
    if progress is not None:
        total = analysis_steps(board, ruleset) + len(ruleset.rules)
        done = iter(range(total))

        def step(description: str) -> None:
            progress(description, next(done, total), total)

    try:
        analysis = analyse(board, ruleset, step, accurate, what_if)
        findings, notes = run_checks(analysis, step)
    except SolveError as exc:
        raise BoardError(board.path, None, f"a cross-section of this board cannot be solved ({exc}); check the "
                                           "stackup's thicknesses and the copper's widths") from None
    return Result(analysis, findings, time.perf_counter() - start, check_notes=notes)
