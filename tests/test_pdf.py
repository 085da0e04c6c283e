"""``--pdf``: the sign-off report as a PDF file, read back with an
independent PDF engine (PDFium, through pypdfium2 from the registry): its
pages carry the verdict, every finding's card and the overlay, and pages are
saved as pictures in tests/artifacts for a person to look at."""

from __future__ import annotations

import builtins
import json

import numpy as np
import pypdfium2 as pdfium
import pytest
from test_html import ARTIFACTS

from checker.cli import main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def demo_pdf(tmp_path_factory):
    folder = tmp_path_factory.mktemp("pdf")
    pdf, report = folder / "signoff.pdf", folder / "report.json"
    assert main(["demo", "--pdf", str(pdf), "--format", "json", "--out", str(report)]) == 1
    return pdf, json.loads(report.read_text())


def page_texts(path) -> list[str]:
    doc = pdfium.PdfDocument(str(path))
    try:
        return [doc[i].get_textpage().get_text_range() for i in range(len(doc))]
    finally:
        doc.close()


def test_pdf_carries_the_verdict_and_every_finding(demo_pdf):
    path, report = demo_pdf
    assert path.read_bytes().startswith(b"%PDF-")
    pages = page_texts(path)
    assert len(pages) >= 3
    first = pages[0]
    assert "FAIL" in first and "demo sensor front end" in first
    failing = report["summary"]["failing"]
    assert f"{failing} of {report['summary']['findings']} findings fail the policy" in first
    text = "\n".join(pages)
    for f in report["findings"]:  # every card prints its finding id
        assert f["id"] in text, f["id"]
    assert "page 1 of" in first  # the print stylesheet's page numbers
    assert "not a field-solver sign-off" in text.replace("\r", "").replace("\n", " ")


def test_pdf_pages_are_pictures_not_blank(demo_pdf):
    path, _ = demo_pdf
    ARTIFACTS.mkdir(exist_ok=True)
    doc = pdfium.PdfDocument(str(path))
    try:
        texts = [doc[i].get_textpage().get_text_range() for i in range(len(doc))]
        overlay = next(i for i, t in enumerate(texts) if "view from top" in t)
        for name, index in (("first", 0), ("overlay", overlay), ("last", len(doc) - 1)):
            image = doc[index].render(scale=1.5).to_pil().convert("RGB")
            image.save(ARTIFACTS / f"signoff-demo-pdf-{name}.png")
            px = np.asarray(image)
            ink = (px.min(axis=2) < 160).mean()
            assert ink > 0.005, (name, ink)
        # the overlay page shows the layer colours, not only black text
        px = np.asarray(doc[overlay].render(scale=1.5).to_pil().convert("RGB")).reshape(-1, 3).astype(int)
        colourful = (px.max(axis=1) - px.min(axis=1) > 60).mean()
        assert colourful > 0.002, colourful
    finally:
        doc.close()


def test_pdf_follows_the_selection(tmp_path, capsys):
    pdf = tmp_path / "only.pdf"
    code, _, err = run(capsys, "demo", "--only", "net=AIN1", "--pdf", str(pdf))
    text = "\n".join(page_texts(pdf))
    assert "only net=AIN1" in text.replace("\r", "").replace("\n", " ")


def test_without_the_pdf_library_one_line_and_no_output_at_all(tmp_path, capsys, monkeypatch):
    real_import = builtins.__import__

    def refuse(name, *args, **kwargs):
        if name == "weasyprint":
            raise ImportError("No module named 'weasyprint'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", refuse)
    html, pdf, svg = tmp_path / "r.html", tmp_path / "r.pdf", tmp_path / "r.svg"
    code, out, err = run(capsys, "demo", "--html", str(html), "--pdf", str(pdf), "--svg", str(svg))
    assert code == 2 and err.count("\n") == 1
    assert "--pdf needs WeasyPrint" in err and "couplint[pdf]" in err and "Traceback" not in err
    assert not html.exists() and not pdf.exists() and not svg.exists()  # nothing of the run is written
    assert list(tmp_path.iterdir()) == []


def test_a_large_boards_traces_image_reaches_the_pdf(tmp_path, monkeypatch, caplog):
    """The overview of a large board embeds its traces as a data: PNG; the
    PDF's fetcher serves exactly those, so the pictures are drawn (the
    layout library logs an error and leaves a blank where a picture fails)."""
    import logging

    from test_svg import crowded_board

    from checker.report import raster
    from checker.report.html import render_html
    from checker.report.pdf import html_to_pdf
    from checker.review import build_review

    monkeypatch.setattr(raster, "RASTER_ABOVE", 10)  # the small board's traces become an image
    result, _ = crowded_board(tmp_path)
    result.review = build_review(result.findings, None, None)
    page = render_html(result, inputs=[], cards=2)
    assert page.count('data-role="traces-image"') >= 1
    with caplog.at_level(logging.WARNING, logger="weasyprint"):
        pdf = html_to_pdf(page)
    assert not [r for r in caplog.records if r.levelno >= logging.ERROR], [r.getMessage() for r in caplog.records]
    path = tmp_path / "crowded.pdf"
    path.write_bytes(pdf)
    texts = page_texts(path)
    overlay = next(i for i, t in enumerate(texts) if "view from top" in t)
    doc = pdfium.PdfDocument(str(path))
    try:
        image = doc[overlay].render(scale=1.5).to_pil().convert("RGB")
    finally:
        doc.close()
    image.save(ARTIFACTS / "crowded-overview-pdf.png")
    px = np.asarray(image).reshape(-1, 3).astype(int)
    from checker.report import svg

    top = np.array([int(svg.LAYER_COLOURS[0][i:i + 2], 16) for i in (1, 3, 5)])  # TOP's colour over white
    near = np.abs(px - (svg.COPPER_OPACITY * top + (1 - svg.COPPER_OPACITY) * 255)).max(axis=1) < 40
    assert near.sum() > 50  # the copper of the image is on the page
