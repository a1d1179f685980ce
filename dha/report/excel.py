"""Excel workbook of one result: ``write_xlsx(result, path) -> Path``.

Sheets (plain names of our own), each a table with one bold, frozen header row unless said:

- ``Summary``: key/value rows (sample, library, settings digest, headline values, mass
  balance) then the specification checks; header rows of each block in bold.
- ``Groups``: group totals in mass %, % v/v and mol %, and a total row.
- ``Carbon number mass`` / ``Carbon number volume``: carbon number x group matrices.
- ``Components``: every component row of the result.
- ``Oxygenates``, ``Properties`` (value, standard uncertainty, unit), ``Import log``,
  ``Warnings``, ``Settings`` (flattened ``section.key``), ``Notes`` (responsibility text).

Numbers are stored as numbers (null -> empty cell, reason in ``Warnings``), each numeric header
carries its unit, and the content depends only on the result dict.
"""
from __future__ import annotations

import datetime as _dt
import logging
from pathlib import Path
from typing import Any, Iterable, Sequence

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from dha.errors import InputError
from dha.safety import save_workbook, visible_data
from dha.report import (
    AROMATICS_DETAIL_LABELS, BASIS_UNITS, GROUP_KEYS, GROUP_LABELS, RESPONSIBILITY_TEXT,
    TRADE_NAMES, VERDICT_WORDS, carbon_label, carbon_number_sort_key, decimals_of,
    display_name, flatten_mapping, headline_rows, identification_check, is_number,
    plain_words, property_keys, property_label, settings_digest, unit_of,
    warnings_about_checks,
)

log = logging.getLogger("dha.report.excel")

_BOLD = Font(bold=True)
_HEADER_FILL = PatternFill("solid", fgColor="DCE3EA")  # pale slate, our own choice
_TITLE_FONT = Font(bold=True, size=13)
_WARN_FONT = Font(bold=True, color="9C2A00")
_MAX_WIDTH = 70

#: Number formats by kind of column.
FMT_PCT = "0.0000"
FMT_RT = "0.000"
FMT_RI = "0.0"
FMT_AREA = "#,##0.0"
FMT_INT = "0"

#: Sheet names (our own).
SHEETS = (
    "Summary", "Groups", "Carbon number mass", "Carbon number volume", "Components",
    "Oxygenates", "Properties", "Distillation", "Import log", "Warnings", "Settings", "Notes",
)

#: Component fields of the contract -> (header, number format or None).
COMPONENT_COLUMNS: dict[str, tuple[str, str | None]] = {
    "name": ("name", None),
    "cas": ("CAS number", None),
    "group": ("group", None),
    "carbon_number": ("carbon number", FMT_INT),
    "rt_min": ("retention time [min]", FMT_RT),
    "retention_index": ("retention index [-]", FMT_RI),
    "area": ("area [CDS units]", FMT_AREA),
    "mass_pct": ("mass %", FMT_PCT),
    "vol_pct": ("% v/v", FMT_PCT),
    "mol_pct": ("mol %", FMT_PCT),
    "match": ("match", None),
    "ri_source": ("retention index source", None),
}


#: Extra component fields the result may carry -> (header, number format).
COMPONENT_EXTRA_COLUMNS: dict[str, tuple[str, str | None]] = {
    "rrf": ("relative response factor, methane = 1 [-]", "0.0000"),
    "model_component": ("properties taken from", None),
    "coelution": ("co-elution note", None),
}


def _cell_value(value: Any) -> Any:
    """A value openpyxl stores faithfully: numbers stay numbers, null/NaN -> empty."""
    if value is None:
        return None
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return value if is_number(value) else None
    if isinstance(value, (dict, list, tuple)):
        return plain_text(value)
    return str(value)


