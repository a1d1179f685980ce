"""Report writers: a result dict (``schema: dha-result/1``) -> Excel workbook or PDF draft.

Both writers take the JSON result dict only (the dha-result/1 schema) and never recompute science: what
they show is what the result holds. This module keeps what both share: the words a person
reads (labels, units, the responsibility text), number formatting and the settings digest.

    write_xlsx(result, path) -> Path      (dha.report.excel)
    write_pdf(result, path) -> Path       (dha.report.pdf)

``WRITERS`` maps a format name to its writer, for the pipeline's dict of writers.
"""
from __future__ import annotations

import hashlib
import json
import math
from typing import Any

#: Group keys of the result, in the order reports show them (the dha-result/1 schema spellings).
GROUP_KEYS = (
    "n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics", "oxygenates",
    "unidentified",
)

#: Human labels of the group keys.
GROUP_LABELS = {
    "n_paraffins": "n-paraffins",
    "isoparaffins": "isoparaffins",
    "olefins": "olefins",
    "naphthenes": "naphthenes",
    "aromatics": "aromatics",
    "oxygenates": "oxygenates",
    "unidentified": "unidentified",
}

#: Keys of the result's optional ``aromatics_detail`` -> labels.
AROMATICS_DETAIL_LABELS = {
    "benzene": "benzene",
    "toluene": "toluene",
    "c8_aromatics": "C8 aromatics",
    "c9plus_aromatics": "C9+ aromatics",
}

#: Basis key -> unit text shown in headers.
BASIS_UNITS = {"mass_pct": "mass %", "vol_pct": "% v/v", "mol_pct": "mol %"}

#: Property key -> (label, unit, decimals). Keys not listed get a unit from their suffix.
PROPERTY_INFO: dict[str, tuple[str, str, int]] = {
    "ron": ("RON (research octane number)", "-", 1),
    "mon": ("MON (motor octane number)", "-", 1),
    "aki": ("AKI = (RON + MON)/2", "-", 1),
    "sensitivity": ("sensitivity = RON - MON", "-", 1),
    "dvpe_kpa": ("DVPE at 37.8 °C", "kPa", 1),
    "density_kg_m3": ("density at reference temperature", "kg/m³", 1),
    "e70_vol_pct": ("E70, evaporated at 70 °C", "% v/v", 1),
    "e100_vol_pct": ("E100, evaporated at 100 °C", "% v/v", 1),
    "e150_vol_pct": ("E150, evaporated at 150 °C", "% v/v", 1),
    "t10_c": ("T10, 10 % v/v evaporated", "°C", 1),
    "t50_c": ("T50, 50 % v/v evaporated", "°C", 1),
    "t90_c": ("T90, 90 % v/v evaporated", "°C", 1),
    "fbp_c": ("final boiling point", "°C", 1),
    "net_heat_mj_kg": ("net heat of combustion", "MJ/kg", 2),
    "mean_molar_mass_g_mol": ("mean molar mass", "g/mol", 2),
    "h_to_c_molar": ("H/C atomic ratio", "mol/mol", 3),
    "rvp_psi": ("RVP (DVPE expressed in psi)", "psi", 2),
    "vli": ("vapour lock index VLI = 10·DVPE + 7·E70", "-", 0),
    "gross_heat_mj_kg": ("gross heat of combustion", "MJ/kg", 2),
    "carbon_mass_pct": ("carbon", "mass %", 2),
    "hydrogen_mass_pct": ("hydrogen", "mass %", 2),
    "co2_g_per_mj": ("CO2 per MJ (net heat)", "g/MJ", 1),
    "benzene_vol_pct": ("benzene", "% v/v", 2),
    "benzene_mass_pct": ("benzene", "mass %", 2),
    "aromatics_vol_pct": ("aromatics", "% v/v", 1),
    "olefins_vol_pct": ("olefins", "% v/v", 1),
    "oxygen_mass_pct": ("oxygen", "mass %", 2),
    "ethanol_vol_pct": ("ethanol", "% v/v", 1),
    "methanol_vol_pct": ("methanol", "% v/v", 1),
    "ethers_c5plus_vol_pct": ("ethers with 5 or more carbon atoms", "% v/v", 1),
}

