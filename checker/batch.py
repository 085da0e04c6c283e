"""``couplint batch``: check many boards in parallel and report for CI.

Targets are board files, fabrication packages (a folder holding Gerber
files or a Gerber job file and no ``*.json``, or a ``.zip``), folders
(every ``*.json`` directly inside) and glob patterns. Each board is checked by :func:`check_one` in a worker: a local
process pool (``--jobs``) or a Dask distributed cluster (``--scheduler``).
A worker loads the rule set itself (from its path), checks the board and
returns a :class:`BoardOutcome` with the board's JSON report as text; the
parent process writes every report (atomically) into ``--out-dir``, prints a
summary table and writes the optional summary JSON and JUnit XML. Remote
workers therefore never need write access to the output folder, but they do
need the board and rule files at the same paths (a shared filesystem) and the
same couplint version.

A board that cannot be loaded or checked is an ``error`` row; the batch goes
on. Exit code (from :func:`run`): 0 when every board passes, 1 when any board
fails or is an error. Problems with the batch itself (no boards found, a bad
rule file, an output path that names an input, an unreachable scheduler)
raise :class:`checker.errors.CouplintError` before any output is written;
the command line turns that into one message and exit code 2.
"""

from __future__ import annotations

import argparse
import datetime
import glob
import hashlib
import math
import os
import sys
import time
from collections import Counter
from dataclasses import asdict, dataclass, field
from typing import Callable, Iterable, Iterator

from . import __version__, limits
from . import cores as core_count
from .atomic import Stopped, refuse_overwriting_inputs, write_atomically
from .errors import CouplintError, UsageError, bounded
from .report.json_report import DEFAULT_PAIRS, parse_pairs
from .report.visible import visible
from .selection import Selection

EXIT_PASS, EXIT_FAIL = 0, 1

FAIL_ON = ("warning", "error", "new")
VERDICTS = ("pass", "pass with waivers", "pass with known findings", "fail", "error")
#: The verdicts that exit 0.
PASSING = ("pass", "pass with waivers", "pass with known findings")

#: Fields of :class:`BoardOutcome` that go into the summary JSON, in order.
#: ``seconds`` is left out on purpose so the file is byte-stable for CI diffs.
SUMMARY_FIELDS = ("path", "name", "verdict", "findings", "failing", "waived", "by_rule", "worst_noise_mv",
                  "error", "report_path")

#: Modules the worker processes import once, up front (forkserver preload).
_WORKER_MODULES = ["checker.batch", "checker.readers", "checker.ruleset", "checker.runner",
                   "checker.report.json_report", "checker.report.junit"]

_GLOB_CHARS = set("*?[")


@dataclass
class BoardOutcome:
    """What checking one board gave. Plain data: it crosses process (and
    machine) boundaries.

    ``verdict`` is ``pass``, ``pass with waivers``, ``fail`` or ``error``;
    ``error`` the one-line message when the board could not be loaded or
    checked (then the counts are 0 and ``by_rule`` is empty).
    ``worst_noise_mv``: the largest coupled noise (mV) over every coupled net
    pair, either direction; ``None`` when no pair has a noise estimate.
    ``report_text`` (the board's JSON report) travels from the worker to the
    parent, which writes it to ``report_path`` and drops the text.
    """

    path: str
    name: str
    verdict: str
    findings: int = 0
    failing: int = 0
    waived: int = 0
    by_rule: dict = field(default_factory=dict)
    worst_noise_mv: float | None = None
    seconds: float = 0.0
    error: str | None = None
    report_path: str | None = None
    report_text: str | None = field(default=None, repr=False)
    #: finding dicts (as in the JSON report) that fail / are waived, for JUnit
    failing_findings: list = field(default_factory=list, repr=False)
    waived_findings: list = field(default_factory=list, repr=False)
    #: the rule set the worker used (checked against the parent's)
    ruleset_sha256: str | None = None

    def summary(self) -> dict:
        """The summary-JSON entry (no clock time)."""
        d = asdict(self)
        return {key: d[key] for key in SUMMARY_FIELDS}


# --------------------------------------------------------------------------- worker

