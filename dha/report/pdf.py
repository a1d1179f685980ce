"""PDF certificate draft of one result: ``write_pdf(result, path) -> Path``.

Laid out with reportlab (real text and tables: wrapping, repeated table headers, page breaks),
charts drawn with matplotlib and embedded as images. A4 portrait:

1. the laboratory (settings ``[lab]``), "DRAFT - not released", the certificate-number field,
   sample and run (method and instrument in full), what the input was (peak table or
   composition table), the identification check in words, the mass balance in words, the
   results with units and the standard method each calculated property stands in for, the
   specification checks, the points to check (warnings in words), and - fixed at the foot of
   the page - the responsibility text and the "reviewed by / released by / date" block;
2. group totals, oxygenates (with trade names), the carbon number x group table and chart,
   the octane contributions (table and chart) and what pulls the octane number down, when the
   result has them, and the peaks to review;
3. onwards: the components (largest first; ``[report] pdf_component_rows``, the workbook lists
   all), the traceability checksums, the import log and every warning.

The points to check on page 1 are cut to the room left above the signature block ("... and n
more"; one line when there is no room for a single point): page 1 never carries over.

The settings used are not printed (they are in the workbook and the JSON; their sha256 is on
page 1). Every page has the draft marking and a footer with the sample id, the time the result
was made and "page x of y". Null values print as "—" (the reason is in the warnings).
"""
from __future__ import annotations

import io
import logging
import threading
from functools import lru_cache
from pathlib import Path
from typing import Any, Sequence
from xml.sax.saxutils import escape

from dha.errors import InputError
from dha.safety import atomic_write_bytes, visible_data
from dha.report import (
    AROMATICS_DETAIL_LABELS, BASIS_UNITS, GROUP_KEYS, GROUP_LABELS, NULL_TEXT,
    RESPONSIBILITY_TEXT, STANDARD_METHODS, VERDICT_WORDS, carbon_label, decimals_of,
    display_name, fmt_number, headline_rows, identification_check, input_kind, is_number,
    mass_balance_words, plain_words, property_keys, property_label, reference_temperature_c,
    settings_digest, unit_of, warnings_about_checks,
)

log = logging.getLogger("dha.report.pdf")

# Page geometry [pt] (A4 = 595.28 pt x 841.89 pt).
PAGE_W_PT = 595.28
PAGE_H_PT = 841.89
MARGIN_X_PT = 40.0
TOP_PT = 48.0           # content starts below the page header
BOTTOM_PT = 46.0        # content ends above the footer
CONTENT_W_PT = PAGE_W_PT - 2 * MARGIN_X_PT

#: Colours (our own choice).
INK = "#1a1a1a"
GREY = "#666666"
RED = "#b3161b"
RULE = "#9aa5b1"
HEADER_FILL = "#e3e8ee"
ZEBRA_FILL = "#f5f6f8"
VERDICT_COLOURS = {"pass": "#1f6b35", "fail": RED, "marginal": "#a85a00", None: GREY}

#: Font sizes [pt].
BODY_PT = 7.6
SMALL_PT = 6.9

_FONT_LOCK = threading.Lock()


@lru_cache(maxsize=1)
def _fonts() -> tuple[str, str]:
    """Register DejaVu Sans (shipped with matplotlib: covers ≤, −, ³, °, …) once; fall back to
    Helvetica when the font file cannot be found."""
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    with _FONT_LOCK:
        try:
            import matplotlib

            folder = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
            pdfmetrics.registerFont(TTFont("DhaSans", str(folder / "DejaVuSans.ttf")))
            pdfmetrics.registerFont(TTFont("DhaSans-Bold", str(folder / "DejaVuSans-Bold.ttf")))
            from reportlab.lib.fonts import addMapping

            addMapping("DhaSans", 0, 0, "DhaSans")
            addMapping("DhaSans", 1, 0, "DhaSans-Bold")
            addMapping("DhaSans", 0, 1, "DhaSans")
            addMapping("DhaSans", 1, 1, "DhaSans-Bold")
            return "DhaSans", "DhaSans-Bold"
        except Exception as err:  # pragma: no cover - a broken matplotlib install
            log.warning("PDF: DejaVu Sans not found (%s); using Helvetica", err)
            return "Helvetica", "Helvetica-Bold"


@lru_cache(maxsize=1)
def _styles() -> dict[str, Any]:
    from reportlab.lib.colors import HexColor
    from reportlab.lib.styles import ParagraphStyle

    font, bold = _fonts()
    base = ParagraphStyle("body", fontName=font, fontSize=BODY_PT, leading=BODY_PT * 1.28,
                          textColor=HexColor(INK))
    return {
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=SMALL_PT, leading=SMALL_PT * 1.25),
        "cell": ParagraphStyle("cell", parent=base, fontSize=SMALL_PT, leading=SMALL_PT * 1.22),
        "cell_r": ParagraphStyle("cell_r", parent=base, fontSize=SMALL_PT,
                                 leading=SMALL_PT * 1.22, alignment=2),
        "key": ParagraphStyle("key", parent=base, fontSize=SMALL_PT, leading=SMALL_PT * 1.22,
                              textColor=HexColor(GREY)),
        "grey": ParagraphStyle("grey", parent=base, fontSize=SMALL_PT, leading=SMALL_PT * 1.25,
                               textColor=HexColor(GREY)),
        "h1": ParagraphStyle("h1", parent=base, fontName=bold, fontSize=15, leading=18),
        "h2": ParagraphStyle("h2", parent=base, fontName=bold, fontSize=9.2, leading=11.5,
                             spaceBefore=6, spaceAfter=2.5, keepWithNext=1),
        "h3": ParagraphStyle("h3", parent=base, fontName=bold, fontSize=7.8, leading=9.6,
                             spaceBefore=2, spaceAfter=2, keepWithNext=1),
        "h2split": ParagraphStyle("h2split", parent=base, fontName=bold, fontSize=9.2,
                                  leading=11.5, spaceBefore=6, spaceAfter=2.5),
        "warn": ParagraphStyle("warn", parent=base, fontSize=SMALL_PT, leading=SMALL_PT * 1.25,
                               textColor=HexColor(RED)),
    }


