"""PDF certificate draft of one result: ``write_pdf(result, path) -> Path``.

A4 portrait pages drawn with matplotlib (``PdfPages``; no pyplot, no extra dependency):

1. the "DRAFT — not released" marking, sample identification, library version and checksum,
   settings digest, the results with units, the specification checks (limit, value, verdict) and
   the responsibility text with an empty "reviewed by / released by / date" block;
2. group totals, oxygenates, a stacked bar chart of group % v/v by carbon number, the carbon
   number x group table and the mass balance;
3. onwards: every component (paginated), the import log, the warnings and the settings used.

Each page carries the draft marking, and a footer with the sample id, ``generated_at`` and
"page x of y". Null values print as "—" (the reason is in the warnings). Text is measured with
the font's own metrics, long cells are shortened with "…" and long texts are wrapped, so
nothing runs over a column or the page edge.
"""
from __future__ import annotations

import logging
import threading
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any, Callable, Sequence

import matplotlib
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties, findfont, get_font
from matplotlib.patches import Rectangle

from dha.errors import InputError
from dha.safety import atomic_write, visible_data
from dha.report import (
    AROMATICS_DETAIL_LABELS, BASIS_UNITS, carbon_label, GROUP_KEYS, GROUP_LABELS, NULL_TEXT,
    RESPONSIBILITY_TEXT, VERDICT_WORDS, decimals_of, flatten_mapping, flatten_settings,
    fmt_number, headline_rows, is_number, mapping_table, property_keys, property_label,
    settings_digest, unit_of, warnings_about_checks,
)
from dha.properties import PROPERTY_KEYS
from dha.report.excel import carbon_number_matrix
from dha.report.figures import plot_groups_by_carbon_number

log = logging.getLogger("dha.report.pdf")

# Page geometry [pt] (A4 = 210 mm x 297 mm = 595.28 pt x 841.89 pt).
PAGE_W_PT = 595.28
PAGE_H_PT = 841.89
MARGIN_X_PT = 40.0
TOP_PT = 52.0          # content starts below the page header
BOTTOM_PT = 50.0       # content ends above the footer
CONTENT_W_PT = PAGE_W_PT - 2 * MARGIN_X_PT

#: Colours (our own choice).
INK = "#1a1a1a"
GREY = "#666666"
RED = "#b3161b"
RULE = "#9aa5b1"
HEADER_FILL = "#e3e8ee"
ZEBRA_FILL = "#f5f6f8"
VERDICT_COLOURS = {"pass": "#1f6b35", "fail": RED, "marginal": "#a85a00", None: GREY}

#: Font sizes [pt] and line heights [pt].
BODY_PT = 6.8
SMALL_PT = 6.5
ROW_H_PT = 8.8
SMALL_ROW_H_PT = 8.6

_RC = {
    "pdf.fonttype": 42,          # TrueType: text stays extractable and searchable
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "axes.unicode_minus": False,
}

_MEASURE_LOCK = threading.Lock()


# ----------------------------------------------------------------------------- text metrics
@lru_cache(maxsize=8)
def _font_path(bold: bool, mono: bool) -> str:
    family = "DejaVu Sans Mono" if mono else "DejaVu Sans"
    return findfont(FontProperties(family=family, weight="bold" if bold else "normal"))


def text_width_pt(text: str, size_pt: float, bold: bool = False, mono: bool = False) -> float:
    """Width of ``text`` set in DejaVu Sans (or Sans Mono) at ``size_pt`` [pt].

    >>> round(text_width_pt("Hello world", 10.0), 1)
    56.9
    """
    if not text:
        return 0.0
    return _width_at_100pt(text, bold, mono) * size_pt / 100.0


@lru_cache(maxsize=65536)
def _width_at_100pt(text: str, bold: bool, mono: bool) -> float:
    """Width at 100 pt [pt], plus 1 % margin. PDF text is drawn from unhinted outlines, so widths
    scale linearly with size; measuring at a small size would include hinting and be wrong."""
    with _MEASURE_LOCK:
        font = get_font(_font_path(bold, mono))
        font.set_size(100.0, 72)  # at 72 dpi one pixel is one point
        font.set_text(text, 0.0)
        width, _height = font.get_width_height()
    return width / 64.0 * 1.01  # FreeType 26.6 fixed point


def fit_text(text: str, width_pt: float, size_pt: float, bold: bool = False,
             mono: bool = False) -> str:
    """``text`` shortened with "…" so that it fits ``width_pt``.

    >>> fit_text("2,2,4-trimethylpentane", 40.0, 7.0)
    '2,2,4-tri…'
    """
    if text_width_pt(text, size_pt, bold, mono) <= width_pt:
        return text
    lo, hi = 0, len(text)
    while lo < hi:  # longest prefix p with width(p + "…") <= width
        mid = (lo + hi + 1) // 2
        if text_width_pt(text[:mid].rstrip() + "…", size_pt, bold, mono) <= width_pt:
            lo = mid
        else:
            hi = mid - 1
    return text[:lo].rstrip() + "…" if lo else "…"