def check_one(path: str, rules: str | None, fail_on: str = "warning", waivers: str | None = None,
              baseline: str | None = None, today: datetime.date | None = None,
              stackup: str | None = None, caps: limits.Limits | None = None,
              pairs: int | None = DEFAULT_PAIRS, cores: int | None = None,
              only: tuple[str, ...] = ()) -> BoardOutcome:
    """Check one board file; runs in a worker. Never raises: a board that
    cannot be loaded or checked comes back with ``verdict="error"`` and the
    message in ``error``.

    ``rules``, ``waivers`` (a waiver file) and ``baseline`` (an earlier JSON
    report of this board) are paths the worker reads itself; ``today`` is the
    date waiver expiry is judged on (default: the worker's today);
    ``stackup``: a stackup YAML for fabrication packages without a job file;
    ``caps``: the resource caps (``--limit``; default: :mod:`checker.limits`'s);
    ``pairs``: net pairs the JSON report lists besides those a finding names;
    ``cores``: processor cores the check may use (:mod:`checker.cores`);
    ``only``: the ``--only`` terms (:mod:`checker.selection`)."""
    with limits.using(caps), core_count.using(cores):
        return _check_one(path, rules, fail_on, waivers, baseline, today, stackup, pairs, only)


def _check_one(path: str, rules: str | None, fail_on: str, waivers: str | None, baseline: str | None,
               today: datetime.date | None, stackup: str | None, pairs: int | None,
               only: tuple[str, ...] = ()) -> BoardOutcome:
    start = time.perf_counter()
    name = board_stem(path)
    try:
        from .readers.fab.package import is_package
        from .report import json_report, junit
        from .session import Request, prepare, run

        # every input is read before the check; --stackup is for the packages of the batch only
        prepared = prepare(Request(board=(path,), rules=rules, waivers=waivers, baseline=baseline,
                                   stackup=stackup if is_package([path]) else None, only=only,
                                   names_checked=False, fail_on=fail_on, today=today))
        name = prepared.board.name
        ruleset = prepared.ruleset
        result = run(prepared)
        failing, waived = junit.result_findings(result)
        by_rule = json_report.summary(result)["findings_by_rule"]
        return BoardOutcome(
            path=path, name=name, verdict=result.verdict(), findings=len(result.findings),
            failing=len(failing), waived=len(waived), by_rule=by_rule, worst_noise_mv=_worst_noise_mv(result),
            seconds=time.perf_counter() - start, report_text=json_report.render(result, pairs),
            failing_findings=failing, waived_findings=waived, ruleset_sha256=ruleset.sha256,
        )
    except CouplintError as exc:
        message = str(exc)
    except MemoryError:
        message = f"{path}: out of memory while checking this board"
    except RecursionError:
        message = f"{path}: the board is nested too deeply to check"
    except Exception as exc:  # noqa: BLE001 - one line per board, never a traceback
        message = f"{path}: internal error: {type(exc).__name__}: {exc} (please report this)"
    return _error_outcome(path, name, message, time.perf_counter() - start)


def _error_outcome(path: str, name: str, message: str, seconds: float = 0.0) -> BoardOutcome:
    return BoardOutcome(path=path, name=name, verdict="error", seconds=seconds, error=bounded(message))


def _worst_noise_mv(result) -> float | None:
    import numpy as np

    p = result.analysis.net_pairs
    if len(p) == 0:
        return None
    worst = np.fmax(p.noise_ab_v, p.noise_ba_v)
    worst = worst[np.isfinite(worst)]
    if worst.size == 0:
        return None
    return float(f"{float(worst.max()) * 1e3:.6g}")


# --------------------------------------------------------------------------- command line

