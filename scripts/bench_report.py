"""The sign-off outputs of a board with thousands of findings: size and time
of the overview SVG, the HTML report and (``--pdf``) the PDF, with pictures
saved for a person to look at.

Builds the seeded, invented two-layer board of ``scripts/synth.py`` (the
same generator the speed benchmarks use) with the benchmark rule set, checks
it, then renders each output ``--runs`` times in this process and prints the
median time and the size. The pictures (the overview, the first card's
close-up, and with ``--pdf`` the PDF's first pages) are written to
``tests/artifacts/`` as PNG, with the HTML and SVG themselves.

    python scripts/bench_report.py                  # about 3 000 findings
    python scripts/bench_report.py --pieces 160000 --pdf

Floors (issue 12): the HTML report of a 3 000-finding board at most 5 MB and
10 s; the overview readable (clusters, not a carpet of callouts).
"""

from __future__ import annotations

import argparse
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "scripts"))

ARTIFACTS = ROOT / "tests" / "artifacts"


def timed(runs: int, make):
    times, value = [], None
    for _ in range(runs):
        start = time.perf_counter()
        value = make()
        times.append(time.perf_counter() - start)
    return value, statistics.median(times), min(times), max(times)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--pieces", type=int, default=180_000,
                    help="pieces per layer (default 180 000: 3 396 findings)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--pdf", action="store_true", help="also time the PDF (slow: minutes)")
    args = ap.parse_args(argv)

    import cairosvg
    from bench import BENCH_RULES
    from synth import make_board

    from checker.report.html import picture_view, render_html
    from checker.report.svg import render_svg
    from checker.review import build_review
    from checker.ruleset import load_ruleset
    from checker.runner import check_board

    with tempfile.TemporaryDirectory() as tmp:
        rules = Path(tmp) / "rules.yaml"
        rules.write_text(BENCH_RULES)
        ruleset = load_ruleset(rules)
    board = make_board(args.pieces, args.seed)
    result = check_board(board, ruleset)
    result.review = build_review(result.findings, None, None)
    n = len(result.findings)
    print(f"board: {len(board.pieces)} pieces, {n} findings")
    ARTIFACTS.mkdir(exist_ok=True)

    svg, t, lo, hi = timed(args.runs, lambda: render_svg(result))
    clusters = len(re.findall(r'data-role="cluster"', svg))
    callouts = len(re.findall(r'<g id="f-', svg))
    print(f"overview SVG: {len(svg) / 1e6:.2f} MB, {t:.2f} s (range {lo:.2f}-{hi:.2f}); "
          f"{clusters} clusters, {callouts} numbered callouts, traces as an image: {'traces-image' in svg}")
    (ARTIFACTS / "bench-overview.svg").write_text(svg, encoding="utf-8")
    cairosvg.svg2png(bytestring=svg.encode(), write_to=str(ARTIFACTS / "bench-overview.png"), output_width=1400)

    first = result.findings[0]
    card = render_svg(result, view=picture_view(first.bbox), only=first.id, width_px=480, compact_legend=True)
    cairosvg.svg2png(bytestring=card.encode(), write_to=str(ARTIFACTS / "bench-card-1.png"), output_width=960)

    page, t, lo, hi = timed(args.runs, lambda: render_html(result, inputs=[]))
    cards = len(re.findall(r'<article class="card', page))
    print(f"HTML report: {len(page.encode()) / 1e6:.2f} MB, {t:.2f} s (range {lo:.2f}-{hi:.2f}); {cards} cards, "
          f"{n} index rows")
    (ARTIFACTS / "bench-report.html").write_text(page, encoding="utf-8")

    if args.pdf:
        from checker.report.pdf import html_to_pdf

        pdf, t, lo, hi = timed(1, lambda: html_to_pdf(page))
        (ARTIFACTS / "bench-report.pdf").write_bytes(pdf)
        import pypdfium2 as pdfium  # the test extra's PDF reader

        doc = pdfium.PdfDocument(str(ARTIFACTS / "bench-report.pdf"))
        print(f"PDF: {len(pdf) / 1e6:.2f} MB, {t:.1f} s, {len(doc)} pages")
        for i in range(min(3, len(doc))):
            doc[i].render(scale=1.5).to_pil().save(ARTIFACTS / f"bench-report-pdf-{i + 1}.png")
        doc.close()
    print(f"pictures and files in {ARTIFACTS}")


if __name__ == "__main__":
    main()
