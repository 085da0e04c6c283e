"""The HTML sign-off report: content, escaping, determinism, and the page as
a real browser (headless Chromium) loads, screenshots and prints it."""

from __future__ import annotations

import datetime as dt
import hashlib
import html
import json
import os
import re
import shutil
import signal
import struct
import subprocess
import textwrap
import zlib
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from checker.cli import demo_board_path
from checker.errors import InputError, UsageError
from checker.readers.board_json import read_board_dict
from checker.report import json_report
from checker.report.html import (
    CLOSE_UP_MAX_MM,
    TOP_PAIRS,
    generated_now,
    picture_view,
    render_html,
    worst_net_pairs,
)
from checker.review import Review
from checker.ruleset import default_ruleset, load_ruleset
from checker.runner import check_board
from checker.waivers import Waiver

ARTIFACTS = Path(__file__).parent / "artifacts"
FIXED_DATE = "2026-01-15T09:30:00Z"


# --------------------------------------------------------------------------
# helpers


class Page(HTMLParser):
    """Every element with its attributes, the text of every element that has
    an ``id``, and the text of each finding card."""

    VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.elements: list[tuple[str, dict[str, str | None]]] = []
        self.text_by_id: dict[str, str] = {}
        self.cards: list[tuple[str, dict[str, str | None], list[str]]] = []  # (finding id, attrs, texts)
        self._open: list[tuple[str, str | None, int | None]] = []  # (tag, id, card index)
        self._buffers: dict[str, list[str]] = {}
        self.feed(text)
        self.close()

    def _gap(self) -> None:
        """Element boundaries separate words (table cells, badges)."""
        self.handle_data(" ")

    def handle_starttag(self, tag, attrs):
        self._gap()
        a = dict(attrs)
        self.elements.append((tag, a))
        card = None
        if "data-finding-id" in a:
            self.cards.append((a["data-finding-id"], a, []))
            card = len(self.cards) - 1
        if tag in self.VOID:
            return
        if a.get("id") is not None:
            self._buffers.setdefault(a["id"], [])
        self._open.append((tag, a.get("id"), card))

    def handle_startendtag(self, tag, attrs):
        self.elements.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        self._gap()
        while self._open:
            t, ident, _ = self._open.pop()
            if ident is not None:
                self.text_by_id[ident] = " ".join("".join(self._buffers.pop(ident, [])).split())
            if t == tag:
                break

    def handle_data(self, data):
        for _, ident, card in self._open:
            if ident is not None and ident in self._buffers:
                self._buffers[ident].append(data)
            if card is not None:
                self.cards[card][2].append(data)

    def card_text(self, finding_id: str) -> str:
        """The card's text with white space collapsed."""
        texts = next(t for fid, _, t in self.cards if fid == finding_id)
        return " ".join("".join(texts).split())


def demo_html(result, **kwargs) -> str:
    return render_html(result, inputs=[str(demo_board_path())], generated=FIXED_DATE, **kwargs)


STACKUP = [
    {"copper": "<svg onload=alert(1)>", "role": "signal", "thickness": 0.035},
    {"dielectric": "<b>pp</b>", "thickness": 0.2, "er": 4.2},
    {"copper": "IN1", "role": "signal", "thickness": 0.035},
    {"dielectric": "pp2", "thickness": 0.2, "er": 4.2},
    {"copper": "GND", "role": "plane", "thickness": 0.035},
]

HOSTILE_RULES = textwrap.dedent("""\
    version: 1
    net_classes:
      fast:
        nets: ["<script>"]
        swing: 3.3 V
        frequency: 10 MHz
      quiet:
        nets: ['A&B"']
        resistance: 10 kohm
        node_capacitance: 10 pF
    rules:
      - name: cross
        kind: crossing-angle
        aggressor: fast
        victim: quiet
        description: "<img src=x onerror=alert(1)>"
        min_angle: 60 deg
        max_length: 1 mm
      - name: noise
        kind: noise-budget
        aggressor: fast
        victim: quiet
        max_noise: 1 mV
    """)


