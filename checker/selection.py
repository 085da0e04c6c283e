"""``--only``: narrow a check's findings to the rules, severities, nets or
layers a reviewer asks for, in every output at once.

Each ``--only KEY=PATTERN`` names one of:

* ``rule``: a rule's name in the rule file, or its kind (``coupled-noise``);
* ``severity``: ``error`` or ``warning``;
* ``net``: the aggressor or the victim net;
* ``layer``: one of the copper layers the finding is on.

Patterns are globs matched against the whole name (``AIN*``), or regular
expressions after ``re:``, as in net classes. Several ``--only`` of one key
widen the selection (either may match); different keys narrow it (each must
match). A pattern that names nothing the rule set or the board has is an
error, so a typo cannot pass as a clean board.

The verdict and the exit status cover the findings selected
(:func:`narrow` makes the narrowed lists; the session builds the result
from them). Waivers are
applied to every finding before the selection, so a waiver whose findings
are all hidden is not reported unused; a baseline's fixed findings are
narrowed like the current ones.
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

from .errors import UsageError
from .findings import SEVERITIES, Finding
from .ruleset import compile_pattern

if TYPE_CHECKING:  # a type only
    from .review import Review

#: the keys ``--only`` takes, and what each matches
KEYS: dict[str, str] = {
    "rule": "a rule's name or kind",
    "severity": "error or warning",
    "net": "the aggressor or victim net",
    "layer": "a copper layer of the finding",
}


_NOUN = {"rule": "rule name or kind of the rule set", "net": "net of the board", "layer": "copper layer of the board"}


@dataclass(frozen=True)
class Selection:
    """The ``--only`` terms of one run, grouped by key (file order kept)."""

    terms: tuple[tuple[str, str], ...]

    @classmethod
    def parse(cls, texts: list[str] | tuple[str, ...] | None) -> Selection | None:
        """``["rule=coupled-noise", "net=AIN*"]`` -> a selection (``None``
        for no terms). Raises :class:`UsageError` naming the bad term.

        >>> Selection.parse(["severity=error", "net=AIN*"]).describe()
        'severity=error, net=AIN*'
        """
        if not texts:
            return None
        terms = []
        for text in texts:
            key, sep, pattern = text.partition("=")
            key, pattern = key.strip().lower(), pattern.strip()
            if not sep or key not in KEYS:
                raise UsageError(f"--only {text}: expected KEY=PATTERN with KEY one of "
                                 f"{', '.join(KEYS)} (e.g. --only net=AIN*)")
            if not pattern:
                raise UsageError(f"--only {text}: the pattern after '=' is empty")
            if key == "severity" and pattern.lower() not in SEVERITIES:
                raise UsageError(f"--only {text}: severity is one of {', '.join(SEVERITIES)}")
            _pattern(pattern, text)  # a bad regular expression is refused here
            terms.append((key, pattern.lower() if key == "severity" else pattern))
        return cls(tuple(terms))

    def describe(self) -> str:
        return ", ".join(f"{k}={p}" for k, p in self.terms)

    def _by_key(self) -> dict[str, list[re.Pattern[str]]]:
        out: dict[str, list[re.Pattern[str]]] = {}
        for key, pattern in self.terms:
            out.setdefault(key, []).append(_pattern(pattern, f"{key}={pattern}"))
        return out

    def validate(self, rules: list[tuple[str, str]], nets: list[str] | None = None,
                 layers: list[str] | None = None) -> None:
        """Refuse a term that matches no rule (name or kind) of the rule
        set, no net or no layer of the board (``None``: not checked, as in a
        batch, where one board may lack a net another has)."""
        known = {"rule": [n for pair in rules for n in pair], "net": nets, "layer": layers}
        for key, pattern in self.terms:
            names = known.get(key)
            if names is None:  # severity, or a list not given
                continue
            compiled = _pattern(pattern, f"{key}={pattern}")
            if not any(compiled.search(name) for name in names):
                sample = ", ".join(sorted(set(names))[:8]) or "none"
                raise UsageError(f"--only {key}={pattern}: matches no {_NOUN[key]} (they include: {sample})")

    def matcher(self):
        """A function ``keep(rule, kind, severity, aggressor, victim,
        layers) -> bool``."""
        by_key = self._by_key()

        def any_of(key: str, names) -> bool:
            pats = by_key.get(key)
            return pats is None or any(p.search(n) for p in pats for n in names)

        def keep(rule: str, kind: str, severity: str, aggressor: str, victim: str, layers) -> bool:
            return (any_of("rule", (rule, kind)) and any_of("severity", (severity,))
                    and any_of("net", (aggressor, victim)) and any_of("layer", tuple(layers)))

        return keep


def _pattern(pattern: str, text: str) -> re.Pattern[str]:
    try:
        return compile_pattern(pattern)
    except re.error as exc:
        raise UsageError(f"--only {text}: not a valid regular expression ({exc})") from None


def narrow(findings: list[Finding], review: Review,
           selection: Selection | None) -> tuple[list[Finding], Review, int]:
    """The findings ``selection`` keeps, the review with its baseline-fixed
    list and statuses narrowed the same way (a new review; the one given is
    left as it is), and how many findings were hidden."""
    if selection is None:
        return list(findings), review, 0
    keep = selection.matcher()
    kept = [f for f in findings if keep(f.rule, f.kind, f.severity, f.aggressor, f.victim, f.layers)]
    fixed = [d for d in review.fixed
             if keep(str(d.get("rule", "")), str(d.get("kind", "")), str(d.get("severity", "")),
                     str(d.get("aggressor", "")), str(d.get("victim", "")), list(d.get("layers") or []))]
    shown = {f.id for f in kept}
    status = {k: v for k, v in review.status.items() if k in shown}
    return kept, dataclasses.replace(review, fixed=fixed, status=status), len(findings) - len(kept)


def selection_note(result) -> str | None:
    """``only severity=error: 3 of 15 findings shown`` for reports, or
    ``None`` when the run had no ``--only``."""
    selection = getattr(result, "selection", None)
    if selection is None:
        return None
    shown = len(result.findings)
    return (f"only {selection.describe()}: {shown} of {shown + result.unselected} findings shown; the verdict "
            "covers these")
