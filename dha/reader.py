"""Read peak-table and composition exports into :class:`Run` objects.

``read_input(path, settings)`` takes one file (text table, XLSX or legacy XLS) and returns one
:class:`Run` per injection: a text file gives one run, a workbook one run per sheet that holds a
table. ``read_text(text, name, settings)`` does the same for text already in memory.

Finding the table
-----------------
The header is the first line (row) whose cells name, through the alias table
``dha/column_aliases.csv`` or the lab's pinned ``[reader] columns``, either a retention time
*and* an area (a **peak table**), or a component (name or CAS) and exactly one of mass %,
volume % or mole % and no area (a **composition table**). Text lines are tried with tab,
semicolon, comma (quoted fields honoured), runs of two or more spaces, and single spaces; the
split that recognises most columns wins. Everything above the header is the metadata block:
``key: value``, ``key = value`` or ``key<separator>value`` lines fill ``Run.sample``
(``id``, ``injection_time``, ``instrument``, ``method``, ``operator``, ``vial``, and any other
key under its own snake_case name); other lines go to ``sample["notes"]``. Without a sample id
the file name stem is used (``<stem>-<sheet>`` for a workbook with several runs).

Units in headers ("RT [min]", "Time (s)", "Time/sec", "Area (pA*s)") are read; retention times
in seconds are converted to minutes (one ``changed`` entry at the header row). A header without
a time unit is taken as minutes unless ``[reader] rt_unit`` says otherwise. Numbers may use a
decimal point or a decimal comma, with thousands separators (``.``, ``,``, space, apostrophe);
the decimal mark is decided once per table from the values (``[reader] decimal`` pins it).

Row rules (peak tables)
-----------------------
Applied in this order; the first that applies decides. ``row`` is the 1-based line number in
the text file or the row number in the sheet. Every skipped or changed row is in
``Run.import_log`` as ``{"row", "action", "reason"}``.

1. Blank lines (no cell with content) are not rows: dropped, not logged.
2. A repeated header (page break) is skipped.
3. A total row ("Total", "Sum", "Grand total", "Summe", "Σ" in the name or first cell) is
   skipped.
4. A row whose retention time is empty or not a number is skipped (this also catches page
   footers and text between tables); a negative retention time is skipped.
5. A row whose area is empty or not a number is skipped.
6. A negative area (baseline artefact) is skipped.
7. A zero area is skipped when ``[reader] zero_area = "skip"`` (the default) and kept with
   ``"keep"``.
8. A row with the same retention time and the same area as an earlier kept row is a duplicate
   and skipped. The same retention time with a different area is kept (two peaks reported at a
   rounded time) and only warned about in the log.
9. A row with more cells than the header, in a comma or semicolon file, is taken to hold an
   unquoted separator inside the name (``2,2,4-trimethylpentane``): the extra cells are joined
   back into the name and the row is logged as ``changed``. Any other row with more cells
   than the header is skipped. Rows with fewer cells are padded with empty cells.
10. The kept rows are sorted by retention time (stable); if the file was not in order, one
    ``changed`` entry at the first out-of-order row says so.

Areas are kept exactly as written (parsed to float, never rounded).

Composition tables use rules 1-3 and 9, then skip a row with no component, an amount that is
not a number, or a negative amount; zero amounts are kept, the order is kept.

Failures
--------
A file that cannot be used raises :class:`dha.errors.InputError` with one line naming the file,
what was found and what to do: empty or binary files (images, archives), no table header, a
peak header without an area or retention-time column, two columns matching one role (e.g. two
area columns), a composition table with more than one amount column, a table with no usable row.

>>> run, = read_text("Sample: HP-7\\nRT [min],Area,Name\\n1.50,100,propane\\n"
...                  "2.25,250.5,\\"2,2-dimethylbutane\\"\\n", "demo.csv")
>>> run.sample["id"], run.kind, list(run.table["area"])
('HP-7', 'peaks', [100.0, 250.5])
>>> run.table.loc[1, "name"]
'2,2-dimethylbutane'
"""
from __future__ import annotations

import csv
import io
import logging
import re
import stat
import tomllib
import zipfile
from dataclasses import dataclass, field
from datetime import date, datetime, time
from functools import lru_cache
from itertools import repeat
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from dha.errors import InputError, SettingsError
from dha.safety import has_controls, terminal_text, visible_controls

log = logging.getLogger("dha.reader")

ALIASES_FILE = Path(__file__).with_name("column_aliases.csv")

#: Columns of a peak table, in order.
PEAK_COLUMNS = ("row", "rt_min", "area", "height", "area_pct", "name", "cas",
                "retention_index", "cds_mass_pct")
#: Columns of a composition input table, in order.
COMPOSITION_COLUMNS = ("row", "component", "amount")
#: Optional columns after them, when the file has them: the CAS number beside a name, and a
#: Hill formula (both used for components outside the library).
COMPOSITION_OPTIONAL = ("cas", "formula")
#: Allowed composition bases.
BASES = ("mass_pct", "vol_pct", "mol_pct")
#: Sample keys always present in ``Run.sample`` (None when the export has no such entry).
SAMPLE_KEYS = ("id", "injection_time", "instrument", "method", "operator", "vial")

_NUMERIC_PEAK_ROLES = ("rt_min", "area", "height", "area_pct", "retention_index", "cds_mass_pct")
_ROLES = frozenset(("rt_min", "area", "height", "area_pct", "name", "cas", "formula",
                    "retention_index",
                    "cds_mass_pct") + BASES)
_READER_DEFAULTS: dict[str, Any] = {
    "columns": {}, "zero_area": "skip", "rt_unit": "auto", "decimal": "auto",
    "separator": "auto", "profile": "",
}
#: Size guards (``[limits]`` in the settings); these defaults apply when a key is absent.
LIMIT_DEFAULTS: dict[str, float] = {
    "max_file_mb": 50.0, "max_workbook_mb": 100.0, "max_rows": 20000, "max_text_chars": 1000,
}
#: An area (or composition amount) at or above this is not a measurement: the row is skipped.
ABSURD_AMOUNT = 1e15
#: Retention indices outside this range are ignored (methane is 100 by definition; n-C100 is
#: 10000, far beyond petrol).
INDEX_RANGE = (100.0, 10000.0)
#: Retention times beyond this [min] (about a week) are not a chromatogram's.
MAX_RT_MIN = 10000.0

_TIME_UNITS = {"min": "min", "mins": "min", "minute": "min", "minutes": "min", "m": "min",
               "s": "s", "sec": "s", "secs": "s", "second": "s", "seconds": "s"}
_SEPARATORS = {"tab": "\t", ";": ";", ",": ",", "whitespace": "  ", "space": " "}
_TRY_ORDER = ("\t", ";", ",", "  ", " ")
_UNIT_RE = re.compile(r"[\[(]([^\])]*)[\])]")
_TOTAL_RE = r"^[ \t]*(?:grand[ \t]+)?(?:total|totals|sum|sums|summe|σ|∑)\b"
_MAGIC = ((b"\x89PNG", "a PNG image"), (b"%PDF", "a PDF document"), (b"\xff\xd8\xff", "a JPEG image"),
          (b"GIF8", "a GIF image"), (b"\x1f\x8b", "a gzip archive"),
          (b"7z\xbc\xaf", "a 7-zip archive"), (b"Rar!", "a RAR archive"))


@dataclass(frozen=True, eq=False)
class Run:
    """One injection read from an export.

    Attributes
    ----------
    source_file : str
        The path the run was read from (or the name given to :func:`read_text`).
    injection : str or None
        Sheet name when a workbook holds several runs; None otherwise.
    sample : dict
        ``id``, ``injection_time``, ``instrument``, ``method``, ``operator``, ``vial`` (None
        where absent) plus any other metadata key found, and ``notes`` for free-text lines.
    kind : str
        ``"peaks"`` or ``"composition"``.
    table : pandas.DataFrame
        Peak table (:data:`PEAK_COLUMNS`) or composition input (:data:`COMPOSITION_COLUMNS`).
    basis : str or None
        ``"mass_pct"``, ``"vol_pct"`` or ``"mol_pct"`` for a composition table; None for peaks.
    import_log : list of dict
        ``{"row", "action", "reason"}`` for every skipped or changed row, by row number.
    """

    source_file: str
    injection: str | None
    sample: dict
    kind: str
    table: pd.DataFrame
    basis: str | None = None
    import_log: list = field(default_factory=list)


# ----------------------------------------------------------------------------- settings, aliases

