"""What a reviewer adds to a list of findings: waivers, a baseline, a verdict.

A :class:`Review` travels with a :class:`checker.runner.Result`; every output
format reads it. Findings are never removed: a waived finding stays in every
report, marked, and only stops counting towards failure.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field

from .findings import SEVERITIES, Finding

#: ``--fail-on`` choices: the lowest severity that fails, or ``new`` (only
#: findings absent from the baseline fail).
FAIL_ON = ("warning", "error", "new")


@dataclass(frozen=True)
class Waiver:
    """One accepted violation.

    Matches a finding by ``id``, or by ``rule`` plus glob patterns for the
    nets and the layers (``nets`` = (aggressor pattern, victim pattern),
    ``layers`` a pattern for the ``/``-joined layer names). ``source`` says
    where it was written (``file:line``).
    """

    reason: str
    author: str
    date: _dt.date
    id: str | None = None
    rule: str | None = None
    nets: tuple[str, str] | None = None
    layers: str | None = None
    expires: _dt.date | None = None
    source: str = ""


@dataclass
class Review:
    """Waivers and baseline applied to one board's findings."""

    #: finding id -> the waiver that covers it
    waived: dict[str, Waiver] = field(default_factory=dict)
    #: waivers past their expiry date (not applied; reported)
    expired: list[Waiver] = field(default_factory=list)
    #: waivers that matched no finding (reported)
    unused: list[Waiver] = field(default_factory=list)
    #: the waiver file, if any
    waiver_file: str | None = None
    #: finding id -> "new" or "unchanged" (only with a baseline)
    status: dict[str, str] = field(default_factory=dict)
    #: findings of the baseline that are gone now (their JSON objects)
    fixed: list[dict] = field(default_factory=list)
    #: the baseline report, if any
    baseline: str | None = None

    def failing(self, findings: list[Finding], fail_on: str = "warning") -> list[Finding]:
        """The findings that make the run fail under ``fail_on``: not
        waived, and at or above the severity (``new``: absent from the
        baseline, any severity)."""
        out = []
        for f in findings:
            if f.id in self.waived:
                continue
            if fail_on == "new":
                if self.status.get(f.id, "new") != "new":
                    continue
            elif SEVERITIES.index(f.severity) > SEVERITIES.index(fail_on):
                continue
            out.append(f)
        return out

    def verdict(self, findings: list[Finding], fail_on: str = "warning") -> str:
        """``fail``, ``pass with waivers`` or ``pass``."""
        if self.failing(findings, fail_on):
            return "fail"
        if any(f.id in self.waived for f in findings):
            return "pass with waivers"
        return "pass"