def hostile_result(tmp_path):
    """A board whose names, rule text, waiver and baseline all carry markup."""
    board = read_board_dict({
        "format": "couplint-board", "version": 1, "name": "<script>alert('board')</script>",
        "stackup": STACKUP,
        "nets": [{"name": "<script>"}, {"name": 'A&B"'}],
        "tracks": [
            {"layer": "<svg onload=alert(1)>", "net": "<script>", "width": 0.15, "points": [[0, 0], [10, 0]]},
            {"layer": "IN1", "net": 'A&B"', "width": 0.15, "points": [[0, 0], [10, 0]]},
        ],
    }, "hostile.json")
    rules = tmp_path / "rules.yaml"
    rules.write_text(HOSTILE_RULES)
    result = check_board(board, load_ruleset(rules))
    assert len(result.findings) == 2
    first, second = result.findings
    hostile = Waiver(reason="<script>alert('waiver')</script>", author='"><svg onload=alert(2)>',
                     date=dt.date(2026, 1, 1), id=first.id, expires=dt.date(2027, 1, 1),
                     source="<i>w.yaml</i>:3")
    stale = Waiver(reason="<iframe src=x>", author="<u>", date=dt.date(2025, 1, 1), rule="cross",
                   nets=("<*", "A&*"), expires=dt.date(2025, 2, 1), source="w.yaml:9")
    result.review = Review(
        waived={first.id: hostile}, expired=[stale], unused=[stale], waiver_file="<w>.yaml",
        status={first.id: "unchanged", second.id: "new"},
        fixed=[{"id": "abcdefabcdef", "rule": "<x>", "severity": "error", "aggressor": "<script>",
                "victim": "<style>", "layers": ["<p onclick=x>"], "message": "</table><script>alert(3)</script>"}],
        baseline="<base>.json", covers={stale: [first.id]})
    return result


def assert_inert(page: Page) -> None:
    """No element that runs code, loads anything or styles from outside."""
    for tag, attrs in page.elements:
        assert tag not in ("script", "iframe", "object", "embed", "img", "link", "base", "form", "input"), tag
        for name, value in attrs.items():
            assert not name.startswith("on"), (tag, name)
            if name in ("src", "href", "xlink:href", "action", "formaction", "srcset", "poster", "data"):
                assert (value or "").startswith("#"), (tag, name, value)


# --------------------------------------------------------------------------
# content


def test_every_finding_is_a_card_with_its_facts(demo):
    page = Page(demo_html(demo))
    ids = [f.id for f in demo.findings]
    assert len(ids) >= 5  # the demo fails every rule kind at least once
    assert [fid for fid, _, _ in page.cards] == ids  # same order, each exactly once
    assert page.text_by_id["finding-count"] == str(len(demo.findings))
    from checker.report.svg import finding_number

    numbers = finding_number(demo)
    failing = {f.id for f in demo.failing()}
    for f in demo.findings:
        text = page.card_text(f.id)
        assert text.startswith(f"#{numbers[f.id]} {f.severity} {f.rule} ({f.kind})"), text[:80]
        assert " ".join(f.message.split()) in text
        assert f"Finding id {f.id}" in text
        assert f"{f.aggressor} (aggressor) \u2192 {f.victim} (victim)" in text
        assert "/".join(f.layers) in text
        assert ("fails" in text) == (f.id in failing)
    # the index links every finding to its card
    hrefs = {a.get("href") for tag, a in page.elements if tag == "a"}
    assert {f"#f-{i}" for i in ids} <= hrefs


def test_value_limit_and_direction(demo):
    page = Page(demo_html(demo))
    noise = next(f for f in demo.findings if f.unit == "mV")
    spacing = next(f for f in demo.findings if f.kind == "spacing-ratio")
    # the worst noise against a 10 mV ceiling, to 4 significant digits; a 2.0 centre/width
    # ratio against a floor of 3
    assert f"Value {noise.value:.4g} mV" in page.card_text(noise.id)
    assert "Limit at most 10 mV" in page.card_text(noise.id)
    assert "Value 2 (centre/width)" in page.card_text(spacing.id)
    assert "Limit at least 3 (centre/width)" in page.card_text(spacing.id)


def test_identity_hashes_and_stackup(demo, tmp_path):
    path = demo_board_path()
    rules = tmp_path / "rules copy.yaml"
    rules.write_bytes(b"x" * (3 << 20))  # bigger than one hashing chunk
    text = render_html(demo, inputs=[str(path), str(rules), str(path)], generated=FIXED_DATE)
    assert hashlib.sha256(path.read_bytes()).hexdigest() in text
    assert hashlib.sha256(rules.read_bytes()).hexdigest() in text
    assert text.count(hashlib.sha256(path.read_bytes()).hexdigest()) == 1  # listed once
    assert demo.analysis.ruleset.sha256 in text
    import checker

    assert f"couplint {checker.__version__}" in text
    Page(text)
    stack = [" ".join(t.split()) for t in re.findall(r'<tr class="(?:copper|dielectric)">(.*?)</tr>', text)]
    assert len(stack) == 7  # 4 copper layers, 3 dielectrics, top to bottom
    assert re.sub("<[^>]+>", " ", stack[1]).split() == ["prepreg-1", "dielectric", "0.2", "mm", "4.2", "0.02"]
    with pytest.raises(InputError, match="no-such-file"):
        render_html(demo, inputs=[str(tmp_path / "no-such-file.json")], generated=FIXED_DATE)


