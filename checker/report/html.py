"""The HTML sign-off report: one self-contained page a reviewer prints and signs.

Everything is in the one file: the style sheet is inline, the pictures are
inline SVG (:mod:`checker.report.svg`), and there is no JavaScript at all. A
Content-Security-Policy in the page forbids every fetch and every script, so
the page works offline and a stray element could not reach the network.

Every piece of text that comes from an input (board, nets, rule file, waiver
file, baseline) goes through :func:`html.escape`.

Same input, same bytes, once the date is fixed: pass ``generated``, or set
``SOURCE_DATE_EPOCH`` (seconds since 1970, UTC); the run time is not printed.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import html
import math
import os
import re
from typing import TYPE_CHECKING, Iterable

import numpy as np

from .. import __version__
from ..errors import InputError, UsageError
from ..selection import selection_note
from . import CAUTION
from .json_report import summary
from .svg import finding_number, render_svg
from .visible import visible

if TYPE_CHECKING:  # the runner renders reports: a type only
    from ..runner import Result

#: How many coupled net pairs the ranking shows.
TOP_PAIRS = 20

#: Each finding's picture shows its bounding box grown on every side by this
#: share of the box's larger side, but at least ``PICTURE_MARGIN_MM``.
PICTURE_MARGIN_SHARE = 0.3
PICTURE_MARGIN_MM = 2.0

#: Bytes read at a time when hashing an input file.
HASH_CHUNK = 1 << 20

POLICY = {
    "warning": "--fail-on warning: every finding that is not waived fails the board, warnings "
               "and errors alike.",
    "error": "--fail-on error: errors that are not waived fail the board; warnings are listed "
             "but do not fail it.",
    "new": "--fail-on new: findings that are not in the baseline fail the board unless waived; "
           "findings already in the baseline are listed but do not fail it.",
}

VERDICT_TITLE = {"pass": "PASS", "pass with waivers": "PASS WITH WAIVERS",
                 "pass with known findings": "PASS WITH KNOWN FINDINGS", "fail": "FAIL"}


#: Findings, worst first, that get a card with a close-up by default (``--cards``).
DEFAULT_CARDS = 200
#: Widest close-up (mm): a finding larger than this is pictured at its worst spot.
CLOSE_UP_MAX_MM = 20.0


def _e(value: object) -> str:
    """Text (or an attribute value) made safe for HTML: control characters
    shown as backslash-x escapes (a page must not carry ESC, BEL or NUL), then escaped."""
    return html.escape(visible(str(value)), quote=True)


def render_html(result: Result, *, inputs: list[str], generated: str | None = None,
                cards: int | None = DEFAULT_CARDS) -> str:
    """The sign-off report of ``result`` as one HTML document.

    ``inputs``: the files the run read (board, rule file, waiver file,
    baseline), listed with their size and SHA-256. ``generated``: the date
    and time to print; by default :func:`generated_now`. ``cards``: how
    many findings, worst first, get a card with a close-up (None: all);
    every finding is in the index table, which is also shown grouped by
    rule and by victim net.
    """
    when = generated if generated is not None else generated_now()
    numbers = finding_number(result)
    ctx = _Context(result, numbers, render_svg)
    ctx.carded = {f.id for f in (result.findings if cards is None else result.findings[:cards])}
    board = result.analysis.board
    parts = [
        _head(board.name),
        '<body>\n<main>\n',
        _title(result, when),
        _verdict(result),
        _identity(result, inputs, when),
        _rule_summary(result),
        _findings_index(ctx),
        _grouped_index(ctx),
        _victims(result),
        _net_pairs(result),
        _overlay(ctx),
        _cards(ctx),
        _waivers(ctx),
        _baseline(ctx),
        _notes(result),
        _caution(),
        _signature(),
        '</main>\n</body>\n</html>\n',
    ]
    return "".join(parts)


def generated_now() -> str:
    """The report date: ``SOURCE_DATE_EPOCH`` when set (reproducible
    output), otherwise the current time; UTC, ISO 8601, whole seconds."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None and epoch.strip() != "":
        try:
            moment = _dt.datetime.fromtimestamp(int(epoch.strip()), _dt.timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise UsageError(f"SOURCE_DATE_EPOCH must be a whole number of seconds since "
                             f"1970-01-01 UTC, not {epoch!r}") from None
    else:
        moment = _dt.datetime.now(_dt.timezone.utc)
    return moment.strftime("%Y-%m-%dT%H:%M:%SZ")


def file_sha256(path: str) -> tuple[str, int]:
    """SHA-256 (hex) and size in bytes of the file at ``path``, read in chunks."""
    digest = hashlib.sha256()
    size = 0
    try:
        with open(path, "rb") as handle:
            while chunk := handle.read(HASH_CHUNK):
                digest.update(chunk)
                size += len(chunk)
    except OSError as exc:
        raise InputError(path, None, f"cannot read it to record its SHA-256 in the report: "
                                     f"{exc.strerror or exc}") from None
    return digest.hexdigest(), size


# --------------------------------------------------------------------------
# numbers
# --------------------------------------------------------------------------


def _num(value: float | None, digits: int = 4) -> str:
    """``digits`` significant digits, without an exponent for everyday sizes."""
    if value is None or not math.isfinite(value):
        return "n/a"
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    if -4 <= magnitude < 7:
        decimals = max(0, digits - 1 - magnitude)
        text = f"{value:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text
    return f"{value:.{digits - 1}e}"


PHYSICAL_UNITS = ("mm", "pF", "mV")


def _quantity(value: float, unit: str) -> str:
    if unit in PHYSICAL_UNITS:
        return f"{_num(value)}\u00a0{unit}"
    return f"{_num(value)} ({unit})"


def _limit(f) -> str:
    """The limit with the direction it works in: a ceiling when the value
    lies above it, a floor when below."""
    text = _quantity(f.limit, f.unit)
    if f.value > f.limit:
        return f"at most {text}"
    if f.value < f.limit:
        return f"at least {text}"
    return text


def _mm(x: float) -> str:
    return f"{x:.3f}"


# --------------------------------------------------------------------------
# page parts
# --------------------------------------------------------------------------


class _Context:
    """What several sections share: numbering, failing set, the SVG renderer."""

    def __init__(self, result: Result, numbers: dict[str, int], render_svg) -> None:
        self.result = result
        self.numbers = numbers
        self.render_svg = render_svg
        self.failing = {f.id for f in result.failing()}
        self.waived = result.review.waived
        self.by_id = {f.id: f for f in result.findings}
        #: the findings that get a card (render_html's ``cards``)
        self.carded = set(self.by_id)
        self._svg_count = 0
        self._reuse: dict = {}  # work the close-ups share (render_svg's ``reuse``)

    def number(self, finding_id: str) -> str:
        n = self.numbers.get(finding_id)
        return f"#{n}" if n is not None else "#?"

    def status(self, f) -> tuple[str, str]:
        """(css class, words) for how a finding counts under the policy."""
        if f.id in self.waived:
            return "st-waived", "waived"
        if f.id in self.failing:
            return "st-fail", "fails"
        return "st-open", "does not fail"

    def svg(self, **kwargs) -> str:
        """An SVG picture ready to sit inline: no XML prolog, and its ids
        made unique in the page (several pictures in one document must not
        share a clip path or a marker by accident)."""
        self._svg_count += 1
        return _inline_svg(self.render_svg(self.result, reuse=self._reuse, **kwargs), f"p{self._svg_count}-")


_PROLOG = re.compile(r"^\s*(<\?xml[^>]*\?>\s*)?(<!DOCTYPE[^>]*>\s*)?", re.IGNORECASE)
_ID = re.compile(r'\bid="([^"]+)"')


def _inline_svg(svg: str, prefix: str) -> str:
    svg = _PROLOG.sub("", svg, count=1)
    ids = set(_ID.findall(svg))
    if not ids:
        return svg

    def ref(match: re.Match) -> str:
        name = match.group(2)
        return f"{match.group(1)}{prefix}{name}" if name in ids else match.group(0)

    svg = _ID.sub(lambda m: f'id="{prefix}{m.group(1)}"', svg)
    svg = re.sub(r'(url\(\s*["\']?#)([^)"\'\s]+)', ref, svg)
    svg = re.sub(r'((?:xlink:)?href="#)([^"]+)', ref, svg)
    return svg


def _head(board_name: str) -> str:
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
        "style-src 'unsafe-inline'\">\n"
        f"<meta name=\"generator\" content=\"couplint {_e(__version__)}\">\n"
        f"<title>Coupling sign-off: {_e(board_name)}</title>\n"
        f"<style>\n{CSS}</style>\n</head>\n"
    )


