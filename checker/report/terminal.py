"""Terminal output: a table of findings, worst first, and a summary line."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from ..runner import Result
from . import CAUTION
from .json_report import summary

SEVERITY_STYLE = {"error": "bold red", "warning": "yellow"}


def _value(value: float, unit: str) -> str:
    if unit in ("mm", "pF", "mV"):
        return f"{value:.3g} {unit}"
    return f"{value:.2f}"


def render(result: Result, console: Console) -> None:
    a = result.analysis
    title = f"{a.board.name} ({a.board.path})"
    if result.findings:
        table = Table(title=title, title_justify="left", expand=False)
        table.add_column("#", justify="right")
        table.add_column("severity")
        table.add_column("rule", overflow="fold")
        table.add_column("aggressor -> victim", overflow="fold")
        table.add_column("layers", overflow="fold")
        table.add_column("value / limit", justify="right")
        table.add_column("at (mm)", justify="right")
        for i, f in enumerate(result.findings, 1):
            limit = _value(f.limit, f.unit) if f.unit in ("mm", "pF", "mV") else f"{f.limit:g} ({f.unit})"
            table.add_row(
                str(i), f"[{SEVERITY_STYLE[f.severity]}]{f.severity}[/]", f.rule,
                f"{f.aggressor} -> {f.victim}", "/".join(f.layers),
                f"{_value(f.value, f.unit)} / {limit}", f"{f.at[0]:.2f}, {f.at[1]:.2f}",
            )
        console.print(table)
        for i, f in enumerate(result.findings, 1):
            console.print(f"{i:>3}. [{f.id}] {f.message}", highlight=False, markup=False)
    else:
        console.print(f"{title}: no findings", highlight=False)
    for note in sorted(set(a.notes)):
        console.print(f"[dim]note: {note}[/]", highlight=False)
    s = summary(result)
    per_rule = ", ".join(f"{k} {v}" for k, v in s["findings_by_rule"].items())
    console.print(
        f"1 board, {s['layers']} layers, {s['pieces']} pieces, {s['pairs_examined']} pairs examined, "
        f"{s['coupled_net_pairs']} coupled net pairs; findings: {s['findings']} ({per_rule}); "
        f"{result.seconds:.2f} s",
        highlight=False,
    )
    console.print(f"[dim]{CAUTION}[/]", highlight=False)