def _limits(settings: dict | None) -> dict[str, float]:
    """The [limits] section with defaults filled in."""
    out = dict(LIMIT_DEFAULTS)
    if settings is not None:
        out.update({k: v for k, v in (settings.get("limits") or {}).items() if k in out})
    return out


def _reader_settings(settings: dict | None) -> dict[str, Any]:
    """The [reader] section with defaults filled in and the import profile applied."""
    out = dict(_READER_DEFAULTS)
    if settings is not None:
        out.update(settings.get("reader", {}))
    out["limits"] = _limits(settings)
    if out.get("profile"):
        path = Path(out["profile"])
        try:
            with path.open("rb") as fh:
                prof = tomllib.load(fh)
        except FileNotFoundError:
            raise SettingsError(f"{path}: import profile not found; fix [reader] profile") from None
        except (OSError, tomllib.TOMLDecodeError) as err:
            raise SettingsError(f"{path}: import profile is not valid TOML ({err})") from None
        except UnicodeDecodeError:
            raise SettingsError(f"{path}: import profile is not a text (TOML) file; fix "
                                "[reader] profile") from None
        prof = prof.get("reader", prof)
        for key, value in prof.items():
            if key not in _READER_DEFAULTS or key == "profile":
                raise SettingsError(f"{path}: unknown key '{key}' in import profile; known: "
                                    f"{', '.join(k for k in _READER_DEFAULTS if k != 'profile')}")
            out[key] = value
    checks = {"zero_area": ("skip", "keep"), "rt_unit": ("auto", "min", "s"),
              "decimal": ("auto", ".", ","), "separator": ("auto", *_SEPARATORS)}
    for key, allowed in checks.items():
        if out[key] not in allowed:
            raise SettingsError(f"[reader] {key} = {out[key]!r}; allowed: {', '.join(allowed)}")
    cols = out["columns"]
    if not isinstance(cols, dict):
        raise SettingsError("[reader] columns must be a table like { rt_min = \"Time\" }")
    for role, header in cols.items():
        role = "name" if role == "component" else role
        if role not in _ROLES:
            raise SettingsError(f"[reader] columns: unknown column '{role}'; known: "
                                f"{', '.join(sorted(_ROLES | {'component'}))}")
        if not isinstance(header, str):
            raise SettingsError(f"[reader] columns: {role} must be a header text")
    return out


@lru_cache(maxsize=4096)
def _norm_header_cached(text: str) -> tuple[str, str]:
    return _norm_header_uncached(text)


def _norm_header(text: Any) -> tuple[str, str]:
    """Normalise a header cell to ``(key, unit)`` (cached).

    >>> _norm_header("Ret. Time [min]")
    ('ret time', 'min')
    >>> _norm_header("Area [%]"), _norm_header("wt%"), _norm_header("Time/sec")
    (('area pct', '%'), ('wt pct', ''), ('time', 'sec'))
    """
    return _norm_header_cached(str(text))


def _norm_header_uncached(text: str) -> tuple[str, str]:
    t = str(text).strip().strip('"').strip().lstrip("\ufeff")
    units = _UNIT_RE.findall(t)
    base = _UNIT_RE.sub(" ", t)
    unit = units[-1].strip().lower() if units else ""
    if "/" in base:
        left, _, right = base.rpartition("/")
        if right.strip().lower() in _TIME_UNITS and left.strip():
            base, unit = left, right.strip().lower()
    key = base.lower().replace("%", " pct ")
    key = re.sub(r"[\W_]+", " ", key).strip()
    if "%" in unit:
        key = f"{key} pct".strip()
    return key, unit


@lru_cache(maxsize=1)
def _aliases() -> dict[str, str]:
    """Normalised alias -> role, from ``column_aliases.csv``."""
    out: dict[str, str] = {}
    with ALIASES_FILE.open(encoding="utf-8") as fh:
        lines = [ln for ln in fh if ln.strip() and not ln.startswith("#")]
    for rec in csv.DictReader(lines):
        key, _ = _norm_header(rec["alias"])
        out.setdefault(key, rec["role"].strip())
    return out


# ----------------------------------------------------------------------------- header search

@dataclass
class _Header:
    cells: list[str]
    roles: dict[str, int]
    units: dict[str, str]
    dupes: dict[str, list[int]]
    kind: str | None
    basis: str | None


_LETTER = re.compile(r"[^\W\d_]")


def _map_header(cells: list[Any], pinned: dict[str, str]) -> _Header:
    aliases = _aliases()
    texts = ["" if c is None else str(c).strip() for c in cells]
    pinned_by_text = {" ".join(h.split()).lower(): ("name" if r == "component" else r)
                      for r, h in pinned.items()}
    pinned_roles = set(pinned_by_text.values())
    matches: dict[str, list[int]] = {}
    units: dict[str, str] = {}
    for i, text in enumerate(texts):
        if not text or not _LETTER.search(text) and "%" not in text:
            continue
        key, unit = _norm_header(text)
        role = pinned_by_text.get(" ".join(text.split()).lower()) if pinned_by_text else None
        if role is None:
            role = aliases.get(key)
            if role is None:
                words = key.rsplit(" ", 1)
                if len(words) == 2 and words[1] in _TIME_UNITS and aliases.get(words[0]) == "rt_min":
                    role, unit = "rt_min", words[1]
            if role is None or role.startswith("sample.") or role in pinned_roles:
                continue
        matches.setdefault(role, []).append(i)
        units.setdefault(role, unit)
    if pinned_roles & set(BASES):      # a pinned amount column silences the other bases
        for b in BASES:
            if b not in pinned_roles:
                matches.pop(b, None)
    roles = {r: idx[0] for r, idx in matches.items()}
    dupes = {r: idx for r, idx in matches.items() if len(idx) > 1}
    kind = basis = None
    if "rt_min" in roles and "area" in roles:
        kind = "peaks"
        if "mass_pct" in roles and "cds_mass_pct" not in roles:
            roles["cds_mass_pct"] = roles["mass_pct"]
        for b in BASES:
            roles.pop(b, None)
    elif "area" not in roles and "rt_min" not in roles and ("name" in roles or "cas" in roles):
        found = [b for b in BASES if b in roles]
        if found:
            kind, basis = "composition", found[0]
    return _Header(texts, roles, units, dupes, kind, basis)


def _split_line(line: str, sep: str) -> list[str]:
    if sep == "  ":
        return re.split(r"\t| {2,}", line.strip())
    if sep == " ":
        return line.split()
    return next(csv.reader([line], delimiter=sep, skipinitialspace=True), [])


def _header_error(name: str, best: tuple[int, _Header] | None, what: str) -> InputError:
    if best is None:
        return InputError(
            f"{name}: no table found ({what}); the file needs a header row with a retention-time "
            f"and an area column (or component and mass %/vol %/mol %), or pin the columns with "
            f"[reader] columns")
    row, hdr = best
    seen = ", ".join(repr(c) for c in hdr.cells if c)[:300]
    recognised = ", ".join(f"{r}={hdr.cells[i]!r}" for r, i in hdr.roles.items())
    if "rt_min" in hdr.roles and "area" not in hdr.roles:
        lack = "no area column"
    elif "area" in hdr.roles and "rt_min" not in hdr.roles:
        lack = "no retention-time column"
    else:
        lack = "no retention-time and area columns, nor a composition amount column"
    return InputError(
        f"{name}: {lack} in the header at row {row} (columns seen: {seen}; recognised: "
        f"{recognised or 'none'}); rename the column or pin it with [reader] columns, "
        f"e.g. {{ area = \"<header>\" }}")


def _check_dupes(name: str, row: int, hdr: _Header) -> None:
    critical = {"rt_min", "area"} if hdr.kind == "peaks" else {"name", hdr.basis}
    for role, idx in hdr.dupes.items():
        if role in critical:
            cols = " and ".join(repr(hdr.cells[i]) for i in idx)
            raise InputError(
                f"{name}: ambiguous columns at row {row}: {cols} both match '{role}'; remove one "
                f"or pin the one to use with [reader] columns = {{ {role} = \"<header>\" }}")
        log.warning("%s: columns %s all match %s; using the first", name,
                    [hdr.cells[i] for i in idx], role)
    if hdr.kind != "peaks" and sum(b in hdr.roles for b in BASES) > 1:
        cols = " and ".join(repr(hdr.cells[hdr.roles[b]]) for b in BASES if b in hdr.roles)
        raise InputError(
            f"{name}: ambiguous composition table at row {row}: {cols} are all amounts; keep one "
            f"column or pin it with [reader] columns = {{ mass_pct = \"<header>\" }}")