def _title(result: Result, when: str) -> str:
    board = result.analysis.board
    return (
        '<header class="title">\n'
        '<p class="kicker">couplint coupling review \u2014 sign-off report</p>\n'
        f"<h1>{_e(board.name)}</h1>\n"
        f'<p class="sub">Generated {_e(when)} by couplint {_e(__version__)}</p>\n'
        "</header>\n"
    )


def _verdict(result: Result) -> str:
    verdict = result.verdict()
    findings = result.findings
    failing = result.failing()
    waived = [f for f in findings if f.id in result.review.waived]
    if verdict == "fail":
        detail = f"{len(failing)} of {len(findings)} findings fail the policy."
    elif verdict == "pass with known findings":
        known = result.review.failing(findings, "warning")
        detail = (f"No new finding fails the policy; {len(known)} of {len(findings)} findings of warning or worse, "
                  "not waived, were already in the baseline and remain.")
    elif verdict == "pass with waivers":
        detail = (f"No finding fails the policy; {len(waived)} of {len(findings)} findings "
                  f"pass only because they are waived.")
    elif findings:
        detail = (f"No finding fails the policy; {len(findings)} findings are listed that do "
                  f"not fail under it.")
    else:
        detail = "No findings."
    css = {"pass": "v-pass", "pass with waivers": "v-waived", "pass with known findings": "v-waived",
           "fail": "v-fail"}.get(verdict, "v-fail")
    policy = POLICY.get(result.fail_on, f"--fail-on {result.fail_on}")
    note = selection_note(result)
    return (
        f'<section class="banner {css}" id="verdict">\n'
        f'<p class="verdict-word">{_e(VERDICT_TITLE.get(verdict, verdict.upper()))}</p>\n'
        f'<p class="verdict-detail">{_e(detail)}</p>\n'
        f'<p class="policy">Policy: {_e(policy)}</p>\n'
        + (f'<p class="policy" id="selection">Selection: {_e(note)}.</p>\n' if note else "")
        + "</section>\n"
    )