def _p(text: Any, style: str = "cell", bold: bool = False, color: str | None = None):
    """A Paragraph of plain text (escaped: the text is never read as markup)."""
    from reportlab.platypus import Paragraph

    t = escape(_text(text))
    if bold:
        t = f"<b>{t}</b>"
    if color:
        t = f'<font color="{color}">{t}</font>'
    return Paragraph(t, _styles()[style])


def _text(value: Any) -> str:
    if value is None or (isinstance(value, float) and not is_number(value)):
        return NULL_TEXT
    if isinstance(value, (list, tuple)):
        return "; ".join(_text(v) for v in value) if value else NULL_TEXT
    return str(value)


def _num(value: Any, decimals: int) -> str:
    return fmt_number(value, decimals)


def _table(rows: Sequence[Sequence[Any]], widths: Sequence[float], *, header: bool = True,
           align_right: Sequence[int] = (), zebra: bool = True, bold_last: bool = False,
           font_pt: float = SMALL_PT, repeat: bool = True, pad: tuple[float, float] = (0.6, 1.0)):
    """A table of plain cells (str: drawn as strings, fast) or Paragraphs (wrapped); ``pad``
    is the (top, bottom) padding of every cell [pt]."""
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Table, TableStyle

    font, bold = _fonts()
    data = [list(r) for r in rows]
    t = Table(data, colWidths=list(widths), repeatRows=1 if (header and repeat) else 0,
              hAlign="LEFT")
    cmds: list[tuple] = [
        ("FONT", (0, 0), (-1, -1), font, font_pt, font_pt * 1.22),
        ("TEXTCOLOR", (0, 0), (-1, -1), HexColor(INK)),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), pad[0]),
        ("BOTTOMPADDING", (0, 0), (-1, -1), pad[1]),
        ("LEFTPADDING", (0, 0), (-1, -1), 2.5),
        ("RIGHTPADDING", (0, 0), (-1, -1), 2.5),
    ]
    for c in align_right:
        cmds.append(("ALIGN", (c, 0), (c, -1), "RIGHT"))
    if header and data:
        cmds += [("FONT", (0, 0), (-1, 0), bold, font_pt, font_pt * 1.22),
                 ("BACKGROUND", (0, 0), (-1, 0), HexColor(HEADER_FILL)),
                 ("LINEBELOW", (0, 0), (-1, 0), 0.6, HexColor(RULE))]
    if zebra and len(data) > 2:
        start = 1 if header else 0
        cmds.append(("ROWBACKGROUNDS", (0, start), (-1, -1), [None, HexColor(ZEBRA_FILL)]))
    if bold_last and data:
        cmds += [("FONT", (0, -1), (-1, -1), bold, font_pt, font_pt * 1.22),
                 ("LINEABOVE", (0, -1), (-1, -1), 0.5, HexColor(RULE))]
    t.setStyle(TableStyle(cmds))
    return t


def _kv_table(pairs: Sequence[tuple[str, Any]], key_w: float = 84.0, columns: int = 2):
    """Key/value pairs in ``columns`` column pairs; values wrap."""
    per = CONTENT_W_PT / columns
    if not pairs:
        from reportlab.platypus import Spacer

        return Spacer(1, 0)
    rows = []
    for i in range(0, len(pairs), columns):
        row: list[Any] = []
        for key, value in list(pairs[i:i + columns]) + [("", "")] * (columns - len(pairs[i:i + columns])):
            row += [_p(key, "key"), _p(value) if key else ""]
        rows.append(row)
    widths = [key_w, per - key_w] * columns
    return _table(rows, widths, header=False, zebra=False)


