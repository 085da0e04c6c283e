"""What a Gerber file without X2 attributes holds: from its name, else its content.

Gerber X2 files say what they are (``TF.FileFunction``); many exports
still carry no attributes. For those, this module reads the trade's
file-naming conventions and, where the name says nothing, the file's
content, and says for every file how it decided (``Guess.why``), so the
user can confirm the mapping or override it with ``--layer``.

**Names** (case-insensitive; the extension, then the words of the name).
These are conventions of the trade, widely used by board makers' CAM
intake (common practice, from memory); none is a standard:

========================================== ==================================
extension / word                           read as
========================================== ==================================
``.gtl``, ``.cmp``; ``F_Cu``, ``top``      top copper (layer 1)
``.gbl``, ``.sol``; ``B_Cu``, ``bottom``   bottom copper (the last layer)
``.g<k>``                                  inner copper, signal series, k-th
``.gp<k>``                                 inner copper, plane series, k-th
``.gl<k>``, ``.ly<k>``, ``.in<k>``;        inner copper, k-th by number
``In<k>_Cu``, ``inner<k>``, ``mid<k>``
``.gko``, ``.gm<k>``, ``.gml``, ``.dim``;  board outline (profile)
``Edge_Cuts``, ``outline``, ``profile``
``.gts`` ``.gbs`` ``.stc`` ``.sts``; mask  solder mask (not read)
``.gto`` ``.gbo`` ``.plc`` ``.pls``; silk  legend (not read)
``.gtp`` ``.gbp`` ``.crc`` ``.crs``; paste solder paste (not read)
``.gd<k>`` ``.gg<k>`` ``.gpt`` ``.gpb``    drill drawing / pad master (not read)
========================================== ==================================

A ``.g<k>`` and a ``.gp<k>`` series number signal and plane layers
separately, so their order between each other is not in the names: the
stackup's layer roles interleave them (``.g`` files fill its signal and
mixed inner layers in order, ``.gp`` files its plane layers) when the
stackup gives roles; otherwise the set is ambiguous and the user is asked
for ``--layer``.

**Content** (when the name says nothing): the file's first 64 KiB are
counted — draws (``D01`` and modal coordinates), flashes (``D03``),
regions (``G36``), clear-polarity objects and the image polarity:

* a negative image (``%IPNEG*%`` or ``TF.FilePolarity,Negative``) is a
  copper plane;
* draws and no flash or region: a drawing (legend, outline, fabrication
  notes) — not copper;
* pours (regions) with clear-polarity cut-outs (``%LPC*%``): copper;
* flashes (and regions) with almost no draws (under 5 % of the objects;
  the draws outlining a region do not count): mask or paste openings —
  not copper;
* anything else is copper, of unknown position: it can fill the one copper
  layer no name claims, never two.

``number_copper`` turns the guesses into layer numbers once the stackup is
known: top is 1, bottom the last, inner layers in their series' order.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

from ...errors import FabError

#: Words that mark each non-copper kind in a file name.
_KIND_WORDS = {
    "mask": ("mask", "soldermask", "stopmask", "stop", "solderresist", "resist", "solder"),
    "silk": ("silk", "silks", "silkscreen", "legend", "overlay", "print", "assy", "assembly"),
    "paste": ("paste", "cream", "stencil", "solderpaste"),
    "profile": ("outline", "profile", "edge", "edgecuts", "edge_cuts", "boardoutline", "dimension", "contour",
                "routing", "rout", "mill", "milling"),
    "drawing": ("drill", "drl", "drillmap", "map", "fab", "fabrication", "courtyard", "crtyd", "dwgs", "cmts",
                "comments", "eco1", "eco2", "margin", "user", "notes", "keepout", "gerberjob", "adhes", "adhesive",
                "glue"),
}

#: Extensions of the trade's naming convention: extension -> (kind, side).
_EXTENSIONS = {
    "gtl": ("copper", "top"), "cmp": ("copper", "top"),
    "gbl": ("copper", "bottom"), "sol": ("copper", "bottom"),
    "gko": ("profile", None), "gml": ("profile", None), "dim": ("profile", None), "gm": ("profile", None),
    "gts": ("mask", None), "gbs": ("mask", None), "stc": ("mask", None), "sts": ("mask", None),
    "gto": ("silk", None), "gbo": ("silk", None), "plc": ("silk", None), "pls": ("silk", None),
    "gtp": ("paste", None), "gbp": ("paste", None), "crc": ("paste", None), "crs": ("paste", None),
    "gpt": ("drawing", None), "gpb": ("drawing", None),
    "gta": ("drawing", None), "gba": ("drawing", None),  # adhesive
}

_INNER_EXT = re.compile(r"(gp|gl|ly|in|g)(\d{1,2})")
_MECH_EXT = re.compile(r"(gm|gd|gg)(\d{1,2})")
_INNER_WORD = re.compile(r"(?:in|inner|mid|int|inr|internal|midlayer|innerlayer)(\d{1,2})(?:cu)?")
_LAYER_WORD = re.compile(r"(?:layer|lyr|copper|cu|sig|signal)(\d{1,2})")

#: Profile names by preference when several files could be the outline.
_PROFILE_RANK = {"name": 0, "gko": 1, "gm1": 2}


@dataclass(frozen=True)
class Guess:
    """What a file seems to hold. ``kind``: ``copper``, ``profile``,
    ``mask``, ``silk``, ``paste``, ``drawing`` or ``unknown``; for copper
    ``side`` is ``top``, ``inner``, ``bottom``, ``layer`` (``index`` is
    the layer number, 1 = top) or ``None`` (content only),
    ``series`` the naming series of an inner layer (``g`` signal, ``gp``
    plane, ``n`` plain numbers) and ``index`` its number in the series;
    ``role`` a layer-role hint (``plane`` for a negative image or the plane
    series); ``why`` the reason in words; ``rank`` orders profile
    candidates (lower first)."""

    kind: str
    why: str
    side: str | None = None
    series: str | None = None
    index: int = 0
    role: str | None = None
    rank: int = 9


#: Generic Gerber extensions: the layer is said by an inner extension
#: (``board.GTL.gbr``) or by the name's words.
_GENERIC_EXT = ("gbr", "ger", "gerber", "pho", "art", "gb", "gbx", "274", "rs274x", "")


def from_name(filename: str, common: str = "") -> Guess | None:
    """The guess the file name supports, or ``None`` if it says nothing.
    ``common``: the start all the package's Gerber file names share (the
    board's own name), left out when the name's words are read, so a board
    called ``mask-aligner`` does not make every file a mask."""
    base = filename.rsplit("/", 1)[-1].rsplit(":", 1)[-1]
    stem, dot, ext = base.rpartition(".")
    if not dot:
        stem, ext = base, ""
    ext = ext.lower()
    if ext in _GENERIC_EXT and "." in stem:  # board.GTL.gbr: the inner extension speaks
        inner = from_name(stem, common)
        if inner is not None:
            return inner
    if common and stem.lower().startswith(common.lower()) and len(stem) > len(common):
        stem = stem[len(common):]
    if ext in _EXTENSIONS:
        kind, side = _EXTENSIONS[ext]
        words = {"copper": "top copper" if side == "top" else "bottom copper"}
        rank = _PROFILE_RANK.get(ext, 3)
        return Guess(kind, f"extension .{ext}: {words.get(kind, _KIND_NAMES[kind])}", side=side, rank=rank)
    m = _INNER_EXT.fullmatch(ext)
    if m and int(m.group(2)) > 0:
        series = {"g": "g", "gp": "gp"}.get(m.group(1), "n")
        what = {"g": "inner signal layer", "gp": "inner plane layer"}.get(series, "inner copper layer")
        return Guess("copper", f"extension .{ext}: {what} {int(m.group(2))}", side="inner", series=series,
                     index=int(m.group(2)), role="plane" if series == "gp" else None)
    m = _MECH_EXT.fullmatch(ext)
    if m:
        if m.group(1) == "gm":
            return Guess("profile", f"extension .{ext}: mechanical layer {m.group(2)} (outline)",
                         rank=_PROFILE_RANK.get(ext, 3))
        return Guess("drawing", f"extension .{ext}: drill drawing")
    return _from_words(stem)


_KIND_NAMES = {"profile": "board outline", "mask": "solder mask", "silk": "legend", "paste": "solder paste",
               "drawing": "drawing", "copper": "copper"}


def _from_words(stem: str) -> Guess | None:
    text = stem.lower()
    # one widely used open convention: <board>-F_Cu, -B_Cu, -In<k>_Cu, -Edge_Cuts, -F_Mask ...
    m = re.search(r"(?:^|[-_.\s])(f|b|in(\d{1,2}))[_.]cu$", text)
    if m:
        if m.group(1) == "f":
            return Guess("copper", "name ends F_Cu: top copper", side="top")
        if m.group(1) == "b":
            return Guess("copper", "name ends B_Cu: bottom copper", side="bottom")
        return Guess("copper", f"name ends In{int(m.group(2))}_Cu: inner copper layer {int(m.group(2))}",
                     side="inner", series="n", index=int(m.group(2)))
    if re.search(r"edge[_.]cuts$", text):
        return Guess("profile", "name ends Edge_Cuts: board outline", rank=_PROFILE_RANK["name"])
    words = [w for w in re.split(r"[^a-z0-9]+", text) if w]
    # a number standing alone belongs to the word before it: "mid layer 1", "inner 2"
    joined: list[str] = []
    for w in words:
        if w.isdigit() and joined and not joined[-1][-1].isdigit():
            prev = joined.pop()
            if prev in ("layer", "lyr") and joined and joined[-1] in ("mid", "inner", "int", "internal", "in"):
                prev = joined.pop()
            joined.append(prev + w)
        else:
            joined.append(w)
    # the layer is said last; read from the end, the first word that speaks decides
    for w in reversed(joined):
        for kind, marks in _KIND_WORDS.items():
            if w in marks or w.rstrip("s") in marks:
                return Guess(kind, f"name word {w!r}: {_KIND_NAMES[kind]}",
                             rank=_PROFILE_RANK["name"] if kind == "profile" else 9)
        m = _INNER_WORD.fullmatch(w)
        if m and int(m.group(1)) > 0:
            return Guess("copper", f"name word {w!r}: inner copper layer {int(m.group(1))}", side="inner",
                         series="n", index=int(m.group(1)))
        m = _LAYER_WORD.fullmatch(w)
        if m and int(m.group(1)) > 0:
            return Guess("copper", f"name word {w!r}: copper layer {int(m.group(1))} (1 = top)", side="layer",
                         index=int(m.group(1)))
        if w in ("top", "toplayer", "topcopper", "front", "component", "comp"):
            return Guess("copper", f"name word {w!r}: top copper", side="top")
        if w in ("bottom", "bot", "bottomlayer", "bottomcopper", "back"):
            return Guess("copper", f"name word {w!r}: bottom copper", side="bottom")
    return None


_D01 = re.compile(rb"D0?1\*")
_D03 = re.compile(rb"D0?3\*")
_MODAL = re.compile(rb"^[XY][-+0-9][^D\r\n]*\*", re.MULTILINE)
_G36 = re.compile(rb"G36\*")
_NEGATIVE = re.compile(rb"%IPNEG\*%|TF\.FilePolarity,Negative")
_REGION_BODY = re.compile(rb"G36\*.*?(?:G37\*|\Z)", re.DOTALL)
_CLEAR = re.compile(rb"%LPC\*%")


def from_content(head: bytes) -> Guess:
    """The guess from counting the objects in ``head`` (a file's start);
    the draws that outline a region (between ``G36`` and ``G37``) are not
    counted as draws."""
    if _NEGATIVE.search(head):
        return Guess("copper", "content: a negative image (copper plane)", role="plane")
    outside = _REGION_BODY.sub(b"G36*", head)
    draws = len(_D01.findall(outside)) + len(_MODAL.findall(outside))
    flashes = len(_D03.findall(outside))
    regions = len(_G36.findall(outside))
    counts = f"{draws} draws, {flashes} flashes, {regions} regions in the first {len(head) >> 10} KiB"
    if draws == 0 and flashes == 0 and regions == 0:
        return Guess("unknown", f"content: no copper objects ({counts})")
    if regions and _CLEAR.search(outside):
        return Guess("copper", f"content: pours with clear-polarity cut-outs ({counts}): copper")
    if flashes == 0 and regions == 0:
        return Guess("drawing", f"content: draws only ({counts}): a legend or drawing, not copper")
    if draws < 0.05 * (draws + flashes + regions):
        return Guess("mask", f"content: pads with almost no draws ({counts}): mask or paste openings, not copper")
    return Guess("copper", f"content: tracks, pads and pours ({counts})")


def number_copper(guesses: list[tuple[str, Guess]], taken: dict[int, str], count: int,
                  roles: Sequence[str] | None, where: str) -> dict[int, tuple[str, Guess]]:
    """Layer numbers (1 = top ... ``count``) for the guessed copper files.

    ``guesses``: (file name, guess) of every copper guess; ``taken``: layer
    number -> file already identified (X2, ``--layer``, naming rule, job
    file); ``roles``: the stackup's role of each copper layer, top first,
    or ``None`` if it gives none. Raises :class:`FabError` (with the whole
    mapping as a table) when the files do not fill the free layers in one
    way only."""
    free = [n for n in range(1, count + 1) if n not in taken]
    out: dict[int, tuple[str, Guess]] = {}
    tops = [g for g in guesses if g[1].side == "top"]
    bottoms = [g for g in guesses if g[1].side == "bottom"]
    inner = [g for g in guesses if g[1].side == "inner"]
    unplaced = [g for g in guesses if g[1].side is None]

    def fail(why: str) -> None:
        raise FabError(where, None, f"{why}; the copper files as couplint reads them:\n"
                       + mapping_table([(name, describe(g), g.why) for name, g in guesses])
                       + "\nname each with --layer FILE=L<n> (1 = top) where this is wrong or ambiguous")

    for name, g in guesses:
        if g.side == "layer":
            if g.index not in free:
                fail(f"{name} looks like copper layer L{g.index}, but the stackup has {count} copper layers"
                     if g.index > count or g.index < 1 else
                     f"{name} looks like copper layer L{g.index}, which another file holds")
            out[g.index] = (name, g)
            free.remove(g.index)
    for side, group, number in (("top", tops, 1), ("bottom", bottoms, count)):
        if len(group) > 1:
            fail(f"{len(group)} files look like {side} copper")
        if group:
            if number not in free:
                holder = taken.get(number) or out.get(number, ("another file",))[0]
                fail(f"{group[0][0]} looks like {side} copper, but layer L{number} is already {holder}")
            out[number] = group[0]
            free.remove(number)
    inner_free = [n for n in free if 1 < n < count]
    series = {g.series for _, g in inner}
    if len(inner) > len(inner_free):
        fail(f"{len(inner)} inner copper files but the stackup has {len(inner_free)} free inner layer(s)")
    if series == {"g", "gp"}:
        if roles is None:
            fail("inner layers come in a signal series (.g<k>) and a plane series (.gp<k>) and the stackup "
                 "gives no layer roles to interleave them")
        assert roles is not None  # fail() raises
        planes = [n for n in inner_free if roles[n - 1] == "plane"]
        others = [n for n in inner_free if roles[n - 1] != "plane"]
        for kind, slots in (("gp", planes), ("g", others)):
            files = sorted((g for g in inner if g[1].series == kind), key=lambda g: g[1].index)
            if len(files) != len(slots):
                fail(f"{len(files)} {'plane' if kind == 'gp' else 'signal'} series file(s) for "
                     f"{len(slots)} {'plane' if kind == 'gp' else 'signal/mixed'} inner layer(s) of the stackup")
            out.update(zip(slots, files))
    elif len(series) > 1:
        fail("inner copper files follow different naming series, so their order is not known")
    else:
        files = sorted(inner, key=lambda g: g[1].index)
        if len({g.index for _, g in files}) != len(files):
            fail("two inner copper files have the same number")
        if len(files) < len(inner_free) and unplaced:
            pass  # the content-only file may fill the one gap left (below)
        elif len(files) < len(inner_free):
            fail(f"{len(inner_free)} inner layer(s) of the stackup but {len(files)} inner copper file(s)")
        if len(files) == len(inner_free):
            out.update(zip(inner_free, files))
        elif files:
            # fewer named inner files than slots with one content-only file: ordered only if
            # the gap is certain, which it is not
            fail("the inner copper files do not fill the stackup's inner layers and their order is not known")
    left = [n for n in range(1, count + 1) if n not in taken and n not in out]
    if unplaced:
        if len(unplaced) == 1 and len(left) == 1:
            out[left[0]] = unplaced[0]
        else:
            fail(f"{len(unplaced)} file(s) look like copper by content only, for {len(left)} layer(s) no name "
                 "claims")
    return out


def describe(g: Guess) -> str:
    """What a guess says, in a few words (``copper, inner 2 (plane series)``)."""
    if g.kind != "copper":
        return _KIND_NAMES.get(g.kind, g.kind)
    if g.side == "layer":
        return f"copper, L{g.index}"
    if g.side == "inner":
        series = {"g": " (signal series)", "gp": " (plane series)"}.get(g.series or "", "")
        return f"copper, inner {g.index}{series}"
    return f"copper, {g.side}" if g.side else "copper, position unknown"


def mapping_table(rows: list[tuple[str, str, str]]) -> str:
    """(file, read as, why) rows as aligned plain text."""
    if not rows:
        return ""
    width = [max(len(r[k]) for r in rows + [("file", "read as", "why")]) for k in range(2)]
    lines = [f"  {'file':<{width[0]}}  {'read as':<{width[1]}}  why"]
    lines += [f"  {a:<{width[0]}}  {b:<{width[1]}}  {c}" for a, b, c in rows]
    return "\n".join(lines)