def wrap_text(text: str, width_pt: float, size_pt: float, bold: bool = False) -> list[str]:
    """Greedy word wrap to ``width_pt``; a word longer than a line is cut between characters.

    >>> wrap_text("aaa bbb ccc", text_width_pt("aaa bbb", 7.0) + 0.1, 7.0)
    ['aaa bbb', 'ccc']
    """
    lines: list[str] = []
    for para in str(text).split("\n"):
        line = ""
        for word in para.split():
            trial = f"{line} {word}" if line else word
            if text_width_pt(trial, size_pt, bold) <= width_pt:
                line = trial
                continue
            if line:
                lines.append(line)
            while text_width_pt(word, size_pt, bold) > width_pt and len(word) > 1:
                cut = len(word) - 1
                while cut > 1 and text_width_pt(word[:cut], size_pt, bold) > width_pt:
                    cut -= 1
                lines.append(word[:cut])
                word = word[cut:]
            line = word
        lines.append(line)
    return lines or [""]


# ----------------------------------------------------------------------------- layout engine
@dataclass(frozen=True)
class Column:
    """A table column: title, width [pt], alignment ("left", "right", "center"), mono font."""

    title: str
    width_pt: float
    align: str = "left"
    mono: bool = False


#: A table cell: text, or (text, {"color": ..., "bold": ...}).
Cell = Any
_Draw = Callable[[Any, Figure, float], None]


