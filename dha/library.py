"""The component library: load the shipped files (plus a lab overlay), merge, check.

The files and their columns are described in ``component_library/README.md``. This module reads
them, merges a lab overlay folder over the shipped folder, and checks the result:

>>> lib = load_library()
>>> lib.find("Isooctane")
'2,2,4-trimethylpentane'
>>> int(lib.components.loc["n-heptane", "carbon_number"])
7

Merging rule of an overlay folder (any subset of the shipped file names):

* ``components.csv`` and ``coelution.csv``: a row whose ``name`` (for co-elution the pair
  ``name_a``/``name_b``, in either order) is already in the library changes only the cells it
  fills: a blank cell keeps the shipped value, a cell holding only ``-`` clears it. Any other row is
  added. The overlay may leave out columns, but may not bring columns the shipped file lacks.
* ``vapour_pressure.csv``, ``unifac/subgroups.csv``, ``unifac/interactions.csv``: a row with the
  same key replaces the shipped row whole (coefficients of one correlation belong together).
* ``references.toml``: keys are added (a key of the same name replaces the shipped entry).
* ``library.toml``: may give the overlay's own ``name`` and ``version``; the merged version reads
  ``<shipped version>+<overlay name>/<overlay version>``.

The same checks run on the merged library as on the shipped one. A folder that cannot be read
(missing file or column, a cell that is not a number) raises ``LibraryError``; other problems
are logged and kept in ``Library.problems`` (``dha library check`` fails on them).

Text columns hold ``""`` where blank; numeric columns are float (``NaN`` where blank), except
``carbon_number`` which is int.
"""
from __future__ import annotations

import csv
import difflib
import hashlib
import io
import logging
import math
import re
import tomllib
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field, replace
from functools import cached_property, lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

import component_library
from dha.errors import LibraryError

log = logging.getLogger("dha.library")

#: Folder of the shipped library (inside the installed package).
SHIPPED_FOLDER = Path(component_library.FOLDER)

#: Library files in the fixed order used for the checksum (``unifac/`` last).
LIBRARY_FILES = (
    "library.toml",
    "components.csv",
    "vapour_pressure.csv",
    "coelution.csv",
    "references.toml",
    "unifac/subgroups.csv",
    "unifac/interactions.csv",
    "stereo_unspecified.csv",
)

GROUPS = ("n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics", "oxygenates")

#: Allowed subgroups per group.
SUBGROUPS = {
    "n_paraffins": ("alkane",),
    "isoparaffins": ("alkane",),
    "olefins": ("alkene", "diene", "cycloalkene"),
    "naphthenes": ("cycloalkane",),
    "aromatics": ("monoaromatic", "indane", "polyaromatic"),
    "oxygenates": ("alcohol", "ether"),
}

COMPONENT_COLUMNS = (
    "name", "synonyms", "cas", "formula", "smiles", "identity_source", "group", "subgroup",
    "carbon_number", "molar_mass_g_mol", "molar_mass_source", "boiling_point_c",
    "boiling_point_source", "density_15c_kg_m3", "density_source", "gross_heat_mj_kg",
    "net_heat_mj_kg", "heat_source", "ron", "ron_source", "mon", "mon_source", "ecn", "ecn_source",
    "retention_index", "retention_index_source", "unifac_groups", "unifac_source",
)
COMPONENT_FLOATS = (
    "molar_mass_g_mol", "boiling_point_c", "density_15c_kg_m3", "gross_heat_mj_kg",
    "net_heat_mj_kg", "ron", "mon", "ecn", "retention_index",
)
#: Values every component must have (the others may be blank).
COMPONENT_REQUIRED_VALUES = (
    "name", "cas", "formula", "smiles", "identity_source", "group", "subgroup", "carbon_number",
    "molar_mass_g_mol", "molar_mass_source", "boiling_point_c", "boiling_point_source",
    "density_15c_kg_m3", "density_source", "ecn", "ecn_source", "retention_index",
    "retention_index_source",
)
#: Value column(s) -> the column naming their source.
VALUE_SOURCES = {
    "cas": "identity_source", "formula": "identity_source", "smiles": "identity_source",
    "molar_mass_g_mol": "molar_mass_source", "boiling_point_c": "boiling_point_source",
    "density_15c_kg_m3": "density_source", "gross_heat_mj_kg": "heat_source",
    "net_heat_mj_kg": "heat_source", "ron": "ron_source", "mon": "mon_source",
    "ecn": "ecn_source", "retention_index": "retention_index_source",
    "unifac_groups": "unifac_source",
}
VP_COLUMNS = ("name", "equation", "a", "b", "c", "d", "e", "tc_k", "pc_kpa", "tmin_k", "tmax_k",
              "source")
VP_FLOATS = ("a", "b", "c", "d", "e", "tc_k", "pc_kpa", "tmin_k", "tmax_k")
#: Coefficients each equation form needs (see component_library/README.md).
VP_EQUATIONS = {
    "antoine": ("a", "b", "c"),
    "dippr101": ("a", "b", "c", "d", "e"),
    "wagner25": ("a", "b", "c", "d", "tc_k", "pc_kpa"),
}
COELUTION_COLUMNS = ("name_a", "name_b", "share_a", "source", "note")
SUBGROUP_COLUMNS = ("subgroup", "main_group", "name", "r", "q")
INTERACTION_COLUMNS = ("main_i", "main_j", "a_ij_k")
#: Names and CAS numbers without cis/trans (E/Z) and the library isomers they stand for
#: (``stereo_unspecified.csv``, optional; see component_library/README.md).
STEREO_COLUMNS = ("name", "synonyms", "cas", "smiles", "isomers", "shares", "identity_source",
                  "share_source", "note")

#: Temperature of the vapour-pressure specification, 37.8 °C = 100 °F [K].
T_RVP_K = 310.93

#: Conventional standard atomic weights [g/mol]: IUPAC CIAAW, "Standard atomic weights of the
#: elements 2021", Pure Appl. Chem. 94 (2022) 573, Table 2 (conventional values).
ATOMIC_WEIGHTS = {"C": 12.011, "H": 1.008, "O": 15.999, "N": 14.007, "S": 32.06, "Cl": 35.45}

#: Plausible ranges of the scalar properties of petrol-range components
#: (common practice, no source): (column, low, high).
RANGES = (
    ("carbon_number", 1, 20),
    ("molar_mass_g_mol", 16.0, 300.0),
    ("boiling_point_c", -200.0, 300.0),
    ("density_15c_kg_m3", 500.0, 1200.0),
    ("gross_heat_mj_kg", 18.0, 56.0),
    ("net_heat_mj_kg", 15.0, 51.0),
    # n-paraffins above C8 rate below n-heptane: n-decane RON -41 / MON -38 (Co-Optima fuel
    # property database, "API Report"); the range leaves room for n-C11/C12
    ("ron", -70.0, 130.0),
    ("mon", -70.0, 130.0),
    ("ecn", 0.0, 25.0),
    ("retention_index", 100.0, 1600.0),
)

_CAS_RE = re.compile(r"^(\d{2,7})-(\d{2})-(\d)$")
_FORMULA_RE = re.compile(r"([A-Z][a-z]?)(\d*)")
_UNIFAC_RE = re.compile(r"^\s*(\d+)\s*:\s*(\d+)\s*$")
_VERSION_RE = re.compile(r"^\d{4}\.\d{2}\.\d+$")


# --------------------------------------------------------------------------------------------
# Problems


@dataclass(frozen=True)
class Problem:
    """One thing wrong in the library, located as in a spreadsheet.

    ``row`` is the 1-based row number with the header as row 1 (so the first data row is 2);
    ``None`` for a problem of a whole file or of a TOML key (then ``column`` names the key).
    """

    file: str
    row: int | None
    column: str | None
    message: str

    def __str__(self) -> str:
        row = "-" if self.row is None else str(self.row)
        return f"{self.file}:{row}:{self.column or '-'}: {self.message}"


