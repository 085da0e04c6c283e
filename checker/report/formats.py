"""The outputs of a check, registered by name with one signature each, so
the command line (and anything else) picks them from a table instead of a
chain of ifs.

* :data:`REPORTS`: the report written to ``--out`` or standard output, by
  ``--format``: ``write(result, handle, options)`` writes text to
  ``handle``.
* :data:`DELIVERABLES`: the files asked for by option (``--svg``,
  ``--html``, ``--pdf``, ``--junit``): ``make(result, options)`` returns
  the file's content, text or (PDF) bytes. Every content is made before any
  file is written.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, TextIO

from rich.console import Console

from . import html, json_report, junit, svg, terminal

if TYPE_CHECKING:  # the runner makes results: a type only
    from ..runner import Result


@dataclass(frozen=True)
class Options:
    """What the outputs may be asked besides the result.

    ``pairs``: net pairs the JSON report lists beyond those a finding names
    (``None``: all); ``cards``: findings given a card in the sign-off
    report (``None``: all); ``inputs``: the files the sign-off report lists
    with their SHA-256; ``console``: the console the text report prints to
    (``None``: a plain one of 140 columns on the handle, as for a file).
    """

    pairs: int | None = json_report.DEFAULT_PAIRS
    cards: int | None = html.DEFAULT_CARDS
    inputs: tuple[str, ...] = ()
    console: Console | None = None
    #: what one output made that another reuses (the PDF lays out the HTML page)
    made: dict = field(default_factory=dict)


def write_text(result: Result, handle: TextIO, options: Options) -> None:
    """The terminal table, summary and verdict; on ``options.console`` if
    given, else without colours, 140 columns wide, on ``handle``."""
    console = options.console or Console(file=handle, width=140, color_system=None, soft_wrap=True)
    terminal.render(result, console)


def write_json(result: Result, handle: TextIO, options: Options) -> None:
    """The JSON report (``docs`` and the README's *JSON report*)."""
    json_report.write(result, handle, options.pairs)


def make_svg(result: Result, options: Options) -> str:
    """The annotated overlay of every finding (no findings: the copper alone)."""
    return svg.render_svg(result) if result.findings else svg.render_svg(result, layers=())


def make_html(result: Result, options: Options) -> str:
    """The self-contained sign-off report (made once per ``options``)."""
    if "html" not in options.made:
        options.made["html"] = html.render_html(result, inputs=list(options.inputs), cards=options.cards)
    return options.made["html"]


def make_pdf(result: Result, options: Options) -> bytes:
    """The sign-off report laid out as PDF (needs the ``pdf`` extra)."""
    from .pdf import html_to_pdf  # WeasyPrint is loaded only when a PDF is asked for

    return html_to_pdf(make_html(result, options))


def make_junit(result: Result, options: Options) -> str:
    """JUnit XML, one test case per rule."""
    return junit.junit_for_result(result)


REPORTS: dict[str, Callable[[Result, TextIO, Options], None]] = {"text": write_text, "json": write_json}

DELIVERABLES: dict[str, Callable[[Result, Options], str | bytes]] = {
    "svg": make_svg, "html": make_html, "pdf": make_pdf, "junit": make_junit,
}