class Flow:
    """Places blocks top to bottom on A4 pages; starts a new page when a block does not fit.

    Each page is a list of ``(y_pt, draw)``; ``draw(ax, fig, y_pt)`` draws on an axes whose data
    coordinates are points from the top-left corner of the page.
    """

    def __init__(self) -> None:
        self.pages: list[list[tuple[float, _Draw]]] = [[]]
        self.y = TOP_PT

    @property
    def space_pt(self) -> float:
        return PAGE_H_PT - BOTTOM_PT - self.y

    def new_page(self) -> None:
        self.pages.append([])
        self.y = TOP_PT

    def ensure(self, height_pt: float) -> None:
        """Start a new page unless ``height_pt`` fits (a fresh page always takes the block)."""
        if height_pt > self.space_pt and self.y > TOP_PT + 1e-6:
            self.new_page()

    def place(self, height_pt: float, draw: _Draw) -> None:
        self.ensure(height_pt)
        self.pages[-1].append((self.y, draw))
        self.y += height_pt

    def gap(self, height_pt: float = 6.0) -> None:
        if self.y > TOP_PT + 1e-6:
            self.y = min(self.y + height_pt, PAGE_H_PT - BOTTOM_PT)

    # -- blocks ---------------------------------------------------------------------------
    def heading(self, text: str, size_pt: float = 9.0, keep_pt: float = 40.0) -> None:
        """A bold heading kept on the same page as at least ``keep_pt`` of what follows."""
        height = size_pt * 1.7
        self.ensure(height + keep_pt)
        shown = fit_text(text, CONTENT_W_PT, size_pt, bold=True)

        def draw(ax, fig, y):
            ax.text(MARGIN_X_PT, y + size_pt * 1.15, shown, fontsize=size_pt,
                    fontweight="bold", color=INK, va="baseline")
            ax.plot([MARGIN_X_PT, MARGIN_X_PT + CONTENT_W_PT], [y + size_pt * 1.45] * 2,
                    color=RULE, linewidth=0.5)

        self.place(height, draw)

    def paragraph(self, text: str, size_pt: float = BODY_PT, color: str = INK,
                  bold: bool = False, x_pt: float = MARGIN_X_PT,
                  width_pt: float = CONTENT_W_PT) -> None:
        """Wrapped text; may continue on the next page between lines."""
        line_h = size_pt * 1.35
        for line in wrap_text(text, width_pt, size_pt, bold):
            def draw(ax, fig, y, line=line):
                ax.text(x_pt, y + size_pt, line, fontsize=size_pt, color=color,
                        fontweight="bold" if bold else "normal", va="baseline")

            self.place(line_h, draw)

    def table(self, columns: Sequence[Column], rows: Sequence[Sequence[Cell]],
              size_pt: float = BODY_PT, row_h_pt: float = ROW_H_PT, header: bool = True,
              wrap_col: int | None = None, x_pt: float = MARGIN_X_PT,
              bold_last: bool = False, zebra: bool = True) -> None:
        """A table that splits between rows across pages, repeating its header."""
        prepared = [prepare_row(columns, row, size_pt, wrap_col) for row in rows]
        header_h = row_h_pt if header else 0.0
        first_h = prepared[0][1] * row_h_pt if prepared else 0.0
        self.ensure(header_h + first_h)
        need_header = header
        for i, (cells, n_lines) in enumerate(prepared):
            h = n_lines * row_h_pt
            if h > self.space_pt and self.y > TOP_PT + 1e-6:
                self.new_page()
                need_header = header
            if need_header:
                self.place(header_h, _header_draw(columns, size_pt, row_h_pt, x_pt))
                need_header = False
            self.place(h, _row_draw(columns, cells, size_pt, row_h_pt, x_pt,
                                    shade=zebra and i % 2 == 1,
                                    bold=bold_last and i == len(prepared) - 1))
        if not prepared:
            self.place(header_h, _header_draw(columns, size_pt, row_h_pt, x_pt))
            self.paragraph("(none)", size_pt=size_pt, color=GREY, x_pt=x_pt + 3)

    def side_by_side(self, parts: Sequence[tuple], size_pt: float = BODY_PT,
                     row_h_pt: float = ROW_H_PT) -> None:
        """Tables next to each other, each ``(x_pt, title, columns, rows[, wrap_col])``.

        Kept on one page; if together they are taller than a page, they follow one another.
        """
        blocks = []
        height = 0.0
        for part in parts:
            x_pt, title, columns, rows = part[:4]
            wrap_col = part[4] if len(part) > 4 else None
            prepared = [prepare_row(columns, row, size_pt, wrap_col) for row in rows]
            h = row_h_pt * 1.3 + row_h_pt + sum(n for _c, n in prepared) * row_h_pt
            height = max(height, h)
            blocks.append((x_pt, title, columns, prepared))
        if height > PAGE_H_PT - TOP_PT - BOTTOM_PT:
            for part in parts:
                x_pt, title, columns, rows = part[:4]
                self.paragraph(title, size_pt=size_pt + 0.5, bold=True, x_pt=x_pt + 3)
                self.table(columns, rows, size_pt=size_pt, row_h_pt=row_h_pt, x_pt=x_pt,
                           wrap_col=part[4] if len(part) > 4 else None)
            return

        def draw(ax, fig, y):
            for x_pt, title, columns, prepared in blocks:
                width = sum(c.width_pt for c in columns)
                ax.text(x_pt + 3, y + row_h_pt * 0.95,
                        fit_text(title, width, size_pt + 0.5, bold=True),
                        fontsize=size_pt + 0.5, fontweight="bold", color=INK, va="baseline")
                yy = y + row_h_pt * 1.3
                _header_draw(columns, size_pt, row_h_pt, x_pt)(ax, fig, yy)
                yy += row_h_pt
                for i, (cells, n) in enumerate(prepared):
                    _row_draw(columns, cells, size_pt, row_h_pt, x_pt, shade=i % 2 == 1,
                              bold=False)(ax, fig, yy)
                    yy += n * row_h_pt

        self.place(height, draw)

    def listing(self, columns: Sequence[tuple[str, int, str]], rows: Sequence[Sequence[Any]],
                size_pt: float = SMALL_PT, row_h_pt: float = SMALL_ROW_H_PT,
                x_pt: float = MARGIN_X_PT) -> None:
        """A long table set as fixed-width lines: one text per row (fast for 600 rows).

        ``columns`` are ``(title, width in characters, "left" | "right")``. Cells are
        shortened with "…" to their width; the header repeats on every page.
        """
        width_pt = listing_width_pt(columns, size_pt) + 6.0
        header = format_listing_row(columns, [c[0] for c in columns])
        lines = [format_listing_row(columns, row) for row in rows]

        def header_draw(ax, fig, y):
            ax.add_patch(Rectangle((x_pt, y), width_pt, row_h_pt, facecolor=HEADER_FILL,
                                   edgecolor="none", zorder=1))
            ax.text(x_pt + 3, y + row_h_pt * 0.5 + size_pt * 0.36, header, fontsize=size_pt,
                    fontweight="bold", family="DejaVu Sans Mono", color=INK, va="baseline",
                    zorder=3)
            ax.plot([x_pt, x_pt + width_pt], [y + row_h_pt] * 2, color=RULE, linewidth=0.6,
                    zorder=2)

        self.ensure(2 * row_h_pt)
        self.place(row_h_pt, header_draw)
        for i, line in enumerate(lines):
            if row_h_pt > self.space_pt:
                self.new_page()
                self.place(row_h_pt, header_draw)

            def draw(ax, fig, y, line=line, shade=i % 2 == 1):
                if shade:
                    ax.add_patch(Rectangle((x_pt, y), width_pt, row_h_pt, facecolor=ZEBRA_FILL,
                                           edgecolor="none", zorder=0.5))
                ax.text(x_pt + 3, y + row_h_pt * 0.5 + size_pt * 0.36, line, fontsize=size_pt,
                        family="DejaVu Sans Mono", color=INK, va="baseline", zorder=3)

            self.place(row_h_pt, draw)
        if not lines:
            self.paragraph("(none)", size_pt=size_pt, color=GREY, x_pt=x_pt + 3)

    def figure(self, height_pt: float, plot: Callable[[Any], Any]) -> None:
        """A chart in a box of the content width: ``plot(axes)`` draws into it."""

        def draw(ax, fig, y):
            left, right, top, bottom = 44.0, 10.0, 28.0, 30.0
            x0 = MARGIN_X_PT + left
            w = CONTENT_W_PT - left - right
            h = height_pt - top - bottom
            chart = fig.add_axes([x0 / PAGE_W_PT, 1 - (y + top + h) / PAGE_H_PT,
                                  w / PAGE_W_PT, h / PAGE_H_PT])
            plot(chart)

        self.place(height_pt, draw)

    def custom(self, height_pt: float, draw: _Draw) -> None:
        self.place(height_pt, draw)