def _error(problems: list[Problem]) -> LibraryError:
    """A ``LibraryError`` carrying ``problems`` (attribute ``.problems``)."""
    more = f" (and {len(problems) - 1} more problems)" if len(problems) > 1 else ""
    err = LibraryError(f"component library: {problems[0]}{more}; fix the file "
                       "(`dha library check` lists every problem)")
    err.problems = list(problems)
    return err


# --------------------------------------------------------------------------------------------
# Reading raw files


@dataclass
class _Raw:
    """A CSV file read as text: header, rows (list of dict) and each row's spreadsheet row."""

    label: str
    columns: list[str]
    rows: list[dict[str, str]]
    row_numbers: list[int]


def _label(folder: Path, rel: str) -> str:
    if folder.resolve() == SHIPPED_FOLDER.resolve():
        return f"component_library/{rel}"
    return str(folder / rel)


def _read_csv(folder: Path, rel: str, problems: list[Problem]) -> _Raw | None:
    path = folder / rel
    label = _label(folder, rel)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        return None
    except (UnicodeDecodeError, OSError) as err:
        problems.append(Problem(label, None, None, f"cannot read the file ({err}); save it as "
                                "UTF-8 text"))
        return None
    header: list[str] | None = None
    rows: list[dict[str, str]] = []
    numbers: list[int] = []
    for number, record in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not record or all(not cell.strip() for cell in record):
            continue
        if record[0].lstrip().startswith("#"):
            continue
        cells = [cell.strip() for cell in record]
        if header is None:
            header = cells
            seen = set()
            for col in header:
                if not col:
                    problems.append(Problem(label, number, None, "empty column name in the header"))
                elif col in seen:
                    problems.append(Problem(label, number, col, "column appears twice in the header"))
                seen.add(col)
            continue
        if len(cells) > len(header):
            if any(cells[len(header):]):
                problems.append(Problem(label, number, None,
                                        f"{len(cells)} cells but {len(header)} columns in the "
                                        "header; quote cells that contain commas"))
            cells = cells[:len(header)]
        cells += [""] * (len(header) - len(cells))
        rows.append(dict(zip(header, cells)))
        numbers.append(number)
    if header is None:
        problems.append(Problem(label, None, None, "the file is empty (no header row)"))
        return None
    return _Raw(label, header, rows, numbers)


def _read_toml(folder: Path, rel: str, problems: list[Problem]) -> dict | None:
    path = folder / rel
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except FileNotFoundError:
        return None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        problems.append(Problem(_label(folder, rel), None, None, f"not valid TOML ({err})"))
        return None


# --------------------------------------------------------------------------------------------
# Merging


@dataclass
class _Table:
    """A merged text table: key -> row dict, plus where each row/cell came from."""

    columns: list[str]
    rows: dict[Any, dict[str, str]] = field(default_factory=dict)
    #: key -> (label, row) of the shipped row, or None
    base: dict[Any, tuple[str, int]] = field(default_factory=dict)
    #: key -> (label, row, columns the overlay filled)
    over: dict[Any, tuple[str, int, frozenset]] = field(default_factory=dict)

    def where(self, key: Any, column: str | None = None) -> tuple[str, int | None]:
        """File label and row of the cell ``column`` of row ``key`` (overlay if it set it)."""
        if key in self.over:
            label, row, cols = self.over[key]
            if column is None or column in cols or key not in self.base:
                return label, row
        if key in self.base:
            return self.base[key]
        return "?", None


def _key_of(kind: str, row: dict[str, str]) -> Any:
    if kind == "coelution":
        return (row.get("name_a", ""), row.get("name_b", ""))
    if kind == "subgroups":
        return row.get("subgroup", "")
    if kind == "interactions":
        return (row.get("main_i", ""), row.get("main_j", ""))
    return row.get("name", "")


def _merge(table: _Table | None, raw: _Raw, kind: str, cellwise: bool, required: Sequence[str],
           is_overlay: bool, problems: list[Problem]) -> _Table:
    """Merge ``raw`` (one file) into ``table``; structural problems go to ``problems``."""
    if not is_overlay:
        missing = [c for c in required if c not in raw.columns]
        if missing:
            problems.append(Problem(raw.label, 1, missing[0],
                                    f"required column(s) missing: {', '.join(missing)}"))
        table = _Table(columns=list(raw.columns) + [c for c in required if c not in raw.columns])
    else:
        keys = ("name_a", "name_b") if kind == "coelution" else (
            ("subgroup",) if kind == "subgroups" else
            ("main_i", "main_j") if kind == "interactions" else ("name",))
        missing = [c for c in keys if c not in raw.columns]
        if missing:
            problems.append(Problem(raw.label, 1, missing[0],
                                    f"key column(s) missing: {', '.join(missing)}"))
            return table
        unknown = [c for c in raw.columns if c not in table.columns]
        if unknown:
            problems.append(Problem(raw.label, 1, unknown[0],
                                    f"column(s) not in the shipped file: {', '.join(unknown)}; "
                                    f"known: {', '.join(table.columns)}"))
    seen_here: dict[Any, int] = {}
    for row, number in zip(raw.rows, raw.row_numbers):
        key = _key_of(kind, row)
        if kind == "coelution" and is_overlay and key not in table.rows \
                and (key[1], key[0]) in table.rows:
            # the same pair written the other way round: turn it into the shipped order
            row = dict(row)
            row["name_a"], row["name_b"] = key[1], key[0]
            share = row.get("share_a", "")
            if share not in ("", "-"):
                try:
                    row["share_a"] = repr(1.0 - float(share))
                except ValueError:
                    pass  # reported when numbers are converted
            key = (key[1], key[0])
        if key in seen_here:
            problems.append(Problem(raw.label, number, None,
                                    f"{key!r} appears twice in this file (also row "
                                    f"{seen_here[key]}); keep one row"))
            continue
        seen_here[key] = number
        if is_overlay and key in table.rows and cellwise:
            merged = dict(table.rows[key])
            filled = []
            for col, value in row.items():
                if value == "":
                    continue
                merged[col] = "" if value == "-" else value
                filled.append(col)
            table.rows[key] = merged
            table.over[key] = (raw.label, number, frozenset(filled))
        else:
            new = {col: "" for col in table.columns}
            new.update({col: ("" if v == "-" else v) for col, v in row.items() if col in new})
            table.rows[key] = new
            if is_overlay:
                table.over[key] = (raw.label, number, frozenset(row))
            else:
                table.base[key] = (raw.label, number)
    return table


def _to_frame(table: _Table, floats: Iterable[str], ints: Iterable[str],
              problems: list[Problem], index: str | None) -> pd.DataFrame:
    """Text table -> DataFrame with numeric columns converted; bad numbers become problems."""
    keys = list(table.rows)
    data = {col: [table.rows[k].get(col, "") for k in keys] for col in table.columns}
    frame = pd.DataFrame(data, columns=table.columns, dtype=object)
    ints = tuple(ints)
    for col in tuple(floats) + ints:
        if col not in frame.columns:
            continue
        values = np.full(len(keys), np.nan)
        for i, (key, text) in enumerate(zip(keys, frame[col])):
            if text == "":
                if col in ints:
                    label, row = table.where(key, col)
                    problems.append(Problem(label, row, col, "blank; an integer is required"))
                continue
            try:
                number = float(text)
            except ValueError:
                label, row = table.where(key, col)
                problems.append(Problem(label, row, col,
                                        f"{text!r} is not a number (use a decimal point, no unit)"))
                continue
            if not math.isfinite(number) or (col in ints and number != int(number)):
                label, row = table.where(key, col)
                kind = "a whole number" if col in ints else "a finite number"
                problems.append(Problem(label, row, col, f"{text!r} is not {kind}"))
                continue
            values[i] = number
        if col in ints:
            frame[col] = np.nan_to_num(values, nan=0).astype(np.int64)
        else:
            frame[col] = values
    for col in frame.columns:
        if col not in floats and col not in ints:
            frame[col] = frame[col].astype(str)
    if index is not None:
        frame = frame.set_index(index, drop=True)
        frame.index.name = index
    return frame