def _identity(result: Result, inputs: list[str], when: str) -> str:
    a = result.analysis
    board = a.board
    rs = a.ruleset
    s = summary(result)
    review = result.review
    rows = [
        ("Board", board.name),
        ("Board file", board.path),
        ("Rule set", rs.path),
        ("Rule set SHA-256", rs.sha256),
        ("Waiver file", review.waiver_file or "none"),
        ("Baseline", review.baseline or "none"),
        ("Failure policy", f"--fail-on {result.fail_on}"),
        ("Tool", f"couplint {__version__}"),
        ("Generated", when),
        ("Scope", f"{s['layers']} copper layers, {s['nets']} nets, {s['pieces']} copper pieces, "
                  f"{s['pairs_examined']} piece pairs examined, {s['coupled_pairs']} coupled piece "
                  f"pairs, {s['coupled_net_pairs']} coupled net pairs"),
    ]
    out = ['<section id="identity">\n<h2>Board and inputs</h2>\n<table class="kv">\n']
    for key, value in rows:
        cls = ' class="hash"' if "SHA-256" in key else ""
        out.append(f"<tr><th>{_e(key)}</th><td{cls}>{_e(value)}</td></tr>\n")
    out.append("</table>\n")
    out.append('<p class="fine">The rule set SHA-256 is taken over the resolved rule content '
               "(after <code>extends</code>), so two files that resolve to the same rules hash the "
               "same; the file SHA-256 values below are over the bytes read.</p>\n")

    out.append('<h3>Input files</h3>\n<table class="grid inputs">\n'
               "<thead><tr><th>File</th><th class=\"r\">Bytes</th><th>SHA-256</th></tr></thead>\n<tbody>\n")
    seen: set[str] = set()
    listed = 0
    for path in inputs:
        if path in seen:
            continue
        seen.add(path)
        digest, size = file_sha256(path)
        listed += 1
        out.append(f'<tr><td class="path">{_e(path)}</td><td class="r">{size}</td>'
                   f'<td class="hash">{_e(digest)}</td></tr>\n')
    if not listed:
        out.append('<tr><td colspan="3">No input files were given to the report.</td></tr>\n')
    out.append("</tbody>\n</table>\n")

    if board.files:
        out.append('<h3>Package files as read</h3>\n<table class="grid files">\n'
                   "<thead><tr><th>File</th><th>Read as</th><th>How it was decided</th></tr></thead>\n<tbody>\n")
        for name, read_as, how in board.files:
            out.append(f'<tr><td class="path">{_e(name)}</td><td>{_e(read_as)}</td><td>{_e(how)}</td></tr>\n')
        out.append("</tbody>\n</table>\n")
    out.append(_stackup(board.stackup))
    out.append(_settings(rs.settings))
    out.append("</section>\n")
    return "".join(out)


def _stackup(stackup) -> str:
    """The stackup table, masks included; a value the input did not give
    (a documented default) is marked and the mark explained below."""
    out = ['<h3>Stackup (top to bottom)</h3>\n<table class="grid stackup">\n'
           "<thead><tr><th>Layer</th><th>Kind</th><th>Role</th><th class=\"r\">Thickness</th>"
           "<th class=\"r\">\u03b5r</th><th class=\"r\">Loss tangent</th></tr></thead>\n<tbody>\n"]
    marked = False

    def value(text: str, item, key: str) -> str:
        nonlocal marked
        if key in getattr(item, "assumed", ()):
            marked = True
            return f'{text}<sup class="assumed" title="assumed: common practice, not your board">*</sup>'
        return text

    def dielectric_row(d, kind: str) -> str:
        tan = _num(d.loss_tangent) if d.loss_tangent is not None else ""
        return (f'<tr class="dielectric"><td>{_e(d.name or "")}</td><td>{kind}</td><td></td>'
                f'<td class="r">{value(_num(d.thickness_mm) + chr(160) + "mm", d, "thickness")}</td>'
                f'<td class="r">{value(_num(d.er), d, "er")}</td><td class="r">{tan}</td></tr>\n')

    if stackup.mask_top is not None:
        out.append(dielectric_row(stackup.mask_top, "solder mask"))
    for i, layer in enumerate(stackup.layers):
        out.append(f'<tr class="copper"><td>{_e(layer.name)}</td><td>copper</td><td>{_e(layer.role)}</td>'
                   f'<td class="r">{value(_num(layer.thickness_mm) + chr(160) + "mm", layer, "thickness")}</td>'
                   "<td></td><td></td></tr>\n")
        if i < len(stackup.dielectrics):
            out.append(dielectric_row(stackup.dielectrics[i], "dielectric"))
    if stackup.mask_bottom is not None:
        out.append(dielectric_row(stackup.mask_bottom, "solder mask"))
    out.append("</tbody>\n</table>\n")
    if marked:
        out.append('<p class="assumed-note">* not given in the input: a documented default was used '
                   "(common practice, not your board). Give the fabricator's value in the job file or "
                   "with --stackup FILE.</p>\n")
    return "".join(out)


def _settings(s) -> str:
    rows = [
        ("Broadside search distance", f"{_num(s.broadside_search_mm)}\u00a0mm"),
        ("Edge search distance", f"{_num(s.edge_search_mm)}\u00a0mm"),
        ("Parallel within", f"{_num(s.parallel_angle_deg)}\u00b0"),
        ("Planes shield neighbouring layers", "yes" if s.planes_shield else "no"),
        ("Bandwidth factor (f = k / rise time)", _num(s.bandwidth_factor)),
    ]
    body = "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>\n" for k, v in rows)
    return f'<h3>Analysis settings</h3>\n<table class="kv">\n{body}</table>\n'


def _rule_summary(result: Result) -> str:
    rules = result.analysis.ruleset.rules
    failing = {f.id for f in result.failing()}
    waived = result.review.waived
    counts = {r.name: [0, 0, 0] for r in rules}
    for f in result.findings:
        row = counts.setdefault(f.rule, [0, 0, 0])
        row[0] += 1
        row[1] += f.id in failing
        row[2] += f.id in waived
    by_sev = {"error": 0, "warning": 0}
    for f in result.findings:
        by_sev[f.severity] = by_sev.get(f.severity, 0) + 1
    out = [
        '<section id="summary">\n<h2>Summary per rule</h2>\n',
        f'<p class="counts">Findings: <strong id="finding-count">{len(result.findings)}</strong> '
        f'({by_sev.get("error", 0)} errors, {by_sev.get("warning", 0)} warnings); failing: '
        f'<strong>{len(failing)}</strong>; waived: <strong>{sum(f.id in waived for f in result.findings)}'
        "</strong></p>\n",
        '<table class="grid rules">\n<thead><tr><th>Rule</th><th>Kind</th><th>Severity</th>'
        '<th>What it asks</th><th class="r">Findings</th><th class="r">Failing</th>'
        '<th class="r">Waived</th></tr></thead>\n<tbody>\n',
    ]
    known = {r.name: r for r in rules}
    for name, (n, nf, nw) in counts.items():
        r = known.get(name)
        kind = r.kind if r else ""
        sev = r.severity if r else ""
        desc = r.description if r else ""
        cls = "clean" if n == 0 else ("bad" if nf else "ok")
        out.append(f'<tr class="{cls}"><td class="name">{_e(name)}</td><td>{_e(kind)}</td>'
                   f'<td><span class="sev sev-{_e(sev)}">{_e(sev)}</span></td><td class="desc">{_e(desc)}</td>'
                   f'<td class="r">{n}</td><td class="r">{nf}</td><td class="r">{nw}</td></tr>\n')
    total_w = sum(f.id in waived for f in result.findings)
    out.append(f'</tbody>\n<tfoot><tr><th colspan="4">All rules</th><td class="r">{len(result.findings)}</td>'
               f'<td class="r">{len(failing)}</td><td class="r">{total_w}</td></tr></tfoot>\n</table>\n'
               "</section>\n")
    return "".join(out)