def plain_text(value: Any) -> str:
    """A list or mapping as words a person reads in a cell (never a JSON literal).

    >>> plain_text(["json", "xlsx"]), plain_text({4: 5.09, 5: 7.0}), plain_text([]), plain_text({})
    ('json, xlsx', '4 = 5.09; 5 = 7.0', '(none)', '(none)')
    """
    if isinstance(value, dict):
        if not value:
            return "(none)"
        return "; ".join(f"{k} = {plain_text(v) if isinstance(v, (dict, list, tuple)) else v}"
                         for k, v in value.items())
    if isinstance(value, (list, tuple)):
        if not value:
            return "(none)"
        return ", ".join(plain_text(v) if isinstance(v, (dict, list, tuple)) else str(v)
                         for v in value)
    if isinstance(value, bool):
        return "true" if value else "false"
    return "" if value is None else str(value)


def _table(ws, header: Sequence[str], rows: Iterable[Sequence[Any]],
           formats: Sequence[str | None] | None = None, start_row: int = 1,
           freeze: bool = True) -> int:
    """Write a header and rows from ``start_row``; return the next free row number."""
    for j, text in enumerate(header, start=1):
        cell = ws.cell(row=start_row, column=j, value=text)
        cell.font = _BOLD
        cell.fill = _HEADER_FILL
        cell.alignment = Alignment(vertical="top", wrap_text=False)
    r = start_row
    fmts = list(formats or [])
    last = ws.max_row       # counted once: ws.max_row scans every cell (quadratic in a loop)
    for r, row in enumerate(rows, start=start_row + 1):
        if r == last + 1:                  # the usual case: append the whole row at once
            last = r
            ws.append([_cell_value(v) for v in row])
            for j, value in enumerate(row):
                if j < len(fmts) and fmts[j] and is_number(value):
                    ws.cell(row=r, column=j + 1).number_format = fmts[j]
            continue
        last = max(last, r)
        for j, value in enumerate(row, start=1):
            cell = ws.cell(row=r, column=j, value=_cell_value(value))
            if fmts and j - 1 < len(fmts) and fmts[j - 1] and is_number(value):
                cell.number_format = fmts[j - 1]
    if freeze:
        ws.freeze_panes = ws.cell(row=start_row + 1, column=1)
    return r + 1


def _autowidth(ws, minimum: int = 8, maximum: int = _MAX_WIDTH) -> None:
    """Set each column's width from its longest text (numbers counted as 10 characters)."""
    widths: dict[int, int] = {}
    # the first 400 rows set the widths (a long listing's later rows are alike; common
    # practice, no source)
    for row in ws.iter_rows(max_row=min(ws.max_row, 400)):
        for cell in row:
            if cell.value is None:
                continue
            n = 10 if is_number(cell.value) else max(len(s) for s in str(cell.value).split("\n"))
            widths[cell.column] = max(widths.get(cell.column, 0), n)
    for col, n in widths.items():
        ws.column_dimensions[get_column_letter(col)].width = max(minimum, min(maximum, n + 2))