def listing_width_pt(columns: Sequence[tuple[str, int, str]], size_pt: float) -> float:
    """Width [pt] of a fixed-width listing line (DejaVu Sans Mono: every glyph equally wide)."""
    return text_width_pt("0" * sum(c[1] for c in columns), size_pt, mono=True)


def format_listing_row(columns: Sequence[tuple[str, int, str]], row: Sequence[Any]) -> str:
    """One listing line: each cell cut to width - 1 characters (with "…"), then aligned.

    >>> format_listing_row([("#", 4, "right"), ("name", 8, "left")], [12, "cyclohexane"])
    '  12 cycloh…'
    """
    parts = []
    for (_title, n, align), value in zip(columns, row):
        text = NULL_TEXT if value is None else str(value)
        if len(text) > n - 1:
            text = text[: max(0, n - 2)] + "…"
        parts.append(text.rjust(n - 1) + " " if align == "right" else text.ljust(n))
    return "".join(parts).rstrip()


def _cell_parts(cell: Cell) -> tuple[str, dict]:
    if isinstance(cell, tuple):
        return str(cell[0]), dict(cell[1])
    return (NULL_TEXT if cell is None else str(cell)), {}


def prepare_row(columns: Sequence[Column], row: Sequence[Cell], size_pt: float,
                wrap_col: int | None) -> tuple[list[tuple[list[str], dict]], int]:
    """Cells as lists of lines that fit their column; returns them and the row's line count."""
    cells = []
    n_lines = 1
    for j, col in enumerate(columns):
        text, style = _cell_parts(row[j] if j < len(row) else "")
        inner = col.width_pt - 6.0
        bold = bool(style.get("bold"))
        if wrap_col is not None and j == wrap_col:
            lines = wrap_text(text, inner, size_pt, bold)
        else:
            lines = [fit_text(text, inner, size_pt, bold, col.mono)]
        n_lines = max(n_lines, len(lines))
        cells.append((lines, style))
    return cells, n_lines


def _header_draw(columns: Sequence[Column], size_pt: float, row_h_pt: float,
                 x_pt: float) -> _Draw:
    titles = [fit_text(c.title, c.width_pt - 6.0, size_pt, bold=True) for c in columns]
    width = sum(c.width_pt for c in columns)

    def draw(ax, fig, y):
        ax.add_patch(Rectangle((x_pt, y), width, row_h_pt, facecolor=HEADER_FILL,
                               edgecolor="none", zorder=1))
        x = x_pt
        for col, title in zip(columns, titles):
            _put(ax, x, y, col, title, size_pt, row_h_pt, bold=True, color=INK)
            x += col.width_pt
        ax.plot([x_pt, x_pt + width], [y + row_h_pt] * 2, color=RULE, linewidth=0.6, zorder=2)

    return draw


def _row_draw(columns: Sequence[Column], cells, size_pt: float, row_h_pt: float, x_pt: float,
              shade: bool, bold: bool) -> _Draw:
    width = sum(c.width_pt for c in columns)
    n_lines = max(len(lines) for lines, _s in cells) if cells else 1

    def draw(ax, fig, y):
        if shade:
            ax.add_patch(Rectangle((x_pt, y), width, row_h_pt * n_lines, facecolor=ZEBRA_FILL,
                                   edgecolor="none", zorder=0.5))
        if bold:
            ax.plot([x_pt, x_pt + width], [y] * 2, color=RULE, linewidth=0.5, zorder=2)
        x = x_pt
        for col, (lines, style) in zip(columns, cells):
            for k, line in enumerate(lines):
                _put(ax, x, y + k * row_h_pt, col, line, size_pt, row_h_pt,
                     bold=bold or bool(style.get("bold")), color=style.get("color", INK))
            x += col.width_pt

    return draw


def _put(ax, x, y, col: Column, text: str, size_pt: float, row_h_pt: float, bold: bool,
         color: str) -> None:
    if not text:
        return
    baseline = y + row_h_pt * 0.5 + size_pt * 0.36
    if col.align == "right":
        tx, ha = x + col.width_pt - 3.0, "right"
    elif col.align == "center":
        tx, ha = x + col.width_pt / 2, "center"
    else:
        tx, ha = x + 3.0, "left"
    ax.text(tx, baseline, text, fontsize=size_pt, fontweight="bold" if bold else "normal",
            color=color, ha=ha, va="baseline", zorder=3,
            family="DejaVu Sans Mono" if col.mono else None)


# ----------------------------------------------------------------------------- page content
def _num(value: Any, decimals: int) -> str:
    return fmt_number(value, decimals)


def _sample_id(result: dict) -> str:
    sample = result.get("sample") or {}
    value = sample.get("id")
    return NULL_TEXT if value in (None, "") else str(value)