def _findings_index(ctx: _Context) -> str:
    findings = ctx.result.findings
    out = ['<section id="index">\n<h2>Findings at a glance</h2>\n']
    if not findings:
        out.append("<p>No rule found anything to report on this board.</p>\n</section>\n")
        return "".join(out)
    out.append('<table class="grid index">\n<thead><tr><th>#</th><th>Severity</th><th>Rule</th>'
               "<th>Aggressor \u2192 victim</th><th>Layers</th><th class=\"r\">Value</th>"
               "<th class=\"r\">Limit</th><th>Status</th></tr></thead>\n<tbody>\n")
    for f in findings:
        css, words = ctx.status(f)
        base = ctx.result.review.status.get(f.id)
        if base:
            words = f"{words}; {base}"
        number = (f'<a href="#f-{_e(f.id)}">{_e(ctx.number(f.id))}</a>' if f.id in ctx.carded
                  else f'{_e(ctx.number(f.id))} <span class="fine">{_e(f.id)}</span>')
        out.append(
            f'<tr id="i-{_e(f.id)}"><td>{number}</td>'
            f'<td><span class="sev sev-{_e(f.severity)}">{_e(f.severity)}</span></td>'
            f"<td>{_e(f.rule)}</td><td>{_e(f.aggressor)} \u2192 {_e(f.victim)}</td>"
            f'<td>{_e("/".join(f.layers))}</td><td class="r">{_e(_quantity(f.value, f.unit))}</td>'
            f'<td class="r">{_e(_limit(f))}</td><td class="{css}">{_e(words)}</td></tr>\n')
    out.append("</tbody>\n</table>\n</section>\n")
    return "".join(out)


def _grouped_index(ctx: _Context) -> str:
    """The index again, grouped by rule and by victim net: for each group,
    its count, its worst finding and the numbers of all its findings (links
    to their rows), worst first. Pre-sorted, so no script is needed."""
    findings = ctx.result.findings
    if not findings:
        return ""
    out = ['<section id="groups">\n<h2>Findings by rule and by victim net</h2>\n']
    for title, key in (("By rule", lambda f: f.rule), ("By victim net", lambda f: f.victim)):
        groups: dict[str, list] = {}
        for f in findings:  # findings come worst first, so each group does too
            groups.setdefault(key(f), []).append(f)
        order = sorted(groups, key=lambda k: (-len(groups[k]), k))
        out.append(f"<details><summary>{_e(title)} ({len(groups)})</summary>\n"
                   '<table class="grid"><thead><tr><th>Group</th><th class="r">Findings</th>'
                   "<th>Worst</th><th>All, worst first</th></tr></thead>\n<tbody>\n")
        for name in order:
            members = groups[name]
            worst = members[0]
            links = " ".join(f'<a href="#i-{_e(f.id)}">{_e(ctx.number(f.id))}</a>' for f in members)
            out.append(f"<tr><td>{_e(name)}</td><td class=\"r\">{len(members)}</td>"
                       f"<td>{_e(ctx.number(worst.id))} {_e(_quantity(worst.value, worst.unit))}</td>"
                       f"<td>{links}</td></tr>\n")
        out.append("</tbody></table>\n</details>\n")
    out.append("</section>\n")
    return "".join(out)


# --------------------------------------------------------------------------
# coupled net pairs
# --------------------------------------------------------------------------


def worst_net_pairs(result: Result, top: int = TOP_PAIRS) -> list[dict]:
    """The ``top`` coupled net pairs, worst coupled noise first (either
    direction); pairs without a noise estimate follow, largest C12 first.
    Ties go by net order, so the ranking is stable."""
    a = result.analysis
    p = a.net_pairs
    if len(p) == 0:
        return []
    ab = np.where(np.isnan(p.noise_ab_v), -1.0, p.noise_ab_v)
    ba = np.where(np.isnan(p.noise_ba_v), -1.0, p.noise_ba_v)
    worst = np.maximum(ab, ba)
    order = np.lexsort((p.net_b, p.net_a, -p.c12_pf, -worst))[:top]
    groups = p.layer_groups
    out = []
    for k in order.tolist():
        i, j = int(p.net_a[k]), int(p.net_b[k])
        forward = ab[k] >= ba[k]
        agg, vic = (i, j) if forward else (j, i)
        noise = worst[k] if worst[k] >= 0 else None
        reverse = (ba[k] if forward else ab[k])
        mask = int(p.layer_mask[k]) if len(p.layer_mask) else 0
        layers = [_group_name(a, g) for n, g in enumerate(groups) if mask >> n & 1]
        out.append({
            "aggressor": a.net_name(agg), "victim": a.net_name(vic), "layers": layers,
            "noise_mv": None if noise is None else float(noise) * 1e3,
            "reverse_mv": None if reverse < 0 else float(reverse) * 1e3,
            "c12_pf": float(p.c12_pf[k]),
        })
    return out