# --------------------------------------------------------------------------------------------
# The Library


@dataclass(frozen=True, eq=False, repr=False)
class Library:
    """The merged, loaded component library (see the module docstring for the merging rule).

    Attributes
    ----------
    components : DataFrame
        One row per component, indexed by ``name``; columns as in ``component_library/README.md``.
    vapour_pressure : DataFrame
        One correlation per component, indexed by ``name``.
    coelution : DataFrame
        Columns ``name_a, name_b, share_a, source, note``.
    references : dict
        Source key -> entry (``cite``, ``doi``/``url``/``package``..., ``licence``).
    unifac_subgroups, unifac_interactions : DataFrame
        Original UNIFAC parameters (``subgroup`` index; ``main_i, main_j, a_ij_k`` columns).
    name, version : str
        From ``library.toml`` (merged version ``<shipped>+<overlay name>/<overlay version>``).
    sha256 : str
        Checksum over the library files (shipped, then overlay), see :func:`library_sha256`.
    folders : tuple of Path
        The folders read, shipped first.
    problems : tuple of Problem
        What :func:`check_library` found when loaded through :func:`load_library` (empty for a
        sound library; :func:`read_library` does not check).
    """

    components: pd.DataFrame
    vapour_pressure: pd.DataFrame
    coelution: pd.DataFrame
    references: dict
    unifac_subgroups: pd.DataFrame
    unifac_interactions: pd.DataFrame
    name: str
    version: str
    sha256: str
    folders: tuple[Path, ...]
    description: str = ""
    problems: tuple = ()
    #: stereo-unspecified entries, indexed by ``name`` (columns of ``STEREO_COLUMNS``)
    stereo: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(
        columns=list(STEREO_COLUMNS[1:]), index=pd.Index([], name="name")))
    _tables: dict = field(default_factory=dict, repr=False)
    _meta: dict = field(default_factory=dict, repr=False)

    def __repr__(self) -> str:
        return (f"Library({self.name!r}, version={self.version!r}, "
                f"components={len(self.components)}, sha256={self.sha256[:12]!r}..., "
                f"problems={len(self.problems)})")

    # -- look-up ------------------------------------------------------------------------------
    @cached_property
    def _lookup(self) -> dict[str, str]:
        table: dict[str, str] = {}
        comps = self.components
        for name in comps.index:                              # names first ...
            table.setdefault(normalise_key(name), name)
        for name, cas in zip(comps.index, comps["cas"]):     # ... then CAS ...
            if cas:
                table.setdefault(normalise_key(cas), name)
        for name, syns in zip(comps.index, comps["synonyms"]):  # ... then synonyms
            for syn in split_synonyms(syns):
                table.setdefault(normalise_key(syn), name)
        return table

    def lookup_table(self) -> dict[str, str]:
        """Normalised key (name, CAS or synonym; see :func:`normalise_key`) -> library name.

        A copy; names win over CAS numbers, CAS numbers over synonyms when keys collide (the
        check reports such collisions).
        """
        return dict(self._lookup)

    def find(self, text: str | None) -> str | None:
        """Library name for a name, synonym or CAS number (case and spacing ignored), or None.

        >>> load_library().find("  ISOOCTANE ")
        '2,2,4-trimethylpentane'
        >>> load_library().find("no such thing") is None
        True
        """
        if text is None or (isinstance(text, float) and math.isnan(text)):
            return None
        return self._lookup.get(normalise_key(str(text)))

    def suggest(self, text: str, n: int = 5) -> list[str]:
        """Library names whose name, synonym or CAS is close to ``text`` (difflib ratio)."""
        keys = difflib.get_close_matches(normalise_key(text), list(self._lookup), n=3 * n,
                                         cutoff=0.6)
        out: list[str] = []
        for key in keys:
            name = self._lookup[key]
            if name not in out:
                out.append(name)
        return out[:n]

    @cached_property
    def _stereo_lookup(self) -> dict[str, str]:
        table: dict[str, str] = {}
        for name, row in self.stereo.iterrows():
            table.setdefault(normalise_key(name), name)
            if row.get("cas"):
                table.setdefault(normalise_key(row["cas"]), name)
            for syn in split_synonyms(row.get("synonyms", "")):
                table.setdefault(normalise_key(syn), name)
        return table

    def find_stereo(self, text: str | None) -> str | None:
        """Stereo-unspecified entry (``stereo_unspecified.csv``) for a name, synonym or CAS.

        Only consulted when :meth:`find` knows nothing: a library component of the same name
        wins.

        >>> load_library().find_stereo("591-21-9")
        '1,3-dimethylcyclohexane'
        """
        if text is None or (isinstance(text, float) and math.isnan(text)):
            return None
        return self._stereo_lookup.get(normalise_key(str(text)))

    def stereo_isomers(self, entry: str, shares: dict | None = None) -> list[tuple[str, float]]:
        """The library isomers of a stereo-unspecified entry with their shares (sum 1).

        Rule (component_library/README.md): ``shares`` (a lab's {isomer: share}, e.g. from
        ``[quantify] stereo_shares``) if given, else the row's ``shares`` column, else equal
        shares. Shares are normalised to sum to 1.

        >>> load_library().stereo_isomers("2-butene")
        [('cis-2-butene', 0.5), ('trans-2-butene', 0.5)]
        """
        row = self.stereo.loc[entry]
        isomers = split_synonyms(row["isomers"])
        given = parse_shares(row.get("shares", ""), len(isomers))
        if shares:
            given = [float(shares.get(i, 0.0)) for i in isomers]
        if given is None or not sum(given) > 0:
            given = [1.0] * len(isomers)
        total = float(sum(given))
        return [(i, float(v) / total) for i, v in zip(isomers, given)]

    # -- properties ---------------------------------------------------------------------------
    def psat_kpa(self, t_k: float) -> pd.Series:
        """Pure-component vapour pressure [kPa] at ``t_k`` [K], a Series indexed by name.

        Uses each component's correlation from ``vapour_pressure.csv`` through
        :func:`dha.vapour_pressure.psat_kpa`.
        """
        from dha.vapour_pressure import psat_kpa

        result = psat_kpa(self.vapour_pressure, t_k)
        return pd.Series(result, index=self.vapour_pressure.index, name="psat_kpa", dtype=float) \
            if not isinstance(result, pd.Series) else result.rename("psat_kpa")

    @cached_property
    def unifac_groups(self) -> dict[str, dict[int, int]]:
        """Component name -> {original-UNIFAC subgroup id: count} (empty dict when blank)."""
        out: dict[str, dict[int, int]] = {}
        for name, text in self.components["unifac_groups"].items():
            groups, _ = parse_unifac_groups(text)
            out[name] = groups
        return out

    def cite(self, key: str) -> str:
        """Citation of a source key (``estimated:<key>`` and ``from-memory`` understood)."""
        if not key:
            return ""
        parts = []
        for one in split_source(key):
            if one == "from-memory":
                parts.append("from memory (no written source)")
                continue
            ref_key = one.split(":", 1)[1] if one.startswith("estimated:") else one
            entry = self.references.get(ref_key)
            text = entry.get("cite", "") if isinstance(entry, dict) else ""
            link = ""
            if isinstance(entry, dict):
                if entry.get("doi"):
                    link = f"doi:{entry['doi']}"
                elif entry.get("url"):
                    link = str(entry["url"])
                elif entry.get("package"):
                    link = f"{entry['package']} {entry.get('version', '')} {entry.get('method', '')}"
            prefix = "estimate; method: " if one.startswith("estimated:") else ""
            parts.append(f"{prefix}{text}" + (f" [{link.strip()}]" if link.strip() else "")
                         if entry else f"{one} (not in references.toml)")
        return "; ".join(parts)

    def component(self, name: str) -> dict[str, dict[str, Any]]:
        """Every value of one component with its source and citation.

        Parameters
        ----------
        name : str
            Name, synonym or CAS number.

        Returns
        -------
        dict
            column -> ``{"value", "source", "cite"}``; ``psat_37_8c_kpa`` and ``vapour_pressure``
            come from ``vapour_pressure.csv``. Raises ``LibraryError`` for an unknown name.
        """
        found = self.find(name)
        if found is None:
            close = self.suggest(name)
            hint = f"; did you mean {', '.join(close)}?" if close else ""
            raise LibraryError(f"component {name!r} is not in the library{hint}")
        row = self.components.loc[found]
        out: dict[str, dict[str, Any]] = {"name": {"value": found, "source": "", "cite": ""}}
        source_cols = {c for c in self.components.columns if c.endswith("_source")}
        for col in self.components.columns:
            if col in source_cols:
                continue
            value = row[col]
            if isinstance(value, (float, np.floating)) and math.isnan(value):
                value = None
            elif isinstance(value, np.integer):
                value = int(value)
            elif isinstance(value, np.floating):
                value = float(value)
            src_col = VALUE_SOURCES.get(col) or _guess_source_column(col, source_cols)
            src = str(row[src_col]) if src_col else ""
            out[col] = {"value": value, "source": src, "cite": self.cite(src)}
        if found in self.vapour_pressure.index:
            vp = self.vapour_pressure.loc[found]
            src = str(vp["source"])
            coeffs = {c: float(vp[c]) for c in VP_FLOATS if not math.isnan(vp[c])}
            try:
                p = float(self.psat_kpa(T_RVP_K).loc[found])
            except Exception as err:  # noqa: BLE001 - shown to the user, not hidden
                log.warning("psat of %s not computed: %s", found, err)
                p = None
            out["psat_37_8c_kpa"] = {"value": p, "source": src, "cite": self.cite(src)}
            out["vapour_pressure"] = {"value": {"equation": vp["equation"], **coeffs},
                                      "source": src, "cite": self.cite(src)}
        pairs = self.coelution[(self.coelution["name_a"] == found)
                               | (self.coelution["name_b"] == found)]
        for _, pair in pairs.iterrows():
            other = pair["name_b"] if pair["name_a"] == found else pair["name_a"]
            share = pair["share_a"] if pair["name_a"] == found else 1.0 - pair["share_a"]
            out[f"coelutes_with {other}"] = {"value": f"share {share:.3g} of the merged peak",
                                             "source": pair["source"],
                                             "cite": self.cite(pair["source"])}
        return out

    def group_counts(self) -> dict[str, int]:
        """Number of components per group, in the order of ``GROUPS``."""
        counts = self.components["group"].value_counts()
        return {g: int(counts.get(g, 0)) for g in GROUPS} | {
            g: int(n) for g, n in counts.items() if g not in GROUPS}

    def export_table(self) -> pd.DataFrame:
        """The merged library as one flat table: components, then ``vp_*`` and ``psat_37_8c_kpa``.

        Columns start with ``name, cas, formula, group, carbon_number, molar_mass_g_mol,
        density_15c_kg_m3, boiling_point_c, ron, mon, retention_index``.
        """
        first = ["name", "cas", "formula", "group", "carbon_number", "molar_mass_g_mol",
                 "density_15c_kg_m3", "boiling_point_c", "ron", "mon", "retention_index"]
        comps = self.components.reset_index()
        rest = [c for c in comps.columns if c not in first]
        table = comps[first + rest].copy()
        vp = self.vapour_pressure.add_prefix("vp_")
        table = table.merge(vp, left_on="name", right_index=True, how="left")
        try:
            psat = self.psat_kpa(T_RVP_K)
            table["psat_37_8c_kpa"] = table["name"].map(psat)
        except ImportError:
            log.warning("dha.vapour_pressure missing; psat_37_8c_kpa not exported")
        return table