def test_verdict_banner_and_waivers(demo):
    assert "FAIL" in Page(demo_html(demo)).text_by_id["verdict"]
    # every finding waived: the board passes, but only with waivers, and each card says why
    waived = Review(waived={f.id: Waiver(reason=f"accepted {k}", author="R. Eviewer", date=dt.date(2026, 1, 2),
                                         id=f.id, expires=dt.date(2026, 12, 31), source=f"w.yaml:{k}")
                            for k, f in enumerate(demo.findings)}, waiver_file="w.yaml")
    old = demo.review
    try:
        demo.review = waived
        page = Page(demo_html(demo))
        assert page.text_by_id["verdict"].split()[:3] == ["PASS", "WITH", "WAIVERS"]
        for k, f in enumerate(demo.findings):
            card = page.card_text(f.id)
            assert f"Reason accepted {k} Author R. Eviewer Date 2026-01-02 Expires 2026-12-31" in card
        demo.fail_on = "error"  # the demo has warnings; with only its errors waived it passes
        demo.review = Review(waived={f.id: waived.waived[f.id] for f in demo.findings if f.severity == "error"})
        banner = " ".join(Page(demo_html(demo)).text_by_id["verdict"].split())
        assert banner.startswith("PASS WITH WAIVERS") and "--fail-on error" in banner
    finally:
        demo.review, demo.fail_on = old, "warning"


def test_clean_board_passes(tmp_path):
    # one clock, far from everything: no coupled pairs, no findings
    board = read_board_dict({
        "format": "couplint-board", "version": 1, "name": "quiet", "stackup": STACKUP[2:],
        "nets": [{"name": "CLK"}], "tracks": [{"layer": "IN1", "net": "CLK", "width": 0.2, "points": [[0, 0], [5, 0]]}],
    }, "quiet.json")
    result = check_board(board, default_ruleset())
    assert result.findings == []
    page = Page(render_html(result, inputs=[], generated=FIXED_DATE))
    assert page.cards == []
    assert page.text_by_id["finding-count"] == "0"
    assert page.text_by_id["verdict"].startswith("PASS No findings.")
    assert "No net pairs couple" in page.text_by_id["pairs"]


def test_markup_in_every_input_stays_text(tmp_path):
    result = hostile_result(tmp_path)
    text = render_html(result, inputs=[], generated="<script>alert('date')</script>")
    page = Page(text)
    assert_inert(page)
    assert [fid for fid, _, _ in page.cards] == [f.id for f in result.findings]
    visible = " ".join("".join(t for _, _, texts in page.cards for t in texts).split())
    # the names arrive as text, exactly as written
    assert "<script> (aggressor) \u2192 A&B\" (victim)" in visible
    assert "Reason <script>alert('waiver')</script> Author \"><svg onload=alert(2)>" in visible
    assert "&lt;script&gt;" in text and "A&amp;B&quot;" in text
    for raw in ("<script>", "<svg onload", "<img src", "<iframe", "</table><script>", "<p onclick"):
        assert raw not in text.replace("<svg xmlns", "")