def _group_name(a, group: tuple[int, int, int]) -> str:
    _, lo, hi = group
    return a.layer_name(lo) if lo == hi else f"{a.layer_name(lo)}/{a.layer_name(hi)}"


BAR_W = 160


#: bar fills, also given as attributes: a renderer that does not style inline SVG from the page's
#: stylesheet (the PDF's) must not fall back to black
BAR_FILL = {"track": "#f3f5f8", "noise": "#33617d", "c12": "#8c7a4a"}


def _bar(fraction: float, css: str, label: str) -> str:
    width = max(0.0, min(1.0, fraction)) * BAR_W
    return (f'<svg class="bar" viewBox="0 0 {BAR_W} 10" width="{BAR_W}" height="10" role="img" '
            f'aria-label="{_e(label)}"><rect class="track" x="0" y="0" width="{BAR_W}" height="10" '
            f'fill="{BAR_FILL["track"]}"/><rect class="{css}" x="0" y="0" width="{width:.2f}" height="10" '
            f'fill="{BAR_FILL.get(css, "#000")}"/></svg>')


def _victims(result: Result) -> str:
    """Every victim of every noise-budget rule, passing or not: its noise,
    the budget and the model that gave the number."""
    rows = sorted(result.analysis.victim_noise, key=lambda v: (v.rule, -v.noise_mv, v.victim))
    if not rows:
        return ""
    out = ['<section id="victims">\n<h2>Noise per victim</h2>\n',
           '<p class="fine">Each victim a noise-budget rule covers, passing or not: the noise all its '
           "aggressors couple onto it (summed, worst case in phase), the rule's budget, and the model that "
           "gave the number: the lumped capacitive model, its small-R limit, or near-/far-end "
           "transmission-line crosstalk where a run is electrically long.</p>\n",
           '<table class="grid">\n<thead><tr><th>Rule</th><th>Victim</th><th class="r">Noise</th>'
           '<th class="r">Budget</th><th>Model</th><th>Worst aggressor</th><th>Verdict</th></tr></thead>\n'
           "<tbody>\n"]
    for v in rows:
        more = f" and {v.aggressors - 1} more" if v.aggressors > 1 else ""
        verdict = "within budget" if v.passes else "over budget"
        out.append(f"<tr><td>{_e(v.rule)}</td><td class=\"nets\">{_e(v.victim)}</td>"
                   f'<td class="r">{_e(_num(v.noise_mv, 3))} mV</td><td class="r">{_e(_num(v.budget_mv, 3))} mV</td>'
                   f"<td>{_e(v.model + (f'; {v.unfiltered_mv:.3g} mV unfiltered' if v.unfiltered_mv >= 0 else ''))}"
                   f"</td><td>{_e(v.worst_aggressor + more)}</td><td>{verdict}</td></tr>\n")
    out.append("</tbody>\n</table>\n</section>\n")
    return "".join(out)


def _net_pairs(result: Result) -> str:
    pairs = worst_net_pairs(result)
    total = len(result.analysis.net_pairs)
    out = ['<section id="pairs">\n<h2>Worst coupled net pairs</h2>\n']
    if not pairs:
        out.append("<p>No net pairs couple on this board within the search distances.</p>\n</section>\n")
        return "".join(out)
    out.append(f'<p class="fine">The {len(pairs)} worst of {total} coupled net pairs (every net pair, '
               "not only those a rule covers), ranked by the larger of the two coupled-noise estimates "
               "(lumped model, one net as aggressor onto the other). Pairs whose net classes lack the "
               "model's inputs have no noise estimate and follow, ranked by mutual capacitance C12. "
               "Bars are scaled to the largest value shown.</p>\n")
    max_noise = max((p["noise_mv"] for p in pairs if p["noise_mv"] is not None), default=0.0)
    max_c12 = max(p["c12_pf"] for p in pairs)
    out.append('<table class="grid pairs">\n<thead><tr><th class="r">Rank</th>'
               "<th>Aggressor \u2192 victim</th><th>Coupled on</th><th>Noise on victim</th>"
               "<th>C12</th></tr></thead>\n<tbody>\n")
    for rank, p in enumerate(pairs, 1):
        if p["noise_mv"] is None:
            noise = '<span class="na">no estimate</span>'
        else:
            label = f"{_num(p['noise_mv'], 3)} mV"
            frac = p["noise_mv"] / max_noise if max_noise > 0 else 0.0
            noise = f'{_bar(frac, "noise", label)} <span class="val">{_e(label)}</span>'
            if p["reverse_mv"] is not None:
                noise += f'<br><span class="fine">other way: {_e(_num(p["reverse_mv"], 3))} mV</span>'
        c12_label = f"{_num(p['c12_pf'], 3)} pF"
        c12 = (f'{_bar(p["c12_pf"] / max_c12 if max_c12 > 0 else 0.0, "c12", c12_label)} '
               f'<span class="val">{_e(c12_label)}</span>')
        out.append(f'<tr><td class="r">{rank}</td><td class="nets">{_e(p["aggressor"])} \u2192 '
                   f'{_e(p["victim"])}</td><td>{_e(", ".join(p["layers"]))}</td>'
                   f'<td class="barcell">{noise}</td><td class="barcell">{c12}</td></tr>\n')
    out.append("</tbody>\n</table>\n</section>\n")
    return "".join(out)


# --------------------------------------------------------------------------
# pictures and finding cards
# --------------------------------------------------------------------------


def _overlay(ctx: _Context) -> str:
    return ('<section id="overlay">\n<h2>Board overlay</h2>\n'
            '<p class="fine">The layers the findings are on, seen from the top, with each finding '
            'marked by its number.</p>\n'
            f'<figure class="overlay">{ctx.svg()}</figure>\n</section>\n')


