"""Coverage-guided fuzzing of every input door of couplint (atheris + libFuzzer).

Every door (one reader entry point: Gerber, Excellon, IPC-D-356, Gerber job
file, stackup YAML, IPC-2581, neutral board JSON, rule YAML, waiver YAML,
baseline JSON report, zipped fabrication package) must answer any bytes by
returning, or by raising exactly one :class:`checker.errors.CouplintError`
whose first line names the file. Anything else is a *crash*: another
exception (RecursionError, OverflowError, MemoryError and warnings included:
warnings are errors here, as in the test suite), a couplint error that does
not name the file, is the internal-error fallback ("please report"), or has
a line over :data:`LINE_LIMIT` characters or over :data:`LINES_LIMIT`
lines; and an input that takes longer than the hang limit (libFuzzer
``-timeout``).

    pip install -e '.[fuzz]'
    python scripts/fuzz.py gerber                  # 20 000 cases of one door
    python scripts/fuzz.py zip -n 50000 --seed 3
    python scripts/fuzz.py all -n 20000 -q         # every door in turn, each in its own process
    python scripts/fuzz.py zip --replay FILE       # one input through a door: outcome and traceback
    python scripts/fuzz.py --write-seeds           # rebuild tests/fuzz/seeds/ from the fixtures

A door runs in-process under libFuzzer in a worker subprocess (the couplint
modules instrumented for coverage), starting from its seed corpus
``tests/fuzz/seeds/<door>/`` plus a working corpus kept in
``--work-dir``. Mutations are libFuzzer's own, with a dictionary of the
format's words, plus a custom mutator: for text formats it now and then
replaces a number by an extreme one or deletes, repeats or moves lines; for
the zip door it mostly opens the archive, changes one member (or drops,
copies or renames one) and writes a valid archive again, so the readers
behind the archive are reached. The first input of every distinct crash (exception type and
place) is saved as ``tests/fuzz/crashers/<door>/<short hash>`` and its
traceback printed; ``tests/test_fuzz_regressions.py`` then runs it with the
seeds on every test run. A hang ends the worker (libFuzzer's timeout): its
input is saved the same way and the worker restarts for the remaining cases.
At the end one line per door gives cases run, seconds, crashes and the
slowest case.
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import hashlib
import importlib
import importlib.util
import io
import json
import os
import pathlib
import random
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import traceback
import warnings
import zipfile
from collections.abc import Callable, Iterator
from typing import Any

ROOT = pathlib.Path(__file__).resolve().parents[1]
FUZZ_DIR = ROOT / "tests" / "fuzz"
SEEDS_DIR = FUZZ_DIR / "seeds"
CRASHERS_DIR = FUZZ_DIR / "crashers"

#: Per-case hang limit (seconds), libFuzzer's ``-timeout``.
HANG_SECONDS = 20

#: A couplint error message with a line longer than this (characters), or
#: more lines than this, counts as a crash: messages quote the input, and
#: must quote a bounded part of it.
LINE_LIMIT = 1000
LINES_LIMIT = 100

#: Text of the readers' catch-all fallback for an unexpected exception.
FALLBACK_MARKS = ("please report",)

#: Fixed timestamp of the members of the zip seeds, so --write-seeds is repeatable.
_ZIP_TIME = (2024, 1, 1, 0, 0, 0)


# --------------------------------------------------------------------------- the doors


def _entry(spec: str) -> Callable:
    """``module:function``, looked up at call time (so a test can spy on it)."""
    module, func = spec.split(":")
    return getattr(importlib.import_module(module), func)


def _stream_door(spec: str) -> Callable[[bytes, pathlib.Path], Any]:
    def run(data: bytes, path: pathlib.Path) -> Any:
        return _entry(spec)(io.BytesIO(data), str(path))
    return run


def _path_door(spec: str, as_list: bool = False) -> Callable[[bytes, pathlib.Path], Any]:
    def run(data: bytes, path: pathlib.Path) -> Any:
        path.write_bytes(data)
        return _entry(spec)([str(path)] if as_list else str(path))
    return run


@dataclasses.dataclass(frozen=True)
class Door:
    """One input door: ``run(data, path)`` feeds it ``data`` under the name
    ``path`` (written there first when the door takes a path); ``entries``
    are the functions (``module:function``) a valid input must reach, the
    first being the one called."""

    name: str
    what: str
    entries: tuple[str, ...]
    suffix: str
    max_len: int
    run: Callable[[bytes, pathlib.Path], Any]
    #: files put beside the input (repo paths, globs allowed), e.g. rule files it may extend
    beside: tuple[str, ...] = ()

    @property
    def modules(self) -> list[str]:
        return sorted({e.split(":")[0] for e in self.entries})


def _door(name: str, what: str, entries: tuple[str, ...], suffix: str, max_len: int, kind: str,
          beside: tuple[str, ...] = ()) -> Door:
    run = {"stream": lambda: _stream_door(entries[0]), "path": lambda: _path_door(entries[0]),
           "paths": lambda: _path_door(entries[0], as_list=True)}[kind]()
    return Door(name, what, entries, suffix, max_len, run, beside)


DOORS: dict[str, Door] = {d.name: d for d in (
    _door("gerber", "Gerber RS-274X / X2 layer", ("checker.readers.fab.gerber:read_gerber",),
          ".gbr", 8192, "stream"),
    _door("excellon", "Excellon drill file", ("checker.readers.fab.excellon:read_excellon",),
          ".drl", 4096, "stream"),
    _door("ipc356", "IPC-D-356 netlist", ("checker.readers.fab.ipc356:read_ipc356",), ".ipc", 8192, "stream"),
    _door("jobfile", "Gerber job file", ("checker.readers.fab.jobfile:read_job",), ".gbrjob", 8192, "stream"),
    _door("stackup-yaml", "stackup YAML", ("checker.readers.fab.stackup_yaml:read_stackup_yaml",),
          ".yaml", 4096, "stream"),
    _door("ipc2581", "IPC-2581 board", ("checker.readers.ipc2581:read_ipc2581",), ".xml", 16384, "stream"),
    _door("board-json", "neutral board JSON", ("checker.readers.board_json:load_board",),
          ".json", 16384, "path"),
    _door("rules", "rule YAML", ("checker.ruleset:load_ruleset",), ".yaml", 8192, "path",
          beside=("tests/data/rules/*.yaml",)),
    _door("waivers", "waiver YAML", ("checker.waivers:load_waivers", "checker.waivers:parse_waivers"),
          ".yaml", 4096, "path"),
    _door("baseline", "baseline JSON report", ("checker.baseline:load_baseline",), ".json", 8192, "path"),
    _door("zip", "zipped fabrication package",
          ("checker.readers.fab.assemble:load_package", "checker.readers.fab.assemble:collect",
           "checker.readers.fab.assemble:board_from_layers"), ".zip", 16384, "paths"),
)}


def input_path(door: Door, folder: pathlib.Path) -> pathlib.Path:
    """The file name the door's input gets in ``folder`` (with the files it
    may refer to put beside it)."""
    for pattern in door.beside:
        for source in sorted(ROOT.glob(pattern)):
            target = folder / source.name
            if not target.exists():
                shutil.copyfile(source, target)
    return folder / f"fuzz-input{door.suffix}"


# --------------------------------------------------------------------------- one case


@dataclasses.dataclass(frozen=True)
class Outcome:
    status: str  # "read", "refused" or "crash"
    detail: str = ""  # the message (refused) or why it is a crash
    signature: str = ""  # crash: exception type and place, to tell distinct crashes apart
    trace: str = ""  # crash: the traceback


def _place(tb_exc: BaseException) -> str:
    """``file:line`` of the innermost couplint frame of the exception (else the innermost frame)."""
    frames = traceback.extract_tb(tb_exc.__traceback__)
    ours = [f for f in frames if "/checker/" in f.filename.replace(os.sep, "/")]
    f = (ours or frames or [None])[-1]
    if f is None:
        return "?"
    rel = f.filename.replace(os.sep, "/").split("/checker/")[-1]
    return f"{rel}:{f.lineno}"


def _format(exc: BaseException) -> str:
    return "".join(traceback.format_exception(exc))


def classify(door: Door, data: bytes, path: pathlib.Path) -> Outcome:
    """Run one input through ``door`` and judge the result (see the module docstring)."""
    from checker.errors import CouplintError

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            door.run(data, path)
    except KeyboardInterrupt:
        raise
    except CouplintError as exc:
        text = str(exc)
        first = text.split("\n", 1)[0]
        cause = exc.__context__ or exc.__cause__
        if any(mark in text for mark in FALLBACK_MARKS):
            inner = cause if cause is not None else exc
            return Outcome("crash", f"internal-error fallback: {first[:300]}",
                           f"fallback {type(inner).__name__}@{_place(inner)}", _format(inner))
        if not any(str(p) in first for p in _names(door, path)):
            return Outcome("crash", f"the message does not name the file: {first[:300]}",
                           f"unnamed {type(exc).__name__}@{_place(exc)}", _format(exc))
        lines = text.split("\n")
        if len(lines) > LINES_LIMIT or max(map(len, lines)) > LINE_LIMIT:
            return Outcome("crash", f"a message of {len(lines)} lines, the longest {max(map(len, lines))} "
                                    f"characters: {first[:300]}...",
                           f"long {type(exc).__name__}@{_place(exc)}", _format(exc))
        return Outcome("refused", text)
    except BaseException as exc:  # noqa: BLE001 - every other outcome is the crash being looked for
        return Outcome("crash", f"{type(exc).__name__}: {str(exc)[:300]}",
                       f"{type(exc).__name__}@{_place(exc)}", _format(exc))
    return Outcome("read")


def _names(door: Door, path: pathlib.Path) -> list[pathlib.Path]:
    """The files an error may name: the input, and the files beside it that it
    may refer to (a rule file's fault can be in the file it extends)."""
    return [path] + [path.parent / p.name for pattern in door.beside for p in ROOT.glob(pattern)]


class Hang(Exception):
    """An input still running after the hang limit (outside libFuzzer's own timeout)."""


@contextlib.contextmanager
def hang_guard(seconds: int) -> Iterator[None]:
    """Raise :class:`Hang` in the block after ``seconds`` (where SIGALRM exists);
    :func:`classify` reports it as a crash like any other exception."""
    if not hasattr(signal, "SIGALRM"):
        yield
        return

    def alarm(signum: int, frame: Any) -> None:
        raise Hang(f"no result after {seconds} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def short_hash(data: bytes) -> str:
    return hashlib.sha1(data).hexdigest()[:12]


# --------------------------------------------------------------------------- mutation


_NUMBER = re.compile(rb"[-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?")
_EXTREMES = (b"0", b"-0", b"1", b"-1", b"0.0000001", b"1e308", b"-1e308", b"1e-320", b"nan", b"inf",
             b"9" * 20, b"-" + b"9" * 12, b"4294967296", b"2147483648", b"65536", b"360", b"-360", b"1e6", b"0.5")


def text_mutator(mutate: Callable[[bytes, int], bytes]) -> Callable[[bytes, int, int], bytes]:
    """A libFuzzer custom mutator for text formats: now and then it changes
    the input as files get damaged or written by odd exporters (a number
    replaced by an extreme or scaled one; a line deleted, repeated or moved),
    otherwise it leaves the change to libFuzzer's own mutator."""

    def mutator(data: bytes, max_size: int, seed: int) -> bytes:
        rng = random.Random(seed)
        if data and rng.random() < 0.3:
            out = _structured(data, rng)
            if out is not None and len(out) <= max_size:
                return out
        return mutate(data, max_size)

    return mutator


def _structured(data: bytes, rng: random.Random) -> bytes | None:
    if rng.random() < 0.6:
        numbers = [m.span() for m in _NUMBER.finditer(data, 0, 1 << 16)]
        if not numbers:
            return None
        a, b = rng.choice(numbers)
        if rng.random() < 0.7:
            new = rng.choice(_EXTREMES)
        else:
            try:
                new = repr(float(data[a:b]) * rng.choice((-1, 10, 1000, 1e-3, 1e9))).encode()
            except ValueError:
                return None
        return data[:a] + new + data[b:]
    lines = data.splitlines(keepends=True)
    i = rng.randrange(len(lines))
    kind = rng.randrange(4)
    if kind == 0:
        del lines[i]
    elif kind == 1:
        j = min(len(lines), i + rng.randrange(1, 8))
        lines[i:i] = lines[i:j] * rng.randrange(1, 4)
    elif kind == 2:
        j = rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
    else:
        lines.insert(rng.randrange(len(lines) + 1), lines.pop(i))
    return b"".join(lines)


def _rezip(members: list[tuple[str, bytes]], rng: random.Random) -> bytes:
    out = io.BytesIO()
    method = rng.choice((zipfile.ZIP_DEFLATED, zipfile.ZIP_STORED))
    with zipfile.ZipFile(out, "w", method) as zf:
        for name, body in members:
            zf.writestr(zipfile.ZipInfo(name, _ZIP_TIME), body, compress_type=method)
    return out.getvalue()


def zip_mutator(mutate: Callable[[bytes, int], bytes]) -> Callable[[bytes, int, int], bytes]:
    """A libFuzzer custom mutator for zip inputs: most of the time it opens
    the archive and mutates one member with ``mutate`` (libFuzzer's own
    mutator), or drops, copies or renames a member, then writes a valid zip
    again; otherwise (or if the input is no zip) it mutates the raw bytes,
    so damaged archives are tried too."""

    def mutator(data: bytes, max_size: int, seed: int) -> bytes:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # zipfile warns of the duplicate names it is asked to write
            return mutate_zip(data, max_size, random.Random(seed))

    def mutate_zip(data: bytes, max_size: int, rng: random.Random) -> bytes:
        if rng.random() < 0.75:
            try:
                with zipfile.ZipFile(io.BytesIO(data)) as zf:
                    members = [(i.filename, zf.read(i)) for i in zf.infolist()[:64]]
            except Exception:  # noqa: BLE001 - not a readable zip: mutate the bytes
                members = []
            if members:
                k = rng.randrange(len(members))
                name, body = members[k]
                action = rng.random()
                if action < 0.8:
                    body = (_structured(body, rng) if body and rng.random() < 0.3 else None) or \
                        mutate(body, max(len(body) * 2, 64))
                    members[k] = (name, body)
                elif action < 0.87 and len(members) > 1:
                    del members[k]
                elif action < 0.94:
                    members.append((name if rng.random() < 0.5 else f"copy-{name}", body))
                else:
                    members[k] = (mutate(name.encode(), 64).decode("utf-8", "replace") or "x", body)
                out = _rezip(members, rng)
                if len(out) <= max_size:
                    return out
        return mutate(data, max_size)

    return mutator


# --------------------------------------------------------------------------- dictionaries

#: Words of every format, for libFuzzer to splice in (-dict): numbers at the
#: edges of what floats and integers hold, and bytes that break text decoding.
#: YAML's own tags: a bare one asks PyYAML to build a value from nothing.
_YAML_TAGS = ("!!float ", "!!int ", "!!bool ", "!!timestamp ", "!!null ", "!!str ", "!!binary ", "!!seq ", "!!map ",
              "!!set ", "!!omap ", "!!pairs ", "!!merge ", "!!python/name:x ", "!<tag:yaml.org,2002:int> ")

_COMMON_WORDS = ("0", "-0", "1e308", "-1e308", "1e-320", "9" * 24, "nan", "NaN", "inf", "-inf", "Infinity",
                 "\r\n", "\r", "\t", "\u2028", b"\x00", b"\xff", b"\xc3", b"\xef\xbb\xbf")

_DOOR_WORDS: dict[str, tuple[str, ...]] = {
    "gerber": ("%FSLAX46Y46*%", "%FSLAX26Y26*%", "%FSTAX24Y24*%", "%MOMM*%", "%MOIN*%", "G01*", "G02*", "G03*",
               "G74*", "G75*", "G36*", "G37*", "D01*", "D02*", "D03*", "D10*", "%LPC*%", "%LPD*%", "%LMXY*%",
               "%LR45*%", "%LS0.5*%", "%SRX3Y2I1J1*%", "%SR*%", "%ABD20*%", "%AB*%", "%ADD10C,0.1*%",
               "%ADD11R,1X0.5*%", "%ADD12O,1X0.5X0.2*%", "%ADD13P,1X5X10*%", "%ADD14MX*%", "%ADD15MX,1.5X2*%",
               "%AMMX*1,1,$1,0,0*%", "%AMMX*4,1,3,0,0,1,0,1,1,0,0,45*%", "%AMMX*$3=$1x2*21,1,$3,$2,0,0,0*%",
               "%AMMX*5,1,6,0,0,1,0*7,0,0,1,0.8,0.1,0*20,1,0.1,0,0,1,0,0*%", "%TF.FileFunction,Copper,L2,Inr,Plane*%",
               "%TF.FilePolarity,Negative*%", "%TF.FileFunction,Profile,NP*%", "%TA.AperFunction,ViaPad*%",
               "%TA.AperFunction,Conductor*%", "%TO.N,GND*%", "%TO.N,*%", "%TO.P,U1,1*%", "%TO.C,U1*%", "%TD*%",
               "%TD.N*%", "M02*", "I0J0", "I1000J-1000", "X0Y0", "X-999999999Y999999999", "G04 #@! TO.N,VCC*",
               "%IPNEG*%", "%OFA0B0*%", "%SFA1B1*%", "%IN name*%", "G54D10*", "G70*", "G71*", "G90*", "G91*"),
    "excellon": ("M48", "METRIC", "METRIC,LZ", "INCH,LZ", "INCH,TZ", "METRIC,000.000", "INCH,00.0000", "T1C0.3",
                 "T2C0.0400", "T01", "%", "M95", "M30", "M00", "G85", "G00", "G01", "G02", "G03", "G05", "M15", "M16",
                 "M17", "R5X1", "X0.Y0.", "X-015Y025", "A0.5", "I1J0", "FMAT,2", "ICI,ON", "G90", "G91", "G93X1Y1",
                 "; #@! TF.FileFunction,Plated,1,4,PTH", "; #@! TF.FileFunction,NonPlated,1,2,NPTH",
                 "; #@! TA.AperFunction,Plated,PTH,ViaDrill", ";FILE_FORMAT=4:4", ";FILE_FORMAT=3:3", ";TYPE=PLATED"),
    "ipc356": ("P  UNITS CUST 0", "P  UNITS CUST 1", "P  UNITS CUST 2", "P  UNITS SI", "P  JOB", "C  ", "317", "327",
               "017", "027", "367", "378", "379", "389", "999", "VIA", "N/C",
               "317GND             VIA   -   D0300PA00X+000100Y+000100X0200Y0200R000 S0",
               "327SIG             U1    -1       A01X-010000Y+020000X0600Y0600R090 S1"),
    "jobfile": ('"MaterialStackup"', '"GeneralSpecs"', '"FilesAttributes"', '"Header"', '"Type"', '"Thickness"',
                '"DielectricConstant"', '"LossTangent"', '"Material"', '"Name"', '"Copper"', '"Dielectric"',
                '"SolderMask"', '"Legend"', '"SolderPaste"', '"FileFunction"', '"FilePolarity"', '"Path"',
                '"Copper,L1,Top"', '"Copper,L3,Inr,Plane"', '"Profile,NP"', '"Negative"', '"LayerNumber"',
                '"BoardThickness"', '"Size"', ': null', ': []', ': {}', ': ""', ': "4,5"', ': -1', ': true'),
    "stackup-yaml": ("units: mm", "units: mil", "units: in", "units: um", "stackup:", "  - {copper: ", "copper: TOP",
                     "dielectric: core", "mask: top-mask", "role: plane", "role: signal", "role: mixed", "thickness: ",
                     "er: ", "loss_tangent: ", "&a ", "*a", "!!binary ", "!!float ", "!!int ", "!!python/name:x ",
                     "? ", "<<: ", "---", "...", "- ", "[", "{", "'", '"', "#"),
    "ipc2581": ('<IPC-2581 revision="C">', "</IPC-2581>", "<Layer ", 'layerFunction="PLANE"',
                'layerFunction="SIGNAL"', 'layerFunction="DRILL"', 'polarity="NEGATIVE"', 'side="INTERNAL"',
                "<StackupLayer ", 'thickness="', 'sequence="', "<Span ", 'fromLayer="', "<Line ", "<Arc ",
                'clockwise="true"', "<Polyline>", "<Polygon>", "<PolyBegin ", "<PolyStepSegment ", "<PolyStepCurve ",
                "<Contour>", "<Cutout>", "<Pad>", "<Location ", "<Hole ", 'platingStatus="VIA"', "<Set ", 'net="',
                "<Circle ", "<RectCenter ", "<LineDesc ", 'lineWidth="', 'lineEnd="SQUARE"', 'units="INCH"',
                'units="MICRON"', "<Profile>", "<StandardPrimitiveRef ", "<Dielectric ", "<Property ", 'value="',
                "<!DOCTYPE x>", '<!ENTITY e "x">', "&e;", "&amp;", "&#x10FFFF;", "&#0;", "<![CDATA[", "<?pi?>",
                "<!-- -->", 'xmlns="http://webstds.ipc.org/2581"'),
    "board-json": (": null", ": []", ": {}", ': ""', ": -1", ": 1e400", ": true", "[[0,0],[1,0],[0,1]]",
                   "[0,0]", '"arc"', '"mm"', '"mil"', '"in"', '"um"'),
    "rules": ("version: 1", "extends: default", "extends: base.yaml", "extends: cycle-a.yaml", "settings:",
              "net_classes:", "rules:", "pairs:", "disable: [", "nets: [", "re:^", "re:(", "  - name: ", "kind: ",
              "aggressor: ", "victim: ", "severity: error", "severity: warning", "&a ", "*a", "<<: ", "!!binary ",
              "- ", "[", "{", "'", '"', "#"),
    "waivers": ("version: 1", "waivers:", "  - id: 0123456789ab", "rule: ", "nets: [", "layers: [", "reason: ",
                "author: ", "date: 2026-01-01", "expires: 2027-02-29", "date: 2026-13-40", "&a ", "*a", "<<: ",
                "!!timestamp ", "- ", "[", "{", "'", '"', "#"),
    "baseline": ('"report"', '"couplint"', '"report_version"', '"findings"', '"id"', '"rule"', '"severity"',
                 '"aggressor"', '"victim"', '"layers"', '"message"', '"waiver"', '"status"', '"0123456789ab"',
                 '"error"', '"warning"', '"info"', ": null", ": []", ": {}", ": -1", ": 1e400", ": true"),
    "zip": ("PK\x03\x04", "PK\x01\x02", "PK\x05\x06", "%FSLAX46Y46*%", "M48", "MaterialStackup", "<IPC-2581",
            "P  UNITS CUST 0", "TF.FileFunction,Copper,L1,Top", "TF.FileFunction,Profile,NP"),
}


def _door_words(name: str) -> list[bytes]:
    """The dictionary words of a door: its format's words, and for the rule
    and board formats the keys, kinds and units couplint knows."""
    words = list(_COMMON_WORDS) + list(_DOOR_WORDS.get(name, ()))
    if name in ("stackup-yaml", "rules", "waivers"):
        words += _YAML_TAGS
    if name == "rules":
        from checker.checks import REGISTRY
        from checker.ruleset import SETTINGS_SCHEMA
        from checker.units import UNITS

        words += [f"kind: {k}" for k in REGISTRY] + [f"{o}: " for m in REGISTRY.values() for o in m.OPTIONS]
        words += [f"{k}: " for k in SETTINGS_SCHEMA] + [f"1 {u}" for table in UNITS.values() for u in table]
    if name == "board-json":
        schema = json.loads((ROOT / "checker" / "readers" / "board.schema.json").read_text(encoding="utf-8"))
        keys: set[str] = set()

        def walk(node: Any) -> None:
            if isinstance(node, dict):
                keys.update(node.get("properties", {}))
                for v in node.values():
                    walk(v)
            elif isinstance(node, list):
                for v in node:
                    walk(v)

        walk(schema)
        words += [f'"{k}": ' for k in sorted(keys)]
    return sorted({w if isinstance(w, bytes) else w.encode("utf-8") for w in words})


def write_dictionary(name: str, target: pathlib.Path) -> pathlib.Path:
    """The door's words as a libFuzzer dictionary file."""
    def quoted(word: bytes) -> str:
        return '"' + "".join(chr(b) if 32 <= b < 127 and chr(b) not in '"\\' else f"\\x{b:02x}" for b in word) + '"'
    target.write_text("".join(f"{quoted(w)}\n" for w in _door_words(name) if w), encoding="ascii")
    return target


# --------------------------------------------------------------------------- the worker (atheris)


def _worker(args: argparse.Namespace) -> None:
    import atheris

    door = DOORS[args.door]
    # comparisons with words guide the mutations (not "RegEx": its pattern proxy lacks match(text, pos))
    atheris.enabled_hooks.add("str")
    stats_path = pathlib.Path(args.stats)
    folder = stats_path.parent / "input"  # in the driver's run folder, which it removes at the end
    folder.mkdir(exist_ok=True)
    path = input_path(door, folder)
    crash_dir = CRASHERS_DIR / door.name
    with atheris.instrument_imports(include=["checker"]), hang_guard(HANG_SECONDS):
        import checker.errors  # noqa: F401
        for module in door.modules:
            importlib.import_module(module)
        # every seed read once before the count starts: the modules a door imports
        # late are instrumented too, and the slowest case is not a first import
        for seed in sorted((SEEDS_DIR / door.name).iterdir()):
            classify(door, seed.read_bytes(), path)
    stats = json.loads(stats_path.read_text()) if stats_path.exists() else {}
    stats.setdefault("cases", 0)
    stats.setdefault("slowest", 0.0)
    stats.setdefault("crashes", {})  # signature -> {"file", "hits", "detail"}
    stats.setdefault("outcomes", {"read": 0, "refused": 0, "crash": 0})
    if not stats_path.exists():  # the crashes saved by earlier runs are known: not saved again
        for old in sorted(crash_dir.glob("*")) if crash_dir.exists() else []:
            with hang_guard(HANG_SECONDS):  # a saved hang must not stop the run before it starts
                outcome = classify(door, old.read_bytes(), path)
            if outcome.status == "crash":
                stats["crashes"].setdefault(outcome.signature, {"file": old.name, "size": old.stat().st_size,
                                                                "hits": 0, "detail": outcome.detail, "new": False})

    def save_stats() -> None:
        tmp = stats_path.with_suffix(".tmp")
        tmp.write_text(json.dumps(stats))
        os.replace(tmp, stats_path)

    def one(data: bytes) -> None:
        t0 = time.perf_counter()
        outcome = classify(door, data, path)
        elapsed = time.perf_counter() - t0
        stats["cases"] += 1
        stats["outcomes"][outcome.status] += 1
        if elapsed > stats["slowest"]:
            stats["slowest"] = elapsed
            stats["slowest_input"] = short_hash(data)
        if outcome.status == "crash":
            known = stats["crashes"].get(outcome.signature)
            # a new crash is saved; a smaller input for a crash this run found replaces it
            if known is None or (known["new"] and len(data) < known["size"]):
                crash_dir.mkdir(parents=True, exist_ok=True)
                if known is not None:
                    (crash_dir / known["file"]).unlink(missing_ok=True)
                name = short_hash(data)
                (crash_dir / name).write_bytes(data)
                entry = {"file": name, "size": len(data), "hits": (known or {}).get("hits", 0),
                         "detail": outcome.detail, "new": True}
                stats["crashes"][outcome.signature] = entry
                if known is None:
                    report = (f"\n=== CRASH {door.name}: {outcome.detail}\n    input: "
                              f"{(crash_dir / name).relative_to(ROOT)}\n{outcome.trace}")
                    with open(stats_path.parent / "crashes.log", "a", encoding="utf-8") as log:
                        log.write(report + "\n")
            stats["crashes"][outcome.signature]["hits"] += 1
        save_stats()

    corpus = pathlib.Path(args.work_dir) / door.name
    corpus.mkdir(parents=True, exist_ok=True)
    artifacts = pathlib.Path(args.artifacts)
    artifacts.mkdir(parents=True, exist_ok=True)
    argv = [sys.argv[0], f"-runs={args.count}", f"-timeout={HANG_SECONDS}", f"-max_len={args.max_len or door.max_len}",
            f"-seed={args.seed}", "-rss_limit_mb=4096", f"-artifact_prefix={artifacts}/", "-print_final_stats=1",
            f"-report_slow_units={HANG_SECONDS}",
            "-reload=0", str(corpus), str(SEEDS_DIR / door.name)]
    if args.dict:
        argv.insert(1, f"-dict={args.dict}")
    # looked up per call: atheris binds Mutate to libFuzzer only once Fuzz() runs
    mutator = (zip_mutator if door.name == "zip" else text_mutator)(lambda data, size: atheris.Mutate(data, size))
    warnings.simplefilter("error")
    atheris.Setup(argv, one, custom_mutator=mutator)
    atheris.Fuzz()


def _scratch() -> str | None:
    return "/dev/shm" if os.path.isdir("/dev/shm") and os.access("/dev/shm", os.W_OK) else None


# --------------------------------------------------------------------------- the driver


def fuzz_door(door: Door, count: int, seed: int, max_len: int | None, work_dir: pathlib.Path,
              quiet: bool) -> dict:
    """Fuzz one door for ``count`` cases in worker subprocesses (restarted
    after a hang or a hard crash); returns the figures."""
    run_dir = pathlib.Path(tempfile.mkdtemp(prefix=f"couplint-fuzz-run-{door.name}-", dir=_scratch()))
    stats_path = run_dir / "stats.json"
    artifacts = run_dir / "artifacts"
    dictionary = write_dictionary(door.name, run_dir / f"{door.name}.dict")
    hangs: list[dict] = []
    start = time.perf_counter()
    restarts = 0
    while True:
        done = json.loads(stats_path.read_text())["cases"] if stats_path.exists() else 0
        left = count - done
        if left <= 0 or restarts > 20:
            break
        cmd = [sys.executable, str(pathlib.Path(__file__).resolve()), "--worker", door.name, "-n", str(left),
               "--seed", str(seed + restarts), "--stats", str(stats_path), "--artifacts", str(artifacts),
               "--work-dir", str(work_dir), "--dict", str(dictionary)]
        if max_len:
            cmd += ["--max-len", str(max_len)]
        proc = subprocess.run(cmd, check=False, stdout=subprocess.DEVNULL if quiet else None,
                              stderr=subprocess.PIPE if quiet else None, text=True, errors="replace")
        log = run_dir / "crashes.log"
        if log.exists():
            print(log.read_text(encoding="utf-8"), file=sys.stderr, flush=True)
            log.unlink()
        if quiet and proc.returncode != 0:
            print("\n".join(proc.stderr.splitlines()[-25:]), file=sys.stderr)
        found = sorted(artifacts.glob("*")) if artifacts.exists() else []
        for art in found:
            kind = art.name.split("-")[0]  # crash, timeout, oom, leak, slow
            data = art.read_bytes()
            target = CRASHERS_DIR / door.name / short_hash(data)
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
            hangs.append({"kind": kind, "file": target.name})
            print(f"=== {kind.upper()} {door.name}: the worker stopped (libFuzzer {kind}); input saved as "
                  f"{target.relative_to(ROOT)}", file=sys.stderr, flush=True)
            art.unlink()
        if proc.returncode != 0 and not found:
            print(f"=== worker for {door.name} exited with status {proc.returncode} and no saved input",
                  file=sys.stderr)
            restarts += 1
            if restarts > 3:
                break
            continue
        if proc.returncode != 0:
            restarts += 1
            continue
        break
    seconds = time.perf_counter() - start
    stats = json.loads(stats_path.read_text()) if stats_path.exists() else {"cases": 0, "slowest": 0.0,
                                                                              "crashes": {}, "outcomes": {}}
    shutil.rmtree(run_dir, ignore_errors=True)
    crashes = [{"signature": sig, **c} for sig, c in stats["crashes"].items() if c["hits"]]
    slowest = max([stats["slowest"]] + [float(HANG_SECONDS) for h in hangs if h["kind"] == "timeout"])
    return {"door": door.name, "cases": stats["cases"], "seconds": seconds, "crashes": crashes, "hangs": hangs,
            "slowest": slowest, "outcomes": stats.get("outcomes", {})}


def summary_line(r: dict) -> str:
    n = len(r["crashes"]) + len(r["hangs"])
    o = r["outcomes"]
    return (f"{r['door']:<13} {r['cases']:>7} cases  {r['seconds']:>8.1f} s  {n:>3} crashes  "
            f"slowest {r['slowest']:.3f} s  (read {o.get('read', 0)}, refused {o.get('refused', 0)})")


# --------------------------------------------------------------------------- seeds


def _test_module(name: str):
    for extra in (ROOT / "tests", ROOT / "scripts"):
        if str(extra) not in sys.path:
            sys.path.insert(0, str(extra))
    return importlib.import_module(name)


def _zip_folder(folder: pathlib.Path, skip: tuple[str, ...] = ()) -> bytes:
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for f in sorted(folder.iterdir()):
            if f.is_file() and not f.name.endswith(skip):
                zf.writestr(zipfile.ZipInfo(f.name, _ZIP_TIME), f.read_bytes(), compress_type=zipfile.ZIP_DEFLATED)
    return out.getvalue()


def _demo_report() -> dict:
    """The JSON report of the demo board with the default rules, as ``couplint demo --format json`` writes it."""
    from checker.cli import main

    with tempfile.TemporaryDirectory() as tmp:
        out = pathlib.Path(tmp) / "report.json"
        with warnings.catch_warnings():
            main(["demo", "--format", "json", "--out", str(out)])
        return json.loads(out.read_text(encoding="utf-8"))


def build_seeds() -> dict[str, dict[str, bytes]]:
    """door -> {file name: bytes}: small valid inputs from the fixtures and
    the samples of the readers' own tests."""
    fx = ROOT / "fixtures"
    fab = fx / "fab"

    def files(*paths: pathlib.Path) -> dict[str, bytes]:
        return {p.name: p.read_bytes() for p in paths}

    seeds: dict[str, dict[str, bytes]] = {}
    gerber_fuzz = _test_module("test_gerber_fuzz")
    seeds["gerber"] = files(*sorted((fab / "four_layer_mixed").glob("*.gbr")),
                            fab / "six_layer" / "six-layer-fab-L2.gbr", fab / "six_layer" / "six-layer-fab-L5.gbr",
                            fab / "shielding-guard_stitched" / "shielding-guard-stitched-L1.gbr",
                            *(fab / "wild-ten-layer" / f"ten-layer-wild.{s}" for s in ("gtl", "gp1", "gko")))
    seeds["gerber"].update({f"test-gerber-fuzz-{i}.gbr": s for i, s in enumerate(gerber_fuzz.SEEDS)})

    excellon, small = _test_module("test_excellon"), _test_module("test_fab_small_fuzz")
    seeds["excellon"] = files(*sorted((fx / "drill").glob("*.drl")),
                              *sorted((fab / "four_layer_mixed").glob("*.drl")),
                              fab / "six_layer" / "six-layer-fab-PTH-1-6.drl",
                              *sorted((fab / "wild-ten-layer").glob("*.drl")))
    seeds["excellon"].update({"test-metric-decimal.drl": excellon.METRIC_DECIMAL.encode(),
                              "test-routed.drl": excellon.ROUTED.encode(),
                              "test-inch-slots.drl": small.INCH_SLOTS.encode()})

    seeds["ipc356"] = files(fab / "four_layer_mixed" / "four-layer-mixed.ipc", fab / "six_layer" / "six-layer-fab.ipc")
    seeds["ipc356"]["test-sample-mm.ipc"] = _test_module("test_ipc356").SAMPLE_MM.encode()

    seeds["jobfile"] = files(*(fab / d / f"{s}.gbrjob" for d, s in (
        ("four_layer_mixed", "four-layer-mixed"), ("six_layer", "six-layer-fab"), ("wild-no-er", "six-layer-no-er"),
        ("shielding-island", "shielding-island"))))
    seeds["jobfile"]["test-job.gbrjob"] = json.dumps(_test_module("test_jobfile").JOB, indent=1).encode()

    seeds["stackup-yaml"] = files(fab / "wild-ten-layer-stackup.yaml")
    seeds["stackup-yaml"]["test-sample.yaml"] = _test_module("test_stackup_yaml").SAMPLE.encode()

    ipc = _test_module("test_ipc2581")
    seeds["ipc2581"] = files(fx / "ipc2581" / "four_layer_mixed_inch.xml")
    with tempfile.TemporaryDirectory() as tmp:
        t = pathlib.Path(tmp)
        seeds["ipc2581"]["test-two-layer.xml"] = ipc.ipc(t, name="a.xml").read_bytes()
        seeds["ipc2581"]["test-two-layer-inch.xml"] = ipc.ipc(t, units="INCH", name="b.xml").read_bytes()

    seeds["board-json"] = files(fx / "two_layer_parallel.json", fx / "two_layer_parallel_mil.json",
                                fx / "four_layer_mixed.json", fx / "shielding" / "guard_stitched.json",
                                fx / "shielding" / "island.json", ROOT / "checker" / "data" / "demo_board.json")

    seeds["rules"] = files(ROOT / "rules" / "default.yaml", *sorted((ROOT / "tests" / "data" / "rules").glob("*.yaml")))
    seeds["rules"]["test-good.yaml"] = _test_module("test_ruleset").GOOD.encode()

    report = _demo_report()
    ids = [f["id"] for f in report["findings"]]
    seeds["waivers"] = {"test-hand-written.yaml": _test_module("test_review").HAND_WRITTEN.encode(),
                        "demo-waivers.yaml": (
                            "version: 1\nwaivers:\n"
                            f"  - id: {ids[0]}\n    reason: \"input filter: 10 Hz\"\n    author: A. Tester\n"
                            "    date: 2026-01-05\n    expires: 2027-06-30\n"
                            f"  - id: {ids[1]}\n    reason: read once a second\n    author: B\n    date: 2026-02-01\n"
                            "  - rule: same-layer-spacing\n    nets: [\"SPI_*\", AIN3]\n    reason: kept\n"
                            "    author: C\n    date: 2026-03-01\n").encode()}
    small_report = {k: report[k] for k in ("report", "report_version", "tool_version")}
    small_report["board"] = {"name": report["board"]["name"]}
    small_report["findings"] = report["findings"][:4]
    seeds["baseline"] = {"demo-report.json": json.dumps(small_report, indent=2).encode(),
                         "minimal.json": json.dumps({"report": "couplint", "report_version": 1, "findings": [
                             {"id": "0123456789ab", "rule": "r", "severity": "error", "aggressor": "A",
                              "victim": "V", "layers": ["TOP"], "message": "m"}]}).encode()}

    seeds["zip"] = {f"{d}.zip": _zip_folder(fab / d, skip=(".ipc",) if d == "wild-ten-layer" else ())
                    for d in ("four_layer_mixed", "shielding-island", "shielding-guard_stitched", "six_layer",
                              "wild-ten-layer")}
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr(zipfile.ZipInfo("four_layer_mixed_inch.xml", _ZIP_TIME),
                    (fx / "ipc2581" / "four_layer_mixed_inch.xml").read_bytes(), compress_type=zipfile.ZIP_DEFLATED)
    seeds["zip"]["ipc2581.zip"] = out.getvalue()
    assert set(seeds) == set(DOORS), set(DOORS) ^ set(seeds)
    return seeds


def write_seeds(names: list[str]) -> None:
    seeds = build_seeds()
    for name in names:
        folder = SEEDS_DIR / name
        if folder.exists():
            shutil.rmtree(folder)
        folder.mkdir(parents=True)
        for file, data in sorted(seeds[name].items()):
            limit = DOORS[name].max_len
            if len(data) > limit:
                raise SystemExit(f"seed {name}/{file} is {len(data)} bytes, over the door's max_len {limit}")
            (folder / file).write_bytes(data)
        print(f"{name}: {len(seeds[name])} seeds, {sum(map(len, seeds[name].values()))} bytes in "
              f"{folder.relative_to(ROOT)}")


def replay(door: Door, files: list[pathlib.Path]) -> int:
    """Each file through ``door`` once, under its own name; 1 if any crashes."""
    crashed = 0
    with tempfile.TemporaryDirectory(dir=_scratch()) as tmp:
        path = input_path(door, pathlib.Path(tmp))
        for f in files:
            t0 = time.perf_counter()
            outcome = classify(door, f.read_bytes(), path)
            print(f"{f}: {outcome.status} in {time.perf_counter() - t0:.3f} s"
                  + (f": {outcome.detail}" if outcome.detail else ""))
            if outcome.status == "crash":
                crashed += 1
                print(outcome.trace)
    return 1 if crashed else 0


# --------------------------------------------------------------------------- command line


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("door", nargs="?",
                        help="; ".join(f"{d.name}: {d.what}" for d in DOORS.values()) + "; or all")
    parser.add_argument("-n", "--count", type=int, default=20_000, help="cases per door (default 20000)")
    parser.add_argument("--seed", type=int, default=1, help="libFuzzer seed (default 1)")
    parser.add_argument("--max-len", type=int, default=None, help="largest input in bytes (default: per door)")
    parser.add_argument("--work-dir", type=pathlib.Path,
                        default=pathlib.Path(tempfile.gettempdir()) / "couplint-fuzz-corpus",
                        help="where the working corpus grows (default: a folder in the temp dir)")
    parser.add_argument("--write-seeds", action="store_true", help="rebuild tests/fuzz/seeds/ and stop")
    parser.add_argument("--replay", nargs="+", type=pathlib.Path, metavar="FILE",
                        help="run these inputs through DOOR once and show each outcome (and a crash's traceback)")
    parser.add_argument("-q", "--quiet", action="store_true", help="hide libFuzzer's progress lines")
    parser.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--stats", help=argparse.SUPPRESS)
    parser.add_argument("--artifacts", help=argparse.SUPPRESS)
    parser.add_argument("--dict", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.write_seeds:
        write_seeds(list(DOORS) if args.door in (None, "all") else [args.door])
        return 0
    if args.door not in DOORS and (args.door != "all" or args.replay):
        parser.error(f"name a door: {', '.join(DOORS)}, or all")
    if args.replay:
        return replay(DOORS[args.door], args.replay)
    if args.worker:
        _worker(args)
        return 0
    if importlib.util.find_spec("atheris") is None:
        parser.error("atheris is not installed: pip install -e '.[fuzz]'")
    names = list(DOORS) if args.door == "all" else [args.door]
    results = []
    for name in names:
        r = fuzz_door(DOORS[name], args.count, args.seed, args.max_len, args.work_dir, args.quiet)
        results.append(r)
        print(summary_line(r), flush=True)
    print("\nsummary (door, cases, wall seconds, crashes, slowest case):")
    for r in results:
        print("  " + summary_line(r))
        for c in r["crashes"]:
            print(f"      {c['hits']:>6} x {c['signature']}: {c['detail'][:160]}  -> "
                  f"tests/fuzz/crashers/{r['door']}/{c['file']}{'' if c['new'] else ' (saved before)'}")
        for h in r["hangs"]:
            print(f"      {h['kind']}: tests/fuzz/crashers/{r['door']}/{h['file']}")
    return 1 if any(r["crashes"] or r["hangs"] for r in results) else 0


if __name__ == "__main__":
    sys.exit(main())