def _guess_source_column(col: str, source_cols: set[str]) -> str | None:
    for src in sorted(source_cols, key=len, reverse=True):
        stem = src[: -len("_source")]
        if col == stem or col.startswith(stem + "_"):
            return src
    return None


# --------------------------------------------------------------------------------------------
# Small parsers (also used by the checks and by other stages)


def normalise_key(text: str) -> str:
    """Key for exact look-ups: case-folded, spaces collapsed, trimmed.

    >>> normalise_key("  2,2,4-Trimethyl   Pentane ")
    '2,2,4-trimethyl pentane'
    """
    return " ".join(str(text).split()).casefold()


def split_synonyms(text: str) -> list[str]:
    """``"isooctane;2,2,4-TMP"`` -> ``["isooctane", "2,2,4-TMP"]`` (blanks dropped)."""
    return [s.strip() for s in str(text or "").split(";") if s.strip()]


def parse_shares(text: str, n: int) -> list[float] | None:
    """``"0.6;0.4"`` -> ``[0.6, 0.4]``; None when blank, not ``n`` numbers or negative."""
    parts = split_synonyms(text)
    if len(parts) != n:
        return None
    try:
        values = [float(p) for p in parts]
    except ValueError:
        return None
    if any(not math.isfinite(v) or v < 0 for v in values):
        return None
    return values


def split_source(text: str) -> list[str]:
    """A source cell may name several keys separated by ``;``."""
    return [s.strip() for s in str(text or "").split(";") if s.strip()]


def cas_is_valid(cas: str) -> bool:
    """True if ``cas`` has the form ``NNNNNNN-NN-N`` and a correct check digit.

    The check digit is the sum of the other digits, each multiplied by its position counted
    from the right (1, 2, 3, ...), modulo 10 (CAS, "CAS Registry Number" check-digit rule,
    https://www.cas.org/support/documentation/chemical-substances/checkdig).

    >>> cas_is_valid("7732-18-5"), cas_is_valid("7732-18-4")
    (True, False)
    """
    match = _CAS_RE.match(str(cas))
    if not match:
        return False
    digits = (match.group(1) + match.group(2))[::-1]
    total = sum((i + 1) * int(d) for i, d in enumerate(digits))
    return total % 10 == int(match.group(3))


def parse_formula(formula: str) -> dict[str, int] | None:
    """Hill formula -> element counts, or None if it is not a formula.

    >>> parse_formula("C8H18")
    {'C': 8, 'H': 18}
    >>> parse_formula("C2H6O")
    {'C': 2, 'H': 6, 'O': 1}
    """
    text = str(formula).strip()
    if not text or "".join(m.group(0) for m in _FORMULA_RE.finditer(text)) != text:
        return None
    counts: dict[str, int] = {}
    for element, number in _FORMULA_RE.findall(text):
        counts[element] = counts.get(element, 0) + (int(number) if number else 1)
    return counts


def is_hill_order(formula: str) -> bool:
    """C first, H second, then the other elements alphabetically; counts of 1 not written."""
    parts = _FORMULA_RE.findall(str(formula))
    elements = [e for e, _ in parts]
    if any(n in ("0", "1") or n.startswith("0") for _, n in parts):
        return False
    if "C" in elements:
        head = ["C"] + (["H"] if "H" in elements else [])
        rest = [e for e in elements if e not in ("C", "H")]
        return elements == head + sorted(rest)
    return elements == sorted(elements)