def _is_header_candidate(hdr: _Header) -> bool:
    return len(hdr.roles) >= 2 and bool(
        {"rt_min", "area"} & hdr.roles.keys() or set(BASES) & hdr.roles.keys())


# ----------------------------------------------------------------------------- metadata

_KEY_RE = re.compile(r"^\s*\"?([A-Za-z][\w .#/()\-]{0,40}?)\"?\s*[:=]\s*(.*?)\s*$")


def _meta_value(v: Any) -> str | None:
    if v is None:
        return None
    if isinstance(v, datetime):
        return v.isoformat(sep=" ")
    if isinstance(v, (date, time)):
        return v.isoformat()
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    s = str(v).strip().strip('"').strip()
    return s or None


def _meta_pair(cells: list[Any], comma: bool = False) -> tuple[str, str | None] | None:
    """A key/value pair from a metadata row's cells, or None for free text.

    ``comma``: the cells come from splitting a text line at commas; then only a known sample
    key (or one ending in ":") makes a pair, so a title such as "Refinery, lab 2" stays text.
    """
    vals = [c for c in cells if c is not None and str(c).strip() != ""]
    if not vals:
        return None
    first = vals[0]
    if isinstance(first, str):
        m = _KEY_RE.match(first)
        if m and (len(vals) == 1 or not m.group(2)):
            rest = m.group(2) or (_meta_value(vals[1]) if len(vals) > 1 else None)
            return m.group(1).strip(), _meta_value(rest)
        words = first.split()
        if len(vals) == 1 and 2 <= len(words) <= 4 and (
                len(words[-1]) > 1 or words[-1].isdigit()):
            # "Sample HP-2351": a known sample key followed by one word
            key = " ".join(words[:-1])
            if _aliases().get(_norm_header(key)[0], "").startswith("sample."):
                return key, words[-1]
        if len(vals) >= 2 and re.match(r"^[A-Za-z][\w .#/()\-]{0,40}:?$", first.strip()) and (
                not comma or first.strip().endswith(":")
                or _aliases().get(_norm_header(first)[0], "").startswith("sample.")):
            return first.strip().rstrip(":").strip(), " ".join(
                _meta_value(v) or "" for v in vals[1:]).strip() or None
    return None


def _sample_from_meta(rows: list[tuple[list[Any], bool, str | None]]) -> dict[str, Any]:
    aliases = _aliases()
    sample: dict[str, Any] = {k: None for k in SAMPLE_KEYS}
    notes: list[str] = []
    for cells, comma, raw in rows:
        pair = _meta_pair(cells, comma)
        if pair is None:
            text = raw.strip() if raw is not None else " ".join(
                str(c).strip() for c in cells if c is not None and str(c).strip())
            if text:
                notes.append(text)
            continue
        key, value = pair
        norm, _ = _norm_header(key)
        role = aliases.get(norm, "")
        if role.startswith("sample.") and sample[role[7:]] is None:
            sample[role[7:]] = value
        else:
            snake = norm.replace(" ", "_") or "field"
            if snake in sample:
                snake = f"{snake}_2"
            sample[snake] = value
    if notes:
        sample["notes"] = notes
    return sample


def _text_meta_cells(line: str) -> tuple[list[str], bool]:
    s = line.strip()
    if _KEY_RE.match(s):
        return [s], False
    for sep in ("\t", ";", ",", "  "):
        if sep in s:
            cells = _split_line(s, sep)
            if len([c for c in cells if c.strip()]) >= 2:
                return cells, sep == ","
    return [s], False


# ----------------------------------------------------------------------------- numbers

# Evidence for a decimal comma (point): the last mark is followed by other than three digits,
# or a thousands-grouped number ends in it, or it follows a lone zero or four or more ungrouped
# digits ("12345,678"). "12,345" is no evidence either way.
_DEC_COMMA = re.compile(r"^[-+\u2212]?[\d.\s'\u00a0\u202f]*\d,(?:\d{1,2}|\d{4,})$|"
                        r"^[-+\u2212]?\d{1,3}(?:[.\s'\u00a0\u202f]\d{3})+,\d+$|"
                        r"^[-+\u2212]?(?:0|\d{4,}),\d+$")
_DEC_POINT = re.compile(r"^[-+\u2212]?[\d,\s'\u00a0\u202f]*\d\.(?:\d{1,2}|\d{4,})$|"
                        r"^[-+\u2212]?\d{1,3}(?:[,\s'\u00a0\u202f]\d{3})+\.\d+$|"
                        r"^[-+\u2212]?(?:0|\d{4,})\.\d+$")


def _detect_decimal(samples: list[str], more_point: int = 0) -> str:
    """``","`` when the values read best with a decimal comma, else ``"."``.

    ``more_point``: further evidence for a decimal point (numbers already parsed with one).

    >>> _detect_decimal(["12,5", "1.234,75", "3"]), _detect_decimal(["1,234.5", "7.25"])
    (',', '.')
    """
    comma = sum(1 for v in samples if _DEC_COMMA.match(v.strip()))
    point = sum(1 for v in samples if _DEC_POINT.match(v.strip()))
    return "," if comma > point + more_point else "."


_CELL_COMMA = re.compile(r"(?:^|(?<=[;\t]))[ ]*[-+\u2212]?[\d. '\u00a0\u202f]*\d,(?:\d{1,2}|\d{4,})[ ]*"
                         r"(?=[;\t]|$)", re.M)
_CELL_POINT = re.compile(r"(?:^|(?<=[;\t]))[ ]*[-+\u2212]?[\d, '\u00a0\u202f]*\d\.(?:\d{1,2}|\d{4,})[ ]*"
                         r"(?=[;\t]|$)", re.M)
_QUOTED_COMMA = re.compile(r'"[ ]*[-+\u2212]?[\d. \'\u00a0\u202f]*\d,(?:\d{1,2}|\d{4,})[ ]*"')
_QUOTED_POINT = re.compile(r'"[ ]*[-+\u2212]?[\d, \'\u00a0\u202f]*\d\.(?:\d{1,2}|\d{4,})[ ]*"')


def _detect_decimal_text(body: str, sep: str) -> str:
    """Decimal mark of a delimited text body, from its number-like cells (one regex pass).

    In a comma-separated file only quoted cells can hold a decimal comma.

    >>> _detect_decimal_text("1;12,5;x\\n2;3,25;y", ";"), _detect_decimal_text("1,2.5,x", ",")
    (',', '.')
    """
    if sep == ",":
        comma, point = len(_QUOTED_COMMA.findall(body)), len(_QUOTED_POINT.findall(body))
        point += len(re.findall(r"(?:^|(?<=,))[ ]*-?\d+\.\d+[ ]*(?=,|$)", body, re.M))
    else:
        comma, point = len(_CELL_COMMA.findall(body)), len(_CELL_POINT.findall(body))
    return "," if comma > point else "."


_STRIP_NUM = re.compile("[ \t\u00a0\u202f'\u2019%]+")


def _text_to_float(values: list[str], decimal: str) -> np.ndarray:
    """Parse text cells to floats in one pass over the joined column (C-speed string ops)."""
    blob = "\n".join(values)
    blob = _STRIP_NUM.sub("", blob).replace("\u2212", "-")
    if decimal == ",":
        blob = blob.replace(".", "").replace(",", ".")
    else:
        blob = blob.replace(",", "")
    parts = blob.split("\n")
    try:
        out = np.array(parts, dtype=float)
    except ValueError:
        out = np.empty(len(parts))
        for i, p in enumerate(parts):
            try:
                out[i] = float(p)
            except ValueError:
                out[i] = np.nan
            if p[:1].isalpha():        # "nan", "inf", "infinity" written as words: not numbers
                out[i] = np.nan
    out[~np.isfinite(out)] = np.nan
    return out


def _to_float(values: list[Any] | np.ndarray, decimal: str) -> np.ndarray:
    """Numbers from cells: numeric cells kept exactly, text cells parsed with ``decimal``."""
    if isinstance(values, np.ndarray):
        out = values.astype(float, copy=True)
        out[~np.isfinite(out)] = np.nan
        return out
    if all(type(v) is str for v in values):
        return _text_to_float(values, decimal)
    out = np.full(len(values), np.nan)
    txt_idx, txt = [], []
    for i, v in enumerate(values):
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            out[i] = float(v)
        elif v is not None:
            txt_idx.append(i)
            txt.append(str(v))
    if txt:
        out[txt_idx] = _text_to_float(txt, decimal)
    out[~np.isfinite(out)] = np.nan
    return out