def _title_block(flow: Flow, result: dict) -> None:
    def draw(ax, fig, y):
        ax.text(MARGIN_X_PT, y + 17, "Certificate draft", fontsize=16, fontweight="bold",
                color=INK, va="baseline")
        ax.text(MARGIN_X_PT, y + 30, fit_text("Petrol composition by detailed hydrocarbon analysis "
                                              "(DHA)", 300, 8),
                fontsize=8, color=GREY, va="baseline")
        bx, bw = MARGIN_X_PT + CONTENT_W_PT - 205, 205
        ax.add_patch(Rectangle((bx, y + 2), bw, 34, facecolor="#fbeaea", edgecolor=RED,
                               linewidth=1.4, zorder=1))
        ax.text(bx + bw / 2, y + 18, "DRAFT — not released", fontsize=13, fontweight="bold",
                color=RED, ha="center", va="baseline", zorder=2)
        ax.text(bx + bw / 2, y + 30, "not valid until reviewed and released", fontsize=7,
                color=RED, ha="center", va="baseline", zorder=2)

    flow.custom(44, draw)


def _identification(flow: Flow, result: dict) -> None:
    sample = result.get("sample") or {}
    library = result.get("library") or {}
    tool = result.get("tool") or {}
    fields: list[tuple[str, Any]] = [("sample id", sample.get("id"))]
    fields += [(k.replace("_", " "), sample[k]) for k in sorted(sample, key=str)
               if k not in ("id", "source_file") and not str(k).endswith("sha256")]
    hashes = [(str(k).replace("_", " "), sample[k]) for k in sorted(sample, key=str)
              if str(k).endswith("sha256")]
    fields += [("generated at", result.get("generated_at")),
               ("tool version", tool.get("version")),
               ("library version", library.get("version"))]
    specs = sorted({str(c.get("spec")) for c in result.get("checks") or [] if c.get("spec")})
    fields.append(("specification", ", ".join(specs) if specs else NULL_TEXT))
    half = CONTENT_W_PT / 2
    kw, vw = 78.0, half - 78.0
    cols = [Column("", kw), Column("", vw), Column("", kw), Column("", vw)]
    rows = []
    for i in range(0, len(fields), 2):
        pair = fields[i:i + 2] + [("", "")] * (2 - len(fields[i:i + 2]))
        row: list[Cell] = []
        for key, value in pair:
            row.append((key, {"color": GREY}))
            row.append(_text_value(value) if key else "")
        rows.append(row)
    flow.heading("Sample and run")
    flow.table(cols, rows, header=False)
    flow.table([Column("", kw), Column("", CONTENT_W_PT - kw)],
               [[("source file", {"color": GREY}), _text_value(sample.get("source_file"))]],
               header=False, zebra=False, wrap_col=1)
    long_cols = [Column("", kw), Column("", CONTENT_W_PT - kw, mono=True)]
    flow.table(long_cols, [[(k, {"color": GREY}), _text_value(v)] for k, v in hashes] + [
        [("library sha256", {"color": GREY}), _text_value(library.get("sha256"))],
        [("settings sha256", {"color": GREY}), settings_digest(result.get("settings"))],
    ], header=False, zebra=False)


def _text_value(value: Any) -> str:
    if value is None or (isinstance(value, float) and not is_number(value)):
        return NULL_TEXT
    if isinstance(value, (list, tuple)):
        return "; ".join(_text_value(v) for v in value) if value else NULL_TEXT
    return str(value)


#: Short labels for extra properties listed in the narrow composition column of page 1.
_SHORT_LABELS = {"rvp_psi": "RVP", "vli": "VLI"}


def _results(flow: Flow, result: dict) -> None:
    props = result.get("properties") or {}
    unc = result.get("uncertainty") or {}
    left_cols = [Column("quantity", 78), Column("value", 42, "right"), Column("unit", 38)]
    left_rows = [[label, _num(value, 2), unit] for _k, label, value, unit in headline_rows(result)]
    right_cols = [Column("property", 168), Column("value", 50, "right"),
                  Column("std. unc.", 50, "right"), Column("unit", 44)]
    right_rows = []
    keys = property_keys(result)
    main_keys = [k for k in keys if k in PROPERTY_KEYS]
    extra_keys = [k for k in keys if k not in PROPERTY_KEYS]
    if extra_keys:   # further estimates go under the composition, where page 1 has room
        left_rows.append(["further estimates", "", ""])
        for key in extra_keys:
            value = props.get(key)
            left_rows.append([_SHORT_LABELS.get(key, property_label(key)),
                              _num(value, decimals_of(key)), unit_of(key)])
    for key in main_keys:
        d = decimals_of(key)
        value = props.get(key)
        right_rows.append([property_label(key), _num(value, d),
                           _num(unc.get(key), d) if is_number(value) else NULL_TEXT,
                           unit_of(key)])
    flow.heading("Results", keep_pt=120)
    right_x = MARGIN_X_PT + CONTENT_W_PT - sum(c.width_pt for c in right_cols)
    flow.side_by_side([
        (MARGIN_X_PT, "Composition (from the DHA)", left_cols, left_rows),
        (right_x, "Calculated properties (estimates)", right_cols, right_rows),
    ])