def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1, got {value}")
    return value


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number of seconds, got {text!r}") from None
    if not (value > 0 and math.isfinite(value)):
        raise argparse.ArgumentTypeError(f"must be a positive number of seconds, got {text!r}")
    return value


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """The options of ``couplint batch``."""
    parser.add_argument("targets", nargs="+", metavar="TARGET",
                        help="board files, fabrication packages (a folder of Gerber files or a .zip), folders "
                             "(every *.json directly inside) or glob patterns (quote them; ** recurses)")
    parser.add_argument("--pairs", metavar="N|all", type=parse_pairs, default=DEFAULT_PAIRS,
                        help="net pairs each JSON report lists besides those a finding names: the N worst "
                             f"(default {DEFAULT_PAIRS}), or 'all'")
    parser.add_argument("--stackup", metavar="FILE",
                        help="stackup YAML for fabrication packages that have no Gerber job file")
    parser.add_argument("--rules", metavar="FILE|NAME",
                        help="rule file (YAML), or the name of a shipped rule set (e.g. 'default'); default: the "
                             "shipped 'default' rule set")
    parser.add_argument("--out-dir", required=True, metavar="DIR",
                        help="folder for the per-board JSON reports (<board file stem>.json; "
                             "created if missing)")
    parser.add_argument("--jobs", type=_positive_int, default=os.cpu_count() or 1, metavar="N",
                        help="worker processes (default: the number of CPUs; 1 checks in this process)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run on a Dask distributed cluster, e.g. tcp://10.0.0.5:8786 "
                             "(needs the 'distributed' package; --jobs is then ignored)")
    parser.add_argument("--connect-timeout", type=_positive_float, default=10.0, metavar="SECONDS",
                        help="how long to try to reach --scheduler (default: 10)")
    parser.add_argument("--summary-json", metavar="FILE",
                        help="write the batch summary as JSON (byte-stable: no clock times)")
    parser.add_argument("--junit", metavar="FILE",
                        help="write JUnit XML: one testsuite per board, one testcase per rule")
    parser.add_argument("--fail-on", choices=FAIL_ON, default="warning",
                        help="what fails a board: findings of this severity or worse ('warning', the default, "
                             "or 'error'), or 'new': findings not in its --baseline-dir report; waived "
                             "findings never fail")
    parser.add_argument("--waivers", metavar="FILE",
                        help="one waiver file (YAML, docs/waivers.md) applied to every board")
    parser.add_argument("--only", metavar="KEY=PATTERN", action="append", default=[],
                        help="report only findings whose rule (name or kind), severity, net or layer matches, "
                             "as for 'couplint check'; each board's verdict covers the findings selected")
    parser.add_argument("--baseline-dir", metavar="DIR",
                        help="the --out-dir of an earlier batch: each board is compared with its report "
                             "there (same file name); a board without one has only new findings")