def _texts(values: list[Any] | np.ndarray) -> list[str] | None:
    """Stripped text of cells; None for an all-numeric column."""
    if isinstance(values, np.ndarray):
        return None
    try:
        blob = "\n".join(values)          # fast path: all cells are text
    except TypeError:
        blob = None
    if (blob is not None and blob.count("\n") == len(values) - 1 and "\t" not in blob
            and " \n" not in blob and "\n " not in blob and "\u00a0" not in blob
            and blob[:1] != " " and blob[-1:] != " "):
        return values                        # nothing to strip
    return [v.strip() if type(v) is str else ("" if v is None or v != v else str(v))
            for v in values]


_TOTAL_C = re.compile(_TOTAL_RE, re.I)




def _total_mask(texts: list[str]) -> np.ndarray:
    """Rows whose text starts like a total ("Total", "Sum", ...).

    The column is searched as one string for the words; only rows holding one are matched
    against the pattern, so a column without totals costs a few substring searches.

    >>> _total_mask(["1", "Sum", "toluene", "Grand total", "summit"]).tolist()
    [False, True, False, True, False]
    """
    out = np.zeros(len(texts), dtype=bool)
    low = "\n".join(texts).lower()
    if low.count("\n") != len(texts) - 1:            # a cell holds a line break
        low = "\n".join(t.replace("\n", " ") for t in texts).lower()
    for word in ("total", "sum", "σ", "∑"):
        pos = low.find(word)
        while pos != -1:
            row = low.count("\n", 0, pos)
            if not out[row] and _TOTAL_C.match(texts[row]):
                out[row] = True
            nxt = low.find("\n", pos)
            pos = -1 if nxt == -1 else low.find(word, nxt)
    return out


# ----------------------------------------------------------------------------- table building

def _fit_row(cells: list[Any], hdr: _Header, sep: str | None, spans: list[tuple[int, int]] | None,
             raw_line: str | None) -> tuple[list[Any] | None, str | None]:
    """Bring a row to the header's width; returns (cells, changed-reason) or (None, skip-reason)."""
    n = len(hdr.cells)
    k = len(cells)
    if k > n and all(c is None or str(c).strip() == "" for c in cells[n:]):
        return cells[:n], None
    if k > n:
        name_i = hdr.roles.get("name")
        if name_i is not None and sep in (",", ";", " ", "  "):
            extra = k - n
            joined = (sep if sep in (",", ";") else " ").join(
                str(c) for c in cells[name_i:name_i + extra + 1])
            fixed = list(cells[:name_i]) + [joined] + list(cells[name_i + extra + 1:])
            if sep in (",", ";"):
                return fixed, f"unquoted '{sep}' inside the name; cells joined to {joined!r}"
            return fixed, None
        return None, f"{k} cells where the header has {n}"
    if k < n and spans is not None and raw_line is not None:
        placed: list[Any] = [""] * n
        for m in re.finditer(r"\S+(?: \S+)*", raw_line):
            s, e = m.span()
            best = max(range(n), key=lambda j: (min(e, spans[j][1]) - max(s, spans[j][0]),
                                                -abs((s + e) / 2 - sum(spans[j]) / 2)))
            placed[best] = (placed[best] + " " + m.group()).strip()
        return placed, None
    if k < n:
        return list(cells) + [""] * (n - k), None
    return cells, None


def _rows_to_columns(body: list[tuple[int, list[Any], str | None]], hdr: _Header,
                     sep: str | None, spans: list[tuple[int, int]] | None):
    """Fit rows to the header width (rule 9); returns line numbers, role columns, first cells."""
    logs: list[dict[str, Any]] = []
    n = len(hdr.cells)
    lines: list[int] = []
    rows: list[list[Any]] = []
    for ln, cells, raw in body:
        if len(cells) != n:
            fixed, why = _fit_row(cells, hdr, sep, spans, raw)
            if fixed is None:
                logs.append({"row": ln, "action": "skipped", "reason": why})
                continue
            if why:
                logs.append({"row": ln, "action": "changed", "reason": why})
            cells = fixed
        lines.append(ln)
        rows.append(cells)
    cols = {role: [r[i] for r in rows] for role, i in hdr.roles.items()}
    first = [next((c for c in r if c is not None and str(c).strip()), "") for r in rows]
    return np.asarray(lines, dtype=np.int64), cols, [first], logs


def _build_run(source: str, stem: str, injection: str | None, sample: dict[str, Any],
               hdr: _Header, header_row: int, line_arr: np.ndarray,
               cols: dict[str, list[Any] | np.ndarray], extra_text: list[list[Any]],
               logs: list[dict[str, Any]], decimal: str | None, rs: dict[str, Any]) -> Run:
    """Turn the columns below a header into a Run (the rules of the module docstring).

    ``cols`` maps each recognised role to its cells (a float array when already numeric);
    ``extra_text`` are more text columns to search for total rows; ``decimal`` None = decide
    from the values.
    """
    nrows = len(line_arr)
    reason = np.full(nrows, None, dtype=object)
    free = np.ones(nrows, dtype=bool)

    def mark(mask: np.ndarray, text: Any) -> None:
        idx = np.flatnonzero(np.asarray(mask, dtype=bool) & free)
        for i in idx.tolist():
            reason[i] = text(i) if callable(text) else text
        free[idx] = False

    texts = {role: _texts(v) for role, v in cols.items()}
    if nrows:
        rep = np.ones(nrows, dtype=bool)
        for role, i in hdr.roles.items():
            t = texts[role]
            if t is None:
                rep[:] = False
                break
            h = hdr.cells[i].lower()
            rep &= np.fromiter((x.lower() == h for x in t), dtype=bool, count=nrows)
        mark(rep, "repeated header row")
        tot = np.zeros(nrows, dtype=bool)
        for t in [texts.get("name"), texts.get("rt_min")] + [_texts(c) for c in extra_text]:
            if t is not None:
                tot |= _total_mask(t)
        mark(tot, "total row")

    numeric = [r for r in (_NUMERIC_PEAK_ROLES if hdr.kind == "peaks" else (hdr.basis,))
               if r in cols]
    if rs["decimal"] != "auto":
        decimal = rs["decimal"]
    elif decimal is None:
        probe: list[str] = []
        keep = free.copy()
        for role in numeric:
            if texts[role] is not None:
                probe += [v for v, k in zip(cols[role], keep) if k and type(v) is str][:300]
        decimal = _detect_decimal(probe) if probe else "."
    nums = {role: _to_float(cols[role], decimal) for role in numeric}
    limits = rs["limits"]
    if nrows > limits["max_rows"]:
        raise InputError(
            f"{source}{f' [{injection}]' if injection else ''}: {nrows} rows under the header at "
            f"row {header_row}, more than [limits] max_rows = {int(limits['max_rows'])}; split "
            "the file or raise the limit in a settings file")
    for role in ("name", "cas"):
        _check_text_length(texts.get(role), role, line_arr, source, limits["max_text_chars"])
    evidence = rs["decimal"] != "auto" or _has_mark_evidence(
        [cols[r] for r in numeric], [texts[r] for r in numeric])
    for role in numeric:
        if texts[role] is not None:
            _check_separators(role, hdr.cells[hdr.roles[role]], cols[role], texts[role],
                              nums[role], decimal, free, line_arr, logs, evidence)
    if "retention_index" in nums:
        ri = nums["retention_index"]
        odd = free & ~np.isnan(ri) & ((ri < INDEX_RANGE[0]) | (ri > INDEX_RANGE[1]))
        for i in np.flatnonzero(odd).tolist():
            logs.append({"row": int(line_arr[i]), "action": "changed",
                         "reason": f"retention index {ri[i]:g} outside {INDEX_RANGE[0]:g}-"
                                   f"{INDEX_RANGE[1]:g} (methane is 100 by definition); "
                                   "ignored, the peak is placed by its retention time"})
        ri[odd] = np.nan

    def raw(role: str) -> Any:
        def text(i: int) -> str:
            cell = texts[role][i] if texts[role] is not None else ""
            return f"{_label(role)} empty or not a number ({cell[:40]!r})"
        return text

    if hdr.kind == "peaks":
        table, basis = _peak_rows(hdr, texts, nums, free, mark, raw, line_arr, rs, logs,
                                  header_row, source)
    else:
        table, basis = _composition_rows(hdr, texts, nums, free, mark, raw, line_arr), hdr.basis
    keep = free.copy()
    for i in np.flatnonzero(~keep):
        logs.append({"row": int(line_arr[i]), "action": "skipped", "reason": reason[i]})
    logs.sort(key=lambda e: (e["row"], e["action"]))
    if table.empty:
        raise InputError(
            f"{source}{f' [{injection}]' if injection else ''}: the table under the header at "
            f"row {header_row} has no usable row ("
            + (f"{nrows} rows, all skipped, e.g. row {logs[0]['row']}: {logs[0]['reason']}"
               if logs else "no rows below the header") + "); check the export")
    if sample.get("id") is None:
        sample["id"] = f"{stem}-{injection}" if injection else stem
    return Run(source_file=source, injection=injection, sample=sample, kind=hdr.kind,
               table=table, basis=basis, import_log=logs)


