"""Find the files of a fabrication package and say what each one is.

A package is given as one folder, one ``.zip`` archive, or a list of files
(folders and archives may not be mixed with loose files). Every file is
*sniffed*: its first bytes decide its format, the file name only breaks a
tie, so a renamed export still reads:

* Gerber job file: JSON whose top level holds ``MaterialStackup``,
  ``GeneralSpecs`` or ``FilesAttributes`` (``.gbrjob``);
* Gerber: an ``%FS`` / ``%MO`` / ``%TF`` extended command or ``G04`` comment
  among the first commands;
* Excellon: an ``M48`` header, or a body of drill commands without one
  (:func:`~checker.readers.fab.excellon.looks_like_drill`);
* IPC-2581: XML whose root element is ``IPC-2581`` (the whole board in one
  file, read by :mod:`checker.readers.ipc2581`);
* IPC-D-356: fixed-column records (``P``, ``C``, ``317``, ``327``, ``999``);
* anything else (a PDF, a readme, a pick-and-place list) is skipped and
  named in a note.

Which copper layer a Gerber file holds comes from its
``TF.FileFunction,Copper,L<n>,...`` attribute, from ``--layer FILE=L<n>``,
or from couplint's naming rule (the stem ends in ``-L<n>``, ``_L<n>`` or
``.L<n>``: ``ctrl-board-L3.gbr``). A file none of these identify is
guessed from the trade's naming conventions and its content
(:mod:`.identify`); ``Sorted.guessed`` holds those, numbered once the
stackup is known (``assemble``), and ``Sorted.read_as`` says for every
file how it was decided.
"""

from __future__ import annotations

import io
import os
import re
import zipfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import BinaryIO, Callable, cast

from ... import limits
from ...errors import FabError, UsageError
from ..ipc2581 import is_ipc2581
from .excellon import looks_like_drill
from .identify import Guess, from_content, from_name
from .source import Metered, PackageBudget

#: How much of a file's start is read to decide its format.
SNIFF_BYTES = 1 << 16

_NAMED_COPPER = re.compile(r"[-_.]L(\d{1,2})$", re.IGNORECASE)
_NAMED_PROFILE = re.compile(r"[-_.]profile$", re.IGNORECASE)
_FILE_FUNCTION = re.compile(rb"TF\.FileFunction,([^*%\r\n]*)")
_GERBER_START = re.compile(rb"%(FS|MO|TF|TA|AD|AM)|G04|G0?1\*|D0?[123]\*")


@dataclass(frozen=True)
class Member:
    """One file of the package: ``name`` is what messages show (the path, or
    ``archive.zip:member``), ``open()`` returns a binary stream."""

    name: str
    stem: str
    size: int
    open: Callable[[], BinaryIO]


@dataclass(frozen=True)
class Sorted:
    """The package's files by format. ``copper`` maps a Gerber layer number
    (1 = top) to its file and the role words its ``TF.FileFunction`` or the
    user gave (``None`` if neither); ``profile`` is the board outline file."""

    name: str
    path: str
    copper: dict[int, tuple[Member, str | None]]
    profile: Member | None
    drills: list[Member]
    jobs: list[Member]
    netlists: list[Member]
    skipped: list[str]
    #: IPC-2581 files (one is the whole board)
    ipc2581: list[Member] = field(default_factory=list)
    #: Gerber files without X2 identity whose name or content says copper:
    #: numbered by :func:`checker.readers.fab.identify.number_copper` once
    #: the stackup is known
    guessed: list[tuple[Member, Guess]] = field(default_factory=list)
    #: (file, read as, how it was decided) for every file but guessed copper
    read_as: list[tuple[str, str, str | None]] = field(default_factory=list)


def is_package(paths: list[str]) -> bool:
    """Whether ``paths`` name a fabrication package rather than one board
    JSON file: a folder, an archive, or files that are not ``.json``."""
    if len(paths) != 1:
        return True
    p = paths[0]
    return os.path.isdir(p) or p.lower().endswith(".zip") or not p.lower().endswith(".json")