def run(args: argparse.Namespace) -> int:
    """Run a batch from parsed arguments. 0: every board passes; 1: some
    board fails or could not be checked. Raises CouplintError (exit 2) for a
    problem with the batch itself, before writing anything."""
    from rich.console import Console

    boards = expand_targets(args.targets)
    out_dir = args.out_dir
    if os.path.exists(out_dir) and not os.path.isdir(out_dir):
        raise UsageError(f"{out_dir}: --out-dir names a file, not a folder")
    report_paths = {b: os.path.join(out_dir, n) for b, n in report_names(boards).items()}
    baselines = _baselines(args.baseline_dir, report_paths)
    _check_outputs(boards, [args.rules, args.waivers, *baselines.values()], report_paths, args.summary_json,
                   args.junit)
    for extra in (args.summary_json, args.junit):
        if extra:
            parent = os.path.dirname(extra) or "."
            same_as_out = os.path.realpath(parent) == os.path.realpath(out_dir)
            if not os.path.isdir(parent) and not same_as_out:  # --out-dir is created below
                raise UsageError(f"{extra}: the folder {parent} does not exist")
    # bad rule or waiver files stop the batch here, once, before any board is checked
    ruleset = _load_ruleset(args.rules)
    rule_names = [r.name for r in ruleset.rules]
    selection = Selection.parse(args.only)
    if selection is not None:  # nets and layers differ from board to board: only rules are checked here
        selection.validate([(r.name, r.kind) for r in ruleset.rules])
    today = None
    if args.waivers:
        from .waivers import load_waivers
        from .waivers import today as review_today

        load_waivers(args.waivers)
        today = review_today()  # one date for every board, also on remote workers
    options = {"rules": args.rules, "fail_on": args.fail_on, "waivers": args.waivers, "today": today,
               "stackup": args.stackup, "caps": limits.current(), "pairs": args.pairs,
               "cores": _cores_per_check(args, len(boards)), "only": tuple(args.only)}
    if args.scheduler:
        source = _dask_outcomes(boards, baselines, options, args.scheduler, args.connect_timeout)
    else:
        source = _pool_outcomes(boards, baselines, options, args.jobs)
    err = Console(stderr=True)
    outcomes: dict[str, BoardOutcome] = {}

    def collect(outcome: BoardOutcome) -> None:
        if outcome.error is None and outcome.ruleset_sha256 != ruleset.sha256:
            outcome = _error_outcome(outcome.path, outcome.name, (
                f"{outcome.path}: the worker's rule set differs from this one "
                f"({args.rules or 'default'} changed during the batch, or differs on the worker)"),
                outcome.seconds)
        if outcome.report_text is not None:
            target = report_paths[outcome.path]
            _write(target, lambda handle, text=outcome.report_text: handle.write(text))
            outcome.report_path = target
            outcome.report_text = None
        outcomes[outcome.path] = outcome

    with source as stream:
        try:
            os.makedirs(out_dir, exist_ok=True)
        except OSError as exc:
            raise UsageError(f"{out_dir}: cannot create the output folder: {exc.strerror or exc}") from None
        if err.is_terminal:  # a progress bar on stderr; never in pipes or CI logs
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

            with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                          TimeElapsedColumn(), console=err, transient=True) as bar:
                task = bar.add_task("checking boards", total=len(boards))
                for outcome in stream:
                    collect(outcome)
                    bar.update(task, advance=1, description=f"checked {os.path.basename(outcome.path)}")
        else:
            for outcome in stream:
                collect(outcome)

    ordered = [outcomes[b] for b in boards]
    summary = summary_dict(ordered, rules=args.rules, sha256=ruleset.sha256, fail_on=args.fail_on,
                           waivers=args.waivers, baseline_dir=args.baseline_dir, only=tuple(args.only))
    if args.summary_json:
        _write(args.summary_json, lambda handle: handle.write(summary_json(summary)))
    if args.junit:
        _write(args.junit, lambda handle: handle.write(junit_xml(ordered, rule_names)))
    print_table(ordered, summary["totals"])
    if selection is not None:
        print(f"only {selection.describe()}: findings outside it are neither counted nor reported; each "
              "verdict covers the findings selected")
    for o in ordered:
        if o.error is not None:
            print(f"couplint: error: {visible(o.error, keep_lines=True)}", file=sys.stderr)
    return EXIT_PASS if all(o.verdict in PASSING for o in ordered) else EXIT_FAIL


# --------------------------------------------------------------------------- targets and names

def expand_targets(targets: Iterable[str]) -> list[str]:
    """Board paths from files, folders and globs: sorted by path, each file
    once (by its real path). Raises UsageError for a target that names
    nothing."""
    found: list[str] = []
    for target in targets:
        target = target.rstrip("/\\") or target
        if os.path.isdir(target):
            inside = _boards_in(target)
            if not inside:
                raise UsageError(f"{target}: no *.json files and no fabrication package in this folder")
            found.extend(inside)
        elif os.path.isfile(target):
            found.append(target)
        elif _GLOB_CHARS & set(target):
            matches = sorted(glob.glob(target, recursive=True))
            files = []
            for m in matches:
                if os.path.isdir(m):
                    files.extend(_boards_in(m.rstrip("/\\")))
                elif os.path.isfile(m):
                    files.append(m)
            if not files:
                raise UsageError(f"{target}: the pattern matches no files")
            found.extend(files)
        elif os.path.exists(target):
            raise UsageError(f"{target}: not a file or a folder")
        else:
            raise UsageError(f"{target}: no such file or folder")
    seen: set[str] = set()
    out = []
    for path in sorted(found):
        real = os.path.realpath(path)
        if real not in seen:
            seen.add(real)
            out.append(path)
    return out


def _boards_in(folder: str) -> list[str]:
    """The boards a folder target stands for: its ``*.json`` files, or, if
    it has none but holds Gerber files or a Gerber job file, the folder
    itself (one fabrication package)."""
    inside = _json_in(folder)
    if inside:
        return inside
    return [folder] if _looks_like_package(folder) else []