def test_ids_are_unique_and_pictures_are_cropped_to_their_finding(demo):
    page = Page(demo_html(demo))
    ids = [a["id"] for _, a in page.elements if a.get("id")]
    assert len(ids) == len(set(ids)), [i for i in ids if ids.count(i) > 1][:5]
    text = demo_html(demo)
    overlay, cards = text.split('<section id="findings">', 1)
    for f in demo.findings:
        start = cards.index(f'data-finding-id="{f.id}"')
        card = cards[start:cards.index("</article>", start)]
        svg = re.search(r'<svg xmlns[^>]*viewBox="([^"]+)"', card)
        assert svg, f.id
        x, y, w, h = map(float, svg.group(1).split())
        vx0, vy0, vx1, vy1 = picture_view(f.bbox)
        if max(vx1 - vx0, vy1 - vy0) > CLOSE_UP_MAX_MM:
            # a finding wider than a close-up: a square of that size centred on its worst spot, said so
            vx0, vy0 = f.at[0] - CLOSE_UP_MAX_MM / 2, f.at[1] - CLOSE_UP_MAX_MM / 2
            vx1, vy1 = f.at[0] + CLOSE_UP_MAX_MM / 2, f.at[1] + CLOSE_UP_MAX_MM / 2
            assert f"The worst spot, {CLOSE_UP_MAX_MM:g} mm across" in card
        else:
            assert vx0 <= f.bbox[0] - 2 and vx1 >= f.bbox[2] + 2
            assert "The worst spot" not in card
        # the picture frames the view (y is flipped, so compare extents)
        assert x <= vx0 + 1e-3 and x + w >= vx1 - 1e-3 and h >= vy1 - vy0 - 1e-3
        # only this finding is called out in its own picture
        called = set(re.findall(r'id="p\d+-f-([0-9a-f]{12})"', card))
        assert called == {f.id}
    # the overlay calls out every finding
    assert set(re.findall(r'id="p1-f-([0-9a-f]{12})"', overlay)) == {f.id for f in demo.findings}


def test_same_input_same_bytes(demo, monkeypatch):
    assert demo_html(demo) == demo_html(demo)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "86400")
    assert generated_now() == "1970-01-02T00:00:00Z"
    a = render_html(demo, inputs=[str(demo_board_path())])
    b = render_html(demo, inputs=[str(demo_board_path())])
    assert a == b and "1970-01-02T00:00:00Z" in a
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    with pytest.raises(UsageError, match="SOURCE_DATE_EPOCH"):
        generated_now()
    monkeypatch.delenv("SOURCE_DATE_EPOCH")
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", generated_now())


def test_page_is_self_contained(demo):
    text = demo_html(demo)
    assert_inert(Page(text))
    assert "Content-Security-Policy" in text and "default-src 'none'" in text
    assert "@import" not in text and not re.search(r"url\(\s*['\"]?(?!#)", text)
    assert "http://" not in text.replace('xmlns="http://www.w3.org/2000/svg"', "")
    assert "https://" not in text
    # print rules: margins, no fixed page size, cards kept whole
    assert "@page" in text and not re.search(r"@page[^{]*\{[^}]*(?<![\w-])size\s*:", text)
    assert re.search(r"\.card\s*\{[^}]*break-inside:\s*avoid", text)
    for section in ("verdict", "identity", "summary", "pairs", "overlay", "findings", "waivers", "baseline",
                    "notes", "caution", "signoff"):
        assert f'id="{section}"' in text, section
    from checker.report import CAUTION

    assert html.escape(CAUTION) in text


def test_worst_pairs_ranked_noise_then_c12(tmp_path):
    # 8 clocks, 8 sensitive nets and 8 unclassed nets side by side on TOP,
    # 0.4 mm apart: every neighbour within the 1 mm edge search couples, so
    # there are more than 20 net pairs and some have no noise estimate
    names = [f"{kind}{i}" for i in range(8) for kind in ("CLK", "SENSE", "X")]
    tracks = [{"layer": "TOP", "net": n, "width": 0.15, "points": [[0, 0.4 * k], [10 + k, 0.4 * k]]}
              for k, n in enumerate(names)]
    stack = [{"copper": "TOP", "role": "signal", "thickness": 0.035},
             {"dielectric": "d", "thickness": 0.2, "er": 4.2},
             {"copper": "GND", "role": "plane", "thickness": 0.035}]
    board = read_board_dict({"format": "couplint-board", "version": 1, "name": "many", "stackup": stack,
                             "nets": [{"name": n} for n in names], "tracks": tracks}, "many.json")
    result = check_board(board, default_ruleset())
    total = len(result.analysis.net_pairs)
    assert total > TOP_PAIRS
    pairs = worst_net_pairs(result)
    assert len(pairs) == TOP_PAIRS
    with_noise = [p for p in pairs if p["noise_mv"] is not None]
    without = pairs[len(with_noise):]
    assert with_noise and without and all(p["noise_mv"] is None for p in without)
    assert [p["noise_mv"] for p in with_noise] == sorted((p["noise_mv"] for p in with_noise), reverse=True)
    assert [p["c12_pf"] for p in without] == sorted((p["c12_pf"] for p in without), reverse=True)
    # the same order as the JSON report's net pairs (worst noise, then C12)
    lines = [json.loads(x) for x in next(json_report.net_pair_lines(result))][:TOP_PAIRS]
    assert [set(x["nets"]) for x in lines] == [{p["aggressor"], p["victim"]} for p in pairs]
    for x, p in zip(lines, pairs):
        on_victim = x["noise_mv_on"][p["victim"]]
        assert (on_victim is None) == (p["noise_mv"] is None)
        if on_victim is not None:
            assert p["noise_mv"] == pytest.approx(on_victim, rel=1e-5)
            assert max(v for v in x["noise_mv_on"].values() if v is not None) == pytest.approx(on_victim, rel=1e-5)
    text = render_html(result, inputs=[], generated=FIXED_DATE)
    rows = re.findall(r'<section id="pairs">.*?</section>', text, re.S)[0].count("<tr><td class=\"r\">")
    assert rows == TOP_PAIRS
    assert f"The {TOP_PAIRS} worst of {total} coupled net pairs" in text
    # bars: the first noise bar is full length, every other one shorter or equal
    widths = [float(w) for w in re.findall(r'<rect class="noise" x="0" y="0" width="([\d.]+)"', text)]
    assert widths[0] == 160 and widths == sorted(widths, reverse=True)