def collect(paths: list[str], layer_overrides: dict[str, str] | None = None) -> Sorted:
    """List and sort the package's files. ``layer_overrides`` maps a file
    name (as given, or its base name) to ``L<n>[,role]``, ``profile`` or
    ``ignore``."""
    members, name, where = _members(paths)
    overrides = dict(layer_overrides or {})
    used: set[str] = set()
    copper: dict[int, tuple[Member, str | None]] = {}
    profile: Member | None = None
    profiles: list[tuple[int, Member, str]] = []  # guessed outline files: (rank, member, why)
    drills: list[Member] = []
    jobs: list[Member] = []
    netlists: list[Member] = []
    ipc2581: list[Member] = []
    skipped: list[str] = []
    guessed: list[tuple[Member, Guess]] = []
    read_as: list[tuple[str, str, str | None]] = []
    common = _common_stem([m.name for m in members])
    for m in members:
        override = _override_for(m, overrides, used)
        if override == "ignore":
            skipped.append(f"{m.name} (--layer ignore)")
            read_as.append((m.name, "ignored", "--layer"))
            continue
        head = _head(m)
        kind = _kind(head, m.stem, m)
        if kind is None and len(members) == 1 and (m.name.lower().endswith(".xml") or head.lstrip().startswith(b"<")):
            kind = "ipc2581"  # one XML file given alone: its reader says what is wrong with it
        elif kind is None:
            kind = _kind_by_name(m, common)  # a damaged file its name vouches for: its reader names the fault
        if override is not None and kind not in ("gerber", None):
            raise UsageError(f"--layer {m.name}={override}: the file is {_KIND_WORDS[kind]}, not a Gerber layer")
        if kind in ("job", "drill", "netlist", "ipc2581"):
            {"job": jobs, "drill": drills, "netlist": netlists, "ipc2581": ipc2581}[kind].append(m)
            read_as.append((m.name, _KIND_WORDS[kind].split(" ", 1)[1], "content"))
        elif kind == "gerber" or override is not None:
            layer, role, is_profile, how = _gerber_identity(m, head, override)
            if is_profile:
                if profile is not None:
                    raise FabError(m.name, None, f"a second board outline (Profile) file; the first is {profile.name}")
                profile = m
                read_as.append((m.name, "board outline", how))
            elif layer is not None:
                if layer in copper:
                    raise FabError(m.name, None, f"copper layer L{layer} again: {copper[layer][0].name} holds it too")
                copper[layer] = (m, role)
                read_as.append((m.name, f"copper L{layer}" + (f", {role}" if role else ""), how))
            elif how is not None:  # an X2 file function that is not copper
                skipped.append(f"{m.name} ({_gerber_function_words(head)})")
                read_as.append((m.name, "not read", how))
            else:
                guess = from_name(m.name, common) or from_content(head)
                if guess.kind == "copper":
                    guessed.append((m, guess))
                elif guess.kind == "profile":
                    profiles.append((guess.rank, m, guess.why))
                else:
                    skipped.append(f"{m.name} ({guess.why}; if it is copper, name it with --layer FILE=L<n>)")
                    read_as.append((m.name, "not read", guess.why))
        else:
            skipped.append(f"{m.name} (not a Gerber, Excellon, IPC-D-356, IPC-2581 or Gerber job file)")
            read_as.append((m.name, "not read", "content: no format couplint reads"))
    profiles.sort(key=lambda t: (t[0], t[1].name))
    for k, (_, m, why) in enumerate(profiles):
        if profile is None and k == 0:
            profile = m
            read_as.append((m.name, "board outline", why))
        else:
            skipped.append(f"{m.name} ({why}; {profile.name if profile else '?'} is used as the outline)")
            read_as.append((m.name, "not read", f"{why}; another file is the outline"))
    unknown = sorted(set(overrides) - used)
    if unknown:
        raise UsageError(f"--layer {unknown[0]}=...: no file of that name in the package")
    return Sorted(name, where, copper, profile, drills, jobs, netlists, skipped, ipc2581, guessed, read_as)