def _summary(ws, result: dict) -> None:
    sample = result.get("sample") or {}
    library = result.get("library") or {}
    tool = result.get("tool") or {}
    ws.cell(row=1, column=1, value="DRAFT — not released: read the Notes sheet before use").font = _TITLE_FONT
    r = 3
    blocks: list[tuple[str, list[tuple[str, Any, str]]]] = []
    ident = [("sample id", sample.get("id"), ""), ("source file", sample.get("source_file"), "")]
    for key in sorted(k for k in sample if k not in ("id", "source_file")):
        ident.append((key.replace("_", " "), sample[key], ""))
    blocks.append(("Sample", ident))
    blocks.append(("Run", [
        ("schema", result.get("schema"), ""),
        ("tool version", tool.get("version"), ""),
        ("generated at", result.get("generated_at"), ""),
        ("library version", library.get("version"), ""),
        ("library sha256", library.get("sha256"), ""),
        ("settings sha256", settings_digest(result.get("settings")), ""),
        ("specification profile", _spec_names(result), ""),
    ]))
    blocks.append(("Headline values", [
        (f"{label} [{unit}]", value, unit) for _key, label, value, unit in headline_rows(result)
    ] + [
        (f"{property_label(k)} [{unit_of(k)}]", (result.get("properties") or {}).get(k), unit_of(k))
        for k in ("ron", "mon", "dvpe_kpa", "density_kg_m3")
    ]))
    balance = result.get("mass_balance")
    if isinstance(balance, dict) and balance:
        blocks.append(("Mass balance", [
            (label + (f" [{unit}]" if unit else ""), value, unit)
            for label, unit, value in flatten_mapping(balance)
        ]))
    for title, rows in blocks:
        r = _table(ws, [title, "value", "unit"], rows, formats=[None, "0.0###", None],
                   start_row=r, freeze=False)
        r += 1
    ws.cell(row=r, column=1, value="Specification checks").font = _TITLE_FONT
    r += 1
    check_rows = []
    for chk in result.get("checks") or []:
        prop = chk.get("property", "")
        check_rows.append([
            chk.get("spec"), prop, property_label(prop), unit_of(prop) or chk.get("unit"),
            chk.get("kind"),
            chk.get("limit"), chk.get("value"), _uncertainty_for(result, chk),
            VERDICT_WORDS.get(chk.get("verdict"), str(chk.get("verdict"))),
        ])
    end = _table(ws, ["spec", "property", "description", "unit", "kind", "limit [unit]",
                      "value [unit]", "standard uncertainty [unit]", "verdict"],
                 check_rows, formats=[None] * 5 + ["0.0##"] * 3 + [None],
                 start_row=r, freeze=False)
    for row in ws.iter_rows(min_row=r + 1, max_row=end - 1, min_col=9, max_col=9):
        for cell in row:
            if cell.value in ("FAIL", VERDICT_WORDS["marginal"]):
                cell.font = _WARN_FONT
    for k, text in enumerate(warnings_about_checks(result)):
        ws.cell(row=end + 1 + k, column=1, value=text)
    ws.freeze_panes = "A2"
    _autowidth(ws)
    ws.column_dimensions["A"].width = 34


def _uncertainty_for(result: dict, check: dict) -> Any:
    if "uncertainty" in check:
        return check.get("uncertainty")
    return (result.get("uncertainty") or {}).get(check.get("property"))


def _spec_names(result: dict) -> str | None:
    names = sorted({str(c.get("spec")) for c in result.get("checks") or [] if c.get("spec")})
    if names:
        return ", ".join(names)
    return ((result.get("settings") or {}).get("report") or {}).get("spec")


def _groups(ws, result: dict) -> None:
    totals = result.get("totals") or {}
    bases = list(BASIS_UNITS)
    rows = []
    sums: dict[str, float | None] = {b: None for b in bases}
    for g in GROUP_KEYS:
        row = [g, GROUP_LABELS[g]]
        for b in bases:
            v = (totals.get(b) or {}).get(g)
            row.append(v)
            if is_number(v):
                sums[b] = (sums[b] or 0.0) + v
        rows.append(row)
    rows.append(["total", "sum of the groups"] + [sums[b] for b in bases])
    _table(ws, ["group", "description"] + [BASIS_UNITS[b] for b in bases], rows,
           formats=[None, None] + [FMT_PCT] * 3)
    last = len(rows) + 1
    for cell in ws[last]:
        cell.font = _BOLD
    detail = result.get("aromatics_detail")
    if isinstance(detail, dict) and detail:
        rows = [[key, AROMATICS_DETAIL_LABELS.get(key, key.replace("_", " "))]
                + [(value or {}).get(b) if isinstance(value, dict) else None for b in bases]
                for key, value in detail.items()]
        _table(ws, ["aromatics detail", "description"] + [BASIS_UNITS[b] for b in bases], rows,
               formats=[None, None] + [FMT_PCT] * 3, start_row=last + 2, freeze=False)
    _autowidth(ws)


def carbon_number_matrix(result: dict, basis: str) -> tuple[list[Any], dict[Any, dict[str, float]]]:
    """Carbon number x group values of ``by_carbon_number`` for one basis.

    Returns the sorted carbon numbers and ``{carbon_number: {group: value}}``; a missing
    (carbon number, group) pair is absent, not zero. Null values are left out.
    """
    cells: dict[Any, dict[str, float]] = {}
    for entry in result.get("by_carbon_number") or []:
        cn = entry.get("carbon_number")
        value = entry.get(basis)
        cells.setdefault(cn, {})
        if is_number(value):
            g = entry.get("group")
            cells[cn][g] = cells[cn].get(g, 0.0) + value
    return sorted(cells, key=carbon_number_sort_key), cells