def molar_mass_g_mol(formula: str) -> float:
    """Molar mass [g/mol] of a formula from IUPAC conventional standard atomic weights.

    >>> round(molar_mass_g_mol("C8H18"), 3)
    114.232
    """
    counts = parse_formula(formula)
    if counts is None:
        raise LibraryError(f"{formula!r} is not a chemical formula")
    unknown = [e for e in counts if e not in ATOMIC_WEIGHTS]
    if unknown:
        raise LibraryError(f"{formula!r}: no atomic weight for {', '.join(unknown)}")
    return sum(ATOMIC_WEIGHTS[e] * n for e, n in counts.items())


def parse_unifac_groups(text: str) -> tuple[dict[int, int], list[str]]:
    """``"1:2 2:4"`` -> ``({1: 2, 2: 4}, [])``; the second item lists unreadable tokens.

    >>> parse_unifac_groups("1:2 2:4")
    ({1: 2, 2: 4}, [])
    """
    groups: dict[int, int] = {}
    bad: list[str] = []
    for token in str(text or "").split():
        match = _UNIFAC_RE.match(token)
        if not match or int(match.group(2)) == 0:
            bad.append(token)
            continue
        sub = int(match.group(1))
        groups[sub] = groups.get(sub, 0) + int(match.group(2))
    return groups, bad


def _subgroup_atoms(name: str) -> dict[str, int] | None:
    """Atoms of a UNIFAC subgroup from its name (``ACCH3`` -> C2H3), None if not C/H/O."""
    text = str(name).strip()
    if text.startswith("cy-"):
        text = text[3:]
    if text.startswith("AC"):
        text = text[1:]          # 'A' marks an aromatic carbon
    text = text.replace("=", "")
    counts = parse_formula(text)
    if counts is None or any(e not in ("C", "H", "O") for e in counts):
        return None
    return counts


# --------------------------------------------------------------------------------------------
# Loading


def _folders(overlay: str | Path | None) -> tuple[Path, ...]:
    if overlay is None:
        return (SHIPPED_FOLDER.resolve(),)
    path = Path(overlay).expanduser().resolve()
    if not path.is_dir():
        raise LibraryError(f"{overlay}: library folder not found; give a folder holding "
                           "components.csv and/or the other library files")
    if path == SHIPPED_FOLDER.resolve():
        return (path,)
    return (SHIPPED_FOLDER.resolve(), path)


def library_sha256(folders: Sequence[str | Path]) -> str:
    """SHA-256 over the library files of ``folders`` (in order) in the order of LIBRARY_FILES.

    For each file present: its relative path, a NUL byte, its byte count, a NUL byte and its
    bytes, with CRLF line ends read as LF (so a Windows checkout gives the same checksum).
    README.md and other files do not count.
    """
    digest = hashlib.sha256()
    for folder in folders:
        for rel in LIBRARY_FILES:
            path = Path(folder) / rel
            if not path.is_file():
                continue
            data = path.read_bytes().replace(b"\r\n", b"\n")
            digest.update(f"{rel}\0{len(data)}\0".encode())
            digest.update(data)
    return digest.hexdigest()


def read_library(folders: str | Path | Sequence[str | Path]) -> Library:
    """Read and merge library folders (first complete, then overlays), without the checks.

    Raises ``LibraryError`` (with ``.problems``) when a file or column is missing or a number
    cannot be read. Use :func:`load_library` in the pipeline (cached and checked).
    """
    if isinstance(folders, (str, Path)):
        folders = (folders,)
    folders = tuple(Path(f) for f in folders)
    if not folders:
        raise LibraryError("no library folder given")
    problems: list[Problem] = []
    base = folders[0]
    if not base.is_dir():
        raise LibraryError(f"{base}: library folder not found")

    meta: dict[str, Any] = {}
    references: dict[str, Any] = {}
    tables: dict[str, _Table | None] = {k: None for k in
                                        ("components", "vapour_pressure", "coelution",
                                         "subgroups", "interactions", "stereo")}
    specs = {
        "components": ("components.csv", COMPONENT_COLUMNS, True),
        "vapour_pressure": ("vapour_pressure.csv", VP_COLUMNS, False),
        "coelution": ("coelution.csv", COELUTION_COLUMNS, True),
        "subgroups": ("unifac/subgroups.csv", SUBGROUP_COLUMNS, False),
        "interactions": ("unifac/interactions.csv", INTERACTION_COLUMNS, False),
        "stereo": ("stereo_unspecified.csv", STEREO_COLUMNS, True),
    }
    optional = {"stereo"}
    versions: list[str] = []
    names: list[str] = []
    for i, folder in enumerate(folders):
        is_overlay = i > 0
        if is_overlay and not folder.is_dir():
            raise LibraryError(f"{folder}: library folder not found")
        info = _read_toml(folder, "library.toml", problems)
        if info is None and not is_overlay and (folder / "library.toml").exists() is False:
            problems.append(Problem(_label(folder, "library.toml"), None, None,
                                    "required file missing"))
        info = info or {}
        if not is_overlay:
            meta = {"name": str(info.get("name", "")), "version": str(info.get("version", "")),
                    "description": str(info.get("description", "")),
                    "library_toml": info, "labels": {}}
            names.append(meta["name"])
            versions.append(meta["version"])
        else:
            oname = str(info.get("name", "") or folder.name)
            over = oname + (f"/{info['version']}" if info.get("version") else "")
            versions.append(over)
            names.append(oname)
        refs = _read_toml(folder, "references.toml", problems)
        if refs is None and not is_overlay and not (folder / "references.toml").exists():
            problems.append(Problem(_label(folder, "references.toml"), None, None,
                                    "required file missing"))
        for key, entry in (refs or {}).items():
            references[key] = entry
            meta["labels"][key] = _label(folder, "references.toml")
        found_any = bool(info) or bool(refs)
        for kind, (rel, cols, cellwise) in specs.items():
            raw = _read_csv(folder, rel, problems)
            if raw is None:
                if not is_overlay and not (folder / rel).exists() and kind not in optional:
                    problems.append(Problem(_label(folder, rel), None, None,
                                            "required file missing"))
                continue
            found_any = True
            if is_overlay and tables[kind] is None:
                if kind not in optional:
                    continue  # base file missing: already reported
                tables[kind] = _Table(columns=list(cols))
            tables[kind] = _merge(tables[kind], raw, kind, cellwise, cols, is_overlay, problems)
        if is_overlay and not found_any:
            problems.append(Problem(str(folder), None, None,
                                    "no library file in this folder (expected any of "
                                    f"{', '.join(LIBRARY_FILES)})"))
    if problems:
        raise _error(problems)

    comps = _to_frame(tables["components"], COMPONENT_FLOATS, ("carbon_number",), problems, "name")
    vp = _to_frame(tables["vapour_pressure"], VP_FLOATS, (), problems, "name")
    coel = _to_frame(tables["coelution"], ("share_a",), (), problems, None)
    subs = _to_frame(tables["subgroups"], ("r", "q"), ("subgroup", "main_group"), problems,
                     "subgroup")
    inter = _to_frame(tables["interactions"], ("a_ij_k",), ("main_i", "main_j"), problems, None)
    if tables["stereo"] is None:
        tables["stereo"] = _Table(columns=list(STEREO_COLUMNS))
    stereo = _to_frame(tables["stereo"], (), (), problems, "name")
    for col in STEREO_COLUMNS[1:]:
        if col not in stereo.columns:
            stereo[col] = ""
    # extra (unknown) component columns that read as numbers become float
    for col in comps.columns:
        if col not in COMPONENT_COLUMNS and comps[col].dtype == object:
            values = comps[col].replace("", np.nan)
            converted = pd.to_numeric(values, errors="coerce")
            if converted.notna().sum() == values.notna().sum() and values.notna().any():
                comps[col] = converted.astype(float)
    if problems:
        raise _error(problems)

    version = versions[0] if len(folders) == 1 else versions[0] + "+" + "+".join(versions[1:])
    return Library(
        components=comps, vapour_pressure=vp, coelution=coel, references=references,
        unifac_subgroups=subs, unifac_interactions=inter,
        name=meta["name"] if len(names) == 1 else "+".join(names), version=version,
        sha256=library_sha256(folders), folders=folders, description=meta["description"],
        stereo=stereo, _tables=tables, _meta=meta,
    )