def picture_view(bbox: tuple[float, float, float, float]) -> tuple[float, float, float, float]:
    """The crop (mm) that shows a finding: its box grown on every side."""
    x0, y0, x1, y1 = bbox
    margin = max(PICTURE_MARGIN_MM, PICTURE_MARGIN_SHARE * max(x1 - x0, y1 - y0))
    return (x0 - margin, y0 - margin, x1 + margin, y1 + margin)


def _cards(ctx: _Context) -> str:
    findings = ctx.result.findings
    out = ['<section id="findings">\n<h2>Findings</h2>\n']
    if not findings:
        out.append("<p>No findings.</p>\n</section>\n")
        return "".join(out)
    shown = [f for f in findings if f.id in ctx.carded]
    if len(shown) < len(findings):
        out.append(f'<p class="fine">Cards with a close-up for the {len(shown)} worst findings (worst first); '
                   f'the other {len(findings) - len(shown)} are in the table <a href="#index">Findings at a '
                   "glance</a> and its groupings (<code>--cards all</code> gives every finding a card).</p>\n")
    for f in shown:
        out.append(_card(ctx, f))
    out.append("</section>\n")
    return "".join(out)


def _card(ctx: _Context, f) -> str:
    css, words = ctx.status(f)
    rows = [
        ("Nets", f"{f.aggressor} (aggressor) \u2192 {f.victim} (victim)"),
        ("Layers", "/".join(f.layers)),
        ("Value", _quantity(f.value, f.unit)),
        ("Limit", _limit(f)),
        ("Over the limit", f"{_num(f.excess, 3)}\u00d7"),
        ("Worst spot", f"x {_mm(f.at[0])}, y {_mm(f.at[1])} mm"),
        ("Extent", f"x {_mm(f.bbox[0])}\u2013{_mm(f.bbox[2])}, y {_mm(f.bbox[1])}\u2013{_mm(f.bbox[3])} mm"),
    ]
    for label, value, unit in (("Coupled length", f.length_mm, "mm"), ("Overlap area", f.area_mm2, "mm\u00b2"),
                               ("C12", f.c12_pf, "pF"), ("Coupled noise", f.noise_mv, "mV")):
        if value is not None:
            rows.append((label, f"{_num(value)}\u00a0{unit}"))
    base = ctx.result.review.status.get(f.id)
    if base:
        rows.append(("Against baseline", base))
    if f.coupling_path:
        rows.append(("Shielding and relays", f.coupling_path))
    rows.append(("Status", words))
    rows.append(("Finding id", f.id))
    table = "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>\n" for k, v in rows)
    waiver = ""
    w = ctx.waived.get(f.id)
    if w is not None:
        waiver = ('<div class="waiver"><p class="wtitle">Waived</p><table class="kv compact">\n'
                  + "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>\n" for k, v in _waiver_rows(w))
                  + "</table></div>\n")
    view = picture_view(f.bbox)
    caption = ""
    if max(view[2] - view[0], view[3] - view[1]) > CLOSE_UP_MAX_MM:
        # a finding spread over much of the board (a net pair coupled in many places): the close-up
        # frames its worst spot; the overview shows the rest
        half = CLOSE_UP_MAX_MM / 2
        view = (f.at[0] - half, f.at[1] - half, f.at[0] + half, f.at[1] + half)
        caption = (f'<figcaption class="fine">The worst spot, {CLOSE_UP_MAX_MM:g} mm across; the finding '
                   "extends beyond it (see Extent and the board overlay).</figcaption>")
    # the finding's own layers (a neighbouring layer's copper would only hide what couples)
    picture = ctx.svg(view=view, only=f.id, layers=f.layers, width_px=480, compact_legend=True)
    return (
        f'<article class="card card-{css[3:]}" id="f-{_e(f.id)}" data-finding-id="{_e(f.id)}">\n'
        f'<header><span class="num">{_e(ctx.number(f.id))}</span> '
        f'<span class="sev sev-{_e(f.severity)}">{_e(f.severity)}</span> '
        f'<span class="rule">{_e(f.rule)}</span> <span class="kind">({_e(f.kind)})</span>'
        f'<span class="status {css}">{_e(words)}</span></header>\n'
        f'<p class="message">{_e(f.message)}</p>\n'
        '<div class="card-body">\n'
        f'<div class="facts"><table class="kv compact">\n{table}</table>\n{waiver}</div>\n'
        f'<figure class="pic">{picture}{caption}</figure>\n'
        "</div>\n</article>\n"
    )


def _date(d) -> str:
    return d.isoformat() if d is not None else "none"


def _waiver_rows(w) -> list[tuple[str, str]]:
    return [
        ("Reason", w.reason),
        ("Author", w.author),
        ("Date", _date(w.date)),
        ("Expires", _date(w.expires)),
        ("Written at", w.source or "not recorded"),
    ]


def _waiver_target(w) -> str:
    return w.describe()


def _waiver_table(ctx: _Context, waivers: Iterable, date_label: str, covers_label: str | None) -> str:
    """Waivers that were not applied; ``covers_label`` heads a column of
    the findings each one matches (``None``: no such column)."""
    covers = ctx.result.review.covers
    head = f"<th>{_e(covers_label)}</th>" if covers_label else ""
    out = ['<table class="grid waivers">\n<thead><tr><th>Matches</th>' + head + '<th>Reason</th><th>Author</th>'
           f"<th>Date</th><th>{_e(date_label)}</th><th>Written at</th></tr></thead>\n<tbody>\n"]
    for w in waivers:
        cell = ""
        if covers_label:
            ids = covers.get(w, [])
            cell = "<td>" + (", ".join(f'<a href="#f-{_e(i)}">{_e(ctx.number(i))}</a>' for i in ids)
                             or "none") + "</td>"
        out.append(f"<tr><td>{_e(_waiver_target(w))}</td>{cell}<td>{_e(w.reason)}</td><td>{_e(w.author)}</td>"
                   f"<td>{_e(_date(w.date))}</td><td>{_e(_date(w.expires))}</td><td>{_e(w.source or '')}</td></tr>\n")
    out.append("</tbody>\n</table>\n")
    return "".join(out)