def _looks_like_package(folder: str) -> bool:
    """Whether a folder holds a Gerber job file or a Gerber file (by content,
    as the package reader sniffs them)."""
    from .readers.fab.package import sniff_kind

    try:
        names = sorted(os.listdir(folder))
    except OSError:
        return False
    for n in names:
        p = os.path.join(folder, n)
        if os.path.isfile(p) and not n.startswith(".") and sniff_kind(p) in ("gerber", "job"):
            return True
    return False


def board_stem(path: str) -> str:
    """The name a board's report is filed under: the file or folder name
    without its extension (``rev-c/`` -> ``rev-c``, ``rev-c.zip`` -> ``rev-c``)."""
    base = os.path.basename(path.rstrip("/\\")) or path
    return base if os.path.isdir(path) else os.path.splitext(base)[0]


def _json_in(folder: str) -> list[str]:
    try:
        names = sorted(os.listdir(folder))
    except OSError as exc:
        raise UsageError(f"{folder}: cannot list the folder: {exc.strerror or exc}") from None
    return [os.path.join(folder, n) for n in names
            if n.lower().endswith(".json") and os.path.isfile(os.path.join(folder, n))]


def report_names(boards: list[str]) -> dict[str, str]:
    """Report file name for each board: ``<stem>.json``. Boards whose stems
    collide (ignoring case, for case-insensitive filesystems) are all named
    with their folder as well, ``<folder>--<stem>.json``, and where even
    that collides, with the first 8 hex digits of the SHA-256 of the path as
    given, ``<stem>-<hash>.json``. A board's name so depends only on its own
    path and the stems of the others, never on the order of the batch: the
    same board keeps its report name from one batch to the next, which
    ``--baseline-dir`` relies on."""
    stems = {b: board_stem(b) for b in boards}
    counts = Counter(s.casefold() for s in stems.values())
    names = {b: stems[b] for b in boards if counts[stems[b].casefold()] == 1}
    crowded = [b for b in boards if b not in names]
    with_folder = {b: f"{_folder_name(b)}--{stems[b]}" for b in crowded}
    again = Counter(n.casefold() for n in list(with_folder.values()) + list(names.values()))
    for b in crowded:
        if again[with_folder[b].casefold()] == 1:
            names[b] = with_folder[b]
        else:
            digest = hashlib.sha256(os.path.normpath(b).encode("utf-8", "surrogateescape")).hexdigest()[:8]
            names[b] = f"{stems[b]}-{digest}"
    return {b: names[b] + ".json" for b in boards}


def _folder_name(path: str) -> str:
    """The name of the folder that holds ``path`` (``.`` resolved to its real name)."""
    parent = os.path.dirname(os.path.normpath(path)) or "."
    return os.path.basename(os.path.abspath(parent)) or "root"


def _baselines(baseline_dir: str | None, report_paths: dict[str, str]) -> dict[str, str]:
    """board -> its baseline report (the file of the same name in ``baseline_dir``), where there is one."""
    if baseline_dir is None:
        return {}
    if not os.path.isdir(baseline_dir):
        raise UsageError(f"{baseline_dir}: --baseline-dir is not a folder")
    out = {}
    for board, report in report_paths.items():
        candidate = os.path.join(baseline_dir, os.path.basename(report))
        if os.path.isfile(candidate):
            out[board] = candidate
    return out


def _check_outputs(boards: list[str], other_inputs: list[str | None], report_paths: dict[str, str],
                   summary_json: str | None, junit: str | None) -> None:
    inputs: list[str | os.PathLike] = [*boards, *(p for p in other_inputs if p)]
    outputs = list(report_paths.values()) + [p for p in (summary_json, junit) if p]
    for out in outputs:
        refuse_overwriting_inputs(out, inputs)
    reports = {os.path.realpath(p): p for p in report_paths.values()}
    for option, path in (("--summary-json", summary_json), ("--junit", junit)):
        if path and os.path.realpath(path) in reports:
            raise UsageError(f"{path}: {option} names the report of a board in --out-dir; choose another path")
    if summary_json and junit and os.path.realpath(summary_json) == os.path.realpath(junit):
        raise UsageError(f"{junit}: --summary-json and --junit name the same file")