def _stamp(folders: tuple[Path, ...]) -> tuple:
    """(size, mtime) of each library file, so an edited file is read again."""
    out = []
    for folder in folders:
        for rel in LIBRARY_FILES:
            try:
                st = (folder / rel).stat()
                out.append((rel, st.st_size, st.st_mtime_ns))
            except OSError:
                out.append((rel, None, None))
    return tuple(out)


def check_cache_dir() -> Path:
    """Where library-check results are kept: ``$DHA_CACHE_DIR``, else the user cache folder
    (``$XDG_CACHE_HOME/dha`` or ``~/.cache/dha``), sub-folder ``library-checks``."""
    import os
    base = os.environ.get("DHA_CACHE_DIR")
    if not base:
        base = str(Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "dha")
    return Path(base) / "library-checks"


@lru_cache(maxsize=1)
def _checker_sha256() -> str:
    """Checksum of this module's source: a changed check invalidates cached results."""
    return hashlib.sha256(Path(__file__).read_bytes()).hexdigest()


def checked_problems(lib: Library) -> tuple[Problem, ...]:
    """``check_library(lib)``, run once per library checksum and checker version.

    The result is cached as JSON in :func:`check_cache_dir` under the sha256 of the library
    files, their folders and this module; a cache that cannot be read or written is ignored.
    """
    import json
    # problems name their files, so the folders are part of the key as well as the contents
    folders = [str(f) for f in (getattr(lib, "folders", None) or ())]
    key = hashlib.sha256(f"{lib.sha256}:{_checker_sha256()}:{folders}".encode()).hexdigest()
    path = check_cache_dir() / f"{key}.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        return tuple(Problem(d["file"], d["row"], d["column"], d["message"]) for d in data)
    except (OSError, ValueError, KeyError, TypeError):
        pass
    problems = tuple(check_library(lib))
    try:
        from dha.safety import atomic_write_text
        path.parent.mkdir(parents=True, exist_ok=True)
        atomic_write_text(path, json.dumps([p.__dict__ for p in problems]))
    except Exception:  # noqa: BLE001 - a cache is optional (read-only home, full disk)
        log.debug("library check cache not written to %s", path)
    return problems


@lru_cache(maxsize=16)
def _load_checked(folders: tuple[Path, ...], stamp: tuple) -> Library:
    lib = read_library(folders)
    problems = checked_problems(lib)
    if problems:
        command = "dha library check" + (f" --library {folders[-1]}" if len(folders) > 1 else "")
        log.warning("component library %s has %d problem(s), first: %s; run `%s`",
                    lib.version, len(problems), problems[0], command)
    log.debug("library %s %s loaded from %s", lib.name, lib.version, folders)
    return replace(lib, problems=problems)


def load_library(overlay: str | Path | None = None) -> Library:
    """The shipped component library, merged with a lab overlay folder when given; checked.

    Parameters
    ----------
    overlay : str or Path, optional
        A lab folder with any subset of the library files (see the module docstring).

    Returns
    -------
    Library
        Cached per resolved folder (and file size/time, so edited files are read again).
        ``Library.problems`` holds what :func:`check_library` found (logged as a warning;
        a run may put them into its warnings); empty for a sound library.

    Raises
    ------
    LibraryError
        A file or column is missing or a number cannot be read (the message names the first
        file:row:column; ``err.problems`` holds all of them).
    """
    folders = _folders(overlay)
    return _load_checked(folders, _stamp(folders))


# --------------------------------------------------------------------------------------------
# Checks


def _resolves(key: str, references: dict) -> str | None:
    """None if the source cell is valid, else the reason."""
    keys = split_source(key)
    if not keys:
        return "no source given"
    for one in keys:
        if one == "from-memory":
            continue
        ref = one.split(":", 1)[1] if one.startswith("estimated:") else one
        if ref not in references:
            return (f"source {one!r} is not a key of references.toml "
                    "(use a key there, estimated:<key> or from-memory)")
    return None


def check_library(lib: Library | str | Path | Sequence[str | Path]) -> list[Problem]:
    """Every problem of a library (a loaded ``Library``, or folders: first complete, then overlays).

    Checks files and columns, units and ranges, formula <-> molar mass <-> carbon number, CAS
    check digits, unique names/CAS/synonyms, group <-> subgroup <-> formula, that every source
    resolves in ``references.toml``, the vapour-pressure correlations (range holds 37.8 °C; the
    value at the normal boiling point is 101.325 kPa within 5 %), co-elution pairs and UNIFAC
    groups (their atoms add up to the formula). An empty list means the library is sound.
    """
    if not isinstance(lib, Library):
        try:
            lib = read_library(lib)
        except LibraryError as err:
            return list(getattr(err, "problems", [Problem("?", None, None, str(err))]))
    problems: list[Problem] = []
    _check_meta(lib, problems)
    _check_references(lib, problems)
    _check_components(lib, problems)
    _check_vapour_pressure(lib, problems)
    _check_coelution(lib, problems)
    _check_unifac(lib, problems)
    _check_stereo(lib, problems)
    return problems


def _check_meta(lib: Library, problems: list[Problem]) -> None:
    label = _label(lib.folders[0], "library.toml")
    info = lib._meta.get("library_toml", {})
    for key in ("name", "version", "description"):
        if not str(info.get(key, "")).strip():
            problems.append(Problem(label, None, key, f"'{key}' missing"))
    version = str(info.get("version", ""))
    if version and not _VERSION_RE.match(version):
        problems.append(Problem(label, None, "version",
                                f"{version!r} is not a calendar version YYYY.MM.N"))


def _check_references(lib: Library, problems: list[Problem]) -> None:
    for key, entry in lib.references.items():
        label = lib._meta["labels"].get(key, "references.toml")
        if not isinstance(entry, dict):
            problems.append(Problem(label, None, key, "must be a table [key] with cite, ..."))
            continue
        if not str(entry.get("cite", "")).strip():
            problems.append(Problem(label, None, key, "'cite' missing"))
        has_link = entry.get("doi") or entry.get("url") or (
            entry.get("package") and entry.get("version") and entry.get("method"))
        if not has_link:
            problems.append(Problem(label, None, key,
                                    "give 'doi', 'url', or 'package' + 'version' + 'method'"))
        if not str(entry.get("licence", "")).strip():
            problems.append(Problem(label, None, key, "'licence' missing"))