def _waivers(ctx: _Context) -> str:
    review = ctx.result.review
    out = ['<section id="waivers">\n<h2>Waivers</h2>\n']
    if review.waiver_file is None and not (review.waived or review.expired or review.unused):
        out.append("<p>No waiver file was given: no finding is waived.</p>\n</section>\n")
        return "".join(out)
    if review.waiver_file:
        out.append(f'<p>Waiver file: <span class="path">{_e(review.waiver_file)}</span></p>\n')
    applied = [f for f in ctx.result.findings if f.id in review.waived]
    out.append(f"<h3>Applied ({len(applied)})</h3>\n")
    if applied:
        out.append('<table class="grid waivers">\n<thead><tr><th>Finding</th><th>Rule</th>'
                   "<th>Nets</th><th>Reason</th><th>Author</th><th>Date</th><th>Expires</th>"
                   "<th>Written at</th></tr></thead>\n<tbody>\n")
        for f in applied:
            w = review.waived[f.id]
            out.append(f'<tr><td><a href="#f-{_e(f.id)}">{_e(ctx.number(f.id))}</a></td><td>{_e(f.rule)}</td>'
                       f"<td>{_e(f.aggressor)} \u2192 {_e(f.victim)}</td><td>{_e(w.reason)}</td>"
                       f"<td>{_e(w.author)}</td><td>{_e(_date(w.date))}</td><td>{_e(_date(w.expires))}</td>"
                       f"<td>{_e(w.source or '')}</td></tr>\n")
        out.append("</tbody>\n</table>\n")
    else:
        out.append("<p>None.</p>\n")
    out.append(f'<h3>Expired \u2014 not applied ({len(review.expired)})</h3>\n')
    out.append(_waiver_table(ctx, review.expired, "Expired", "Would cover") if review.expired else "<p>None.</p>\n")
    out.append(f'<h3>Unused \u2014 matched no finding ({len(review.unused)})</h3>\n')
    out.append(_waiver_table(ctx, review.unused, "Expires", None) if review.unused else "<p>None.</p>\n")
    out.append("</section>\n")
    return "".join(out)


def _baseline(ctx: _Context) -> str:
    review = ctx.result.review
    out = ['<section id="baseline">\n<h2>Against the baseline</h2>\n']
    if not review.baseline:
        out.append("<p>No baseline was given: findings are not compared with an earlier report.</p>\n"
                   "</section>\n")
        return "".join(out)
    findings = ctx.result.findings
    new = [f for f in findings if review.status.get(f.id) == "new"]
    same = [f for f in findings if review.status.get(f.id) == "unchanged"]
    out.append(f'<p>Baseline: <span class="path">{_e(review.baseline)}</span> \u2014 '
               f"{len(new)} new, {len(same)} unchanged, {len(review.fixed)} fixed.</p>\n")
    for title, group in (("New", new), ("Unchanged", same)):
        out.append(f"<h3>{title} ({len(group)})</h3>\n")
        if not group:
            out.append("<p>None.</p>\n")
            continue
        out.append(" ".join(f'<a class="chip" href="#f-{_e(f.id)}">{_e(ctx.number(f.id))} {_e(f.rule)}: '
                            f"{_e(f.aggressor)} \u2192 {_e(f.victim)}</a>" for f in group) + "\n")
    out.append(f"<h3>Fixed \u2014 in the baseline, gone now ({len(review.fixed)})</h3>\n")
    if not review.fixed:
        out.append("<p>None.</p>\n")
    else:
        out.append('<table class="grid fixed">\n<thead><tr><th>Id</th><th>Severity</th><th>Rule</th>'
                   "<th>Aggressor \u2192 victim</th><th>Layers</th><th>Message</th></tr></thead>\n<tbody>\n")
        for d in review.fixed:
            d = d if isinstance(d, dict) else {}
            layers = d.get("layers") or []
            layers = "/".join(str(x) for x in layers) if isinstance(layers, list) else str(layers)
            out.append(f'<tr><td class="hash">{_e(d.get("id", ""))}</td><td>{_e(d.get("severity", ""))}</td>'
                       f'<td>{_e(d.get("rule", ""))}</td><td>{_e(d.get("aggressor", ""))} \u2192 '
                       f'{_e(d.get("victim", ""))}</td><td>{_e(layers)}</td>'
                       f'<td>{_e(d.get("message", ""))}</td></tr>\n')
        out.append("</tbody>\n</table>\n")
    out.append("</section>\n")
    return "".join(out)


def _notes(result: Result) -> str:
    notes = sorted(set(result.notes))
    body = ("<ul>\n" + "".join(f"<li>{_e(n)}</li>\n" for n in notes) + "</ul>\n") if notes \
        else "<p>The analysis raised no notes.</p>\n"
    return f'<section id="notes">\n<h2>Analysis notes</h2>\n{body}</section>\n'


def _caution() -> str:
    return ('<section id="caution" class="caution">\n<h2>Limits of this report</h2>\n'
            f"<p>{_e(CAUTION)}</p>\n"
            "<p>A signature below records that the reviewer has examined this report for the board "
            "and the input files identified above by their SHA-256.</p>\n</section>\n")


def _signature() -> str:
    return ('<section id="signoff" class="signature">\n<h2>Review sign-off</h2>\n'
            '<table class="sign">\n'
            '<tr><th>Reviewer (name)</th><td></td></tr>\n'
            '<tr><th>Signature</th><td></td></tr>\n'
            '<tr><th>Date</th><td></td></tr>\n'
            '<tr class="comments"><th>Comments</th><td></td></tr>\n'
            "</table>\n</section>\n")