def _kind_by_name(m: Member, common: str) -> str | None:
    """The format a file's name vouches for when its content matches none
    (cut short, empty, another encoding): ``.gbrjob`` is a job file, a name
    that says copper (couplint's ``-L<n>`` rule or the trade's conventions)
    a Gerber file. Its reader then refuses it naming the file, instead of
    the package seeming to lack it."""
    base = Path(m.name.rsplit(":", 1)[-1]).name
    if base.lower().endswith(".gbrjob"):
        return "job"
    guess = from_name(m.name, common)
    if _NAMED_COPPER.search(m.stem) or (guess is not None and guess.kind == "copper"):
        return "gerber"
    return None


def _common_stem(names: list[str]) -> str:
    """The start every file name shares, cut after its last separator
    (``-``, ``_``, ``.``, blank): the board's name in ``ctl-board-top.gbr``,
    ``ctl-board-bottom.gbr`` ...; ``""`` for fewer than two files."""
    bases = [_stem(Path(n.rsplit(":", 1)[-1]).name) + "." for n in names]  # a whole stem ends at a separator
    if len(bases) < 2:
        return ""
    prefix = os.path.commonprefix([re.sub(r"[-_. ]", "-", b.lower()) for b in bases])
    cut = prefix.rfind("-")
    return bases[0][:cut + 1] if cut >= 0 else ""


_KIND_WORDS = {"job": "a Gerber job file", "drill": "an Excellon drill file", "netlist": "an IPC-D-356 netlist",
               "ipc2581": "an IPC-2581 file", "gerber": "a Gerber file", None: "not a known format"}


def parse_layer_override(text: str) -> tuple[str, str]:
    """``FILE=L3``, ``FILE=L3,plane``, ``FILE=profile`` or ``FILE=ignore``
    -> (file, value); a ``UsageError`` for anything else."""
    file, sep, value = text.rpartition("=")
    value = value.strip()
    ok = re.fullmatch(r"L\d{1,2}(,(signal|plane|mixed))?|profile|ignore", value, re.IGNORECASE)
    if not sep or not file or not ok:
        raise UsageError(f"--layer {text}: give FILE=L<n>, FILE=L<n>,signal|plane|mixed, FILE=profile or FILE=ignore")
    return file, value.lower() if not value.upper().startswith("L") else "L" + value[1:].lower()


# --------------------------------------------------------------------------- listing


def _members(paths: list[str]) -> tuple[list[Member], str, str]:
    if not paths:
        raise UsageError("no input given")
    if len(paths) == 1 and os.path.isdir(paths[0]):
        folder = Path(paths[0])
        files = sorted(p for p in folder.iterdir() if p.is_file() and not p.name.startswith("."))
        if not files:
            raise FabError(str(folder), None, "the folder holds no files")
        budget = PackageBudget(str(folder))
        return _within_cap([_file_member(p, budget) for p in files], budget), folder.resolve().name, str(folder)
    if len(paths) == 1 and paths[0].lower().endswith(".zip"):
        budget = PackageBudget(paths[0])
        return _within_cap(_zip_members(paths[0], budget), budget), Path(paths[0]).stem, paths[0]
    members = []
    first = Path(paths[0])
    budget = PackageBudget(str(first.parent))
    for p in paths:
        if os.path.isdir(p) or p.lower().endswith(".zip"):
            raise UsageError(f"{p}: give one folder, one .zip, or a list of files, not a mix")
        if not os.path.exists(p):
            raise FabError(p, None, "no such file")
        members.append(_file_member(Path(p), budget))
    # the package is the files given: messages name them (their folder may be "." and say nothing)
    shown = ", ".join(paths[:3]) + (f" and {len(paths) - 3} more" if len(paths) > 3 else "")
    return _within_cap(members, budget), first.parent.resolve().name or first.stem, shown


def _within_cap(members: list[Member], budget: PackageBudget) -> list[Member]:
    """Refuse, before reading, a package whose files (their declared sizes,
    uncompressed) add up to more than the package cap; the bytes actually
    read are counted too (:class:`PackageBudget`), so a size that lies does
    not get past it."""
    total = sum(m.size for m in members)
    if total > budget.limit:
        raise FabError(budget.name, None, f"the files add up to {total / limits.MB:,.0f} MB (uncompressed), over the "
                                          f"cap of {budget.limit // limits.MB:,} MB per package; "
                                          f"{limits.hint('package-mb')}")
    return members