def _load_ruleset(rules: str | None):
    from .ruleset import ruleset_named

    return ruleset_named(rules)


def _write(path: str, emit: Callable) -> None:
    try:
        write_atomically(path, emit)
    except OSError as exc:
        raise UsageError(f"{path}: cannot write: {exc.strerror or exc}") from None


# --------------------------------------------------------------------------- executors

class _Stream:
    """A context manager yielding outcomes as boards finish; closes its
    workers on exit. ``close(stopping)``: ``stopping`` is true when the run
    was interrupted (Ctrl-C, SIGTERM), so running boards are abandoned
    rather than waited for."""

    def __init__(self, gen: Iterator[BoardOutcome], close: Callable[[bool], None]) -> None:
        self._gen, self._close = gen, close

    def __enter__(self) -> Iterator[BoardOutcome]:
        return self._gen

    def __exit__(self, exc_type, exc, tb) -> None:
        self._close(exc_type is not None and issubclass(exc_type, (KeyboardInterrupt, Stopped)))


def _close_pool(pool, stopping: bool) -> None:
    if stopping:  # do not wait for the boards being checked: end the workers
        for process in list(getattr(pool, "_processes", {}).values()):
            process.terminate()
        pool.shutdown(wait=False, cancel_futures=True)
    else:
        pool.shutdown(wait=True, cancel_futures=True)