# --------------------------------------------------------------------------
# in a real browser

CHROMIUM = shutil.which("chromium")
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--disable-dev-shm-usage"]
BROWSER_TIMEOUT_S = 120
#: a console message in Chromium's log on stderr: ``...:INFO:CONSOLE:12] "text", source: url (12)``
CONSOLE = re.compile(r":CONSOLE[:(]\d*\)?\]\s*(.*)")

needs_chromium = pytest.mark.skipif(
    CHROMIUM is None, reason="chromium is not installed (Debian package 'chromium'; .ci/run installs it)")


def chromium(tmp_path: Path, url: str, *flags: str) -> tuple[str, list[str]]:
    """Run headless Chromium once on ``url``: its stdout, and the console
    messages the page logged. Bounded by a timeout; the whole process group
    is killed if it hangs."""
    profile = tmp_path / f"profile-{len(list(tmp_path.glob('profile-*')))}"
    cmd = [CHROMIUM, *CHROMIUM_FLAGS, f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0",
           *flags, url]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, start_new_session=True,
                            text=True, errors="replace")
    try:
        out, err = proc.communicate(timeout=BROWSER_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        pytest.fail(f"chromium did not finish within {BROWSER_TIMEOUT_S} s: {' '.join(flags)}")
    assert proc.returncode == 0, err[-2000:]
    return out, [m.group(1) for m in CONSOLE.finditer(err)]


def read_png(path: Path) -> np.ndarray:
    """Pixels (rows, columns, channels) of an 8-bit, non-interlaced PNG."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, header = 8, [], None
    while pos < len(data):
        (n,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        pos += 12 + n
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat.append(body)
    width, height, depth, colour, _, _, interlace = header
    assert depth == 8 and interlace == 0 and colour in (0, 2, 4, 6), header
    bpp = {0: 1, 2: 3, 4: 2, 6: 4}[colour]
    raw = np.frombuffer(zlib.decompress(b"".join(idat)), np.uint8).reshape(height, width * bpp + 1)
    out = np.zeros((height, width * bpp), np.uint8)
    prev = np.zeros(width * bpp, np.int64)
    for y in range(height):
        kind, line = raw[y, 0], raw[y, 1:].astype(np.int64)
        if kind == 0:
            cur = line
        elif kind == 1:
            cur = np.cumsum(line.reshape(width, bpp), axis=0).reshape(-1) % 256
        elif kind == 2:
            cur = (line + prev) % 256
        else:  # average and Paeth depend on the byte just decoded: one at a time
            cur = np.array(_unfilter_sequential(int(kind), line.tolist(), prev.tolist(), bpp), np.int64)
        out[y] = cur
        prev = cur
    return out.reshape(height, width, bpp)


def _unfilter_sequential(kind: int, filt: list[int], up: list[int], bpp: int) -> list[int]:
    """One PNG row under the average (3) or Paeth (4) filter."""
    rec = [0] * len(filt)
    for i in range(bpp):  # no pixel to the left
        rec[i] = (filt[i] + (up[i] >> 1 if kind == 3 else up[i])) & 255
    if kind == 3:
        for i in range(bpp, len(filt)):
            rec[i] = (filt[i] + ((rec[i - bpp] + up[i]) >> 1)) & 255
        return rec
    for i in range(bpp, len(filt)):
        a, b, c = rec[i - bpp], up[i], up[i - bpp]
        pa, pb, pc = b - c, a - c, a + b - c - c
        pa, pb, pc = (pa if pa >= 0 else -pa), (pb if pb >= 0 else -pb), (pc if pc >= 0 else -pc)
        rec[i] = (filt[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
    return rec


@pytest.fixture(scope="module")
def demo_page(demo):
    ARTIFACTS.mkdir(exist_ok=True)
    path = ARTIFACTS / "signoff-demo.html"
    path.write_text(demo_html(demo), encoding="utf-8")
    return path


@needs_chromium
def test_console_capture_sees_page_errors(tmp_path):
    # the console check below is only worth something if errors do show up in the log
    probe = tmp_path / "probe.html"
    probe.write_text('<!DOCTYPE html><title>probe</title><script>console.error("probe-7301");</script>')
    _, console = chromium(tmp_path, probe.as_uri(), "--dump-dom")
    assert any("probe-7301" in m for m in console), console


@needs_chromium
def test_browser_loads_demo_report(demo, demo_page, tmp_path):
    dom, console = chromium(tmp_path, demo_page.as_uri(), "--dump-dom")
    assert console == []
    page = Page(dom)
    expected = json_report.build_report(demo)["summary"]["findings"]
    assert len(page.cards) == expected
    assert page.text_by_id["finding-count"] == str(expected)
    assert not any(tag == "script" for tag, _ in page.elements)


@needs_chromium
def test_browser_keeps_hostile_names_as_text(tmp_path):
    path = tmp_path / "hostile.html"
    result = hostile_result(tmp_path)
    path.write_text(render_html(result, inputs=[], generated=FIXED_DATE), encoding="utf-8")
    dom, console = chromium(tmp_path, path.as_uri(), "--dump-dom")
    assert console == []
    page = Page(dom)
    assert_inert(page)
    assert len(page.cards) == len(result.findings)


@needs_chromium
def test_browser_screenshot_is_not_blank(demo_page, tmp_path):
    shot = ARTIFACTS / "signoff-demo.png"
    shot.unlink(missing_ok=True)
    _, console = chromium(tmp_path, demo_page.as_uri(), f"--screenshot={shot}", "--window-size=1280,2000")
    assert console == []
    pixels = read_png(shot)[:, :, :3]
    assert pixels.shape[:2] == (2000, 1280)
    rgb = pixels.reshape(-1, 3).astype(np.int64)
    counts = np.bincount(rgb[:, 0] << 16 | rgb[:, 1] << 8 | rgb[:, 2])
    colours, background = np.count_nonzero(counts), counts.max() / counts.sum()
    assert colours > 50 and background < 0.95, (colours, background)
    # ink in the top half and in the bottom half (the page is laid out, not one block)
    for half in (pixels[:1000], pixels[1000:]):
        assert (half.min(axis=2) < 128).mean() > 0.002


@needs_chromium
def test_browser_prints_a_pdf(demo_page, tmp_path):
    pdf = ARTIFACTS / "signoff-demo.pdf"
    pdf.unlink(missing_ok=True)
    _, console = chromium(tmp_path, demo_page.as_uri(), f"--print-to-pdf={pdf}", "--no-pdf-header-footer")
    assert console == []
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-") and b"%%EOF" in data[-1024:]
    pages = len(re.findall(rb"/Type\s*/Page(?![s\w])", data))
    assert pages >= 3, pages  # identity and summary, the overlay, ten finding cards


def test_cards_for_the_worst_findings_and_every_finding_in_the_index(demo):
    text = render_html(demo, inputs=[], generated=FIXED_DATE, cards=3)
    findings = demo.findings
    carded = re.findall(r'<article class="card[^"]*" id="f-([0-9a-f]{12})"', text)
    assert carded == [f.id for f in findings[:3]]  # the worst three, in order
    rows = re.findall(r'<tr id="i-([0-9a-f]{12})">', text)
    assert rows == [f.id for f in findings]  # every finding has its row
    for f in findings[3:]:  # no link to a card that is not there
        assert f'href="#f-{f.id}"' not in text
    for f in findings:  # the groupings link every finding's row, once per grouping
        assert text.count(f'href="#i-{f.id}"') == 2
    assert f"Cards with a close-up for the 3 worst findings (worst first); the other {len(findings) - 3} are" in text
    everything = render_html(demo, inputs=[], generated=FIXED_DATE, cards=None)
    assert len(re.findall(r'<article class="card', everything)) == len(findings)
    assert "Cards with a close-up for the" not in everything