def _check_components(lib: Library, problems: list[Problem]) -> None:
    table: _Table = lib._tables["components"]
    comps = lib.components
    refs = lib.references
    source_cols = [c for c in comps.columns if c.endswith("_source")]

    def add(name: str, column: str | None, message: str) -> None:
        label, row = table.where(name, column)
        problems.append(Problem(label, row, column, message))

    owners: dict[str, tuple[str, str]] = {}   # normalised key -> (name, what)

    def claim(name: str, text: str, what: str, column: str) -> None:
        key = normalise_key(text)
        if key in owners and (owners[key][0] != name or owners[key][1] != what):
            other, other_what = owners[key]
            where = "this component's" if other == name else f"{other!r}'s"
            add(name, column, f"{what} {text!r} equals {where} {other_what}; keys must be unique")
        else:
            owners.setdefault(key, (name, what))

    # names and CAS numbers first, so a synonym clash is reported on the synonym
    for name in comps.index:
        claim(name, name, "name", "name")
    for name, cas in comps["cas"].items():
        if cas:
            claim(name, cas, "CAS", "cas")
    for name, syns in comps["synonyms"].items():
        for syn in split_synonyms(syns):
            claim(name, syn, "synonym", "synonyms")

    for name, row in comps.iterrows():
        # required values
        for col in COMPONENT_REQUIRED_VALUES:
            if col == "name":
                continue
            value = row.get(col)
            if value is None or value == "" or (isinstance(value, float) and math.isnan(value)):
                add(name, col, "blank; a value is required")
        if name != name.strip() or name != name.lower() or not name:
            add(name, "name", f"{name!r}: names are lower case without outer spaces")
        # CAS
        cas = row["cas"]
        if cas and not _CAS_RE.match(cas):
            add(name, "cas", f"{cas!r} is not a CAS number NNNNNNN-NN-N")
        elif cas and not cas_is_valid(cas):
            add(name, "cas", f"{cas!r} has a wrong check digit")
        # formula, molar mass, carbon number
        counts = parse_formula(row["formula"]) if row["formula"] else None
        if row["formula"] and counts is None:
            add(name, "formula", f"{row['formula']!r} is not a chemical formula")
        elif counts is not None:
            if not is_hill_order(row["formula"]):
                add(name, "formula", f"{row['formula']!r} is not in Hill order (C, H, then "
                                     "alphabetical; no count 1)")
            unknown = [e for e in counts if e not in ATOMIC_WEIGHTS]
            if unknown:
                add(name, "formula", f"element(s) {', '.join(unknown)} not expected in petrol")
            else:
                mm = molar_mass_g_mol(row["formula"])
                given = row["molar_mass_g_mol"]
                if not math.isnan(given) and abs(mm - given) > 0.01:
                    add(name, "molar_mass_g_mol",
                        f"{given:g} g/mol differs from {mm:.3f} g/mol computed from "
                        f"{row['formula']} (IUPAC atomic weights) by more than 0.01")
            if counts.get("C", 0) != row["carbon_number"]:
                add(name, "carbon_number", f"{row['carbon_number']} but the formula "
                                           f"{row['formula']} has {counts.get('C', 0)} carbons")
            _check_group_formula(name, row, counts, add)
        # group and subgroup
        group, sub = row["group"], row["subgroup"]
        if group and group not in SUBGROUPS:
            add(name, "group", f"{group!r} is not one of {', '.join(GROUPS)}")
        elif group and sub not in SUBGROUPS[group]:
            add(name, "subgroup", f"{sub!r} does not belong to group {group} (allowed: "
                                  f"{', '.join(SUBGROUPS[group])})")
        smiles = row["smiles"]
        if group == "n_paraffins" and smiles and not re.fullmatch(r"C+", smiles):
            add(name, "smiles", f"{smiles!r} is not an unbranched chain for an n-paraffin")
        if group == "isoparaffins" and smiles and ("(" not in smiles or re.search(r"[^C()]", smiles)):
            add(name, "smiles", f"{smiles!r} is not a branched saturated chain for an isoparaffin")
        # ranges
        for col, low, high in RANGES:
            value = row[col]
            if isinstance(value, (float, np.floating)) and math.isnan(value):
                continue
            if not (low <= value <= high) or (col == "ecn" and value <= 0):
                add(name, col, f"{value:g} outside the plausible range {low:g}..{high:g}")
        gross, net = row["gross_heat_mj_kg"], row["net_heat_mj_kg"]
        if not math.isnan(gross) and not math.isnan(net) and not gross > net:
            add(name, "net_heat_mj_kg", f"net heat {net:g} must be below gross heat {gross:g}")
        if math.isnan(gross) != math.isnan(net):
            add(name, "gross_heat_mj_kg", "give both gross and net heat, or neither")
        # sources
        for src_col in source_cols:
            text = row[src_col]
            values = [c for c, s in VALUE_SOURCES.items() if s == src_col] or \
                [c for c in comps.columns if _guess_source_column(c, {src_col}) == src_col]
            has_value = any(not _blank(row.get(c)) for c in values)
            if not text:
                if has_value:
                    add(name, src_col, f"blank, but {', '.join(values)} has a value; name its source")
                continue
            if not has_value and src_col != "identity_source":
                add(name, src_col, f"source {text!r} given but {', '.join(values)} is blank")
            reason = _resolves(text, refs)
            if reason:
                add(name, src_col, reason)
        # UNIFAC groups
        text = row["unifac_groups"]
        groups, bad = parse_unifac_groups(text)
        if bad:
            add(name, "unifac_groups", f"cannot read {' '.join(bad)!r}; write id:count pairs "
                                       "separated by spaces, e.g. '1:2 2:4'")
        subs = lib.unifac_subgroups
        missing = [g for g in groups if g not in subs.index]
        if missing:
            add(name, "unifac_groups", f"subgroup(s) {', '.join(map(str, missing))} not in "
                                       "unifac/subgroups.csv")
        elif groups and counts is not None and not bad:
            atoms: dict[str, int] = {}
            readable = True
            for sub_id, n in groups.items():
                sub_atoms = _subgroup_atoms(subs.loc[sub_id, "name"])
                if sub_atoms is None:
                    readable = False
                    break
                for e, k in sub_atoms.items():
                    atoms[e] = atoms.get(e, 0) + k * n
            if readable and atoms != counts:
                got = "".join(f"{e}{atoms[e]}" for e in sorted(atoms, key="CHO".index))
                add(name, "unifac_groups", f"groups {text!r} add up to {got}, not "
                                           f"{row['formula']}")


def _blank(value: Any) -> bool:
    return value is None or value == "" or (isinstance(value, (float, np.floating))
                                            and math.isnan(value))


def _check_group_formula(name: str, row: pd.Series, counts: dict[str, int], add) -> None:
    """Group/subgroup against the formula: oxygen and the hydrogen deficiency."""
    group, sub = row["group"], row["subgroup"]
    c, h, o = counts.get("C", 0), counts.get("H", 0), counts.get("O", 0)
    # rings plus double bonds of a CxHyOz molecule: c - h/2 + 1 (oxygen adds none)
    dbe = c - h / 2 + 1
    f = row["formula"]
    if group == "oxygenates":
        if o == 0:
            add(name, "formula", f"{f} has no oxygen but the group is oxygenates")
        return
    if o:
        add(name, "group", f"{f} contains oxygen but the group is {group}; use oxygenates")
        return
    if group in ("n_paraffins", "isoparaffins") and h != 2 * c + 2:
        add(name, "formula", f"{f} is not CnH2n+2 as a {group[:-1]} must be")
    expected = {
        "alkene": (1, 1), "diene": (2, 3), "cycloalkene": (2, 3), "cycloalkane": (1, 2),
        "monoaromatic": (4, 5), "indane": (5, 6), "polyaromatic": (7, 12),
    }.get(sub)
    if group in ("olefins", "naphthenes", "aromatics") and expected:
        low, high = expected
        if not low <= dbe <= high:
            add(name, "formula", f"{f} has {dbe:g} rings plus double bonds; a {sub} has "
                                 f"{low}" + (f" to {high}" if high != low else ""))