CSS = """\
:root {
  --ink: #1f2430; --muted: #5d6575; --line: #cdd2db; --soft: #f3f5f8;
  --bad: #9e2a1f; --bad-bg: #fbeae7; --good: #236b3b; --good-bg: #e7f3ea;
  --hold: #7b5900; --hold-bg: #fdf3d8; --noise: #33617d; --c12: #8c7a4a;
}
* { box-sizing: border-box; }
html { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
body { margin: 0 auto; padding: 16px 20px 40px; max-width: 1100px; color: var(--ink);
  font: 14px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", "DejaVu Sans", sans-serif; }
h1 { font-size: 1.7em; margin: 0.1em 0 0.2em; }
h2 { font-size: 1.25em; margin: 1.6em 0 0.5em; padding-bottom: 0.2em; border-bottom: 2px solid var(--ink); }
h3 { font-size: 1.02em; margin: 1.1em 0 0.4em; }
code, .hash, .path { font-family: ui-monospace, "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 0.92em; }
.hash, .path { overflow-wrap: anywhere; }
td { overflow-wrap: break-word; }
.kicker { margin: 0; text-transform: uppercase; letter-spacing: 0.08em; font-size: 0.8em; color: var(--muted); }
.sub, .fine { color: var(--muted); font-size: 0.88em; }
table { border-collapse: collapse; width: 100%; margin: 0.3em 0 0.8em; }
th, td { text-align: left; vertical-align: top; padding: 3px 6px; }
.grid th, .grid td { border-bottom: 1px solid var(--line); }
.grid thead th { background: var(--soft); border-bottom: 1px solid var(--ink); font-weight: 600; }
.grid tfoot th, .grid tfoot td { border-top: 1px solid var(--ink); font-weight: 600; }
.kv th { width: 13em; color: var(--muted); font-weight: 600; }
.kv.compact th { width: 9.5em; }
.r { text-align: right; }
tr.clean td { color: var(--muted); }
tr.dielectric td { background: var(--soft); color: var(--muted); }
.banner { margin: 1em 0; padding: 10px 16px; border: 2px solid; border-radius: 4px; }
.v-pass { border-color: var(--good); background: var(--good-bg); }
.v-waived { border-color: var(--hold); background: var(--hold-bg); }
.v-fail { border-color: var(--bad); background: var(--bad-bg); }
.verdict-word { margin: 0; font-size: 1.6em; font-weight: 700; letter-spacing: 0.04em; }
.v-pass .verdict-word { color: var(--good); } .v-waived .verdict-word { color: var(--hold); }
.v-fail .verdict-word { color: var(--bad); }
.verdict-detail, .policy { margin: 0.2em 0 0; }
.counts strong { font-size: 1.1em; }
.sev { display: inline-block; white-space: nowrap; padding: 0 6px; border-radius: 3px; font-size: 0.85em;
  font-weight: 600; border: 1px solid; }
.sev-error { color: var(--bad); border-color: var(--bad); background: var(--bad-bg); }
.sev-warning { color: var(--hold); border-color: var(--hold); background: var(--hold-bg); }
.st-fail { color: var(--bad); font-weight: 600; } .st-waived { color: var(--hold); font-weight: 600; }
.st-open { color: var(--muted); }
a { color: var(--noise); }
.barcell { white-space: nowrap; }
svg.bar { vertical-align: middle; }
svg.bar .track { fill: var(--soft); } svg.bar .noise { fill: var(--noise); } svg.bar .c12 { fill: var(--c12); }
.na { color: var(--muted); font-style: italic; }
figure { margin: 0; }
figure svg { display: block; max-width: 100%; height: auto; }
figure.overlay { border: 1px solid var(--line); padding: 4px; }
.card { border: 1px solid var(--line); border-left: 5px solid var(--line); border-radius: 4px; padding: 8px 12px;
  margin: 0 0 12px; break-inside: avoid; page-break-inside: avoid; }
.card.card-fail { border-left-color: var(--bad); } .card.card-waived { border-left-color: var(--hold); }
.card header { display: flex; flex-wrap: wrap; gap: 6px; align-items: baseline; }
.card .num { font-weight: 700; font-size: 1.15em; }
.card .rule { font-weight: 600; } .card .kind { color: var(--muted); }
.card .status { margin-left: auto; }
.card .message { margin: 0.3em 0 0.5em; }
.card-body { display: grid; grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap: 12px; align-items: start; }
.card .pic svg { max-height: 90mm; margin: 0 auto; }
.waiver { border: 1px solid var(--hold); background: var(--hold-bg); padding: 4px 8px; border-radius: 3px; }
.wtitle { margin: 0; font-weight: 700; color: var(--hold); }
.chip { display: inline-block; margin: 2px 4px 2px 0; padding: 1px 6px; border: 1px solid var(--line);
  border-radius: 10px; text-decoration: none; color: var(--ink); }
.caution { border-top: 1px solid var(--line); }
.signature { break-inside: avoid; page-break-inside: avoid; }
table.sign th { width: 11em; }
table.sign td { border-bottom: 1px solid var(--ink); height: 2.4em; }
table.sign tr.comments td { height: 7em; }
@page { margin: 14mm 12mm 16mm 12mm;
  @bottom-right { content: "page " counter(page) " of " counter(pages); font-size: 8pt; color: #5d6575; } }
@media (max-width: 700px) { .card-body { grid-template-columns: minmax(0, 1fr); } }
@media print {
  body { max-width: none; padding: 0; font-size: 9.5pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  h3 { break-after: avoid; page-break-after: avoid; }
  tr, .banner, figure.overlay { break-inside: avoid; page-break-inside: avoid; }
  thead { display: table-header-group; }
  a { color: inherit; text-decoration: none; }
  #findings { break-before: page; page-break-before: always; }
  figure.overlay svg { max-height: 230mm; }
  .card .pic svg { max-height: 80mm; }
}
"""