def _file_member(p: Path, budget: PackageBudget) -> Member:
    try:
        size = p.stat().st_size
    except OSError as exc:
        raise FabError(str(p), None, f"cannot read: {exc.strerror or exc}") from None

    def opener(p: Path = p) -> BinaryIO:
        try:
            return cast(BinaryIO, Metered(open(p, "rb"), str(p), size, budget))  # reads like one
        except OSError as exc:
            raise FabError(str(p), None, f"cannot read: {exc.strerror or exc}") from None

    return Member(str(p), _stem(p.name), size, opener)


def _zip_members(path: str, budget: PackageBudget) -> list[Member]:
    try:
        archive = zipfile.ZipFile(path)
        # a member without a name cannot be a file of the package
        infos = [i for i in archive.infolist()
                 if i.filename and not i.is_dir() and not Path(i.filename).name.startswith(".")]
    except FileNotFoundError:
        raise FabError(path, None, "no such file") from None
    except (OSError, EOFError, zipfile.BadZipFile, ValueError, NotImplementedError, RuntimeError) as exc:
        raise FabError(path, None, f"not a readable .zip archive: {exc}") from None
    if not infos:
        raise FabError(path, None, "the archive holds no files")
    members = []
    for info in sorted(infos, key=lambda i: i.filename):
        name = f"{path}:{info.filename}"

        def opener(info: zipfile.ZipInfo = info, name: str = name) -> BinaryIO:
            try:
                # counted while inflating; reads like a binary stream
                return cast(BinaryIO, Metered(cast(BinaryIO, archive.open(info)), name, info.file_size, budget))
            except (OSError, zipfile.BadZipFile, RuntimeError, NotImplementedError, ValueError) as exc:
                raise FabError(name, None, f"cannot extract from the archive: {exc}") from None

        members.append(Member(name, _stem(Path(info.filename).name), info.file_size, opener))
    return members


def _stem(filename: str) -> str:
    return filename.rsplit(".", 1)[0] if "." in filename.lstrip(".") else filename


def _head(m: Member) -> bytes:
    cap = limits.current().file_bytes
    if m.size > cap:
        raise FabError(m.name, None, f"the file is {m.size / limits.MB:,.0f} MB, over the cap of {cap // limits.MB:,} "
                                     f"MB per file; {limits.hint('file-mb')}")
    stream = m.open()
    try:
        return stream.read(SNIFF_BYTES)
    except (OSError, zipfile.BadZipFile, EOFError, ValueError, zlib.error) as exc:
        raise FabError(m.name, None, f"cannot read: {exc}") from None
    finally:
        stream.close()


def _override_for(m: Member, overrides: dict[str, str], used: set[str]) -> str | None:
    for key in (m.name, m.name.rsplit(":", 1)[-1], Path(m.name.rsplit(":", 1)[-1]).name):
        if key in overrides:
            used.add(key)
            return overrides[key]
    return None


# --------------------------------------------------------------------------- sniffing


def sniff_kind(path: str) -> str | None:
    """``gerber``, ``job``, ``drill``, ``netlist``, ``ipc2581`` or ``None`` for the file
    at ``path``, from its content (unreadable files: ``None``)."""
    try:
        member = _file_member(Path(path), PackageBudget(path))
        with open(path, "rb") as stream:
            head = stream.read(SNIFF_BYTES)
        return _kind(head, _stem(os.path.basename(path)), member)
    except (OSError, FabError):
        return None


def _kind(head: bytes, stem: str, member: Member | None = None) -> str | None:
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    if text.startswith(b"<") or head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "ipc2581" if is_ipc2581(head) else None
    if text.startswith(b"{"):
        keys = (b'"MaterialStackup"', b'"GeneralSpecs"', b'"FilesAttributes"')
        return "job" if any(k in head for k in keys) else None
    lines = [ln.strip() for ln in text.splitlines()[:50]]
    body = [ln for ln in lines if ln and not ln.startswith(b";")]
    if body and body[0].startswith(b"M48"):
        return "drill"
    if _looks_like_ipc356(text, member):  # first: a net named LED_G04 must not make it Gerber
        return "netlist"
    if _GERBER_START.search(text[:4096]):
        return "gerber"
    if looks_like_drill(head):  # a drill program without its M48 header
        return "drill"
    return None


