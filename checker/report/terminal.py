"""Terminal output: a table of findings, worst first, the review (waivers,
baseline), a summary line and the verdict."""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from ..selection import selection_note
from . import CAUTION
from .json_report import summary
from .visible import visible

if TYPE_CHECKING:  # the runner renders reports: a type only
    from ..runner import Result

SEVERITY_STYLE = {"error": "bold red", "warning": "yellow"}
STATUS_STYLE = {"new": "bold", "unchanged": "dim"}
VERDICT_STYLE = {"pass": "bold green", "pass with waivers": "green", "pass with known findings": "yellow",
                 "fail": "bold red"}
#: Below this many columns the findings table names rules by short codes
#: (R1, R2, ...) with a legend under it: the longest rule name and the
#: other columns then fit without breaking a name mid-word.
WIDE_TABLE_COLUMNS = 120


def _value(value: float, unit: str) -> str:
    if unit in ("mm", "pF", "mV"):
        return f"{value:.3g} {unit}"
    return f"{value:.2f}"


def _severity(f, waived: bool) -> str:
    if waived:
        return f"[dim]{f.severity} (waived)[/]"
    return f"[{SEVERITY_STYLE[f.severity]}]{f.severity}[/]"


#: How a file was identified when no attribute or option said it: the
#: reasons :mod:`checker.readers.fab.identify` gives start so.
_INFERRED = ("extension ", "name word", "name ends", "content:")


def _render_files(board, console: Console) -> None:
    """The package's files as read, when any was identified by its name or
    content rather than by its attributes: the user confirms or corrects
    the mapping with --layer."""
    if not any(how.startswith(_INFERRED) for _, _, how in board.files):
        return
    table = Table(title="package files (identified by name or content where no attribute says; correct with "
                        "--layer FILE=L<n>)", title_justify="left", expand=False)
    for column in ("file", "read as", "how"):
        table.add_column(column, overflow="fold")
    for name, read_as, how in board.files:
        table.add_row(*(escape(visible(v)) for v in (name.rsplit("/", 1)[-1], read_as, how)))
    console.print(table)


def render(result: Result, console: Console) -> None:
    a = result.analysis
    review = result.review
    with_baseline = review.baseline is not None
    title = escape(visible(f"{a.board.name} ({a.board.path})"))
    if result.findings:
        table = Table(title=title, title_justify="left", expand=False)
        table.add_column("#", justify="right")
        if with_baseline:
            table.add_column("status")
        table.add_column("severity")
        # a narrow terminal gets short rule codes and a legend, never a rule name broken mid-word
        rules = list(dict.fromkeys(f.rule for f in result.findings))
        abbreviate = console.width < WIDE_TABLE_COLUMNS
        code = {r: f"R{i}" for i, r in enumerate(rules, 1)} if abbreviate else {r: r for r in rules}
        table.add_column("rule", overflow="fold")
        table.add_column("aggressor -> victim", overflow="fold")
        table.add_column("layers", overflow="fold")
        table.add_column("value / limit", justify="right")
        table.add_column("at (mm)", justify="right")
        for i, f in enumerate(result.findings, 1):
            limit = _value(f.limit, f.unit) if f.unit in ("mm", "pF", "mV") else f"{f.limit:g} ({f.unit})"
            status = review.status.get(f.id, "new")
            cells = [str(i)] + ([f"[{STATUS_STYLE[status]}]{status}[/]"] if with_baseline else []) + [
                _severity(f, f.id in review.waived), code[f.rule], escape(visible(f"{f.aggressor} -> {f.victim}")),
                escape(visible("/".join(f.layers))),
                f"{_value(f.value, f.unit)} / {limit}", f"{f.at[0]:.2f}, {f.at[1]:.2f}",
            ]
            table.add_row(*cells, style="dim" if f.id in review.waived else None)
        console.print(table)
        if abbreviate:
            console.print("rules: " + ", ".join(f"{code[r]} {r}" for r in rules), highlight=False, markup=False)
        for i, f in enumerate(result.findings, 1):
            console.print(visible(f"{i:>3}. [{f.id}] {f.message}"), highlight=False, markup=False)
            if f.coupling_path:
                console.print(visible(f"     path: {f.coupling_path}"), highlight=False, markup=False)
            if f.suggestion:
                console.print(visible(f"     what if: {f.suggestion}"), highlight=False, markup=False)
            w = review.waived.get(f.id)
            if w is not None:
                console.print(visible(f"     waived: {_waiver_line(w)}"), style="dim", highlight=False, markup=False)
    else:
        console.print(f"{title}: no findings", highlight=False)
    _render_victims(result, console)
    _render_files(a.board, console)
    for note in sorted(set(result.notes)):
        console.print(f"[dim]note: {escape(visible(note))}[/]", highlight=False)
    _render_review(result, console)
    s = summary(result)
    per_rule = ", ".join(f"{k} {v}" for k, v in s["findings_by_rule"].items())
    review_counts = ""
    if review.waiver_file is not None:
        review_counts += f"; waived {s['waived']}"
    if with_baseline:
        review_counts += f"; new {s['new']}, unchanged {s['unchanged']}, fixed {s['fixed']}"
    console.print(
        f"1 board, {s['layers']} layers, {s['pieces']} pieces, {s['pairs_examined']} pairs examined, "
        f"{s['coupled_net_pairs']} coupled net pairs; findings: {s['findings']} ({per_rule}){review_counts}; "
        f"{a.mode} mode, {result.seconds:.2f} s",
        highlight=False,
    )
    selected = selection_note(result)
    if selected is not None:
        console.print(visible(selected), highlight=False, markup=False)
    console.print(f"[dim]{CAUTION}[/]", highlight=False)
    console.print(_verdict_line(result, s), highlight=False)


