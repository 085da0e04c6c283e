"""Command line: argument parsing and exit codes only.

Exit codes: 0 no findings, 1 findings (with ``--fail-on error``, error
findings only), 2 bad input or usage, 3 an internal error.
"""

from __future__ import annotations

import argparse
import os
import sys
from importlib import resources
from pathlib import Path

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

from . import __version__
from .atomic import refuse_overwriting_inputs, write_atomically
from .errors import CouplintError, UsageError

EXIT_CLEAN, EXIT_FINDINGS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3


def demo_board_path() -> Path:
    """The invented demo board shipped inside the package."""
    return Path(str(resources.files("checker") / "data" / "demo_board.json"))


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="couplint",
        description="Find where aggressor nets couple onto victim nets in exported PCB geometry.",
    )
    parser.add_argument("--version", action="version", version=f"couplint {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def output_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--rules", metavar="FILE",
                       help="rule file (YAML); default: the shipped 'default' rule set")
        p.add_argument("--format", choices=("text", "json"), default="text",
                       help="text table (default) or the JSON report")
        p.add_argument("--out", metavar="FILE", help="write the report to FILE instead of stdout")
        p.add_argument("--fail-on", choices=("warning", "error"), default="warning",
                       help="lowest severity that makes the exit code 1 (default: warning)")

    check = sub.add_parser("check", help="check a board file")
    check.add_argument("board", help="board geometry (neutral JSON)")
    output_options(check)
    demo = sub.add_parser("demo", help="check the built-in demo board")
    output_options(demo)
    kinds = sub.add_parser("kinds", help="describe the rule kinds a rule file can use")
    kinds.add_argument("kind", nargs="?", help="one kind to describe in full")
    return parser


def main(argv: list[str] | None = None) -> int:
    try:
        args = _parser().parse_args(argv)
    except SystemExit as exc:  # argparse has printed its message
        return EXIT_BAD_INPUT if exc.code not in (0, None) else EXIT_CLEAN
    try:
        if args.command == "kinds":
            return _kinds(args.kind)
        board_path = str(demo_board_path()) if args.command == "demo" else args.board
        return _check(board_path, args)
    except CouplintError as exc:
        print(f"couplint: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # e.g. piped into `head`: stop quietly
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_CLEAN
    except KeyboardInterrupt:
        print("couplint: interrupted", file=sys.stderr)
        return 130
    except MemoryError:
        print("couplint: error: out of memory", file=sys.stderr)
        return EXIT_INTERNAL
    except Exception as exc:  # noqa: BLE001 - one line, never a traceback
        print(f"couplint: internal error: {type(exc).__name__}: {exc} (please report this)", file=sys.stderr)
        return EXIT_INTERNAL


def _check(board_path: str, args: argparse.Namespace) -> int:
    from .readers import load_board
    from .report import json_report, terminal
    from .ruleset import default_ruleset, load_ruleset
    from .runner import check_board

    if args.out:
        refuse_overwriting_inputs(args.out, [board_path] + ([args.rules] if args.rules else []))
    ruleset = load_ruleset(args.rules) if args.rules else default_ruleset()
    board = load_board(board_path)
    err = Console(stderr=True)
    if err.is_terminal:  # a progress bar on stderr; never in pipes or CI logs
        with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=err, transient=True) as bar:
            task = bar.add_task("checking", total=None)

            def progress(what: str, done: int, total: int) -> None:
                bar.update(task, description=what, completed=done, total=total)

            result = check_board(board, ruleset, progress=progress)
    else:
        result = check_board(board, ruleset)
    result.fail_on = args.fail_on

    if args.format == "json":
        emit = lambda handle: json_report.write(result, handle)  # noqa: E731
    elif args.out:
        emit = lambda handle: terminal.render(  # noqa: E731
            result, Console(file=handle, width=140, color_system=None, soft_wrap=True))
    else:
        console = Console()
        if not console.is_terminal:  # piped or captured: room for the whole table
            console = Console(width=max(console.width, 132))
        emit = lambda handle: terminal.render(result, console)  # noqa: E731
    if args.out:
        write_atomically(args.out, emit)
    else:
        emit(sys.stdout)
    return EXIT_FINDINGS if result.failing() else EXIT_CLEAN


def _kinds(kind: str | None) -> int:
    import inspect

    from .checks import REGISTRY

    console = Console()
    if kind is None:
        for name, module in REGISTRY.items():
            first = inspect.getdoc(module).splitlines()[0]
            console.print(f"[bold]{name}[/]  {first.split(':', 1)[-1].strip()}", highlight=False)
        return EXIT_CLEAN
    if kind not in REGISTRY:
        raise UsageError(f"unknown rule kind {kind!r} (known: {', '.join(REGISTRY)})")
    console.print(inspect.getdoc(REGISTRY[kind]), highlight=False, markup=False)
    return EXIT_CLEAN


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