#: Key suffix -> unit, for keys not in PROPERTY_INFO (longest suffixes first).
_SUFFIX_UNITS = (
    ("_mass_pct", "mass %"), ("_vol_pct", "% v/v"), ("_mol_pct", "mol %"),
    ("_kg_m3", "kg/m³"), ("_mj_kg", "MJ/kg"), ("_g_mol", "g/mol"), ("_kpa", "kPa"),
    ("_psi", "psi"), ("_min", "min"), ("_c", "°C"), ("_k", "K"), ("_pct", "%"),
)

#: What the reports say where a person reads them (common trade practice). One paragraph per item.
RESPONSIBILITY_TEXT = (
    "This is a DRAFT, not a certificate. It becomes one only when an authorised person has "
    "reviewed and released it under the laboratory's own accredited procedures.",
    "Calculated properties (octane numbers, DVPE, density, distillation points, heat of "
    "combustion) are estimates from the composition. They are not results of the standard "
    "engine, vapour-pressure, distillation or density test methods and do not replace them.",
    "Local regulations and the applicable product specification rule. The specification "
    "limits shown come from the profile named above; check them against the current edition.",
    "Safety: petrol is highly flammable and its vapour can form explosive mixtures with air. "
    "Benzene is a human carcinogen (IARC group 1). Handle samples cold, closed and with "
    "ventilation.",
)

#: Text shown for a value that is null; the reason is in the result's warnings.
NULL_TEXT = "—"

#: Verdict key -> words shown to the reader.
VERDICT_WORDS = {
    "pass": "pass",
    "fail": "FAIL",
    "marginal": "within uncertainty of the limit",
    None: "not checked",
}


def property_label(key: str) -> str:
    """Human label of a property key, e.g. ``"dvpe_kpa"`` -> ``"DVPE at 37.8 °C"``.

    >>> property_label("t50_c")
    'T50, 50 % v/v evaporated'
    >>> property_label("toluene_vol_pct")
    'toluene'
    """
    if key in PROPERTY_INFO:
        return PROPERTY_INFO[key][0]
    base = key
    for suffix, _unit in _SUFFIX_UNITS:
        if key.endswith(suffix):
            base = key[: -len(suffix)]
            break
    return base.replace("_", " ")


def unit_of(key: str) -> str:
    """Unit text of a result key, from the table or from the key's unit suffix.

    ``"-"`` means dimensionless; ``""`` means the key names no unit.

    >>> unit_of("dvpe_kpa"), unit_of("ethers_c5plus_vol_pct"), unit_of("ron")
    ('kPa', '% v/v', '-')
    """
    if key in PROPERTY_INFO:
        return PROPERTY_INFO[key][1]
    for suffix, unit in _SUFFIX_UNITS:
        if key.endswith(suffix):
            return unit
    return ""


def decimals_of(key: str) -> int:
    """Decimals shown for a property key (2 when the key is not in the table).

    >>> decimals_of("h_to_c_molar")
    3
    """
    return PROPERTY_INFO.get(key, ("", "", 2))[2]