# Valid thousands grouping for each decimal mark, and the reading with the other mark.
_GROUPED = {".": re.compile(r"^[-+]?\d{1,3}(?:,\d{3})+(?:\.\d*)?(?:[eE][-+]?\d+)?$"),
            ",": re.compile(r"^[-+]?\d{1,3}(?:\.\d{3})+(?:,\d*)?(?:[eE][-+]?\d+)?$")}
_OTHER_MARK = {".": re.compile(r"^[-+]?(?:\d{1,3}(?:\.\d{3})+|\d*),\d+(?:[eE][-+]?\d+)?$"),
               ",": re.compile(r"^[-+]?(?:\d{1,3}(?:,\d{3})+|\d*)\.\d+(?:[eE][-+]?\d+)?$")}
_MARK_WORD = {".": "decimal point", ",": "decimal comma"}
# Whole numbers grouped by the table's own decimal mark ("1.234" with a decimal point): they
# read differently with the other mark, so they are logged when a table mixes marks.
_GROUPED_BY_MARK = {".": re.compile(r"^[-+]?\d{1,3}(?:\.\d{3})+$"),
                    ",": re.compile(r"^[-+]?\d{1,3}(?:,\d{3})+$")}


def _has_mark_evidence(columns: list[Any], texts: list[list[str] | None]) -> bool:
    """True when some number shows its decimal mark ("12,5", "1.234,5", "0.5", "7.25").

    Without such evidence the mark is a default, and every cell that reads differently with
    the other mark ("2,215") is logged.
    """
    for col, txt in zip(columns, texts):
        if txt is None:
            if isinstance(col, np.ndarray) and _fractional_count(col, 1):
                return True
            continue
        for cell in txt[:300]:
            s = cell.strip()
            if _DEC_COMMA.match(s) or _DEC_POINT.match(s) or ("," in s and "." in s):
                return True
    return False


def _check_separators(role: str, header: str, cells: list[Any], texts: list[str],
                      values: np.ndarray, decimal: str, free: np.ndarray, line_arr: np.ndarray,
                      logs: list[dict[str, Any]], evidence: bool = True) -> None:
    """Never a silent x10: cells whose separators contradict the table's decimal mark.

    With a decimal point, a text cell holding a comma must be thousands-grouped ("1,234.5");
    with a decimal comma, a cell holding a point likewise ("1.234,5"). A cell that is not
    ("100,5" in a decimal-point table) is read with the other mark when that reading is
    unambiguous (100.5) and logged as ``changed`` with the raw text and the value used; a cell
    that reads with neither ("1,234,5") becomes not-a-number (its row is skipped and logged).
    When a table mixes marks, every cell that reads both ways ("1,234") is logged too, with
    the value used. ``values`` is changed in place.
    """
    other = "," if decimal == "." else "."
    if other not in "".join(t for t in texts if t) and evidence:
        return
    contradict, ambiguous = [], []
    for i, cell in enumerate(texts):
        if not free[i] or type(cells[i]) is not str:
            continue
        if other not in cell:
            if decimal in cell and _GROUPED_BY_MARK[decimal].match(
                    _STRIP_NUM.sub("", cell).replace("\u2212", "-")):
                ambiguous.append(i)
            continue
        s = _STRIP_NUM.sub("", cell).replace("\u2212", "-")
        if _GROUPED[decimal].match(s):
            ambiguous.append(i)
            continue
        if _OTHER_MARK[decimal].match(s):
            num = s.replace(".", "").replace(",", ".") if other == "," else s.replace(",", "")
            values[i] = float(num)
            contradict.append(i)
        else:
            values[i] = np.nan     # neither reading: the row rule for "not a number" skips it
    for i in contradict:
        logs.append({"row": int(line_arr[i]), "action": "changed",
                     "reason": f"{_label(role)} {texts[i]!r} (column {header!r}) has a "
                               f"{_MARK_WORD[other]} in a table read with a "
                               f"{_MARK_WORD[decimal]}; value used {float(values[i])!r}"})
    if contradict or not evidence:
        why = ("in a table mixing decimal marks" if contradict else
               "and no number of the table shows its decimal mark")
        for i in ambiguous:
            logs.append({"row": int(line_arr[i]), "action": "changed",
                         "reason": f"{_label(role)} {texts[i]!r} (column {header!r}) reads "
                                   f"either way {why}; value used {float(values[i])!r} "
                                   f"({_MARK_WORD[decimal]}); check it, or pin [reader] "
                                   "decimal"})


def _check_text_length(texts: list[str] | None, role: str, line_arr: np.ndarray, source: str,
                       limit: float) -> None:
    if not texts:
        return
    longest = max(map(len, texts))
    if longest > limit:
        i = next(k for k, v in enumerate(texts) if len(v) == longest)
        raise InputError(f"{source}, row {int(line_arr[i])}, column {role}: a text of {longest} "
                         f"characters, more than [limits] max_text_chars = {int(limit)}; "
                         "shorten it in the export (or raise the limit in a settings file)")


def _label(role: str) -> str:
    return {"rt_min": "retention time", "area": "area"}.get(role, role.replace("_", " "))


def _peak_rows(hdr, cols, nums, free, mark, raw, line_arr, rs, logs, header_row, source):
    n = len(line_arr)
    rt = nums["rt_min"]
    unit = hdr.units.get("rt_min", "")
    unit = _TIME_UNITS.get(unit, unit)
    if rs["rt_unit"] != "auto":
        unit = rs["rt_unit"]
    if unit == "s":
        rt = rt / 60.0
        logs.append({"row": header_row, "action": "changed",
                     "reason": f"retention time column {hdr.cells[hdr.roles['rt_min']]!r} is in "
                               f"seconds; converted to minutes"})
    area = nums["area"]
    mark(np.isnan(rt), raw("rt_min"))
    mark(rt < 0, "negative retention time")
    mark(rt > MAX_RT_MIN, lambda i: f"retention time {rt[i]:g} min beyond {MAX_RT_MIN:g} min; "
                                    "not a chromatogram's")
    mark(np.isnan(area), raw("area"))
    mark(area < 0, "negative area (baseline artefact)")
    mark(area >= ABSURD_AMOUNT, lambda i: f"area {area[i]:g} at or above {ABSURD_AMOUNT:g}; not "
                                          "a detector's, check the export")
    if rs["zero_area"] == "skip":
        mark(area == 0, "zero area")
    keep = free.copy()
    if np.any(np.diff(np.sort(rt[keep])) == 0):       # only then look for duplicates
        seen: dict[tuple[float, float], int] = {}
        first_of: dict[int, int] = {}
        rt_l, area_l = rt.tolist(), area.tolist()
        for i in np.flatnonzero(keep).tolist():
            key = (rt_l[i], area_l[i])
            if key in seen:
                first_of[i] = seen[key]
            else:
                seen[key] = i
        dup = np.zeros(len(rt), dtype=bool)
        dup[list(first_of)] = True
        mark(dup, lambda i: f"duplicate of row {int(line_arr[first_of[i]])} (same retention "
                            f"time and area)")
        keep = free.copy()
        if np.any(np.diff(np.sort(rt[keep])) == 0):
            log.warning("%s: some rows share a retention time with different areas; all kept",
                        source)
    order = np.flatnonzero(keep)
    kept_rt = rt[order]
    unsorted = bool(np.any(np.diff(kept_rt) < 0))
    if unsorted:
        first_bad = int(line_arr[order[int(np.flatnonzero(np.diff(kept_rt) < 0)[0]) + 1]])
        perm = np.argsort(kept_rt, kind="stable")
        moved = int((perm != np.arange(len(perm))).sum())
        order = order[perm]
        logs.append({"row": first_bad, "action": "changed",
                     "reason": f"rows not in retention-time order; table sorted by rt_min "
                               f"({moved} rows moved)"})
    m = len(order)
    data: dict[str, Any] = {"row": line_arr[order]}
    for role in ("rt_min", "area", "height", "area_pct"):
        data[role] = ((rt if role == "rt_min" else nums[role])[order] if role in nums
                      else np.full(m, np.nan))
    for role in ("name", "cas"):
        t = cols.get(role)
        vals = np.full(len(order), None, dtype=object)
        if t is not None:
            vals[:] = [t[i] or None for i in order.tolist()]
        data[role] = pd.Series(vals, dtype=object, copy=False)
    for role in ("retention_index", "cds_mass_pct"):
        data[role] = nums[role][order] if role in nums else np.full(m, np.nan)
    return pd.DataFrame(data, copy=False), None