def _matrix(ws, result: dict, basis: str) -> None:
    unit = BASIS_UNITS[basis]
    order, cells = carbon_number_matrix(result, basis)
    present = [g for g in GROUP_KEYS if any(g in cells[cn] for cn in order)]
    extra = sorted({g for cn in order for g in cells[cn] if g not in GROUP_KEYS}, key=str)
    groups = present + extra
    rows = []
    for cn in order:
        vals = [cells[cn].get(g) for g in groups]
        rows.append([carbon_label(cn)] + vals + [sum(v for v in vals if v is not None)])
    col_totals = [sum(cells[cn].get(g, 0.0) for cn in order) for g in groups]
    rows.append(["total"] + col_totals + [sum(col_totals)])
    header = ["carbon number (≤C3 holds C1-C3)"] + [f"{GROUP_LABELS.get(g, g)} [{unit}]" for g in groups] + [f"total [{unit}]"]
    _table(ws, header, rows, formats=[None] + [FMT_PCT] * (len(groups) + 1))
    for cell in ws[len(rows) + 1]:
        cell.font = _BOLD
    _autowidth(ws)


def _components(ws, result: dict) -> None:
    comps = result.get("components") or []
    keys = list(COMPONENT_COLUMNS)
    extra = sorted({k for c in comps for k in c if k not in COMPONENT_COLUMNS}, key=str)
    def extra_header(k: str) -> str:
        if k in COMPONENT_EXTRA_COLUMNS:
            return COMPONENT_EXTRA_COLUMNS[k][0]
        unit = unit_of(k)
        numeric = any(is_number(c.get(k)) for c in comps)
        return k.replace("_", " ") + (f" [{unit}]" if unit else " [unit not stated]" if numeric
                                      else "")

    header = ["#"] + [COMPONENT_COLUMNS[k][0] for k in keys] + [extra_header(k) for k in extra]
    formats = ([FMT_INT] + [COMPONENT_COLUMNS[k][1] for k in keys]
               + [COMPONENT_EXTRA_COLUMNS.get(k, ("", None))[1] for k in extra])
    rows = ([i] + [c.get(k) for k in keys] + [c.get(k) for k in extra]
            for i, c in enumerate(comps, start=1))
    _table(ws, header, rows, formats=formats)
    _autowidth(ws, maximum=45)


def _oxygenates(ws, result: dict) -> None:
    oxy = result.get("oxygenates") or []
    bases = ["mass_pct", "vol_pct"] + (["mol_pct"] if any("mol_pct" in o for o in oxy) else [])
    rows = [[o.get("name"), TRADE_NAMES.get(str(o.get("cas") or ""), ""), o.get("cas")]
            + [o.get(b) for b in bases] for o in oxy]
    r = _table(ws, ["name", "trade name", "CAS number"] + [BASIS_UNITS[b] for b in bases], rows,
               formats=[None, None, None] + [FMT_PCT] * len(bases))
    ws.cell(row=r + 1, column=1, value="oxygen [mass %]").font = _BOLD
    cell = ws.cell(row=r + 1, column=4, value=_cell_value(result.get("oxygen_mass_pct")))
    cell.number_format = FMT_PCT
    _autowidth(ws)


def _properties(ws, result: dict) -> None:
    props = result.get("properties") or {}
    unc = result.get("uncertainty") or {}
    rows = []
    formats_per_row = []
    for key in property_keys(result):
        value = props.get(key)
        note = "" if is_number(value) else "not computed: see Warnings"
        rows.append([key, property_label(key), unit_of(key), value, unc.get(key), note])
        d = decimals_of(key)
        formats_per_row.append("0" + ("." + "0" * d if d else ""))
    _table(ws, ["property", "description", "unit", "value [unit]",
                "standard uncertainty [unit]", "note"], rows)
    for i, fmt in enumerate(formats_per_row, start=2):
        for col in (4, 5):
            if is_number(ws.cell(row=i, column=col).value):
                ws.cell(row=i, column=col).number_format = fmt
    _autowidth(ws)