#: An IPC-D-356 record: ``C`` comment, ``P`` parameter (column 1, then a
#: blank or the line's end) or a three-digit operation code on a line
#: without field separators (a CSV list's numbers are not records).
_IPC356_LINE = re.compile(rb"(?:[CP](?:\s|$)|[0-9]{3}(?!.*[,;\t]))")  # fixed columns: no separators
_IPC356_TEST = re.compile(rb"(?:^|\n)(?:317|327|999)")


def _looks_like_ipc356(text: bytes, member: Member | None) -> bool:
    """Whether the file is an IPC-D-356 netlist: every line of its start is a
    record (a comment header of any length is), and a test record (317 /
    327) or the end record (999) stands somewhere in the file — searched
    through the whole file, not a window, so a long header still reads."""
    lines = [ln for ln in text.splitlines()[:-1] or text.splitlines() if ln.strip()][:400]
    if not lines or not all(_IPC356_LINE.match(ln) for ln in lines):
        return False
    if _IPC356_TEST.search(text):
        return True
    if member is None or member.size <= len(text):
        return False
    stream = member.open()
    try:
        tail = b""
        while chunk := stream.read(1 << 20):
            if _IPC356_TEST.search(tail + chunk):
                return True
            tail = chunk[-8:]
    except (OSError, zipfile.BadZipFile, EOFError, ValueError) as exc:
        raise FabError(member.name, None, f"cannot read: {exc}") from None
    finally:
        stream.close()
    return False


def _gerber_identity(m: Member, head: bytes, override: str | None) -> tuple[int | None, str | None, bool, str | None]:
    """(copper layer number or None, role or None, is the profile, how it
    was decided); how is ``None`` when neither attributes, ``--layer`` nor
    couplint's naming rule say what the file is."""
    if override is not None:
        if override == "profile":
            return None, None, True, "--layer"
        number, _, given = override[1:].partition(",")
        return int(number), given or None, False, "--layer"
    found = _FILE_FUNCTION.search(head)
    if found is not None:
        fields = [f.strip() for f in found.group(1).decode("ascii", "replace").split(",")]
        how = f"TF.FileFunction,{','.join(fields)}"
        if fields[0] == "Copper":
            if len(fields) < 3 or not re.fullmatch(r"L\d+", fields[1]):
                raise FabError(m.name, _line_of(head, found.start()),
                               f"TF.FileFunction,{','.join(fields)}: a copper layer needs Copper,L<n>,Top|Inr|Bot")
            role = fields[3].lower() if len(fields) > 3 and fields[3] in ("Plane", "Signal", "Mixed") else None
            return int(fields[1][1:]), role, False, how
        if fields[0] == "Profile":
            return None, None, True, how
        return None, None, False, how
    named = _NAMED_COPPER.search(m.stem)
    if named is not None:
        return int(named.group(1)), None, False, "name -L<n> (couplint's naming rule)"
    if _NAMED_PROFILE.search(m.stem):
        return None, None, True, "name -Profile (couplint's naming rule)"
    return None, None, False, None


def _gerber_function_words(head: bytes) -> str:
    found = _FILE_FUNCTION.search(head)
    if found is not None:
        return f"TF.FileFunction {found.group(1).decode('ascii', 'replace')}: not copper"
    return ("a Gerber file without TF.FileFunction whose name does not follow the copper naming rule "
            "(<name>-L<n>.gbr); if it is copper, name it with --layer FILE=L<n>")


def _line_of(head: bytes, offset: int) -> int:
    return head.count(b"\n", 0, offset) + 1


def read_bytes_member(m: Member) -> io.BytesIO:
    """The whole member in memory (small files: job files, netlists)."""
    stream = m.open()
    try:
        return io.BytesIO(stream.read())
    finally:
        stream.close()