def _composition_rows(hdr, cols, nums, free, mark, raw, line_arr):
    n = len(line_arr)
    comp = cols.get("name") or [""] * n
    if cols.get("cas") is not None:
        comp = [c or k for c, k in zip(comp, cols["cas"])]
    amount = nums[hdr.basis]
    mark(np.array([c == "" for c in comp], dtype=bool), "no component name or CAS number")
    mark(np.isnan(amount), raw(hdr.basis))
    mark(amount < 0, "negative amount")
    mark(amount >= ABSURD_AMOUNT, lambda i: f"amount {amount[i]:g} at or above {ABSURD_AMOUNT:g}; "
                                            "not a percentage, check the file")
    keep = free.tolist()
    out = pd.DataFrame({"row": line_arr[free],
                        "component": pd.Series([c for c, k in zip(comp, keep) if k], dtype=object),
                        "amount": amount[free]})
    # kept beside the name for components outside the library (dha.quantify)
    for role in ("cas", "formula"):
        if cols.get(role) is not None and (role != "cas" or cols.get("name") is not None):
            out[role] = pd.Series([c or None for c, k in zip(cols[role], keep) if k],
                                  dtype=object)
    return out


# ----------------------------------------------------------------------------- text files

def read_text(text: str, name: str = "<text>", settings: dict | None = None) -> list[Run]:
    """Read a text export already decoded to ``str``.

    Parameters
    ----------
    text : str
        The whole file.
    name : str
        File name used in messages, as ``Run.source_file`` and (its stem) as fallback sample id.
    settings : dict, optional
        Full settings from :func:`dha.settings.load_settings`; only ``[reader]`` is used.

    Returns
    -------
    list of Run
        One run.
    """
    rs = _reader_settings(settings)
    return [_read_text(text, name, rs)]


def _read_text(text: str, name: str, rs: dict[str, Any],
               pre_logs: list[dict[str, Any]] | None = None) -> Run:
    text = text.lstrip("\ufeff")
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    lines = text.split("\n")
    if not text.strip():
        raise InputError(f"{name}: the file is empty; export the peak table again")
    pre_logs = list(pre_logs or [])
    if has_controls(text):
        pre_logs += _clean_control_lines(lines)
    _check_text_limits(lines, name, rs)
    pinned = rs["columns"]
    seps = _TRY_ORDER if rs["separator"] == "auto" else (_SEPARATORS[rs["separator"]],)
    best: tuple[int, _Header] | None = None
    found = None
    for i, line in enumerate(lines):
        if not _LETTER.search(line) or _KEY_RE.match(line):
            continue         # no words, or a "key: value" metadata line
        cand = None
        for sep in seps:
            if sep not in line and not (sep == "  " and "\t" in line):
                continue
            hdr = _map_header(_split_line(line, sep), pinned)
            if sep == " " and (hdr.dupes or len(hdr.roles) < 0.6 * len(hdr.cells)):
                continue   # single-space splitting of free text ("Retention time and area")
            if hdr.roles and (cand is None or len(hdr.roles) > len(cand[1].roles)
                              or (hdr.kind and not cand[1].kind)):
                cand = (sep, hdr)
                if hdr.kind and sep != " " and not hdr.dupes:
                    break          # a full header with a real separator: look no further
        if cand is None:
            continue
        sep, hdr = cand
        if _is_header_candidate(hdr) and (best is None or len(hdr.roles) > len(best[1].roles)):
            best = (i + 1, hdr)
        if hdr.kind or (hdr.dupes and _is_header_candidate(hdr)):
            _check_dupes(name, i + 1, hdr)
        if hdr.kind:
            found = (i, sep, hdr)
            break
    if found is None:
        raise _header_error(name, best, f"{len(lines)} lines, none with such a header")
    hi, sep, hdr = found
    spans = None
    if sep == "  ":
        spans = [m.span() for m in re.finditer(r"\S+(?: \S+)*", lines[hi].replace("\t", "  "))]
        if len(spans) != len(hdr.cells):
            spans = None
    meta = [(*_text_meta_cells(ln), ln) for ln in lines[:hi] if ln.strip()]
    sample = _sample_from_meta(meta)
    stem = Path(name).stem or "sample"
    strip_chars = " \t;,\"" if sep not in (" ", "  ") else " \t"
    fast = None
    decimal = None
    if sep in (",", ";", "\t"):
        body_lines = lines[hi + 1:]
        while body_lines and not body_lines[-1].strip(strip_chars):
            body_lines.pop()           # trailing blank lines
        stripped = list(map(str.strip, body_lines, repeat(strip_chars, len(body_lines))))
        if all(stripped):              # no blank lines: the usual case, no per-line loop
            kept = body_lines
            line_nos = np.arange(hi + 2, hi + 2 + len(body_lines), dtype=np.int64)
        else:                          # drop blank (or separator-only) lines, keep numbers
            idx = [j for j, t in enumerate(stripped) if t]
            kept = [body_lines[j] for j in idx]
            line_nos = np.asarray(idx, dtype=np.int64) + (hi + 2)
        body_text = "\n".join(kept)
        fixed = None if rs["decimal"] == "auto" else rs["decimal"]
        fast = _fast_columns(body_text, line_nos, sep, hdr, fixed)
        if fast is not None:
            *fast, decimal = fast
        else:
            decimal = fixed
            # every line, blank ones too: a blank line may sit inside a quoted cell
            body = _split_records(body_lines, list(range(hi + 2, hi + 2 + len(body_lines))),
                                  sep, name, pre_logs)
    else:
        body = [(j, _split_line(ln, sep), ln.replace("\t", "  "))
                for j, ln in enumerate(lines[hi + 1:], start=hi + 2) if ln.strip()]
    if fast is None:
        fast = _rows_to_columns(body, hdr, sep, spans)
    line_arr, cols, extra, logs = fast
    return _build_run(name, stem, None, sample, hdr, hi + 1, line_arr, cols, extra,
                      pre_logs + logs, decimal, rs)


def _clean_control_lines(lines: list[str]) -> list[dict[str, Any]]:
    """Replace control characters in ``lines`` (in place) visibly; one log entry per line.

    NUL characters are removed (they come from padding or a UTF-16 file read as 8-bit text);
    a form feed or vertical tab becomes a space (a page break); any other control character is
    shown as ``<BEL>``, ``<ESC>``... Lines holding only white space and page breaks are blank.
    """
    logs = []
    for i, line in enumerate(lines):
        if not has_controls(line):
            continue
        fixed = line.replace("\x00", "").replace("\x0c", " ").replace("\x0b", " ")
        if not fixed.strip():
            lines[i] = ""
            continue
        shown = visible_controls(fixed)
        lines[i] = shown
        what = []
        if "\x00" in line:
            what.append(f"{line.count(chr(0))} NUL character(s) removed")
        if "\x0c" in line or "\x0b" in line:
            what.append("page-break character(s) replaced by spaces")
        if shown != fixed:
            names = sorted(set(re.findall(r"<(?:[A-Z]{2,3}|U\+[0-9A-F]{4})>", shown))
                           - set(re.findall(r"<(?:[A-Z]{2,3}|U\+[0-9A-F]{4})>", fixed)))
            what.append("control character(s) shown as " + ", ".join(names))
        logs.append({"row": i + 1, "action": "changed",
                     "reason": "; ".join(what) + f" (line now {terminal_text(shown.strip())[:60]!r})"})
    return logs