def _image(fig, width_pt: float, height_pt: float):
    """A matplotlib Figure as an embedded PNG (200 dpi) of the given size."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from reportlab.platypus import Image

    buf = io.BytesIO()
    FigureCanvasAgg(fig)
    fig.savefig(buf, format="png", dpi=200)
    buf.seek(0)
    return Image(buf, width=width_pt, height=height_pt)


# ----------------------------------------------------------------------------- page 1
def _sample_id(result: dict) -> str:
    value = (result.get("sample") or {}).get("id")
    return NULL_TEXT if value in (None, "") else str(value)


def _settings_section(result: dict, name: str) -> dict:
    value = (result.get("settings") or {}).get(name)
    return value if isinstance(value, dict) else {}


def certificate_number(result: dict) -> str:
    """The certificate number from ``[report] certificate_number`` with its placeholders filled,
    or "" when the setting is empty.

    >>> certificate_number({"settings": {"report": {"certificate_number": "L2/{date}/{tank}"}},
    ...                     "sample": {"tank": "T-14", "injection_time": "2026-11-30 07:42"}})
    'L2/20261130/T-14'
    """
    pattern = str(_settings_section(result, "report").get("certificate_number") or "")
    if not pattern:
        return ""
    sample = result.get("sample") or {}
    when = str(sample.get("injection_time") or result.get("generated_at") or "")
    date = "".join(ch for ch in when[:10] if ch.isdigit())

    class _Fill(dict):
        def __missing__(self, key):
            return ""

    fields = _Fill({str(k): ("" if v is None else str(v)) for k, v in sample.items()})
    fields.update(sample_id=str(sample.get("id") or ""), date=date,
                  stem=str(sample.get("output_stem") or sample.get("id") or ""))
    try:
        return pattern.format_map(fields)
    except (ValueError, IndexError):
        return pattern


def _lab_block(result: dict) -> list:
    lab = _settings_section(result, "lab")
    out = []
    if lab.get("name"):
        out.append(_p(lab["name"], "body", bold=True))
    line = "; ".join(str(lab[k]) for k in ("address", "accreditation") if lab.get(k))
    if line:
        out.append(_p(line, "grey"))
    return out


def _title(result: dict) -> list:
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Paragraph, Table, TableStyle

    st = _styles()
    font, bold = _fonts()
    kind = input_kind(result)
    sub = ("Petrol composition by detailed hydrocarbon analysis (capillary GC-FID)"
           if kind == "peak table" else
           "Petrol composition from a COMPOSITION TABLE (not measured here by GC)")
    left = [Paragraph("Certificate draft", st["h1"]), _p(sub, "grey")]
    number = certificate_number(result)
    left.append(_p(f"Certificate no.: {number or '______________________'}", "body"))
    box = Table([[Paragraph(f'<font name="{bold}" size="13" color="{RED}">DRAFT — not released'
                            '</font>', st["body"])],
                 [_p("not valid until reviewed and released", "small", color=RED)]],
                colWidths=[190])
    box.setStyle(TableStyle([("BOX", (0, 0), (-1, -1), 1.3, HexColor(RED)),
                             ("BACKGROUND", (0, 0), (-1, -1), HexColor("#fbeaea")),
                             ("ALIGN", (0, 0), (-1, -1), "CENTER"),
                             ("TOPPADDING", (0, 0), (-1, -1), 3)]))
    outer = Table([[left, box]], colWidths=[CONTENT_W_PT - 196, 196])
    outer.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("LEFTPADDING", (0, 0), (-1, -1), 0),
                               ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
    return _lab_block(result) + [outer]


def _sample_block(result: dict) -> list:
    sample = result.get("sample") or {}
    library = result.get("library") or {}
    tool = result.get("tool") or {}
    kind = input_kind(result)
    specs = sorted({str(c.get("spec")) for c in result.get("checks") or []
                    if c.get("spec") and c.get("property") != "identification"})
    ref_t = reference_temperature_c(result)
    skip = {"id", "source_file", "instrument", "method", "notes", "output_stem", "input_kind"}
    pairs: list[tuple[str, Any]] = [("sample id", sample.get("id"))]
    for k in ("tank", "vial", "injection", "injection_time", "operator", "site", "lab"):
        if sample.get(k) not in (None, ""):
            pairs.append((k.replace("_", " "), sample.get(k)))
    for k in sorted(sample, key=str):
        if k in skip or str(k).endswith("sha256") or k in dict(pairs) or sample.get(k) in (None, ""):
            continue
        if k in ("tank", "vial", "injection", "injection_time", "operator", "site", "lab"):
            continue
        pairs.append((str(k).replace("_", " "), sample[k]))
    pairs += [("reference temperature", f"{ref_t:g} °C for densities and volume %"),
              ("specification", ", ".join(specs) if specs else "none applied"),
              ("result made", result.get("generated_at")),
              ("dha / library", f"{_text(tool.get('version'))} / {_text(library.get('version'))}")]
    full = [
        ("input", f"{kind}: {_text(sample.get('source_file'))}"
         + (" — amounts as given by the sender, not measured here" if kind == "composition table"
            else "")),
        ("instrument", sample.get("instrument") if kind == "peak table" else
         sample.get("instrument") or "none (composition table)"),
        ("method", sample.get("method") if kind == "peak table" else
         sample.get("method") or "none (composition table)"),
    ]
    notes = [str(n).lstrip("#").strip() for n in sample.get("notes") or [] if str(n).strip()]
    if notes:
        full.append(("notes in the file header", " / ".join(notes)))
    hashes = [("library sha256", library.get("sha256"))]
    out = [_p("Sample and run", "h2"), _kv_table(pairs, columns=2),
           _kv_table(full, key_w=96, columns=1),
           _kv_table([(k, v) for k, v in hashes if v], key_w=96, columns=1)]
    return out


_IDENT_WORDS = {"pass": "passed", "marginal": "marginal", "fail": "FAILED"}
_VERDICT_SENTENCE = {
    "pass": "the peaks were identified reliably",
    "marginal": "the identification is uncertain in places: check the peaks listed",
    "fail": "the identification is NOT reliable: do not release before the peaks are checked",
}


def _identification_block(result: dict) -> list:
    out = [_p("Identification and mass balance", "h2")]
    chk = identification_check(result)
    if chk is not None:
        verdict = chk.get("verdict")
        score = chk.get("value")
        head = (f"Identification check: {_IDENT_WORDS.get(verdict, str(verdict))}"
                + (f" (score {score:.2f} of 1)" if is_number(score) else "")
                + f" — {_VERDICT_SENTENCE.get(verdict, '')}")
        out.append(_p(head, "body", bold=True, color=VERDICT_COLOURS.get(verdict, INK)))
        for reason in chk.get("reasons") or []:
            out.append(_p(f"• {plain_words(reason)}", "small"))
    elif input_kind(result) == "composition table":
        out.append(_p("No identification: the components were named in the composition table.",
                      "body"))
    out.append(_p(f"Mass balance: {mass_balance_words(result)}", "body"))
    return out


_WORST = {"fail": 3, "marginal": 2, "pass": 1, None: 0}


def _limit_text(checks: list[dict], decimals: int) -> str:
    lo = [c.get("limit") for c in checks if c.get("kind") == "min" and is_number(c.get("limit"))]
    hi = [c.get("limit") for c in checks if c.get("kind") == "max" and is_number(c.get("limit"))]
    if lo and hi:
        return f"{max(lo):.{decimals}f} – {min(hi):.{decimals}f}"
    if lo:
        return f"≥ {max(lo):.{decimals}f}"
    if hi:
        return f"≤ {min(hi):.{decimals}f}"
    return ""


def result_rows(result: dict) -> list[dict]:
    """One row per reported quantity: composition values, then calculated properties, then any
    other checked quantity; each with its checks (limits, verdict) and the method it stands for.
    """
    props = result.get("properties") or {}
    unc = result.get("uncertainty") or {}
    ref_t = reference_temperature_c(result)
    kind = input_kind(result)
    checks = [c for c in result.get("checks") or [] if c.get("property") != "identification"]
    by_prop: dict[str, list[dict]] = {}
    for c in checks:
        by_prop.setdefault(str(c.get("property")), []).append(c)
    source = "DHA (this analysis)" if kind == "peak table" else "composition table (as sent)"
    rows: list[dict] = []
    for key, label, value, unit in headline_rows(result):
        rows.append({"key": key, "label": label, "value": value, "unit": unit,
                     "decimals": 2, "unc": None, "method": source, "section": "composition"})
    done = {r["key"] for r in rows}
    for key in ("ethanol_vol_pct", "methanol_vol_pct", "ethers_c5plus_vol_pct"):
        if key in by_prop:
            rows.append({"key": key, "label": property_label(key),
                         "value": by_prop[key][0].get("value"), "unit": unit_of(key),
                         "decimals": decimals_of(key), "unc": None, "method": source,
                         "section": "composition"})
            done.add(key)
    for key in property_keys(result):
        if key not in props and key not in STANDARD_METHODS:
            continue
        label = f"density at {ref_t:g} °C" if key == "density_kg_m3" else property_label(key)
        value = props.get(key)
        rows.append({"key": key, "label": label, "value": value, "unit": unit_of(key),
                     "decimals": decimals_of(key),
                     "unc": unc.get(key) if is_number(value) else None,
                     "method": STANDARD_METHODS.get(key, "-"), "section": "calculated"})
        done.add(key)
    for key, chks in by_prop.items():
        if key not in done:
            rows.append({"key": key, "label": property_label(key), "value": chks[0].get("value"),
                         "unit": unit_of(key) or _text(chks[0].get("unit") or ""),
                         "decimals": decimals_of(key), "unc": chks[0].get("uncertainty"),
                         "method": "-", "section": "other"})
    for r in rows:
        chks = by_prop.get(r["key"], [])
        r["limit"] = _limit_text(chks, r["decimals"])
        verdicts = [c.get("verdict") for c in chks]
        r["verdict"] = max(verdicts, key=lambda v: _WORST.get(v, 0)) if verdicts else None
        if r["unc"] is None and chks and is_number(chks[0].get("uncertainty")):
            r["unc"] = chks[0].get("uncertainty")
    return rows


def _results_block(result: dict) -> list:
    from reportlab.lib.colors import HexColor

    checks = [c for c in result.get("checks") or [] if c.get("property") != "identification"]
    specs = sorted({str(c.get("spec")) for c in checks if c.get("spec")})
    ref_t = reference_temperature_c(result)
    title = "Results" + (f" and specification check ({', '.join(specs)})" if specs else
                         " (no specification applied)")
    rows = [["quantity", "result", "std. unc.", "unit", "limit", "verdict", "stands in for"]]
    marks = []
    section = None
    sections = {"composition": (f"Composition (volume % at {ref_t:g} °C)"
                                if input_kind(result) == "peak table" else
                                f"Composition from the composition table (volume % at "
                                f"{ref_t:g} °C)"),
                "calculated": "Calculated properties: estimates from the composition, not "
                              "results of the test methods named",
                "other": "Other checked quantities"}
    heads = []
    for r in result_rows(result):
        if r["section"] != section:
            section = r["section"]
            heads.append(len(rows))
            rows.append([sections[section], "", "", "", "", "", ""])
        d = r["decimals"]
        rows.append([_p(r["label"]) if len(r["label"]) > 38 else r["label"],
                     _num(r["value"], d), _num(r["unc"], d) if r["unc"] is not None else "",
                     r["unit"], r["limit"],
                     VERDICT_WORDS.get(r["verdict"], "") if r["verdict"] else "",
                     _p(r["method"]) if len(r["method"]) > 30 else r["method"]])
        marks.append((len(rows) - 1, r["verdict"]))
    widths = [128, 38, 38, 34, 50, 122, 0.0]
    widths[-1] = CONTENT_W_PT - sum(widths[:-1])
    # tighter rows than elsewhere: page 1 keeps room for the points to check
    tbl = _table(rows, widths, align_right=(1, 2, 4), zebra=False, pad=(0.15, 0.45))
    _font, bold = _fonts()
    for i in heads:
        tbl.setStyle([("SPAN", (0, i), (-1, i)), ("FONT", (0, i), (-1, i), bold, SMALL_PT,
                                                  SMALL_PT * 1.22),
                      ("BACKGROUND", (0, i), (-1, i), HexColor(ZEBRA_FILL))])
    for i, verdict in marks:
        if verdict:
            tbl.setStyle([("TEXTCOLOR", (5, i), (5, i), HexColor(VERDICT_COLOURS.get(verdict, INK)))])
            if verdict == "fail":
                tbl.setStyle([("FONT", (5, i), (5, i), bold, SMALL_PT, SMALL_PT * 1.22)])
    out = [_p(title, "h2split"), tbl]
    for text in warnings_about_checks(result):
        out.append(_p(plain_words(text), "warn"))
    if checks:
        out.append(_p("Verdicts: pass = inside the limit by more than the expanded uncertainty "
                      "U = 2 × std. unc.; FAIL = outside by more than U; within uncertainty of "
                      "the limit = |value − limit| ≤ U, so the result alone cannot decide (after "
                      "EN ISO 4259). Where no uncertainty is given, U = 0.", "grey"))
    return out


def _points_to_check(result: dict, limit: int = 8) -> list:
    """The warnings in words on page 1: as many as fit above the signature block (at most
    ``limit``), then "... and n more": the list never carries over onto page 2."""
    warnings = [plain_words(w) for w in result.get("warnings") or []]
    if not warnings:
        return []
    return [_fitting_points_class()(warnings, limit)]


@lru_cache(maxsize=1)
def _fitting_points_class():
    from reportlab.platypus import Flowable

    class FittingPoints(Flowable):
        """Heading, bullets and a closing line, cut to the space left on the page."""

        def __init__(self, warnings: list[str], limit: int):
            super().__init__()
            self.warnings = warnings
            self.limit = limit
            self._parts: list = []

        def _layout(self, avail_w: float, k: int) -> tuple[list, float]:
            n = len(self.warnings)
            if k < 0:       # no room for a single point: one line
                parts = [_p(f"Points to check ({n}): see the list of warnings after the "
                            "components.", "h3")]
            else:
                head = _p(f"Points to check ({n}; all are listed after the components)", "h2")
                parts = [head] + [_p(f"• {w}", "small") for w in self.warnings[:k]]
                if k < n:
                    parts.append(_p(f"… and {n - k} more: see the list of warnings after the "
                                    "components.", "grey"))
            height = 0.0
            for i, part in enumerate(parts):
                height += part.wrap(avail_w, 10_000)[1]
                if i:
                    height += part.getSpaceBefore()
                height += part.getSpaceAfter()
            return parts, height

        def wrap(self, avail_w, avail_h):
            k = min(self.limit, len(self.warnings))
            parts, height = self._layout(avail_w, k)
            while height > avail_h and k > -1:
                k -= 1
                parts, height = self._layout(avail_w, k)
            self._parts, self.width, self.height = parts, avail_w, height
            return avail_w, height

        def getSpaceBefore(self):  # noqa: N802 - reportlab's name
            return _styles()["h2"].spaceBefore

        def split(self, avail_w, avail_h):
            return []           # never split: ``wrap`` already cut the list to the space

        def draw(self):
            y = self.height
            for i, part in enumerate(self._parts):
                if i:
                    y -= part.getSpaceBefore()
                _w, h = part.wrap(self.width, 10_000)
                y -= h
                part.drawOn(self.canv, 0, y)
                y -= part.getSpaceAfter()

    return FittingPoints


@lru_cache(maxsize=1)
def page1_foot_pt() -> float:
    """Height of the responsibility text and signature block at the foot of page 1 [pt]."""
    from reportlab.platypus import Paragraph

    st = _styles()
    h = Paragraph("Read before use", st["h3"]).wrap(CONTENT_W_PT, 100)[1] + 5
    for para in RESPONSIBILITY_TEXT:
        h += Paragraph(escape(para), st["small"]).wrap(CONTENT_W_PT, 200)[1] + 2
    return h + 4 + 34 + 4


def _draw_page1_foot(canvas) -> None:
    """Responsibility text and the signature block, at the foot of page 1 (always there)."""
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Paragraph

    st = _styles()
    font, bold = _fonts()
    top = BOTTOM_PT + page1_foot_pt()
    canvas.setStrokeColor(HexColor(RULE))
    canvas.setLineWidth(0.6)
    canvas.line(MARGIN_X_PT, top, PAGE_W_PT - MARGIN_X_PT, top)
    y = top - 4
    head = Paragraph("Read before use", st["h3"])
    _w, h = head.wrap(CONTENT_W_PT, 100)
    head.drawOn(canvas, MARGIN_X_PT, y - h)
    y -= h + 1
    for para in RESPONSIBILITY_TEXT:
        p = Paragraph(escape(para), st["small"])
        _w, h = p.wrap(CONTENT_W_PT, 200)
        p.drawOn(canvas, MARGIN_X_PT, y - h)
        y -= h + 2
    labels = ("reviewed by (name, signature)", "released by (name, signature)", "date")
    widths = (CONTENT_W_PT * 0.38, CONTENT_W_PT * 0.38, CONTENT_W_PT * 0.24)
    x = MARGIN_X_PT
    box_h = 34
    yb = max(BOTTOM_PT + 2, y - 4 - box_h)
    canvas.setFont(font, 6.5)
    for label, w in zip(labels, widths):
        canvas.setStrokeColor(HexColor(RULE))
        canvas.rect(x, yb, w - 8, box_h, stroke=1, fill=0)
        canvas.setFillColor(HexColor(GREY))
        canvas.drawString(x + 4, yb + box_h - 9, label)
        x += w


# ----------------------------------------------------------------------------- page 2
def _groups_block(result: dict) -> list:
    totals = result.get("totals") or {}
    ref_t = reference_temperature_c(result)
    bases = list(BASIS_UNITS)
    rows = [["group"] + [BASIS_UNITS[b] for b in bases]]
    sums: dict[str, float | None] = dict.fromkeys(bases, None)
    for g in GROUP_KEYS:
        row = [GROUP_LABELS[g]]
        for b in bases:
            v = (totals.get(b) or {}).get(g)
            row.append(_num(v, 2))
            if is_number(v):
                sums[b] = (sums[b] or 0.0) + v
        rows.append(row)
    rows.append(["total"] + [_num(sums[b], 2) for b in bases])
    gt = _table(rows, [74, 44, 44, 44], align_right=(1, 2, 3), bold_last=True)
    orows = [["oxygenate, aromatics", "CAS", "mass %", "% v/v"]]
    for o in result.get("oxygenates") or []:
        orows.append([_p(display_name(o.get("name"), o.get("cas"))), _text(o.get("cas")),
                      _num(o.get("mass_pct"), 2), _num(o.get("vol_pct"), 2)])
    orows.append(["oxygen (element)", "", _num(result.get("oxygen_mass_pct"), 2), ""])
    detail = result.get("aromatics_detail")
    if not isinstance(detail, dict) or not detail:
        detail = {"benzene": result.get("benzene") or {}}
    for key, value in detail.items():
        value = value if isinstance(value, dict) else {}
        orows.append([AROMATICS_DETAIL_LABELS.get(key, key.replace("_", " ")),
                      "71-43-2" if key == "benzene" else "",
                      _num(value.get("mass_pct"), 2), _num(value.get("vol_pct"), 2)])
    ow = [CONTENT_W_PT - 206 - 10 - 46 - 40 - 40, 46, 40, 40]
    ot = _table(orows, ow, align_right=(2, 3))
    from reportlab.platypus import Table, TableStyle

    outer = Table([[[_p("PIONA and oxygenates", "h3"), gt],
                    [_p("Oxygenates (trade names in brackets), oxygen and aromatics", "h3"), ot]]],
                  colWidths=[216, CONTENT_W_PT - 216])
    outer.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("LEFTPADDING", (0, 0), (-1, -1), 0),
                               ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
    return [_p("Group totals", "h2"), outer,
            _p(f"Volume % at {ref_t:g} °C. Groups: n-paraffins, isoparaffins, olefins, "
               "naphthenes, aromatics (PIONA), oxygenates and unidentified peaks.", "grey")]


def _carbon_block(result: dict) -> list:
    from dha.report.excel import carbon_number_matrix
    from dha.report.figures import groups_by_carbon_number_figure

    order, cells = carbon_number_matrix(result, "vol_pct")
    out = [_p("Group amounts by carbon number (% v/v)", "h2")]
    fig = groups_by_carbon_number_figure(result, basis="vol_pct", size_in=(7.2, 2.6))
    out.append(_image(fig, CONTENT_W_PT, CONTENT_W_PT * 2.6 / 7.2))
    if not order:
        out.append(_p("no carbon-number data in this result", "grey"))
        return out
    groups = [g for g in GROUP_KEYS if any(g in cells[cn] for cn in order)]
    rows = [["carbon no."] + [GROUP_LABELS.get(g, str(g)) for g in groups] + ["total"]]
    for cn in order:
        vals = [cells[cn].get(g) for g in groups]
        rows.append([carbon_label(cn)] + [_num(v, 2) if v else "" for v in vals]
                    + [_num(sum(v for v in vals if v is not None), 2)])
    col_tot = [sum(cells[cn].get(g, 0.0) for cn in order) for g in groups]
    rows.append(["total"] + [_num(v, 2) for v in col_tot] + [_num(sum(col_tot), 2)])
    cw = (CONTENT_W_PT - 100) / max(1, len(groups))
    out.append(_table(rows, [50] + [cw] * len(groups) + [50],
                      align_right=tuple(range(1, len(groups) + 2)), bold_last=True))
    out.append(_p("≤C3 holds C1 to C3; the last bucket holds the carbon number shown and "
                  "heavier where it is marked +.", "grey"))
    return out


def _octane_block(result: dict) -> list:
    contrib = result.get("octane_contributions") or []
    explained = result.get("octane_explained") or {}
    if not contrib and not (isinstance(explained, dict) and explained):
        return []
    out = [_p("What makes up the calculated octane numbers", "h2")]
    if contrib:
        from dha.report.figures import octane_contributions_figure

        method = explained.get("method") if isinstance(explained, dict) else None
        out.append(_p("Contribution of each group and carbon number to the calculated RON and "
                      "MON (they add up to the values on page 1)"
                      + (f"; method: {method}" if method else "") + ".", "small"))
        by_group: dict[str, list[float]] = {}
        for c in contrib:
            g = str(c.get("group"))
            acc = by_group.setdefault(g, [0.0, 0.0])
            acc[0] += c.get("ron") or 0.0 if is_number(c.get("ron")) else 0.0
            acc[1] += c.get("mon") or 0.0 if is_number(c.get("mon")) else 0.0
        rows = [["group", "to RON", "to MON"]]
        for g, (r, m) in by_group.items():
            rows.append([GROUP_LABELS.get(g, g), _num(r, 2), _num(m, 2)])
        rows.append(["total", _num(sum(v[0] for v in by_group.values()), 2),
                     _num(sum(v[1] for v in by_group.values()), 2)])
        t = _table(rows, [70, 66, 66], align_right=(1, 2), bold_last=True)
        fig = octane_contributions_figure(result, size_in=(4.3, 2.4))
        img = _image(fig, 300, 300 * 2.4 / 4.3)
        from reportlab.platypus import Table, TableStyle

        from reportlab.platypus import KeepTogether

        outer = Table([[t, img]], colWidths=[CONTENT_W_PT - 306, 306])
        outer.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0)]))
        out = [KeepTogether(out + [outer])]   # heading, words, table and chart stay together
    if isinstance(explained, dict) and explained.get("components"):
        rows = [["component pulling the octane number down", "% v/v", "RON", "MON"]]
        for c in explained["components"]:
            rows.append([_p(display_name(c.get("name"), c.get("cas"))),
                         _num(c.get("vol_pct"), 2), _num(c.get("ron"), 2), _num(c.get("mon"), 2)])
        out.append(_p("Components that pull the octane numbers down most (their contribution "
                      "against the sample's average)", "h3"))
        out.append(_table(rows, [CONTENT_W_PT - 150, 50, 50, 50], align_right=(1, 2, 3)))
    if isinstance(explained, dict) and explained.get("classes"):
        rows = [["class", "RON", "MON"]]
        for c in explained["classes"]:
            rows.append([_p(_text(c.get("class"))), _num(c.get("ron"), 2), _num(c.get("mon"), 2)])
        out.append(_table(rows, [CONTENT_W_PT - 100, 50, 50], align_right=(1, 2)))
    return out


def _review_block(result: dict, limit: int = 25) -> list:
    ident = result.get("identification")
    peaks = (ident or {}).get("peaks_to_review") if isinstance(ident, dict) else None
    if not peaks:
        return []
    out = [_p(f"Peaks to review ({len(peaks)}, most important first)", "h2")]
    rows = [["RT [min]", "identified as", "group", "mass %", "confidence", "why"]]
    for pk in peaks[:limit]:
        rows.append([_num(pk.get("rt_min"), 3), _p(display_name(pk.get("name"), pk.get("cas"))),
                     GROUP_LABELS.get(pk.get("group"), _text(pk.get("group"))),
                     _num(pk.get("mass_pct"), 3), _num(pk.get("confidence"), 2),
                     _p(plain_words(pk.get("reason") or ""))])
    out.append(_table(rows, [40, 130, 56, 38, 44, CONTENT_W_PT - 308], align_right=(0, 3, 4)))
    if len(peaks) > limit:
        out.append(_p(f"{len(peaks) - limit} more in the workbook (sheet Peaks to review).",
                      "grey"))
    return out


# ----------------------------------------------------------------------------- page 3+
_MATCH_WORDS = {"name": "name", "cas": "CAS", "retention_index": "ret. index",
                "unidentified": "unidentified"}


def _components_block(result: dict) -> list:
    comps = list(result.get("components") or [])
    limit = _settings_section(result, "report").get("pdf_component_rows", 0)
    limit = int(limit) if is_number(limit) else 0
    order = sorted(range(len(comps)), key=lambda i: -(comps[i].get("mass_pct")
                                                      if is_number(comps[i].get("mass_pct")) else -1))
    shown = order if limit <= 0 else order[:limit]
    kind = input_kind(result)
    title = (f"Components ({len(comps)} rows; largest first"
             + (f", the {len(shown)} largest shown, all in the workbook)" if len(shown) < len(comps)
                else ")"))
    from reportlab.platypus import CondPageBreak

    out = [CondPageBreak(90), _p(title, "h2split")]
    peak = kind == "peak table"
    head = ["#", "name", "CAS", "group", "C", "mass %", "% v/v", "mol %"]
    widths = [24, 170, 52, 58, 18, 40, 40, 40]
    if peak:
        head += ["RT [min]", "RI", "match"]
        widths += [40, 34, 0.0]
        widths[-1] = CONTENT_W_PT - sum(widths[:-1])
    else:
        widths[1] += CONTENT_W_PT - sum(widths)
    rows = [head]
    for i in shown:
        c = comps[i]
        group = c.get("group")
        row = [str(i + 1), display_name(c.get("name"), c.get("cas")), _text(c.get("cas")),
               GROUP_LABELS.get(group, _text(group)), _text(c.get("carbon_number")),
               _num(c.get("mass_pct"), 3), _num(c.get("vol_pct"), 3), _num(c.get("mol_pct"), 3)]
        if peak:
            row += [_num(c.get("rt_min"), 3), _num(c.get("retention_index"), 1),
                    _MATCH_WORDS.get(c.get("match"), _text(c.get("match")))]
        if len(row[1]) > 44:   # long names wrap (strings are faster; only these need a Paragraph)
            row[1] = _p(row[1])
        rows.append(row)
    right = (0, 4, 5, 6, 7) + ((8, 9) if peak else ())
    out.append(_table(rows, widths, align_right=right))
    if len(shown) < len(comps):
        rest = [comps[i] for i in order[len(shown):]]
        mass = sum(c.get("mass_pct") for c in rest if is_number(c.get("mass_pct")))
        out.append(_p(f"{len(rest)} smaller components ({mass:.3f} mass % together) are listed "
                      "in the workbook, sheet Components.", "grey"))
    return out


def _traceability_block(result: dict) -> list:
    sample = result.get("sample") or {}
    library = result.get("library") or {}
    prov = result.get("provenance") if isinstance(result.get("provenance"), dict) else {}
    pairs = [("input file", sample.get("source_file")),
             ("input sha256", sample.get("source_sha256") or prov.get("input_sha256")),
             ("library sha256", library.get("sha256")),
             ("settings sha256", settings_digest(result.get("settings"))),
             ("schema", result.get("schema"))]
    return [_p("Traceability (the settings used are in the workbook and the JSON result)", "h2"),
            _kv_table([(k, v) for k, v in pairs if v], key_w=96, columns=1)]


def _logs_block(result: dict) -> list:
    entries = result.get("import_log") or []
    from reportlab.platypus import CondPageBreak

    out = [CondPageBreak(60),
           _p(f"Import log ({len(entries)} rows of the file skipped or changed)", "h2split")]
    if entries:
        rows = [["row", "action", "reason"]]
        for e in entries:
            rows.append([_text(e.get("row")), _text(e.get("action")), _p(e.get("reason"))])
        out.append(_table(rows, [40, 60, CONTENT_W_PT - 100], align_right=(0,)))
    warnings = result.get("warnings") or []
    out += [CondPageBreak(60), _p(f"Warnings ({len(warnings)})", "h2split")]
    if warnings:
        rows = [["#", "warning"]] + [[str(i), _p(plain_words(w))]
                                     for i, w in enumerate(warnings, start=1)]
        out.append(_table(rows, [22, CONTENT_W_PT - 22], align_right=(0,)))
    return out


# ----------------------------------------------------------------------------- document
def _end_of_first_page_class():
    from reportlab.platypus import Flowable

    class EndOfFirstPage(Flowable):
        """Moves on to the next page when still on page 1; nothing on a later page."""

        def wrap(self, avail_w, avail_h):
            if self.canv.getPageNumber() == 1:
                return avail_w, avail_h + 1.0
            return avail_w, 0.0

        def split(self, avail_w, avail_h):
            return [] if self.canv.getPageNumber() == 1 else [self]

        def draw(self):
            pass

    return EndOfFirstPage


def _EndOfFirstPage():  # noqa: N802 - reads as a flowable in the story
    return _end_of_first_page_class()()


def story(result: dict) -> list:
    """The flowables of the draft, in order (page 1 ends before "Group totals")."""
    from reportlab.platypus import CondPageBreak, Spacer

    s: list = []
    s += _title(result)
    s += _sample_block(result)
    s += _identification_block(result)
    s += _results_block(result)
    s += _points_to_check(result)
    s.append(_EndOfFirstPage())   # the certificate face ends; the rest flows
    s += _groups_block(result)
    s += _carbon_block(result)
    s += _octane_block(result)
    s += _review_block(result)
    s += _components_block(result)
    s.append(Spacer(1, 4))
    # traceability before the logs: at the very end it was sometimes alone on the last page
    s += _traceability_block(result)
    s += _logs_block(result)
    return s


def _frame_drawer(result: dict):
    from reportlab.lib.colors import Color, HexColor

    font, bold = _fonts()
    sample_id = _sample_id(result)
    made = _text(result.get("generated_at"))

    def draw(canvas, doc) -> None:
        canvas.saveState()
        canvas.setFillColor(Color(0.70, 0.09, 0.11, alpha=0.05))
        canvas.setFont(bold, 110)
        canvas.translate(PAGE_W_PT / 2, PAGE_H_PT / 2)
        canvas.rotate(52)
        canvas.drawCentredString(0, -40, "DRAFT")
        canvas.restoreState()
        canvas.saveState()
        canvas.setFont(font, 7)
        canvas.setFillColor(HexColor(GREY))
        canvas.drawString(MARGIN_X_PT, PAGE_H_PT - 28, "dha · DHA composition and calculated "
                          "properties")
        canvas.setFillColor(HexColor(RED))
        canvas.setFont(bold, 7)
        canvas.drawRightString(PAGE_W_PT - MARGIN_X_PT, PAGE_H_PT - 28,
                               "DRAFT — not released")
        canvas.setStrokeColor(HexColor(RULE))
        canvas.setLineWidth(0.5)
        canvas.line(MARGIN_X_PT, PAGE_H_PT - 33, PAGE_W_PT - MARGIN_X_PT, PAGE_H_PT - 33)
        canvas.line(MARGIN_X_PT, 34, PAGE_W_PT - MARGIN_X_PT, 34)
        canvas.setFont(font, 7)
        canvas.setFillColor(HexColor(GREY))
        canvas.drawString(MARGIN_X_PT, 24, f"{sample_id} · result made {made}")
        if doc.page == 1:
            _draw_page1_foot(canvas)
        canvas.restoreState()

    return draw


def _numbered_canvas(total_holder: dict):
    """A canvas class that keeps each page until the end, then writes "page x of y"."""
    from reportlab.pdfgen.canvas import Canvas

    class _Canvas(Canvas):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self._pages: list[dict] = []

        def showPage(self):  # noqa: N802 - reportlab's name
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            total = len(self._pages)
            total_holder["pages"] = total
            font, _bold = _fonts()
            from reportlab.lib.colors import HexColor

            for state in self._pages:
                self.__dict__.update(state)
                self.setFont(font, 7)
                self.setFillColor(HexColor(GREY))
                self.drawRightString(PAGE_W_PT - MARGIN_X_PT, 24,
                                     f"page {self._pageNumber} of {total}")
                super().showPage()
            super().save()

    return _Canvas


def build_pdf(result: dict) -> bytes:
    """The draft as PDF bytes."""
    if not isinstance(result, dict):
        raise InputError(f"PDF report: result must be a dict (dha-result/1), got "
                         f"{type(result).__name__}")
    from reportlab import rl_config
    from reportlab.platypus import BaseDocTemplate, Frame, NextPageTemplate, PageTemplate

    # binary (zlib) streams only: the ASCII-85 text encoding of every page and image is done
    # in pure Python without reportlab's optional accelerator (about 10 % of the PDF's time)
    rl_config.useA85 = 0
    _fonts()
    foot = page1_foot_pt()
    frame1 = Frame(MARGIN_X_PT, BOTTOM_PT + foot + 6, CONTENT_W_PT,
                   PAGE_H_PT - TOP_PT - BOTTOM_PT - foot - 6, id="first",
                   leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    frame = Frame(MARGIN_X_PT, BOTTOM_PT, CONTENT_W_PT, PAGE_H_PT - TOP_PT - BOTTOM_PT,
                  id="body", leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    draw = _frame_drawer(result)
    buf = io.BytesIO()
    doc = BaseDocTemplate(buf, pagesize=(PAGE_W_PT, PAGE_H_PT), title="Certificate draft",
                          author="dha", subject=_sample_id(result), invariant=1,
                          pageCompression=1)
    doc.addPageTemplates([PageTemplate("first", [frame1], onPage=draw),
                          PageTemplate("later", [frame], onPage=draw)])
    doc.build([NextPageTemplate("later")] + story(result),
              canvasmaker=_numbered_canvas({}))
    return buf.getvalue()


def write_pdf(result: dict, path) -> Path:
    """Write the certificate draft of ``result`` to ``path`` (folders created).

    Parameters
    ----------
    result : dict
        A result dict of schema ``dha-result/1``; extra keys (``octane_contributions``,
        ``octane_explained``, ``identification.peaks_to_review``) are shown when present.
    path : str or Path
        Output file.

    Returns
    -------
    Path
        The file written.
    """
    if not isinstance(result, dict):
        raise InputError(f"write_pdf: result must be a dict (dha-result/1), got "
                         f"{type(result).__name__}")
    result = visible_data(result)  # control characters shown, never written raw
    data = build_pdf(result)
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write_bytes(path, data)
    log.info("wrote %s", path)
    return path