#: victims listed per noise-budget rule on the terminal (all are in the JSON report)
VICTIM_ROWS = 15


def _render_victims(result: Result, console: Console) -> None:
    """Noise per victim for each noise-budget rule, passing or not, worst first."""
    rows = sorted(result.analysis.victim_noise, key=lambda v: (v.rule, -v.noise_mv, v.victim))
    for rule in dict.fromkeys(v.rule for v in rows):
        mine = [v for v in rows if v.rule == rule]
        console.print(f"noise per victim ({rule}, budget {mine[0].budget_mv:.3g} mV):", highlight=False,
                      markup=False)
        for v in mine[:VICTIM_ROWS]:
            mark = "ok  " if v.passes else "FAIL"
            more = f" and {v.aggressors - 1} more" if v.aggressors > 1 else ""
            raw = f"; {v.unfiltered_mv:.3g} mV unfiltered" if v.unfiltered_mv >= 0 else ""
            console.print(visible(f"  {mark} {v.victim}: {v.noise_mv:.3g} mV "
                                  f"({v.model}; from {v.worst_aggressor}{more}{raw})"),
                          highlight=False, markup=False)
        if len(mine) > VICTIM_ROWS:
            console.print(f"  ... {len(mine) - VICTIM_ROWS} more victims in the JSON report (victim_noise)",
                          highlight=False, markup=False)


def _waiver_line(w) -> str:
    until = f", expires {w.expires}" if w.expires else ""
    return f"{w.reason} ({w.author}, {w.date}{until}; {w.source})"


def _render_review(result: Result, console: Console) -> None:
    """Expired and unused waivers, and findings of the baseline that are gone."""
    review = result.review
    if review.waiver_file is not None and (review.expired or review.unused):
        console.print(visible(f"waivers in {review.waiver_file}:"), highlight=False, markup=False)
        for w in review.expired:
            n = len(review.covers.get(w, []))
            would = f"would cover {n} finding{'s' if n != 1 else ''}" if n else "matches no finding either"
            console.print(f"  [yellow]expired[/] {escape(visible(w.source))}: {escape(visible(w.describe()))}, "
                          f"expired {w.expires} "
                          f"({would}; not applied)", highlight=False)
        for w in review.unused:
            console.print(f"  [yellow]unused[/]  {escape(visible(w.source))}: {escape(visible(w.describe()))} "
                          f"matches no finding "
                          f"(fixed, or a wrong id or pattern?)", highlight=False)
    if review.baseline is not None and review.fixed:
        console.print(visible(f"fixed since the baseline {review.baseline}:"), highlight=False, markup=False)
        for f in review.fixed:
            text = f"[{f['id']}] {f['rule']}: {f['aggressor']} -> {f['victim']} on {'/'.join(f['layers'])}"
            console.print(f"  [green]fixed[/] {escape(visible(text))}", highlight=False)


def _verdict_line(result: Result, s: dict) -> str:
    """``verdict: fail (3 failing: ...)``, with what was waived or let pass."""
    verdict, fail_on = s["verdict"], result.fail_on
    parts = []
    if s["failing"]:
        what = "new since the baseline" if fail_on == "new" else f"{fail_on} or worse"
        parts.append(f"{s['failing']} failing: {what}, not waived")
    if s["waived"]:
        parts.append(f"{s['waived']} waived")
    passed = s["findings"] - s["failing"] - s["waived"]
    if passed:
        why = "unchanged since the baseline" if fail_on == "new" else f"below {fail_on}"
        parts.append(f"{passed} {why}, not failing with --fail-on {fail_on}")
    detail = f" ({'; '.join(parts)})" if parts else ""
    return f"verdict: [{VERDICT_STYLE[verdict]}]{verdict}[/]{detail}"
