"""What a reviewer adds to a list of findings: waivers, a baseline, a verdict.

A :class:`Review` travels with a :class:`checker.runner.Result`; every output
format reads it. Findings are never removed: a waived finding stays in every
report, marked, and only stops counting towards failure.

* **Waivers** (:mod:`checker.waivers`): accepted findings, each with a
  reason, an author and a date.
* A **baseline** (:mod:`checker.baseline`): an earlier couplint JSON report;
  findings are then ``new`` or ``unchanged`` by stable id, and baseline
  findings that are gone are ``fixed``.
* :func:`build_review` applies both to one board's findings; :class:`Review`
  holds the outcome and the verdict.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field

from .baseline import Baseline
from .findings import SEVERITIES, Finding
from .waivers import Waiver, WaiverFile, today, waiver_mark

#: ``--fail-on`` choices: the lowest severity that fails, or ``new`` (only
#: findings absent from the baseline fail).
FAIL_ON = ("warning", "error", "new")


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
    #: every waiver of the file -> the ids of the findings it matches
    #: (expired ones included: what they would cover)
    covers: dict[Waiver, list[str]] = field(default_factory=dict)

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
        """``fail``, ``pass with known findings`` (``--fail-on new``: nothing
        new fails, but unwaived findings of warning or worse that the
        baseline already had remain), ``pass with waivers`` or ``pass``.
        Every verdict but ``fail`` exits 0."""
        if self.failing(findings, fail_on):
            return "fail"
        if fail_on == "new" and self.failing(findings, "warning"):
            return "pass with known findings"
        if any(f.id in self.waived for f in findings):
            return "pass with waivers"
        return "pass"


# --------------------------------------------------------------------------
# Dates
# --------------------------------------------------------------------------


# --------------------------------------------------------------------------
# Waiver files: reading
# --------------------------------------------------------------------------


# --------------------------------------------------------------------------
# Waiver files: appending
# --------------------------------------------------------------------------


# --------------------------------------------------------------------------
# Baseline
# --------------------------------------------------------------------------


# --------------------------------------------------------------------------
# Applying
# --------------------------------------------------------------------------


def build_review(findings: list[Finding], waivers: WaiverFile | None = None, baseline: Baseline | None = None,
                 on: _dt.date | None = None) -> Review:
    """Apply a waiver file and a baseline to one board's findings.

    A finding is waived by the first waiver in the file that matches it and
    has not expired, waivers by id taking precedence over waivers by rule
    and patterns. An expired waiver is not applied and is listed in
    ``expired``; one that matches no finding is listed in ``unused``. ``on``
    is the date expiry is judged on (default :func:`today`, only read when
    there are waivers).
    """
    review = Review()
    if waivers is not None:
        review.waiver_file = waivers.path
        day = on if on is not None else today()
        active: list[Waiver] = []
        for w in waivers.waivers:
            review.covers[w] = [f.id for f in findings if w.matches(f)]
            if w.expired(day):
                review.expired.append(w)
            elif not review.covers[w]:
                review.unused.append(w)
            else:
                active.append(w)
        for w in sorted(active, key=lambda w: w.id is None):  # stable: file order within each group
            for fid in review.covers[w]:
                review.waived.setdefault(fid, w)
    if baseline is not None:
        review.baseline = baseline.path
        before = {f["id"] for f in baseline.findings}
        now = {f.id for f in findings}
        review.status = {f.id: "unchanged" if f.id in before else "new" for f in findings}
        review.fixed = [f for f in baseline.findings if f["id"] not in now]
    return review


def waiver_entry(w: Waiver, review: Review | None = None) -> dict:
    """A whole waiver (what it matches, then :func:`waiver_mark`), and with
    a review the ids of the findings it matches."""
    d = {"id": w.id, "rule": w.rule, "nets": list(w.nets) if w.nets else None, "layers": w.layers,
         **waiver_mark(w)}
    if review is not None:
        d["findings"] = sorted(review.covers.get(w, []))
    return d


def review_dict(review: Review) -> dict:
    """The ``review`` section of the JSON report."""
    return {
        "waiver_file": review.waiver_file,
        "expired": [waiver_entry(w, review) for w in review.expired],
        "unused": [waiver_entry(w) for w in review.unused],
        "baseline": review.baseline,
        "fixed": list(review.fixed),
    }