def _check_text_limits(lines: list[str], name: str, rs: dict[str, Any]) -> None:
    """Refuse a text with more rows, or a longer line, than ``[limits]`` allows."""
    limits = rs["limits"]
    n = len(lines)
    if n > limits["max_rows"] + 1000:   # metadata lines and blank lines get some room
        raise InputError(
            f"{name}: {n} lines, more than [limits] max_rows = {int(limits['max_rows'])} rows "
            "(a DHA run has a few hundred to a few thousand peaks); split the file or raise "
            "the limit in a settings file")
    longest = max(map(len, lines), default=0)
    if longest > 4 * limits["max_text_chars"] + 2000:
        row = next(i for i, ln in enumerate(lines, start=1) if len(ln) == longest)
        raise InputError(
            f"{name}, row {row}: a line of {longest} characters, longer than [limits] "
            f"max_text_chars = {int(limits['max_text_chars'])} allows for its cells; check the "
            "export (or raise the limit in a settings file)")


def _blank_cells(cells: list[Any]) -> bool:
    return all(not str(c).strip(' \t;,"') for c in cells)


def _split_records(kept: list[str], line_nos: list[int], sep: str, name: str,
                   logs: list[dict[str, Any]]) -> list[tuple[int, list[Any], None]]:
    """Rows of a delimited body with quoted cells that may span lines.

    A line break inside a quoted cell is replaced by a space and logged (``changed``) at the
    row's first line; the row keeps the line number where it starts.
    """
    reader = csv.reader((ln + "\n" for ln in kept), delimiter=sep, skipinitialspace=True)
    body = []
    before = 0
    try:
        for cells in reader:
            row = line_nos[before] if before < len(line_nos) else line_nos[-1]
            if reader.line_num - before > 3:
                # a stray quote, not a name on two lines: split every line on its own
                return [(ln, cells, None) for ln, cells in
                        ((ln, _split_line(raw, sep)) for ln, raw in zip(line_nos, kept))
                        if not _blank_cells(cells)]
            if reader.line_num - before > 1 or any("\n" in c for c in cells):
                joined = [c.replace("\n", " ") for c in cells]
                if joined != cells:
                    logs.append({"row": row, "action": "changed",
                                 "reason": f"line break inside a quoted cell (rows {row}-"
                                           f"{line_nos[min(reader.line_num, len(line_nos)) - 1]}) "
                                           "replaced by a space"})
                cells = joined
            before = reader.line_num
            if not _blank_cells(cells):      # blank (or separator-only) lines are not rows
                body.append((row, cells, None))
    except csv.Error as err:
        raise InputError(f"{name}, row {line_nos[min(before, len(line_nos) - 1)]}: cannot split "
                         f"the table into cells ({err}); check the quotes in the export") from None
    return body


def _fast_columns(body_text: str, line_nos: np.ndarray, sep: str, hdr: _Header,
                  decimal: str | None):
    """Columns of a delimited body through pandas' C parser.

    Returns ``(lines, cols, extra_text, logs, decimal)``, or None when a row needs rule 9 (more
    cells than the header) or the lines do not map one-to-one to rows. With ``decimal`` None
    the body is parsed with a decimal point first; if the cells that did not parse read
    better with a decimal comma (or every number is ambiguous, like "12.345"), it is parsed
    again with a decimal comma.
    """
    n = len(hdr.cells)
    if not len(line_nos):
        return None
    text_cols = {hdr.roles[r] for r in ("name", "cas") if r in hdr.roles}
    numeric = {r: i for r, i in hdr.roles.items() if r not in ("name", "cas")}
    if 0 not in numeric.values():
        text_cols.add(0)

    def parse(dec: str) -> pd.DataFrame | None:
        try:
            df = pd.read_csv(io.StringIO(body_text), sep=sep, header=None, names=range(n + 1),
                             quotechar='"', skipinitialspace=True, decimal=dec, engine="c",
                             low_memory=False, skip_blank_lines=False)
        except (pd.errors.ParserError, ValueError, OverflowError):
            return None
        if (len(df) != len(line_nos) or not isinstance(df.index, pd.RangeIndex)
                or df[n].notna().to_numpy().any()):
            return None
        return df

    df = parse(decimal or ".")
    if df is None:
        return None
    if decimal is None:
        decimal = "."
        probe = [v for i in numeric.values() if df[i].dtype.kind not in "fiu"
                 for v in df[i].tolist()[:300] if type(v) is str]
        if probe:
            # columns that parsed as numbers with a decimal point are evidence for it too
            parsed = sum(_fractional_count(df[i].to_numpy(float))
                         for i in numeric.values() if df[i].dtype.kind == "f")
            decimal = _detect_decimal(probe, parsed)
        elif sep != "," and all(_ambiguous_thousands(df[i].to_numpy(dtype=float))
                                for i in numeric.values()):
            decimal = _detect_decimal_text(body_text, sep)
        if decimal == ",":
            df = parse(",")
            if df is None:
                return None
    cols: dict[str, list[Any] | np.ndarray] = {}
    for role, i in hdr.roles.items():
        c = df[i]
        if c.dtype.kind in "fiu" and role not in ("name", "cas"):
            cols[role] = c.to_numpy(dtype=float)
        else:
            cols[role] = [v if type(v) is str else "" if v != v else _cell_text(v)
                          for v in c.tolist()]
    extra = [] if 0 not in text_cols else [
        [v if type(v) is str else "" if v != v else _cell_text(v) for v in df[0].tolist()]]
    return line_nos, cols, extra, [], decimal


def _fractional_count(v: np.ndarray, cap: int = 300) -> int:
    """How many finite values have a fractional part (at most ``cap``)."""
    v = v[np.isfinite(v)]
    return min(cap, int(np.count_nonzero(np.mod(v, 1))))


def _cell_text(v: Any) -> str:
    """A parsed cell back to text: NaN -> "", 7.0 -> "7"."""
    if type(v) is str:
        return v
    if v is None or v != v:
        return ""
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v)


def _ambiguous_thousands(v: np.ndarray) -> bool:
    """True when every value could be a whole number grouped by "." ("12.345", "7")."""
    v = v[np.isfinite(v)]
    scaled = v * 1000.0
    return bool(np.all(np.abs(scaled - np.round(scaled)) < 1e-6 * np.maximum(1.0, np.abs(scaled))))


def _decode(data: bytes, name: str) -> str:
    """Text from bytes: BOM first, then UTF-8, then Windows-1252."""
    if data.startswith(b"\xef\xbb\xbf"):
        return data[3:].decode("utf-8", errors="replace")
    if data.startswith(b"\xff\xfe") or data.startswith(b"\xfe\xff"):
        return data.decode("utf-16", errors="replace")
    zeros = data.count(b"\x00")
    if zeros > len(data) // 4:
        even = data[0::2].count(b"\x00")
        enc = "utf-16-be" if even > zeros // 2 else "utf-16-le"
        text = data.decode(enc, errors="replace")
    else:
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError:
            text = data.decode("cp1252", errors="replace")
    return text


_CONTROL_BYTES = bytes([*range(0, 9), *range(14, 32), 127])
_OTHER_BYTES = bytes(b for b in range(256) if b not in _CONTROL_BYTES)