def _cores_per_check(args: argparse.Namespace, boards: int) -> int:
    """Cores each board's check may use: ``--cores`` if given; else, with
    worker processes, the cores shared out among them (at least 1);
    without, every core (:func:`checker.cores.count`); on a cluster, 1."""
    given = getattr(args, "cores", None)
    if given is not None:
        return given
    if getattr(args, "scheduler", None):
        return 1  # a cluster's workers share their machines with one another
    return max(1, core_count.count() // min(args.jobs, max(boards, 1)))


def _pool_outcomes(boards: list[str], baselines: dict[str, str], options: dict, jobs: int) -> _Stream:
    jobs = min(jobs, len(boards))
    if jobs <= 1:  # no worker processes: check here, one board after another
        return _Stream((check_one(b, baseline=baselines.get(b), **options) for b in boards), lambda stopping: None)

    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    # forkserver: workers start from a clean process with couplint imported
    # once, not as forks of a parent that may run threads.
    context = None
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(_WORKER_MODULES)
    pool = ProcessPoolExecutor(max_workers=jobs, mp_context=context)

    def gen() -> Iterator[BoardOutcome]:
        futures = {pool.submit(check_one, b, baseline=baselines.get(b), **options): b for b in boards}
        for future in as_completed(futures):
            yield _outcome_of(future, futures[future], BrokenProcessPool)

    return _Stream(gen(), lambda stopping: _close_pool(pool, stopping))


def _outcome_of(future, path: str, broken: type[BaseException] | tuple[type[BaseException], ...]) -> BoardOutcome:
    name = os.path.splitext(os.path.basename(path))[0]
    try:
        return future.result()
    except broken:
        return _error_outcome(path, name, f"{path}: not checked: a worker process died "
                                          "(out of memory or killed)")
    except Exception as exc:  # noqa: BLE001 - e.g. a Dask worker lost: one line per board
        return _error_outcome(path, name, f"{path}: the worker failed: {type(exc).__name__}: {exc}")


def _dask_outcomes(boards: list[str], baselines: dict[str, str], options: dict, address: str,
                   timeout: float) -> _Stream:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise UsageError("--scheduler needs Dask distributed: pip install 'dask[distributed]'") from None
    _check_address(address)
    try:
        client = Client(address, timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        detail = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise UsageError(f"--scheduler {address}: cannot reach the Dask scheduler: {detail}") from None

    def gen() -> Iterator[BoardOutcome]:
        futures = [client.submit(check_one, b, baseline=baselines.get(b), pure=False, **options) for b in boards]
        paths = {f.key: b for f, b in zip(futures, boards)}
        for future in as_completed(futures, loop=client.loop):
            yield _outcome_of(future, paths[future.key], ())

    return _Stream(gen(), lambda stopping: client.close())


def _check_address(address: str) -> None:
    """Refuse a malformed scheduler address up front (a Client that fails on
    one leaves a half-built object that complains at exit)."""
    try:
        from distributed.comm.addressing import get_address_host_port, parse_address
    except ImportError:  # pragma: no cover - moved in some future version: let Client judge
        return
    try:
        scheme, _ = parse_address(address, strict=False)
        if scheme != "inproc":
            get_address_host_port(address)
    except ValueError as exc:
        raise UsageError(f"--scheduler {address}: not a scheduler address ({exc}); "
                         "expected e.g. tcp://HOST:8786") from None


# --------------------------------------------------------------------------- outputs

def summary_dict(outcomes: list[BoardOutcome], *, rules: str | None, sha256: str, fail_on: str,
                 waivers: str | None = None, baseline_dir: str | None = None, only: tuple[str, ...] = ()) -> dict:
    """The summary JSON's content: tool version, rule set, boards by path,
    totals (and the ``--only`` terms, when given)."""
    totals = {"boards": len(outcomes)}
    for v in VERDICTS:
        totals[v] = sum(o.verdict == v for o in outcomes)
    totals["findings"] = sum(o.findings for o in outcomes)
    totals["failing"] = sum(o.failing for o in outcomes)
    totals["waived"] = sum(o.waived for o in outcomes)
    return {
        "report": "couplint-batch",
        "tool_version": __version__,
        "ruleset": {"path": rules or "default", "sha256": sha256},
        "fail_on": fail_on,
        "waivers": waivers,
        "baseline_dir": baseline_dir,
        **({"only": list(only)} if only else {}),
        "boards": [o.summary() for o in sorted(outcomes, key=lambda o: o.path)],
        "totals": totals,
    }


def summary_json(summary: dict) -> str:
    import json

    return json.dumps(summary, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def junit_xml(outcomes: list[BoardOutcome], rule_names: list[str]) -> str:
    from .report import junit

    return junit.document(
        junit.board_suite(path=o.path, name=o.name, rules=rule_names, failing=o.failing_findings,
                          waived=o.waived_findings, error=o.error)
        for o in sorted(outcomes, key=lambda o: o.path))


VERDICT_STYLE = {"pass": "green", "pass with waivers": "cyan", "pass with known findings": "yellow", "fail": "bold red",
                 "error": "bold magenta"}


def print_table(outcomes: list[BoardOutcome], totals: dict, console=None) -> None:
    """The summary table on stdout, sorted by path, then a totals line."""
    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

    if console is None:
        console = Console()
        if not console.is_terminal:  # piped or captured: room for the whole table
            console = Console(width=max(console.width, 132))
    table = Table(title="couplint batch", title_justify="left")
    table.add_column("board", overflow="fold")
    table.add_column("verdict")
    table.add_column("findings", justify="right")
    table.add_column("failing", justify="right")
    table.add_column("worst noise", justify="right")
    table.add_column("time", justify="right")
    for o in sorted(outcomes, key=lambda o: o.path):
        noise = "-" if o.worst_noise_mv is None else f"{o.worst_noise_mv:.3g} mV"
        table.add_row(Text(o.path), Text(o.verdict, style=VERDICT_STYLE[o.verdict]),
                      "-" if o.error else str(o.findings), "-" if o.error else str(o.failing),
                      "-" if o.error else noise, f"{o.seconds:.2f} s")
    console.print(table)
    parts = [f"{totals[v]} {v}" for v in VERDICTS if totals[v]]
    n = totals["boards"]
    console.print(f"{n} board{'s' if n != 1 else ''}: {', '.join(parts)}; {totals['findings']} findings, "
                  f"{totals['failing']} failing", highlight=False, markup=False)
    renamed = [o for o in sorted(outcomes, key=lambda o: o.path)
               if o.report_path and os.path.basename(o.report_path) != board_stem(o.path) + ".json"]
    if renamed:
        shown = ", ".join(f"{o.path} -> {os.path.basename(o.report_path or '')}" for o in renamed[:6])
        more = f" and {len(renamed) - 6} more" if len(renamed) > 6 else ""
        console.print(f"boards of the same name are filed with their folder (or their path's hash): {shown}{more}",
                      highlight=False, markup=False)