def _checks(flow: Flow, result: dict) -> None:
    checks = result.get("checks") or []
    specs = sorted({str(c.get("spec")) for c in checks if c.get("spec")})
    title = "Specification check" + (f": {', '.join(specs)}" if specs else "")
    flow.heading(title, keep_pt=30)
    multi = len(specs) > 1
    cols = [Column("requirement", 125 if multi else 175), Column("unit", 40),
            Column("kind", 30, "center"), Column("limit", 45, "right"),
            Column("value", 45, "right"), Column("std. unc.", 45, "right"),
            Column("verdict", 125)]
    if multi:
        cols.insert(0, Column("spec", 50))
    rows = []
    unc = result.get("uncertainty") or {}
    for chk in checks:
        prop = str(chk.get("property", ""))
        d = decimals_of(prop)
        verdict = chk.get("verdict")
        u = chk.get("uncertainty", unc.get(prop))
        row: list[Cell] = [property_label(prop), unit_of(prop) or str(chk.get("unit") or ""),
                           str(chk.get("kind") or NULL_TEXT), _num(chk.get("limit"), d),
                           _num(chk.get("value"), d),
                           _num(u, d) if is_number(chk.get("value")) else NULL_TEXT,
                           (VERDICT_WORDS.get(verdict, str(verdict)),
                            {"color": VERDICT_COLOURS.get(verdict, INK),
                             "bold": verdict in ("fail", "marginal")})]
        if multi:
            row.insert(0, str(chk.get("spec") or NULL_TEXT))
        rows.append(row)
    flow.table(cols, rows)
    for text in warnings_about_checks(result):
        flow.paragraph(text, size_pt=6.3, color=RED)
    if not checks:
        return
    flow.paragraph("Verdicts: pass = inside the limit by more than the expanded uncertainty "
                   "U = 2 × std. unc.; FAIL = outside by more than U; within uncertainty of the "
                   "limit = |value − limit| ≤ U, so the result alone cannot decide (after EN ISO "
                   "4259). Where no uncertainty is given, U = 0.", size_pt=6.3, color=GREY)


def _responsibility(flow: Flow) -> None:
    size = 7.0
    lines = sum(len(wrap_text(p, CONTENT_W_PT, size)) for p in RESPONSIBILITY_TEXT)
    block_h = 17 + lines * size * 1.35 + 3 * len(RESPONSIBILITY_TEXT) + 62
    flow.ensure(block_h)  # text and signature block stay together
    flow.heading("Read before use", keep_pt=block_h - 17)
    for para in RESPONSIBILITY_TEXT:
        flow.paragraph(para, size_pt=size)
        flow.gap(3)

    def draw(ax, fig, y):
        labels = ("reviewed by (name, signature)", "released by (name, signature)", "date")
        widths = (CONTENT_W_PT * 0.38, CONTENT_W_PT * 0.38, CONTENT_W_PT * 0.24)
        x = MARGIN_X_PT
        for label, w in zip(labels, widths):
            ax.add_patch(Rectangle((x, y + 4), w - 8, 44, facecolor="none", edgecolor=RULE,
                                   linewidth=0.7))
            ax.text(x + 4, y + 13, label, fontsize=6.5, color=GREY, va="baseline")
            x += w

    flow.custom(54, draw)