def _check_text(text: str, name: str) -> None:
    head = text[:20000]
    # control characters (by deleting every other byte of the UTF-8 form) and undecodable bytes
    bad = len(head.encode("utf-8", "surrogatepass").translate(None, _OTHER_BYTES))
    bad += head.count("\ufffd")
    if bad > max(2, len(text[:20000]) // 50):
        raise InputError(f"{name}: not a text table ({bad} control or undecodable characters); "
                         f"give a CSV/TXT/TSV or Excel export of the peak table")


# ----------------------------------------------------------------------------- workbooks

def _grid_runs(sheets: list[tuple[str, list[list[Any]]]], path: Path,
               rs: dict[str, Any]) -> list[Run]:
    pinned = rs["columns"]
    found = []
    best = None
    cleaned: dict[str, list[dict[str, Any]]] = {}
    for sheet, rows in sheets:
        cleaned[sheet] = _clean_control_cells(rows)
    for sheet, rows in sheets:
        for r, cells in enumerate(rows):
            if not any(isinstance(c, str) and any(ch.isalpha() for ch in c) for c in cells):
                continue
            hdr = _map_header([c if isinstance(c, str) else None for c in cells], pinned)
            if _is_header_candidate(hdr) and (best is None or len(hdr.roles) > len(best[1].roles)):
                best = (r + 1, hdr)
            if hdr.kind or (hdr.dupes and _is_header_candidate(hdr)):
                _check_dupes(f"{path} [{sheet}]", r + 1, hdr)
            if hdr.kind:
                found.append((sheet, rows, r, hdr))
                break
    if not found:
        names = ", ".join(repr(s) for s, _ in sheets)
        raise _header_error(str(path), best, f"sheets {names}, none with such a header")
    runs = []
    for sheet, rows, r, hdr in found:
        sample = _sample_from_meta([(c, False, None) for c in rows[:r] if any(
            v is not None and str(v).strip() for v in c)])
        body = []
        for j, cells in enumerate(rows[r + 1:], start=r + 2):
            cells = ["" if c is None else c for c in cells]
            if any(not (isinstance(c, str) and not c.strip()) for c in cells):
                body.append((j, cells, None))
        injection = sheet if len(found) > 1 else None
        line_arr, cols, extra, logs = _rows_to_columns(body, hdr, None, None)
        runs.append(_build_run(str(path), path.stem, injection, sample, hdr, r + 1, line_arr,
                               cols, extra, cleaned[sheet] + logs, None, rs))
    skipped = [s for s, _ in sheets if s not in {f[0] for f in found}]
    if skipped:
        log.info("%s: sheets without a table left out: %s", path, ", ".join(skipped))
    return runs


def _clean_control_cells(rows: list[list[Any]]) -> list[dict[str, Any]]:
    """Control characters in a sheet's text cells shown visibly (in place); logged per row."""
    logs = []
    for r, cells in enumerate(rows, start=1):
        names: set[str] = set()
        for j, c in enumerate(cells):
            if isinstance(c, str) and has_controls(c):
                shown = visible_controls(c)
                names |= set(re.findall(r"<(?:[A-Z]{2,3}|U\+[0-9A-F]{4})>", shown))
                cells[j] = shown
        if names:
            logs.append({"row": r, "action": "changed",
                         "reason": "control character(s) shown as " + ", ".join(sorted(names))})
    return logs


def _flat(err: Exception) -> str:
    """A library's error message on one short line."""
    return " ".join(str(err).split())[:120]


def _xlsx_sheets(data: bytes, path: Path,
                 limits: dict[str, float] | None = None) -> list[tuple[str, list[list[Any]]]]:
    import openpyxl
    limits = limits or LIMIT_DEFAULTS
    max_rows = int(limits["max_rows"]) + 1000     # metadata and blank rows get some room
    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
        try:
            sheets = []
            for ws in wb.worksheets:
                rows = []
                for r in ws.iter_rows(min_row=1, values_only=True):
                    if len(rows) >= max_rows:
                        raise InputError(
                            f"{path} [{ws.title}]: more than {max_rows} rows ([limits] max_rows "
                            f"= {int(limits['max_rows'])}); export only the peak table or "
                            "raise the limit in a settings file")
                    rows.append(list(r))
                sheets.append((ws.title, rows))
            return sheets
        finally:
            wb.close()
    except InputError:
        raise
    except Exception as err:  # corrupt archives raise many kinds of error
        raise InputError(f"{path}: cannot read the Excel workbook ({type(err).__name__}: "
                         f"{_flat(err)}); save it again as .xlsx or export CSV") from None


def _xls_sheets(data: bytes, path: Path) -> list[tuple[str, list[list[Any]]]]:
    import xlrd
    try:
        book = xlrd.open_workbook(file_contents=data)
        out = []
        for sh in book.sheets():
            rows = []
            for r in range(sh.nrows):
                cells = []
                for c in sh.row(r):
                    if c.ctype == xlrd.XL_CELL_DATE:
                        cells.append(xlrd.xldate_as_datetime(c.value, book.datemode))
                    elif c.ctype in (xlrd.XL_CELL_EMPTY, xlrd.XL_CELL_BLANK):
                        cells.append(None)
                    elif c.ctype == xlrd.XL_CELL_ERROR:
                        cells.append("#ERROR")
                    else:
                        cells.append(c.value)
                rows.append(cells)
            out.append((sh.name, rows))
        return out
    except Exception as err:  # corrupt files raise many kinds of error
        raise InputError(f"{path}: cannot read the legacy Excel file ({type(err).__name__}: "
                         f"{_flat(err)}); save it as .xlsx or export CSV") from None


# ----------------------------------------------------------------------------- entry point

def read_input(path: str | Path, settings: dict | None = None) -> list[Run]:
    """Read one export file into runs.

    Parameters
    ----------
    path : str or Path
        A text table (CSV, TSV, TXT; any separator), an XLSX or a legacy XLS workbook.
    settings : dict, optional
        Full settings from :func:`dha.settings.load_settings`; only ``[reader]`` is used.

    Returns
    -------
    list of Run
        One per injection (a workbook: one per sheet with a table), in file order.

    Raises
    ------
    dha.errors.InputError
        The file is missing, empty, not a table, or its columns cannot be told apart.
    """
    rs = _reader_settings(settings)
    limits = rs["limits"]
    path = Path(path)
    try:
        info = path.stat()
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; check the path") from None
    except OSError as err:
        raise InputError(f"{path}: cannot read the file ({err.strerror}); check the path") from None
    if stat.S_ISDIR(info.st_mode):
        raise InputError(f"{path}: is a folder, not a file; give a peak-table file")
    if not stat.S_ISREG(info.st_mode):
        raise InputError(f"{path}: not a regular file (a device, pipe or socket); give the "
                         "export file itself")
    if info.st_size > limits["max_file_mb"] * 1e6:
        raise InputError(f"{path}: {info.st_size / 1e6:.1f} MB, larger than [limits] "
                         f"max_file_mb = {limits['max_file_mb']:g} (a DHA peak table is well "
                         "under 1 MB); check the file or raise the limit in a settings file")
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: file not found; check the path") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a folder, not a file; give a peak-table file") from None
    except OSError as err:
        raise InputError(f"{path}: cannot read the file ({err.strerror})") from None
    if not data.strip():
        raise InputError(f"{path}: the file is empty; export the peak table again")
    if data.startswith(b"PK\x03\x04"):
        try:
            infos = zipfile.ZipFile(io.BytesIO(data)).infolist()
        except Exception:  # noqa: BLE001 - zipfile raises several kinds on a damaged archive
            raise InputError(f"{path}: a damaged or truncated ZIP/XLSX file (its directory "
                             "cannot be read); copy or export it again") from None
        if "xl/workbook.xml" not in {i.filename for i in infos}:
            raise InputError(f"{path}: a ZIP archive but not an Excel workbook; give the XLSX "
                             f"or a CSV export itself")
        unpacked = sum(i.file_size for i in infos)
        if unpacked > limits["max_workbook_mb"] * 1e6:
            raise InputError(f"{path}: the workbook unpacks to {unpacked / 1e6:.0f} MB, more "
                             f"than [limits] max_workbook_mb = {limits['max_workbook_mb']:g}; "
                             "export only the peak table, or raise the limit in a settings file")
        return _grid_runs(_xlsx_sheets(data, path, limits), path, rs)
    if data.startswith(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"):
        return _grid_runs(_xls_sheets(data, path), path, rs)
    for magic, what in _MAGIC:
        if what and data.startswith(magic):
            raise InputError(f"{path}: {what}, not a table export; give a CSV/TXT/TSV or Excel "
                             f"export of the peak table")
    text = _decode(data, str(path))
    _check_text(text, str(path))
    return [_read_text(text, str(path), rs, _encoding_notes(data))]


_UTF8_MULTIBYTE = re.compile(rb"[\xc2-\xf4][\x80-\xbf]+")


def _encoding_notes(data: bytes) -> list[dict[str, Any]]:
    """An import-log entry when a file without BOM mixes UTF-8 with another encoding.

    Such a file is read as Windows-1252 (``_decode``), so its UTF-8 parts (accented names)
    come out garbled: said at the first row that is not UTF-8.
    """
    if data.startswith((b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff")) or b"\x00" in data[:4000]:
        return []
    try:
        data.decode("utf-8")
        return []
    except UnicodeDecodeError as err:
        first_bad = err.start
    if not _UTF8_MULTIBYTE.search(data):
        return []          # plain Windows-1252 (no UTF-8 in it): read as it is
    row = data.count(b"\n", 0, first_bad) + 1
    return [{"row": row, "action": "changed",
             "reason": "the file mixes encodings (UTF-8 and, from this row, another one); read "
                       "as Windows-1252, so UTF-8 text such as accented names may be garbled; "
                       "export the file again in one encoding"}]