def _check_vapour_pressure(lib: Library, problems: list[Problem]) -> None:
    table: _Table = lib._tables["vapour_pressure"]
    vp = lib.vapour_pressure
    comps = lib.components

    def add(name: str, column: str | None, message: str) -> None:
        label, row = table.where(name, column)
        problems.append(Problem(label, row, column, message))

    for name in comps.index:
        if name not in vp.index:
            ctab: _Table = lib._tables["components"]
            label, row = ctab.where(name, "name")
            problems.append(Problem(label, row, "name",
                                    f"{name!r} has no row in vapour_pressure.csv"))
    good = []
    for name, row in vp.iterrows():
        if name not in comps.index:
            add(name, "name", f"{name!r} is not a component in components.csv")
        eq = row["equation"]
        if eq not in VP_EQUATIONS:
            add(name, "equation", f"{eq!r} is not one of {', '.join(VP_EQUATIONS)}")
            continue
        missing = [c for c in VP_EQUATIONS[eq] + ("tmin_k", "tmax_k") if math.isnan(row[c])]
        if missing:
            add(name, missing[0], f"blank; the {eq} form needs {', '.join(missing)}")
            continue
        if not row["tmin_k"] < T_RVP_K < row["tmax_k"]:
            add(name, "tmin_k", f"range {row['tmin_k']:g}..{row['tmax_k']:g} K does not "
                                f"contain {T_RVP_K} K (37.8 °C)")
            continue
        reason = _resolves(row["source"], lib.references)
        if reason:
            add(name, "source", reason)
        good.append(name)
    if not good:
        return
    try:
        from dha.vapour_pressure import psat_kpa
    except ImportError:
        problems.append(Problem("dha/vapour_pressure.py", None, None,
                                "module missing; cannot evaluate the correlations"))
        return
    sub = vp.loc[good]
    p_rvp = pd.Series(np.asarray(psat_kpa(sub, T_RVP_K), dtype=float), index=sub.index)
    for name, p in p_rvp.items():
        if not (math.isfinite(p) and p > 0):
            add(name, "a", f"vapour pressure at 37.8 °C is {p!r}; check the coefficients")
    # the correlation must give 101.325 kPa at the normal boiling point (5 %: common practice,
    # no source; measured boiling points and correlations of measured data agree far better)
    names = [n for n in good if n in comps.index]
    tb_k = comps.loc[names, "boiling_point_c"].to_numpy(dtype=float) + 273.15
    rows = vp.loc[names]
    inside = (~np.isnan(tb_k)) & (rows["tmin_k"].to_numpy() <= tb_k) & \
        (tb_k <= rows["tmax_k"].to_numpy())
    if not inside.any():
        return
    names = [n for n, ok in zip(names, inside) if ok]
    tb_k = tb_k[inside]
    p_tb = np.asarray(psat_kpa(vp.loc[names], tb_k), dtype=float)
    for name, t, p in zip(names, tb_k, p_tb):
        if not abs(p / 101.325 - 1) <= 0.05:
            add(name, "source", f"the correlation gives {p:.1f} kPa at the boiling point "
                                f"{t - 273.15:g} °C of components.csv (expected 101.3 kPa "
                                "within 5 %)")


def _check_coelution(lib: Library, problems: list[Problem]) -> None:
    table: _Table = lib._tables["coelution"]
    comps = lib.components
    for i, row in lib.coelution.iterrows():
        key = (row["name_a"], row["name_b"])

        def add(column: str | None, message: str, key=key) -> None:
            label, number = table.where(key, column)
            problems.append(Problem(label, number, column, message))

        for col in ("name_a", "name_b"):
            if row[col] not in comps.index:
                close = difflib.get_close_matches(row[col], list(comps.index), n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                add(col, f"{row[col]!r} is not a component name{hint}")
        if row["name_a"] == row["name_b"]:
            add("name_b", "a component cannot co-elute with itself")
        if (row["name_b"], row["name_a"]) in table.rows and row["name_a"] < row["name_b"]:
            add("name_a", "the same pair appears twice (as a/b and b/a)")
        share = row["share_a"]
        if math.isnan(share) or not 0.0 <= share <= 1.0:
            add("share_a", f"{share!r} must be a fraction from 0 to 1")
        reason = _resolves(row["source"], lib.references)
        if reason:
            add("source", reason)


def _check_unifac(lib: Library, problems: list[Problem]) -> None:
    subs: _Table = lib._tables["subgroups"]
    inter: _Table = lib._tables["interactions"]
    frame = lib.unifac_subgroups
    for sub_id, row in frame.iterrows():
        key = str(sub_id)
        for col in ("r", "q"):
            if not (row[col] > 0 or (col == "q" and row[col] == 0)):
                label, number = subs.where(key, col)
                problems.append(Problem(label, number, col, f"{row[col]!r} must be positive"))
        if "source" in frame.columns:
            reason = _resolves(row["source"], lib.references)
            if reason:
                label, number = subs.where(key, "source")
                problems.append(Problem(label, number, "source", reason))
    mains = set(frame["main_group"])
    for _, row in lib.unifac_interactions.iterrows():
        key = (str(row["main_i"]), str(row["main_j"]))
        for col in ("main_i", "main_j"):
            if row[col] not in mains:
                label, number = inter.where(key, col)
                problems.append(Problem(label, number, col, f"main group {row[col]} is not in "
                                                            "unifac/subgroups.csv"))
        if math.isnan(row["a_ij_k"]):
            label, number = inter.where(key, "a_ij_k")
            problems.append(Problem(label, number, "a_ij_k", "blank; give the parameter [K]"))
        if "source" in row.index:
            reason = _resolves(row["source"], lib.references)
            if reason:
                label, number = inter.where(key, "source")
                problems.append(Problem(label, number, "source", reason))


def _check_stereo(lib: Library, problems: list[Problem]) -> None:
    """``stereo_unspecified.csv``: isomers are library components of one formula carrying a
    cis/trans (E/Z) descriptor, shares are non-negative numbers (one per isomer), the CAS number
    is valid and claimed by no component, names are no component's name, CAS or synonym, and
    every source resolves."""
    table: _Table | None = lib._tables.get("stereo")
    if table is None or lib.stereo.empty:
        return
    comps = lib.components
    taken = lib._lookup
    seen: dict[str, str] = {}
    for name, row in lib.stereo.iterrows():
        def add(column: str | None, message: str, key=name) -> None:
            label, number = table.where(key, column)
            problems.append(Problem(label, number, column, message))

        for text, col in [(name, "name"), (row["cas"], "cas")] + [
                (syn, "synonyms") for syn in split_synonyms(row["synonyms"])]:
            if not text:
                continue
            key = normalise_key(text)
            if key in taken:
                add(col, f"{text!r} is already the library component {taken[key]!r}; "
                         "remove it here (a component of that name wins)")
            elif key in seen and seen[key] != name:
                add(col, f"{text!r} also names the entry {seen[key]!r}")
            seen.setdefault(key, name)
        if row["cas"] and not cas_is_valid(row["cas"]):
            add("cas", f"{row['cas']!r} is not a valid CAS number (format or check digit)")
        isomers = split_synonyms(row["isomers"])
        if len(isomers) < 1:
            add("isomers", "no isomer given; list the library names separated by ';'")
        formulas = set()
        for iso in isomers:
            if iso not in comps.index:
                close = difflib.get_close_matches(iso, list(comps.index), n=1)
                add("isomers", f"{iso!r} is not a component name"
                    + (f" (did you mean {close[0]!r}?)" if close else ""))
                continue
            formulas.add(comps.at[iso, "formula"])
            if not re.search(r"(^|[-,(])(cis|trans|e|z)([-,)]|$)", iso):
                add("isomers", f"{iso!r} carries no cis/trans (E/Z) descriptor")
        if len(formulas) > 1:
            add("isomers", f"the isomers have different formulas ({', '.join(sorted(formulas))})")
        if row["shares"] and parse_shares(row["shares"], len(isomers)) is None:
            add("shares", f"{row['shares']!r}: give {len(isomers)} non-negative numbers "
                          "separated by ';' (or leave blank for equal shares)")
        for col in ("identity_source", "share_source"):
            reason = _resolves(row[col], lib.references)
            if reason:
                add(col, reason)