def _groups_page(flow: Flow, result: dict) -> None:
    totals = result.get("totals") or {}
    bases = list(BASIS_UNITS)
    g_cols = [Column("group", 88)] + [Column(BASIS_UNITS[b], 52, "right") for b in bases]
    g_rows = []
    sums: dict[str, float | None] = dict.fromkeys(bases, None)
    for g in GROUP_KEYS:
        row = [GROUP_LABELS[g]]
        for b in bases:
            v = (totals.get(b) or {}).get(g)
            row.append(_num(v, 2))
            if is_number(v):
                sums[b] = (sums[b] or 0.0) + v
        g_rows.append(row)
    g_rows.append([("total", {"bold": True})] + [(_num(sums[b], 2), {"bold": True}) for b in bases])
    o_cols = [Column("oxygenate", 112), Column("CAS", 54), Column("mass %", 44, "right"),
              Column("% v/v", 44, "right")]
    o_rows = [[str(o.get("name") or NULL_TEXT), str(o.get("cas") or NULL_TEXT),
               _num(o.get("mass_pct"), 2), _num(o.get("vol_pct"), 2)]
              for o in result.get("oxygenates") or []]
    o_rows.append([("oxygen", {"bold": True}), "", (_num(result.get("oxygen_mass_pct"), 2),
                                                    {"bold": True}), ""])
    detail = result.get("aromatics_detail")
    if not isinstance(detail, dict) or not detail:
        detail = {"benzene": result.get("benzene") or {}}
    for key, value in detail.items():
        value = value if isinstance(value, dict) else {}
        o_rows.append([(AROMATICS_DETAIL_LABELS.get(key, key.replace("_", " ")), {"bold": True}),
                       "71-43-2" if key == "benzene" else "",
                       (_num(value.get("mass_pct"), 2), {"bold": True}),
                       (_num(value.get("vol_pct"), 2), {"bold": True})])
    flow.heading("Group totals", keep_pt=120)
    o_x = MARGIN_X_PT + CONTENT_W_PT - sum(c.width_pt for c in o_cols)
    flow.side_by_side([(MARGIN_X_PT, "PIONA and oxygenates", g_cols, g_rows),
                       (o_x, "Oxygenates, oxygen and aromatics", o_cols, o_rows)])
    flow.gap(8)
    flow.heading("Group amounts by carbon number (% v/v)", keep_pt=220)
    flow.figure(220, lambda ax: plot_groups_by_carbon_number(result, ax, basis="vol_pct"))
    order, cells = carbon_number_matrix(result, "vol_pct")
    groups = [g for g in GROUP_KEYS if any(g in cells[cn] for cn in order)]
    if order:
        flow.gap(4)
        flow.heading("Carbon number × group (% v/v)")
        width_left = CONTENT_W_PT - 52 - 52
        cw = width_left / max(1, len(groups))
        cols = ([Column("carbon no.", 52)]
                + [Column(GROUP_LABELS.get(g, str(g)), cw, "right") for g in groups]
                + [Column("total", 52, "right")])
        rows = []
        for cn in order:
            vals = [cells[cn].get(g) for g in groups]
            rows.append([carbon_label(cn)] + [_num(v, 2) if v else "" for v in vals]
                        + [_num(sum(v for v in vals if v is not None), 2)])
        col_tot = [sum(cells[cn].get(g, 0.0) for cn in order) for g in groups]
        rows.append(["total"] + [_num(v, 2) for v in col_tot] + [_num(sum(col_tot), 2)])
        flow.table(cols, rows, size_pt=SMALL_PT + 0.3, row_h_pt=SMALL_ROW_H_PT, bold_last=True)
    balance = result.get("mass_balance")
    if isinstance(balance, dict) and balance:
        columns, rows, scalars = mapping_table(balance)
        flow.gap(4)
        flow.heading("Mass balance of the peak table", keep_pt=60)
        if columns:
            cw = min(70.0, (CONTENT_W_PT - 150 - 40) / len(columns))
            cols = ([Column("quantity", 150), Column("unit", 40)]
                    + [Column(c.replace("_", " "), cw, "right") for c in columns])
            flow.table(cols, [[label, unit] + [_text_or_num(v) if v is not None else ""
                                               for v in values]
                              for label, unit, values in rows],
                       size_pt=SMALL_PT + 0.3, row_h_pt=SMALL_ROW_H_PT)
        if scalars:
            flow.gap(3)
            cols = [Column("quantity", 150), Column("unit", 40), Column("value", 70, "right")]
            flow.table(cols, [[label, unit, _text_or_num(v)] for label, unit, v in scalars],
                       size_pt=SMALL_PT + 0.3, row_h_pt=SMALL_ROW_H_PT, header=False)


def _settings(flow: Flow, result: dict) -> None:
    flow.gap(8)
    flow.heading("Settings used (their sha256 is on page 1)")
    cols = [Column("setting", 190), Column("value", CONTENT_W_PT - 190, mono=True)]
    flow.table(cols, flatten_settings(result.get("settings")), size_pt=SMALL_PT,
               row_h_pt=SMALL_ROW_H_PT, wrap_col=1)


def _text_or_num(value: Any) -> str:
    if isinstance(value, bool):
        return str(value)
    if is_number(value):
        return f"{value:,.4f}".rstrip("0").rstrip(".") if isinstance(value, float) else f"{value:,}"
    return _text_value(value)


_MATCH_WORDS = {"name": "name", "cas": "CAS", "retention_index": "ret. index",
                "unidentified": "unidentified"}


def _components(flow: Flow, result: dict) -> None:
    comps = result.get("components") or []
    flow.heading(f"Components ({len(comps)} rows, in the order of the result)")
    cols = [("#", 5, "right"), ("name", 38, "left"), ("CAS", 12, "left"),
            ("group", 13, "left"), ("C", 5, "right"), ("RT [min]", 9, "right"),
            ("RI", 8, "right"), ("mass %", 8, "right"), ("% v/v", 8, "right"),
            ("mol %", 8, "right"), (" match", 14, "left")]
    rows = []
    for i, c in enumerate(comps, start=1):
        group = c.get("group")
        rows.append([
            str(i), _text_value(c.get("name")), _text_value(c.get("cas")),
            GROUP_LABELS.get(group, _text_value(group)), _text_value(c.get("carbon_number")),
            _num(c.get("rt_min"), 3), _num(c.get("retention_index"), 1),
            _num(c.get("mass_pct"), 3), _num(c.get("vol_pct"), 3), _num(c.get("mol_pct"), 3),
            " " + _MATCH_WORDS.get(c.get("match"), _text_value(c.get("match"))),
        ])
    flow.listing(cols, rows, size_pt=SMALL_PT, row_h_pt=SMALL_ROW_H_PT)