def _distillation(ws, result: dict) -> None:
    """The estimated distillation curve (dha.properties.volatility details), if computed."""
    details = ((result.get("property_details") or {}).get("volatility") or {})
    curve = details.get("curve") or {}
    pct, t_c = curve.get("evaporated_vol_pct") or [], curve.get("t_c") or []
    rows = [[p, t] for p, t in zip(pct, t_c)]
    _table(ws, ["evaporated (% v/v)", "temperature (°C)"], rows, formats=["0.0", "0.0"])
    method = (details.get("model") or {}).get("distillation")
    if method:
        ws.cell(row=1, column=4, value=f"estimate: {method}; not a result of the standard "
                                        "distillation test")
    _autowidth(ws)


def _import_log(ws, result: dict) -> None:
    rows = [[e.get("row"), e.get("action"), e.get("reason")] for e in result.get("import_log") or []]
    _table(ws, ["row in input", "action", "reason"], rows, formats=[FMT_INT, None, None])
    _autowidth(ws, maximum=100)


def _warnings(ws, result: dict) -> None:
    rows = [[i, str(w)] for i, w in enumerate(result.get("warnings") or [], start=1)]
    _table(ws, ["#", "warning"], rows, formats=[FMT_INT, None])
    _autowidth(ws, maximum=120)


def _settings(ws, result: dict) -> None:
    rows = []

    def walk(prefix: str, value: Any) -> None:
        if isinstance(value, dict) and value and prefix.count(".") < 1:
            for k in sorted(value, key=str):
                walk(f"{prefix}.{k}" if prefix else str(k), value[k])
        else:
            rows.append([prefix, plain_text(value) if isinstance(value, (dict, list, tuple, bool))
                         else value])

    walk("", result.get("settings") or {})
    _table(ws, ["setting (section.key of the settings file)", "value"], rows)
    _autowidth(ws)


def _notes(ws, result: dict) -> None:
    _table(ws, ["read before use"], [[p] for p in RESPONSIBILITY_TEXT])
    ws.column_dimensions["A"].width = 110
    for row in ws.iter_rows(min_row=2):
        for cell in row:
            cell.alignment = Alignment(wrap_text=True, vertical="top")
    for r in range(2, len(RESPONSIBILITY_TEXT) + 2):
        ws.row_dimensions[r].height = 32


def _peaks_to_review(ws, result: dict) -> None:
    ident = result.get("identification")
    peaks = (ident or {}).get("peaks_to_review") if isinstance(ident, dict) else None
    chk = identification_check(result)
    r = 1
    if chk is not None:
        words = {"pass": "passed", "marginal": "marginal", "fail": "FAILED"}
        ws.cell(row=1, column=1, value=f"Identification check: "
                f"{words.get(chk.get('verdict'), chk.get('verdict'))}").font = _TITLE_FONT
        score = chk.get("value")
        ws.cell(row=2, column=1, value="score [0-1]")
        ws.cell(row=2, column=2, value=_cell_value(score))
        r = 3
        for reason in chk.get("reasons") or []:
            ws.cell(row=r, column=1, value=plain_words(reason))
            r += 1
        r += 1
    rows = [[p.get("rt_min"), p.get("name"), GROUP_LABELS.get(p.get("group"), p.get("group")),
             p.get("mass_pct"), p.get("confidence"), p.get("reason")] for p in peaks or []]
    _table(ws, ["retention time [min]", "identified as", "group", "mass %", "confidence [0-1]",
                "why to review"], rows, formats=[FMT_RT, None, None, FMT_PCT, "0.00", None],
           start_row=r, freeze=r == 1)
    _autowidth(ws, maximum=90)


