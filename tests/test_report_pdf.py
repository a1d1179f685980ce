"""PDF certificate draft: write the sample result, read the PDF back, check layout.

Reports are tested by reading them back (STYLE.md §14): the file exists, its page count, and
that the sample id and the safety/responsibility words (common trade practice) appear in its text. The
layout is checked on the drawn pages: no text leaves the page and no two texts overlap.
"""
from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg

from dha.errors import InputError
from dha.report.pdf import (
    BOTTOM_PT, PAGE_H_PT, SMALL_ROW_H_PT, TOP_PT, render_pages, write_pdf,
)

pypdf = pytest.importorskip("pypdf")  # in the project's test extras

FIXTURE = Path(__file__).parent / "data" / "sample_result.json"
#: Pages of the fixture: 1 summary, 2 groups and chart, 3 components + logs, 4 settings.
FIXTURE_PAGES = 4


@pytest.fixture(scope="module")
def result() -> dict:
    return json.loads(FIXTURE.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def pages_text(result, tmp_path_factory) -> list[str]:
    path = write_pdf(result, tmp_path_factory.mktemp("pdf") / "out" / "T-14.pdf")
    assert path.is_file() and path.read_bytes()[:5] == b"%PDF-"
    return [page.extract_text() for page in pypdf.PdfReader(path).pages]


def _one_line(text: str) -> str:
    return " ".join(text.split())


def test_page_count(pages_text):
    assert len(pages_text) == FIXTURE_PAGES


def test_page_one_marks_draft_and_identifies_the_sample(pages_text, result):
    p1 = _one_line(pages_text[0])
    assert "DRAFT — not released" in p1
    assert result["sample"]["id"] in p1                       # "T-14 summer blend"
    assert result["library"]["sha256"] in p1
    assert result["library"]["version"] in p1
    assert "en228-e10-summer" in p1
    assert "FAIL" in p1                                       # DVPE 63.4 kPa > 60 + 2u
    assert p1.count("within uncertainty of the limit") >= 2   # RON and MON
    # Responsibility text (common trade practice) and an empty signature block on page 1.
    for phrase in ("carcinogen", "highly flammable", "estimates", "authorised person",
                   "reviewed by", "released by", "date"):
        assert phrase in p1, phrase
    # A null property prints as the dash; fbp_c is null in the fixture.
    assert "final boiling point — —" in p1


def test_every_page_has_footer(pages_text, result):
    for i, text in enumerate(pages_text, start=1):
        assert f"page {i} of {FIXTURE_PAGES}" in text
        assert result["sample"]["id"] in text
        assert result["generated_at"] in text


def test_all_components_listed(pages_text, result):
    text = _one_line(" ".join(pages_text[2:]))
    assert "Components (49 rows" in text
    for comp in result["components"]:
        assert comp["name"] in text, comp["name"]
    assert "Import log (5 rows" in text and "Warnings (5)" in text


def _text_boxes(fig) -> np.ndarray:
    """Window extents [px] of the page's visible texts (the faint watermark excluded)."""
    renderer = FigureCanvasAgg(fig).get_renderer()
    boxes = []
    for ax in fig.axes[:1]:
        for t in ax.texts:
            if not t.get_text() or (t.get_alpha() or 1.0) < 0.5:
                continue
            bb = t.get_window_extent(renderer)
            boxes.append((bb.x0, bb.x1, bb.y0, bb.y1))
    return np.array(boxes)


def _assert_clean_layout(fig) -> None:
    w, h = fig.bbox.width, fig.bbox.height
    b = _text_boxes(fig)
    assert (b[:, 0] >= 0).all() and (b[:, 1] <= w).all(), "text runs over the page edge"
    assert (b[:, 2] >= 0).all() and (b[:, 3] <= h).all()
    x0, x1, y0, y1 = (b[:, i][:, None] for i in range(4))
    ox = np.minimum(x1, x1.T) - np.maximum(x0, x0.T)
    oy = np.minimum(y1, y1.T) - np.maximum(y0, y0.T)
    overlap = (ox > 0.5) & (oy > 0.5)
    np.fill_diagonal(overlap, False)
    assert not overlap.any(), f"{overlap.sum() // 2} overlapping text pairs"


def test_fixture_pages_do_not_overlap(result):
    for fig in render_pages(result):
        _assert_clean_layout(fig)


def _many_components(result: dict, n: int) -> dict:
    big = copy.deepcopy(result)
    base = result["components"]
    big["components"] = []
    for i in range(n):
        comp = dict(base[i % len(base)])
        if i % 7 == 0:
            comp["name"] = (f"peak {i + 1}: an invented component name far too long for its "
                            "column, 2,2,3,3,4-pentamethylhexane-like")
        big["components"].append(comp)
    return big


def test_600_components_paginate(result, tmp_path):
    big = _many_components(result, 600)
    path = write_pdf(big, tmp_path / "big.pdf")
    reader = pypdf.PdfReader(path)
    n = len(reader.pages)
    # At most (page height - margins) / row height rows fit on a page (geometry of pdf.py).
    rows_per_page = int((PAGE_H_PT - TOP_PT - BOTTOM_PT) / SMALL_ROW_H_PT)
    assert n >= 2 + -(-600 // rows_per_page)
    texts = [_one_line(p.extract_text()) for p in reader.pages]
    assert f"page {n} of {n}" in texts[-1]
    listing = " ".join(texts[2:])
    assert "Components (600 rows" in listing
    assert "599 " in listing and "600 " in listing          # row numbers of the last rows
    assert "peak 596: an invented" in listing and "…" in listing   # long names shortened
    # The header repeats on every page the listing runs over.
    assert sum("RT [min]" in t for t in texts) >= -(-600 // rows_per_page)


def test_600_components_first_listing_page_layout(result):
    figs = render_pages(_many_components(result, 600))
    _assert_clean_layout(figs[2])


def test_not_a_dict_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="dict"):
        write_pdf("no result", tmp_path / "x.pdf")


def test_empty_result_gives_the_three_page_skeleton(tmp_path):
    path = write_pdf({}, tmp_path / "empty.pdf")
    reader = pypdf.PdfReader(path)
    assert len(reader.pages) == 3
    p1 = _one_line(reader.pages[0].extract_text())
    assert "DRAFT — not released" in p1 and "carcinogen" in p1
    assert "no carbon-number data" in reader.pages[1].extract_text()