def is_number(value: Any) -> bool:
    """True for a finite int/float that is not a bool.

    >>> is_number(1.5), is_number(None), is_number(float("nan")), is_number(True)
    (True, False, False, False)
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return False
    return math.isfinite(value)


def fmt_number(value: Any, decimals: int = 2) -> str:
    """Text of a number with fixed decimals; ``NULL_TEXT`` for null/NaN; other values as str.

    >>> fmt_number(3.14159, 2), fmt_number(None), fmt_number("13+")
    ('3.14', '—', '13+')
    """
    if value is None:
        return NULL_TEXT
    if is_number(value):
        return f"{value:.{decimals}f}"
    if isinstance(value, float):  # NaN or inf
        return NULL_TEXT
    return str(value)


def canonical_json(obj: Any) -> str:
    """JSON text with sorted keys and no spaces: the same dict always gives the same text."""
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=str)


def settings_digest(settings: dict | None) -> str:
    """SHA-256 (hex) of the settings' canonical JSON, to tell two runs' settings apart.

    Notes
    -----
    digest = sha256(UTF-8 of ``json.dumps(settings, sort_keys=True, separators=(",", ":"))``).

    >>> settings_digest({"b": 1, "a": 2}) == settings_digest({"a": 2, "b": 1})
    True
    """
    return hashlib.sha256(canonical_json(settings or {}).encode("utf-8")).hexdigest()


def flatten_settings(settings: dict | None, prefix: str = "") -> list[tuple[str, str]]:
    """Settings as ``("section.key", value text)`` rows, sorted; lists/dicts as compact JSON.

    >>> flatten_settings({"identify": {"ri_tolerance": 3.0, "markers": {}}})
    [('identify.markers', '{}'), ('identify.ri_tolerance', '3.0')]
    """
    rows: list[tuple[str, str]] = []
    for key in sorted(settings or {}, key=str):
        value = settings[key]
        name = f"{prefix}{key}"
        if isinstance(value, dict) and value:
            rows.extend(flatten_settings(value, prefix=name + "."))
        elif isinstance(value, (dict, list)):
            rows.append((name, canonical_json(value)))
        else:
            rows.append((name, json.dumps(value) if isinstance(value, (bool, str)) or value is None
                         else str(value)))
    return rows


def flatten_mapping(data: dict | None) -> list[tuple[str, str, Any]]:
    """Nested dict as ``(label, unit, value)`` rows; sub-keys joined with ", ".

    The unit comes from the top-level key's suffix (``area_share_pct`` -> ``%``).

    >>> flatten_mapping({"peaks": {"identified": 44}, "area_share_pct": {"excluded": 0.02}})
    [('peaks, identified', '', 44), ('area share, excluded', '%', 0.02)]
    """
    rows: list[tuple[str, str, Any]] = []

    def walk(prefix: str, unit: str, value: Any) -> None:
        if isinstance(value, dict) and value:
            for k, v in value.items():
                walk(f"{prefix}, {str(k).replace('_', ' ')}", unit, v)
        else:
            rows.append((prefix, unit, value))

    for key, value in (data or {}).items():
        key = str(key)
        walk(property_label(key), unit_of(key), value)
    return rows


def mapping_table(data: dict | None) -> tuple[list[str], list[tuple[str, str, list[Any]]],
                                              list[tuple[str, str, Any]]]:
    """A dict of dicts as a matrix: (column keys, rows ``(label, unit, values)``, scalar rows).

    Entries whose value is a dict become matrix rows (columns: the union of their keys, in
    order of first appearance); other entries come back as ``(label, unit, value)`` rows.

    >>> cols, rows, scalars = mapping_table({"peaks": {"a": 1, "b": 2}, "area_pct": {"b": 5.0},
    ...                                      "closes": True})
    >>> cols, rows, scalars
    (['a', 'b'], [('peaks', '', [1, 2]), ('area', '%', [None, 5.0])], [('closes', '', True)])
    """
    columns: list[str] = []
    rows: list[tuple[str, str, list[Any]]] = []
    scalars: list[tuple[str, str, Any]] = []
    for key, value in (data or {}).items():
        if isinstance(value, dict):
            for sub in value:
                if str(sub) not in columns:
                    columns.append(str(sub))
    for key, value in (data or {}).items():
        key = str(key)
        if isinstance(value, dict):
            flat = {str(k): v for k, v in value.items()}
            rows.append((property_label(key), unit_of(key), [flat.get(c) for c in columns]))
        else:
            scalars.append((property_label(key), unit_of(key), value))
    return columns, rows, scalars


def warnings_about_checks(result: dict) -> list[str]:
    """Warnings that report a specification limit as not checked."""
    return [str(w) for w in result.get("warnings") or [] if "not checked" in str(w)]


def carbon_label(value: Any) -> str:
    """Label of a carbon-number bucket: the lowest bucket 3 also holds C1-C2 (dha.groups).

    >>> carbon_label(3), carbon_label(7), carbon_label("13+")
    ('≤C3', 'C7', 'C13+')
    """
    if is_number(value) and int(value) == 3:
        return "≤C3"
    return f"C{value}"


def carbon_number_sort_key(value: Any) -> tuple[int, str]:
    """Sort key for carbon numbers that may be ints or a bucket text such as ``"13+"``.

    >>> sorted([10, "13+", 3, None], key=carbon_number_sort_key)
    [3, 10, '13+', None]
    """
    if is_number(value):
        return (int(value), "")
    text = "" if value is None else str(value)
    digits = "".join(ch for ch in text if ch.isdigit())
    return (int(digits) if digits else 10**6, text)


def headline_rows(result: dict) -> list[tuple[str, str, Any, str]]:
    """The headline composition values: ``(key, label, value, unit)`` rows, value may be None."""
    totals = result.get("totals") or {}
    vol = totals.get("vol_pct") or {}
    mass = totals.get("mass_pct") or {}
    benzene = result.get("benzene") or {}
    return [
        ("benzene_vol_pct", "benzene", benzene.get("vol_pct"), "% v/v"),
        ("benzene_mass_pct", "benzene", benzene.get("mass_pct"), "mass %"),
        ("aromatics_vol_pct", "aromatics", vol.get("aromatics"), "% v/v"),
        ("olefins_vol_pct", "olefins", vol.get("olefins"), "% v/v"),
        ("oxygenates_vol_pct", "oxygenates", vol.get("oxygenates"), "% v/v"),
        ("oxygen_mass_pct", "oxygen", result.get("oxygen_mass_pct"), "mass %"),
        ("unidentified_mass_pct", "unidentified", mass.get("unidentified"), "mass %"),
    ]


#: Standard test method each calculated property stands in for (EN / ISO first, then ASTM).
STANDARD_METHODS: dict[str, str] = {
    "ron": "EN ISO 5164 / ASTM D2699",
    "mon": "EN ISO 5163 / ASTM D2700",
    "aki": "from RON and MON",
    "sensitivity": "from RON and MON",
    "dvpe_kpa": "EN 13016-1 / ASTM D5191",
    "rvp_psi": "ASTM D5191 (DVPE in psi)",
    "density_kg_m3": "EN ISO 12185 / ASTM D4052",
    "e70_vol_pct": "EN ISO 3405 / ASTM D86",
    "e100_vol_pct": "EN ISO 3405 / ASTM D86",
    "e150_vol_pct": "EN ISO 3405 / ASTM D86",
    "t10_c": "EN ISO 3405 / ASTM D86",
    "t50_c": "EN ISO 3405 / ASTM D86",
    "t90_c": "EN ISO 3405 / ASTM D86",
    "fbp_c": "EN ISO 3405 / ASTM D86",
    "vli": "EN 228 (10·DVPE + 7·E70)",
    "net_heat_mj_kg": "ASTM D4809 / D240",
    "gross_heat_mj_kg": "ASTM D4809 / D240",
    "mean_molar_mass_g_mol": "-",
    "h_to_c_molar": "ASTM D5291",
}

#: Trade names of oxygenates by CAS number (the names the trade and EN 228 use).
TRADE_NAMES: dict[str, str] = {
    "1634-04-4": "MTBE", "637-92-3": "ETBE", "994-05-8": "TAME", "108-20-3": "DIPE",
    "75-65-0": "TBA", "78-83-1": "isobutanol", "67-63-0": "isopropanol", "919-94-8": "TAEE",
}


#: The same trade names by the library's systematic names (for entries without a CAS number).
_TRADE_BY_NAME: dict[str, str] = {
    "2-methoxy-2-methylpropane": "MTBE", "2-ethoxy-2-methylpropane": "ETBE",
    "2-methoxy-2-methylbutane": "TAME", "2-ethoxy-2-methylbutane": "TAEE",
    "2-(propan-2-yloxy)propane": "DIPE", "2-isopropoxypropane": "DIPE",
    "2-methyl-2-propanol": "TBA", "2-methyl-1-propanol": "isobutanol",
    "2-propanol": "isopropanol",
}


def display_name(name: Any, cas: Any = None) -> str:
    """A component name with its trade name beside it, e.g. ``2-methoxy-2-methylpropane (MTBE)``.

    >>> display_name("2-ethoxy-2-methylpropane", "637-92-3"), display_name("toluene", "108-88-3")
    ('2-ethoxy-2-methylpropane (ETBE)', 'toluene')
    >>> display_name("2-methoxy-2-methylbutane")
    '2-methoxy-2-methylbutane (TAME)'

    """
    text = NULL_TEXT if name in (None, "") else str(name)
    trade = TRADE_NAMES.get(str(cas or "")) or _TRADE_BY_NAME.get(text.casefold())
    if trade and trade.lower() not in text.lower():
        return f"{text} ({trade})"
    return text


def input_kind(result: dict) -> str:
    """``"peak table"`` or ``"composition table"``: ``sample.input_kind`` when the result has it,
    else a composition table when no component carries a retention time and there is no mass
    balance of peaks.

    >>> input_kind({"components": [{"rt_min": None}]}), input_kind({"mass_balance": {"peaks": {}}})
    ('composition table', 'peak table')
    """
    kind = (result.get("sample") or {}).get("input_kind")
    if kind:
        return str(kind)
    mb = result.get("mass_balance")
    if isinstance(mb, dict) and "peaks" in mb:
        return "peak table"
    if isinstance(mb, dict) and "rows" in mb:
        return "composition table"
    comps = result.get("components") or []
    if comps and all(c.get("rt_min") is None for c in comps):
        return "composition table"
    return "peak table"


def reference_temperature_c(result: dict) -> float:
    """Reference temperature of densities and volume % [°C] from the settings used (15 °C when
    the result does not say)."""
    value = ((result.get("settings") or {}).get("quantify") or {}).get("reference_temperature_c")
    return float(value) if is_number(value) else 15.0


def mass_balance_words(result: dict) -> str:
    """The mass balance in one sentence, e.g. "179 peaks in the file: 170 identified, 9
    unidentified (0.20 % of the area), none excluded; 1 row skipped or changed: see the import
    log."

    >>> mass_balance_words({"mass_balance": {"peaks": {"total": 10, "identified": 9,
    ...     "unidentified": 1, "excluded": 0}, "area_share_pct": {"unidentified": 0.5}},
    ...     "import_log": [{"row": 3}]})
    '10 peaks in the file: 9 identified, 1 unidentified (0.50 % of the area), none excluded; 1 row of the file skipped or changed: see the import log.'
    """
    log_rows = result.get("import_log") or []
    tail = (f"; {len(log_rows)} row{'s' if len(log_rows) != 1 else ''} of the file skipped or "
            "changed: see the import log." if log_rows else "; no row of the file skipped.")
    mb = result.get("mass_balance")
    if isinstance(mb, dict) and "rows" in mb and "peaks" not in mb:
        rows = mb.get("rows") or {}
        share = mb.get("amount_share_pct") or {}
        basis = BASIS_UNITS.get(str(mb.get("basis")), "")
        text = (f"{rows.get('total', 0)} rows in the composition table: "
                f"{rows.get('in_library', 0)} components of the library")
        if rows.get("stereo_split"):
            text += f", {rows['stereo_split']} split over cis/trans isomers"
        out = rows.get("not_in_library") or 0
        text += (f", {out} not in the library ({fmt_number(share.get('not_in_library'), 2)} % "
                 "of the amount, kept as unidentified)" if out else ", none outside it")
        total = mb.get("sum_before_normalisation")
        if is_number(total):
            text += f"; the amounts summed to {total:.3f} {basis} before normalisation to 100"
        return text + tail
    if not isinstance(mb, dict) or not mb:
        n = len(result.get("components") or [])
        return f"{n} components in the composition table{tail}"
    peaks = mb.get("peaks") or {}
    share = mb.get("area_share_pct") or {}
    total = peaks.get("total", peaks.get("read"))
    parts = [f"{peaks.get('identified', 0)} identified"]
    unid = peaks.get("unidentified") or 0
    parts.append(f"{unid} unidentified" + (f" ({fmt_number(share.get('unidentified'), 2)} % of "
                                            "the area)" if unid else ""))
    exc = peaks.get("excluded") or 0
    parts.append(f"{exc} excluded ({fmt_number(share.get('excluded'), 2)} % of the area)"
                 if exc else "none excluded")
    head = f"{total} peaks in the file" if total is not None else "peaks"
    return f"{head}: {', '.join(parts)}{tail}"


#: Settings keys -> words, for warnings a person reads on the certificate.
_SETTING_WORDS = {
    "isothermal_until_min": "the end of the method's isothermal hold",
    "holdup_time_min": "the hold-up time",
    "markers": "the n-alkane marker times",
    "expected_oxygenates": "the list of oxygenates the samples may hold",
    "blend_components": "the list of components blended into the samples",
    "ri_tolerance": "the retention-index window",
    "other_oxygenate_odds": "the weight given to unexpected oxygenates",
    "split_named_coelutions": "the co-elution rule",
    "use_names": "the use of names in the export",
    "response_factors": "the response factors",
    "reference_temperature_c": "the reference temperature",
    "exclude": "the peaks excluded",
    "activity": "the vapour-pressure model",
    "distillation_curve": "the distillation model",
    "model": "the octane model",
}


def plain_words(text: Any) -> str:
    """A warning rewritten for a chemist: settings syntax (``[identify] markers``,
    ``identify.expected_oxygenates``, ``snake_case`` keys) becomes words.

    >>> plain_words("check them; set [identify] isothermal_until_min and holdup_time_min to the method's")
    "check them; set the end of the method's isothermal hold and the hold-up time in the lab settings to the method's"
    >>> plain_words("oxygenates outside identify.expected_oxygenates matched")
    'oxygenates outside the list of oxygenates the samples may hold matched'
    """
    import re

    s = str(text)
    had_section = bool(re.search(r"\[[a-z_]+\]", s))
    s = re.sub(r"\s*\[[a-z_]+\]\s*", " ", s)
    s = re.sub(r"\b[a-z]+\.([a-z][a-z0-9_]*)\b",
               lambda m: _SETTING_WORDS.get(m.group(1), m.group(0)), s)
    for key, words in _SETTING_WORDS.items():
        if "_" in key:
            s = re.sub(rf"\b{key}\b", words, s)
    s = re.sub(r"\b([a-z]+)_([a-z0-9_]+)\b", lambda m: m.group(0).replace("_", " "), s)
    if had_section:
        s = re.sub(r"(\bset\b[^;.]*?)(\bto\b|$)", lambda m: m.group(1).rstrip() +
                   " in the lab settings " + m.group(2) if m.group(2) else m.group(1).rstrip() +
                   " in the lab settings", s, count=1)
    return re.sub(r"\s{2,}", " ", s).strip()


def identification_check(result: dict) -> dict | None:
    """The run-quality check of the identification (``checks`` entry with property
    "identification"), or None when the result has none."""
    for chk in result.get("checks") or []:
        if chk.get("property") == "identification":
            return chk
    return None


def property_keys(result: dict) -> list[str]:
    """Property keys in report order: the contract's order, then any extra keys sorted."""
    from dha.properties import PROPERTY_KEYS

    props = result.get("properties") or {}
    extra = sorted(k for k in props if k not in PROPERTY_KEYS)
    return list(PROPERTY_KEYS) + extra


def _write_xlsx(result: dict, path):
    from dha.report.excel import write_xlsx

    return write_xlsx(result, path)


def _write_pdf(result: dict, path):
    from dha.report.pdf import write_pdf

    return write_pdf(result, path)


#: Format name -> writer(result, path) -> Path. Imports are lazy (matplotlib is slow to load).
WRITERS = {"xlsx": _write_xlsx, "pdf": _write_pdf}

__all__ = [
    "GROUP_KEYS", "GROUP_LABELS", "BASIS_UNITS", "PROPERTY_INFO", "RESPONSIBILITY_TEXT",
    "NULL_TEXT", "VERDICT_WORDS", "WRITERS", "property_label", "unit_of", "decimals_of",
    "is_number", "fmt_number", "canonical_json", "settings_digest", "flatten_settings",
    "carbon_number_sort_key", "headline_rows", "property_keys", "flatten_mapping",
    "warnings_about_checks", "AROMATICS_DETAIL_LABELS", "mapping_table", "STANDARD_METHODS",
    "TRADE_NAMES", "display_name", "input_kind", "reference_temperature_c",
    "mass_balance_words", "plain_words", "identification_check", "carbon_label",
]