def _octane(ws, result: dict) -> None:
    contrib = result.get("octane_contributions") or []
    explained = result.get("octane_explained") or {}
    r = 1
    if isinstance(explained, dict) and explained.get("method"):
        ws.cell(row=1, column=1, value=f"method: {explained.get('method')}")
        r = 3
    rows = [[GROUP_LABELS.get(c.get("group"), c.get("group")), carbon_label(c.get("carbon_number"))
             if c.get("carbon_number") is not None else "", c.get("ron"), c.get("mon")]
            for c in contrib]
    ron_sum = sum(c.get("ron") for c in contrib if is_number(c.get("ron")))
    mon_sum = sum(c.get("mon") for c in contrib if is_number(c.get("mon")))
    if rows:
        rows.append(["total", "", ron_sum, mon_sum])
    r = _table(ws, ["group", "carbon number", "contribution to RON [-]",
                    "contribution to MON [-]"], rows, formats=[None, None, "0.000", "0.000"],
               start_row=r, freeze=r == 1)
    if isinstance(explained, dict) and explained.get("components"):
        r += 1
        r = _table(ws, ["component pulling the octane number down", "% v/v", "RON effect [-]",
                        "MON effect [-]"],
                   [[display_name(c.get("name"), c.get("cas")), c.get("vol_pct"), c.get("ron"),
                     c.get("mon")] for c in explained["components"]],
                   formats=[None, FMT_PCT, "0.000", "0.000"], start_row=r, freeze=False)
    if isinstance(explained, dict) and explained.get("classes"):
        r += 1
        _table(ws, ["class", "RON effect [-]", "MON effect [-]"],
               [[c.get("class"), c.get("ron"), c.get("mon")] for c in explained["classes"]],
               formats=[None, "0.000", "0.000"], start_row=r, freeze=False)
    _autowidth(ws, maximum=60)


def sheet_names(result: dict) -> list[str]:
    """The sheets of this result's workbook: ``SHEETS``, plus "Peaks to review" and "Octane
    contributions" after "Components" when the result has them."""
    names = list(SHEETS)
    extra = []
    ident = result.get("identification")
    if (isinstance(ident, dict) and ident.get("peaks_to_review")) or identification_check(result):
        extra.append("Peaks to review")
    if result.get("octane_contributions") or result.get("octane_explained"):
        extra.append("Octane contributions")
    at = names.index("Components") + 1
    return names[:at] + extra + names[at:]


def _fixed_time(result: dict) -> _dt.datetime:
    """Workbook created/modified time: the result's generated_at, else a fixed epoch."""
    text = result.get("generated_at")
    if isinstance(text, str):
        try:
            t = _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
            return t.astimezone(_dt.timezone.utc).replace(tzinfo=None)
        except ValueError:
            log.debug("generated_at %r is not ISO 8601; workbook time set to 2000-01-01", text)
    return _dt.datetime(2000, 1, 1)


def write_xlsx(result: dict, path) -> Path:
    """Write the result as an Excel workbook and return its path.

    Parameters
    ----------
    result : dict
        A result dict of schema ``dha-result/1`` (the dha-result/1 schema). Missing keys give empty
        sheets; null values give empty cells (reason in the ``Warnings`` sheet).
    path : str or Path
        File to write (parent folders are created); overwritten if it exists.

    Returns
    -------
    Path
        ``path`` as a Path.
    """
    if not isinstance(result, dict):
        raise InputError(f"write_xlsx: result must be a dict (dha-result/1), got {type(result).__name__}")
    result = visible_data(result)  # control characters shown, never written raw
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb = Workbook()
    wb.remove(wb.active)
    builders = {
        "Summary": _summary,
        "Groups": _groups,
        "Carbon number mass": lambda ws, res: _matrix(ws, res, "mass_pct"),
        "Carbon number volume": lambda ws, res: _matrix(ws, res, "vol_pct"),
        "Components": _components,
        "Oxygenates": _oxygenates,
        "Properties": _properties,
        "Distillation": _distillation,
        "Import log": _import_log,
        "Warnings": _warnings,
        "Settings": _settings,
        "Notes": _notes,
        "Peaks to review": _peaks_to_review,
        "Octane contributions": _octane,
    }
    for name in sheet_names(result):
        builders[name](wb.create_sheet(name), result)
    sample_id = str((result.get("sample") or {}).get("id") or "")
    wb.properties.title = f"dha result {sample_id}".strip()
    wb.properties.creator = "dha"
    stamp = _fixed_time(result)
    wb.properties.created = stamp
    wb.properties.modified = stamp
    save_workbook(wb, path)  # string cells only (no live formula), atomic
    log.info("wrote %s", path)
    return path