def _logs(flow: Flow, result: dict) -> None:
    flow.gap(8)
    entries = result.get("import_log") or []
    flow.heading(f"Import log ({len(entries)} rows skipped or changed)")
    cols = [Column("row", 40, "right"), Column("action", 60),
            Column("reason", CONTENT_W_PT - 100)]
    flow.table(cols, [[_text_value(e.get("row")), _text_value(e.get("action")),
                       _text_value(e.get("reason"))] for e in entries],
               size_pt=SMALL_PT, row_h_pt=SMALL_ROW_H_PT, wrap_col=2)
    flow.gap(8)
    warnings = result.get("warnings") or []
    flow.heading(f"Warnings ({len(warnings)})")
    cols = [Column("#", 24, "right"), Column("warning", CONTENT_W_PT - 24)]
    flow.table(cols, [[str(i), str(w)] for i, w in enumerate(warnings, start=1)],
               size_pt=SMALL_PT, row_h_pt=SMALL_ROW_H_PT, wrap_col=1)


def layout(result: dict) -> Flow:
    """Place all blocks of the draft on pages (no drawing yet)."""
    flow = Flow()
    _title_block(flow, result)
    flow.gap(4)
    _identification(flow, result)
    flow.gap(6)
    _results(flow, result)
    flow.gap(6)
    _checks(flow, result)
    flow.gap(6)
    _responsibility(flow)
    flow.new_page()
    _groups_page(flow, result)
    flow.new_page()
    _components(flow, result)
    _logs(flow, result)
    _settings(flow, result)
    return flow


def _frame(ax, page: int, n_pages: int, result: dict) -> None:
    """Page header, draft watermark and footer."""
    ax.text(PAGE_W_PT / 2, PAGE_H_PT / 2, "DRAFT", rotation=52, fontsize=120,
            fontweight="bold", color=RED, alpha=0.05, ha="center", va="center", zorder=0)
    ax.text(MARGIN_X_PT, 30, "dha · DHA composition and calculated properties", fontsize=7,
            color=GREY, va="baseline")
    ax.text(PAGE_W_PT - MARGIN_X_PT, 30, "DRAFT — not released", fontsize=7.5,
            fontweight="bold", color=RED, ha="right", va="baseline")
    ax.plot([MARGIN_X_PT, PAGE_W_PT - MARGIN_X_PT], [36, 36], color=RULE, linewidth=0.6)
    fy = PAGE_H_PT - 26
    ax.plot([MARGIN_X_PT, PAGE_W_PT - MARGIN_X_PT], [fy - 10, fy - 10], color=RULE,
            linewidth=0.6)
    ax.text(MARGIN_X_PT, fy, fit_text(f"sample: {_sample_id(result)}", 210, 7), fontsize=7,
            color=GREY, va="baseline")
    generated = _text_value(result.get("generated_at"))
    ax.text(PAGE_W_PT / 2, fy, fit_text(f"generated {generated}", 170, 7), fontsize=7,
            color=GREY, ha="center", va="baseline")
    ax.text(PAGE_W_PT - MARGIN_X_PT, fy, f"page {page} of {n_pages}", fontsize=7,
            color=GREY, ha="right", va="baseline")


def render_pages(result: dict) -> list[Figure]:
    """The draft's pages as A4 matplotlib Figures (not yet saved), in order.

    Each Figure's first axes spans the page with data coordinates in points from the top-left
    corner; a chart adds its own axes.
    """
    if not isinstance(result, dict):
        raise InputError(f"render_pages: result must be a dict (dha-result/1), got {type(result).__name__}")
    figures = []
    with matplotlib.rc_context(_RC):
        flow = layout(result)
        pages = [p for p in flow.pages if p] or [[]]
        for number, ops in enumerate(pages, start=1):
            fig = Figure(figsize=(PAGE_W_PT / 72, PAGE_H_PT / 72))
            ax = fig.add_axes((0, 0, 1, 1))
            ax.set_xlim(0, PAGE_W_PT)
            ax.set_ylim(PAGE_H_PT, 0)
            ax.axis("off")
            _frame(ax, number, len(pages), result)
            for y, draw in ops:
                draw(ax, fig, y)
            figures.append(fig)
    return figures


def write_pdf(result: dict, path) -> Path:
    """Write the certificate draft of a result as an A4 PDF and return its path.

    Parameters
    ----------
    result : dict
        A result dict of schema ``dha-result/1`` (the dha-result/1 schema); extra keys ``generated_at``
        and ``mass_balance`` are shown when present. Null values print as "—".
    path : str or Path
        File to write (parent folders are created); overwritten if it exists.

    Returns
    -------
    Path
        ``path`` as a Path.
    """
    if not isinstance(result, dict):
        raise InputError(f"write_pdf: result must be a dict (dha-result/1), got {type(result).__name__}")
    result = visible_data(result)  # control characters shown, never written raw
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with matplotlib.rc_context(_RC):
        pages = render_pages(result)
        metadata = {"Title": f"Certificate draft: {_sample_id(result)}", "Creator": "dha",
                    "Producer": "dha (matplotlib)", "CreationDate": None}
        def _save(fh):
            with PdfPages(fh, metadata=metadata) as pdf:
                for fig in pages:
                    pdf.savefig(fig)
        atomic_write(path, _save)
    log.info("wrote %s (%d pages)", path, len(pages))
    return path
