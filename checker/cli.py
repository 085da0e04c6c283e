"""Command line: argument parsing and exit codes only.

Exit codes: 0 pass (no failing finding; waived findings never fail, and
with ``--fail-on new`` only findings absent from the ``--baseline`` fail),
1 fail, 2 bad input or usage, 3 an internal error.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from functools import partial
from importlib import resources
from pathlib import Path
from typing import Any

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

from . import __version__, batch, cores, limits, progress
from .atomic import (
    Stopped,
    refuse_overwriting_inputs,
    refuse_shared_outputs,
    removing_temporaries_on_signals,
    write_atomically,
)
from .errors import CouplintError, UsageError, bounded
from .report import html as html_report
from .report import json_report
from .report.visible import visible
from .review import FAIL_ON
from .waivers import DEFAULT_WAIVER_FILE, TODAY_ENV

EXIT_CLEAN, EXIT_FINDINGS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3


def demo_board_path() -> Path:
    """The invented demo board shipped inside the package."""
    return Path(str(resources.files("checker") / "data" / "demo_board.json"))


def pairs_option(p: argparse.ArgumentParser, each: str = "the") -> None:
    """``--pairs N|all``: how many net pairs a JSON report lists."""
    p.add_argument("--pairs", metavar="N|all", type=json_report.parse_pairs, default=json_report.DEFAULT_PAIRS,
                   help=f"net pairs {each} JSON report lists besides those a finding names: the N worst "
                        f"(default {json_report.DEFAULT_PAIRS}), or 'all'")


def limit_option(p: argparse.ArgumentParser) -> None:
    """``--limit NAME=VALUE``: raise (or lower) one resource cap."""
    p.add_argument("--limit", metavar="NAME=VALUE", action="append", default=[],
                   help="raise or lower a resource cap, repeatable: file-mb (default 512), package-mb (2048), "
                        "draws (5000000 per Gerber layer), shapes (1000000 per Gerber layer), track-points "
                        "(1000000 per JSON track or outline); see the README's caps")


def cores_option(p: argparse.ArgumentParser, each: str = "a check") -> None:
    """``--cores N``: how many processor cores one check may use."""
    p.add_argument("--cores", metavar="N", type=_cores_arg, default=None,
                   help=f"processor cores {each} may use (default: ${cores.CORES_ENV}, else all this process may "
                        f"run on, at most {cores.MAX_CORES}); the report is the same for any N")


def _cores_arg(text: str) -> int:
    try:
        return cores.parse_cores(text)
    except UsageError as exc:
        raise argparse.ArgumentTypeError(str(exc).removeprefix("--cores: ")) from None


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="couplint",
        description="Find where aggressor nets couple onto victim nets in exported PCB geometry.",
    )
    parser.add_argument("--version", action="version", version=f"couplint {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def output_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--rules", metavar="FILE|NAME",
                       help="rule file (YAML), or the name of a shipped rule set (e.g. 'default'); default: the "
                            "shipped 'default' rule set")
        p.add_argument("--format", choices=("text", "json"), default="text",
                       help="text table (default) or the JSON report")
        p.add_argument("--out", metavar="FILE", help="write the report to FILE instead of stdout")
        p.add_argument("--fail-on", choices=FAIL_ON, default="warning",
                       help="what makes the exit code 1: findings of this severity or worse ('warning', the "
                            "default, or 'error'), or 'new': findings not in the --baseline report; waived "
                            "findings never fail")
        p.add_argument("--waivers", metavar="FILE",
                       help="waiver file (YAML, see docs/waivers.md): waived findings stay in the report, "
                            f"marked, and do not fail the run (expiry is judged on today's date, or on "
                            f"${TODAY_ENV} if set)")
        p.add_argument("--baseline", metavar="FILE",
                       help="an earlier JSON report of this board: findings are marked new or unchanged, "
                            "and those gone since are listed as fixed")

        p.add_argument("--only", metavar="KEY=PATTERN", action="append", default=[],
                       help="report only findings whose rule (name or kind), severity, net (aggressor or victim) "
                            "or layer matches, e.g. --only net=AIN* --only severity=error; globs or re:REGEX; "
                            "repeat a key to widen, combine keys to narrow; every output and the exit status "
                            "cover the findings selected")
        p.add_argument("--svg", metavar="FILE", help="also write the annotated overlay of every finding (SVG)")
        p.add_argument("--svg-dir", metavar="DIR",
                       help="also write one overlay per layer group with findings into DIR (created if missing)")
        p.add_argument("--html", metavar="FILE", help="also write the self-contained HTML sign-off report")
        p.add_argument("--pdf", metavar="FILE",
                       help="also write the sign-off report as PDF, laid out for print (needs the 'pdf' extra: "
                            "WeasyPrint)")
        # --cards takes what --pairs takes: a whole number, or 'all'
        p.add_argument("--cards", metavar="N|all", type=json_report.parse_pairs, default=html_report.DEFAULT_CARDS,
                       help=f"findings, worst first, that get a card with a close-up in the HTML report "
                            f"(default {html_report.DEFAULT_CARDS}; every finding is in its index table either "
                            "way), or 'all'")
        p.add_argument("--junit", metavar="FILE", help="also write JUnit XML (one test case per rule)")
        p.add_argument("--what-if", action="store_true",
                       help="for budget findings, also work out the extra spacing that would meet the budget "
                            "(solves wider tables; the fraction of today's coupling is always given)")
        limit_option(p)
        pairs_option(p)
        cores_option(p)
        p.add_argument("--accurate", action="store_true",
                       help="solve every distinct coupled cross-section directly instead of interpolating "
                            "field-solved tables (slower; the report says which mode was used)")

    check = sub.add_parser(
        "check", help="check a board: a neutral JSON file, or a fabrication package (folder, .zip or files)")
    check.add_argument("board", nargs="+", metavar="BOARD",
                       help="board geometry: one neutral JSON file, or a fabrication package given as one folder, "
                            "one .zip, or its files (Gerber X2 copper layers, Excellon drills, a Gerber job file, "
                            "an IPC-D-356 netlist; see docs/fab-package.md)")
    check.add_argument("--stackup", metavar="FILE",
                       help="stackup YAML for a fabrication package (instead of its Gerber job file)")
    check.add_argument("--netlist", metavar="FILE",
                       help="IPC-D-356 netlist naming the nets of copper that carries no TO.N attribute")
    check.add_argument("--layer", metavar="FILE=L<n>[,ROLE]", action="append", default=[],
                       help="say what a Gerber file of the package is: copper layer n (1 = top), optionally "
                            "with its role (signal, plane, mixed), 'profile' (the board outline) or 'ignore'; "
                            "repeatable")
    output_options(check)
    demo = sub.add_parser("demo", help="check the built-in demo board")
    output_options(demo)
    batch_parser = sub.add_parser("batch", help="check many boards in parallel (files, folders or globs)")
    batch.add_arguments(batch_parser)
    limit_option(batch_parser)
    cores_option(batch_parser, "each board's check (with several worker processes, by default 1)")

    waive = sub.add_parser(
        "waive", help="append a waiver for one finding id to a waiver file",
        description="Append a waiver for the finding ID to the waiver file (created if missing). The id is "
                    "checked for its format (12 hex digits, as 'couplint check' prints in [brackets]) and, "
                    "with --report, against the findings of that JSON report, so a mistyped id is refused. "
                    "The file is validated first, an id already waived is refused, and everything already "
                    "in the file is kept byte for byte.")
    waive.add_argument("id", metavar="ID", help="finding id (12 hex digits)")
    waive.add_argument("--reason", required=True, help="why the finding is acceptable")
    waive.add_argument("--author", help="who accepts it (default: the user name from the environment)")
    waive.add_argument("--report", metavar="REPORT.json",
                       help="a JSON report of the board ('couplint check --format json'): the id must be one of "
                            "its findings")
    waive.add_argument("--expires", metavar="YYYY-MM-DD",
                       help="last day the waiver applies (default: it does not expire)")
    waive.add_argument("--waivers", metavar="FILE", default=DEFAULT_WAIVER_FILE,
                       help=f"waiver file (default: {DEFAULT_WAIVER_FILE} in the current folder)")
    kinds = sub.add_parser("kinds", help="describe the rule kinds a rule file can use")
    kinds.add_argument("kind", nargs="?", help="one kind to describe in full")

    classes = sub.add_parser(
        "classes", help="list the nets each net class catches on a board, and the nets no class catches "
                        "that are named like clocks, switching nodes or analog inputs")
    _survey_options(classes)
    init = sub.add_parser(
        "init", help="write a commented starter rule file for a board: the net classes with what their "
                     "patterns catch on it, values marked illustrative")
    _survey_options(init)
    init.add_argument("--out", metavar="FILE", default=STARTER_FILE,
                      help=f"the rule file to write (default: {STARTER_FILE}; an existing file is kept "
                           "unless --force)")
    init.add_argument("--force", action="store_true", help="replace FILE if it exists")
    return parser


#: Where ``couplint init`` writes by default.
STARTER_FILE = "couplint-rules.yaml"


def _survey_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("board", nargs="+", metavar="BOARD",
                   help="board geometry: one neutral JSON file, or a fabrication package (folder, .zip or files)")
    p.add_argument("--rules", metavar="FILE|NAME",
                   help="the rule set whose net classes to use (a file or a shipped set's name; default: "
                        "the shipped 'default' set)")
    p.add_argument("--stackup", metavar="FILE", help="stackup YAML for a fabrication package")
    p.add_argument("--netlist", metavar="FILE", help="IPC-D-356 netlist for copper without TO.N attributes")
    p.add_argument("--layer", metavar="FILE=L<n>[,ROLE]", action="append", default=[],
                   help="say what a Gerber file of the package is (as for check)")


def main(argv: list[str] | None = None) -> int:
    try:
        args = _parser().parse_args(argv)
    except SystemExit as exc:  # argparse has printed its message
        return EXIT_BAD_INPUT if exc.code not in (0, None) else EXIT_CLEAN
    try:
        caps = limits.parse(getattr(args, "limit", None) or [])
        with removing_temporaries_on_signals(), limits.using(caps), progress.to(_progress_line), \
                cores.using(getattr(args, "cores", None)):
            return _dispatch(args)
    except Stopped as exc:  # SIGTERM or SIGHUP (see removing_temporaries_on_signals)
        print(f"couplint: stopped by a signal (exit {exc.code}); no output was left half-written", file=sys.stderr)
        return int(exc.code or 1)
    except CouplintError as exc:
        print(f"couplint: error: {visible(bounded(str(exc)), keep_lines=True)}", file=sys.stderr)
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
        print(f"couplint: internal error: {type(exc).__name__}: {visible(bounded(str(exc)))} (please report this)",
              file=sys.stderr)
        return EXIT_INTERNAL


def _progress_line(line: str) -> None:
    """A progress line of a long stage, on stderr (terminal and CI log alike)."""
    print(visible(line), file=sys.stderr, flush=True)


def _dispatch(args: argparse.Namespace) -> int:
    if args.command == "batch":
        return batch.run(args)
    if args.command == "kinds":
        return _kinds(args.kind)
    if args.command == "waive":
        return _waive(args)
    if args.command in ("classes", "init"):
        return _survey(args)
    board_paths = [str(demo_board_path())] if args.command == "demo" else args.board
    return _check(board_paths, args)


def _check(board_paths: list[str], args: argparse.Namespace) -> int:
    from .analysis import analysis_steps
    from .report.formats import DELIVERABLES, REPORTS, Options
    from .session import Request, prepare, run

    refuse_shared_outputs([("--out", args.out), *((f"--{name}", getattr(args, name)) for name in DELIVERABLES)])
    outputs = [p for p in (args.out, *(getattr(args, name) for name in DELIVERABLES)) if p]
    # --rules names a file, or a shipped rule set (--rules default), which is no input file of this run
    rules_file = args.rules if args.rules and os.path.exists(args.rules) else None
    inputs = list(board_paths) + [p for p in (rules_file, args.waivers, args.baseline, getattr(args, "stackup", None),
                                                getattr(args, "netlist", None)) if p]
    for out in outputs:
        refuse_overwriting_inputs(out, inputs)
    # every input is read and validated before the (possibly long) check
    prepared = prepare(Request(
        board=tuple(board_paths), rules=args.rules, waivers=args.waivers, baseline=args.baseline,
        stackup=getattr(args, "stackup", None), netlist=getattr(args, "netlist", None),
        layers=tuple(getattr(args, "layer", None) or ()), only=tuple(args.only), fail_on=args.fail_on,
        accurate=args.accurate, what_if=args.what_if))
    err = Console(stderr=True)
    if err.is_terminal:  # a progress bar on stderr; never in pipes or CI logs
        with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=err, transient=True) as bar:
            task = bar.add_task("checking", total=None)
            step = ["checking"]

            def advance(what: str, done: int, total: int) -> None:
                step[0] = what
                bar.update(task, description=what, completed=done, total=total)

            def within(text: str) -> None:  # how far the step has got (pairs measured, solves done)
                bar.update(task, description=f"{step[0]}: {text}")

            with progress.details_to(within):
                result = run(prepared, progress=advance)
    else:  # plain lines (CI logs): a long check says where it is every few seconds
        stage = progress.Stage("checking", unit="steps", scale=1,
                               total=analysis_steps(prepared.board, prepared.ruleset) + len(prepared.ruleset.rules))
        at: dict[str, Any] = {"what": "preparing", "done": 0}

        def lines(what: str, done: int, total: int) -> None:
            at.update(what=what, done=done)
            stage.total = total
            stage.at(done, what)

        def within(text: str) -> None:
            stage.at(at["done"], f"{at['what']}: {text}")

        with progress.details_to(within):
            result = run(prepared, progress=lines)

    console = None
    if not args.out and args.format == "text":
        console = Console()
        if not console.is_terminal:  # piped or captured: room for the whole table
            console = Console(width=max(console.width, 132))
    options = Options(pairs=args.pairs, cards=getattr(args, "cards", Options.cards), console=console,
                      inputs=tuple(_files_of(inputs) + ([] if rules_file else [result.analysis.ruleset.path])))
    _write_deliverables(result, args, options)
    write_report = REPORTS[args.format]
    if args.out:
        write_atomically(args.out, lambda handle: write_report(result, handle, options))
    else:
        write_report(result, sys.stdout, options)
    return EXIT_FINDINGS if result.failing() else EXIT_CLEAN


def _files_of(paths: list[str]) -> list[str]:
    """The input files to list (with their SHA-256) in the sign-off report:
    a package folder stands for every file directly inside it."""
    out = []
    for p in paths:
        if os.path.isdir(p):
            out += sorted(str(f) for f in Path(p).iterdir() if f.is_file() and not f.name.startswith("."))
        else:
            out.append(p)
    return out


def _write_to(handle, content) -> None:
    handle.write(content)


def _write_deliverables(result, args: argparse.Namespace, options) -> None:
    """The files asked for (``--svg``, ``--svg-dir``, ``--html``, ``--pdf``,
    ``--junit``): every one is made first, then each is written atomically,
    so a failure (a PDF library missing) leaves no output of this run
    behind."""
    from .report import svg
    from .report.formats import DELIVERABLES

    files: list[tuple[str | Path, str | bytes]] = [
        (getattr(args, name), make(result, options)) for name, make in DELIVERABLES.items() if getattr(args, name)]
    if args.svg_dir:
        folder = Path(args.svg_dir)
        files += [(folder / f"{group}.svg", text) for group, text in svg.svg_per_layer_group(result).items()]
        folder.mkdir(parents=True, exist_ok=True)
    for path, content in files:
        write_atomically(path, partial(_write_to, content=content), binary=isinstance(content, bytes))


def _waive(args: argparse.Namespace) -> int:
    from .waivers import ID_PATTERN, append_waiver, parse_date

    if not ID_PATTERN.match(args.id.strip()):
        raise UsageError(f"{args.id!r} is not a finding id (12 hex digits, as 'couplint check' prints in "
                         f"[brackets])")
    expires = None
    if args.expires is not None:
        try:
            expires = parse_date(args.expires)
        except ValueError as exc:
            raise UsageError(f"--expires: {exc}") from None
    finding = None
    if args.report is not None:
        finding = _finding_in_report(args.report, args.id.strip())
    author = args.author if args.author is not None else _user_name()
    waiver = append_waiver(args.waivers, args.id, args.reason, author, expires=expires)
    until = f", until {waiver.expires}" if waiver.expires else ""
    what = ""
    if finding is not None:
        what = f": {finding.get('rule')} {finding.get('aggressor')} -> {finding.get('victim')}"
    print(visible(f"waived {waiver.id}{what} in {waiver.source} ({waiver.author}, {waiver.date}{until})"))
    return EXIT_CLEAN


def _finding_in_report(report: str, finding_id: str) -> dict:
    """The finding ``finding_id`` of the JSON report ``report``; a usage
    error naming the report when it has no such finding."""
    from .baseline import load_baseline

    findings = load_baseline(report).findings  # the baseline reader words a bad report
    for f in findings:
        if f.get("id") == finding_id:
            return f
    raise UsageError(f"{report}: no finding with the id {finding_id} in this report ({len(findings)} findings); "
                     "check the id against the report of the board you mean")


def _survey(args: argparse.Namespace) -> int:
    """``couplint classes`` and ``couplint init`` (:mod:`checker.netsurvey`)."""
    from .netsurvey import starter_rules, survey, survey_lines
    from .ruleset import load_ruleset, ruleset_named
    from .session import load_board_of

    if args.command == "init":
        refuse_overwriting_inputs(args.out, list(args.board) + [p for p in (args.rules, args.stackup, args.netlist)
                                                                if p and os.path.exists(p)])
        folder = os.path.dirname(os.path.abspath(args.out))
        if not os.path.isdir(folder):
            raise UsageError(f"{args.out}: the folder {os.path.dirname(args.out) or '.'} does not exist")
        if os.path.exists(args.out) and not args.force:
            raise UsageError(f"{args.out}: the file exists; couplint init keeps it (give --force to replace it, "
                             "or --out FILE)")
    ruleset = ruleset_named(args.rules)
    found = survey(load_board_of(args.board, getattr(args, "stackup", None), getattr(args, "netlist", None),
                                 getattr(args, "layer", None) or ()), ruleset)
    if args.command == "classes":
        for line in survey_lines(found):
            print(visible(line))
        return EXIT_CLEAN
    base = args.rules if args.rules and not os.path.exists(args.rules) else "default"
    if args.rules and os.path.exists(args.rules):
        base = os.path.relpath(os.path.abspath(args.rules), os.path.dirname(os.path.abspath(args.out)))
    text = starter_rules(found, base)
    # what is written must load: checked first in a file beside it, so `extends` resolves the same way
    with tempfile.NamedTemporaryFile("w", encoding="utf-8", suffix=".yaml", prefix=".couplint-init-",
                                     dir=os.path.dirname(os.path.abspath(args.out)), delete=False) as trial:
        trial.write(text)
    try:
        load_ruleset(trial.name)
    finally:
        os.unlink(trial.name)
    write_atomically(args.out, lambda handle: handle.write(text))
    print(visible(f"wrote {args.out}: {len(found.catches)} net classes for {found.board_name}; "
                  f"{sum(len(v) for v in found.hinted.values())} net(s) named like an aggressor or a victim "
                  "are listed there commented out; set the illustrative values for your design"))
    return EXIT_CLEAN


def _user_name() -> str:
    """The user name from the environment, for a waiver's author."""
    for var in ("COUPLINT_AUTHOR", "USER", "LOGNAME", "USERNAME"):
        name = os.environ.get(var, "").strip()
        if name:
            return name
    raise UsageError("no user name in the environment (USER, LOGNAME, USERNAME); give --author NAME")


def _kinds(kind: str | None) -> int:
    import inspect

    from .checks import REGISTRY

    console = Console()
    if kind is None:
        for name, module in REGISTRY.items():
            first = (inspect.getdoc(module) or name).splitlines()[0]
            console.print(f"[bold]{name}[/]  {first.split(':', 1)[-1].strip()}", highlight=False)
        return EXIT_CLEAN
    if kind not in REGISTRY:
        raise UsageError(f"unknown rule kind {kind!r} (known: {', '.join(REGISTRY)})")
    console.print(inspect.getdoc(REGISTRY[kind]), highlight=False, markup=False)
    return EXIT_CLEAN


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
