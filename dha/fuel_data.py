"""Detailed compositions of real gasoline-like fuels, mapped onto the component library.

The data: ``dha/properties/octane_data/gasolines_mon_training.csv``, 40 fuels with detailed
DHA-type compositions (CAS numbers by structure): three research gasolines (FACE A, C, G)
neat and with 10-60 % v/v ethanol, an RBOB-type blendstock neat and with ethanol, prenol or
isoprenol, an alkylate and an aromatic certification-type fuel. How the table is read (the
fraction of an additive a label names is its volume fraction, the base fuel's components are
its mole fractions; "isoprenol" by the label, not the listed CAS number): :func:`real_fuels`.
Source: Kuzhagaliyeva, Horvath, Williams, Nicolle, Sarathy, "Artificial intelligence-driven
design of fuel mixtures", Communications Chemistry 5, 111 (2022); CC BY 4.0 (see that folder's
PROVENANCE.md).

Used for two things, kept apart by *family* (a base fuel and all its blends are one family):

* the identification priors (:mod:`dha.identify`): how petrol mass spreads over groups and
  carbon numbers, from outside compositions rather than invented profiles;
* the evaluation of identification on runs whose compositions the project did not shape
  (``benchmarks/bench_identify.py``, ``tests/test_identify.py``), with the priors refitted
  without the family under test.
"""
from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from dha.memo import ObjectMemo

DATA_FILE = Path(__file__).parent / "properties" / "octane_data" / "gasolines_mon_training.csv"
SOURCE = ("KUZ2022_MON: Kuzhagaliyeva et al., Commun. Chem. 5, 111 (2022), CC BY 4.0; "
          "40 real gasoline-like fuels with detailed compositions")


#: Additives named in the gasoline labels ("FACE_A+E25", "RBOB5 + 10 vol% ethanol + 20 vol%
#: prenol") and their CAS numbers. The source lists the "isoprenol" blends under the CAS number
#: and SMILES of diisobutylene (107-39-1), the same mismatch as its pure-component entry named
#: "isoprenol" (MON 83.3): we read the label, i.e. 3-methyl-3-buten-1-ol (763-32-6).
GASOLINE_ADDITIVES = {"ethanol": "64-17-5", "prenol": "556-82-1", "isoprenol": "763-32-6"}
ISOPRENOL_DATA_CAS = "107-39-1"


def gasoline_additives(label: str) -> dict[str, float]:
    """Additives and their nominal % v/v from a gasoline label.

    >>> gasoline_additives("FACE_A+E25")
    {'ethanol': 25.0}
    >>> gasoline_additives("RBOB5 + 10 vol%  ethanol + 20 vol% prenol")
    {'ethanol': 10.0, 'prenol': 20.0}
    """
    lab = " ".join(label.split())
    out = {}
    m = re.search(r"\+E(\d+)$", lab)
    if m:
        out["ethanol"] = float(m.group(1))
    for v, name in re.findall(r"(\d+) vol% (\w+)", lab):
        out[name] = float(v)
    return out


def blended_volume_pct(label: str) -> float:
    """What a label says was blended into its base fuel in all [% v/v] ("RBOB5 + 10 vol%
    ethanol + 20 vol% prenol" -> 30; a base fuel -> 0)."""
    return float(sum(gasoline_additives(label).values()))


def family_of(label: str) -> str:
    """The base fuel of a mixture label: "FACE_A+E10" -> "FACE_A", "RBOB5 + 20 vol% prenol"
    -> "RBOB5"."""
    return re.split(r"\s*\+", str(label).strip())[0].strip()


@lru_cache(maxsize=4)
def _raw() -> pd.DataFrame:
    return pd.read_csv(DATA_FILE, dtype={"component_cas": str})


def write_composition_tables(folder: Path, fuels: pd.DataFrame | None = None) -> list[Path]:
    """Write one composition table per fuel into ``folder`` (``<mixture_id>.csv``): column
    ``component`` (CAS number, the data's SMILES where it gives none) and ``mol_pct``, as a LIMS
    would send it. ``fuels`` defaults to the shipped data table. Returns the paths written."""
    fuels = _raw() if fuels is None else fuels
    paths = []
    for mid, g in fuels.groupby("mixture_id"):
        comp = g["component_cas"].where(g["component_cas"].notna(), g["component"])
        path = Path(folder) / f"{mid}.csv"
        pd.DataFrame({"component": comp, "mol_pct": 100.0 * g["fraction"]}).to_csv(path,
                                                                                  index=False)
        paths.append(path)
    return paths


def real_fuels(library: Any) -> pd.DataFrame:
    """The 40 fuels' compositions on the library, one row per (fuel, component).

    Columns: ``mixture_id``, ``label``, ``family``, ``component`` (library name, None when the
    library lacks it), ``source_name``, ``mass_pct`` (of the whole fuel). The reading is the
    octane fit's (``octane_fit.gasoline_volume_fractions``, which works in volumes; a test
    checks the two agree): the fraction of an additive the label names
    (:func:`gasoline_additives`) is its volume fraction (an E10 is 10 % v/v ethanol, about
    11 % m/m, not 10 % mol), the base fuel's components are its mole fractions, turned into
    masses with molar masses and into the volume the additive leaves with densities (the
    library's, or ``mixture_components.csv`` beside the data for a component the library
    lacks; a base component without a density takes the base's mass-weighted mean). Rows
    without a molar mass are left out of the mass conversion and counted in
    ``unmatched_mass_pct`` by :func:`fuel_table`.
    Components are matched by CAS number first, then by name (:func:`dha.identify.match_name`).
    """
    return _FUELS.get(library, lambda: _real_fuels(library),
                      tag=getattr(library, "sha256", None)).copy()


_FUELS = ObjectMemo(size=4)


def _real_fuels(library: Any) -> pd.DataFrame:
    from dha.identify import match_name

    d = _raw().copy()
    iso = (d["component_cas"] == ISOPRENOL_DATA_CAS) & d["mixture_label"].str.contains("isoprenol")
    d.loc[iso, "component_cas"] = GASOLINE_ADDITIVES["isoprenol"]
    d.loc[iso, "component_name"] = "isoprenol"
    comp = [match_name(c, library) if isinstance(c, str) else None for c in d["component_cas"]]
    by_name = [match_name(n, library) for n in d["component_name"]]
    d["component"] = [a or b for a, b in zip(comp, by_name)]
    comps = library.components
    d["molar_mass"] = d["component"].map(pd.to_numeric(comps["molar_mass_g_mol"], errors="coerce"))
    d["density"] = d["component"].map(pd.to_numeric(comps["density_15c_kg_m3"], errors="coerce"))
    extra = Path(__file__).parent / "properties" / "octane_data" / "mixture_components.csv"
    if extra.exists():
        mc = pd.read_csv(extra, dtype={"cas": str}).drop_duplicates("cas").set_index("cas")
        for col, src in (("molar_mass", "molar_mass_g_mol"), ("density", "density_15c_kg_m3")):
            d[col] = d[col].fillna(d["component_cas"].map(mc[src]))
    d = d[d["molar_mass"].notna()].copy()
    d["mass"] = d["fraction"] * d["molar_mass"]
    # the additives a label names: their fractions are volume fractions (gasoline_additives);
    # the base's mole fractions become masses, scaled to the volume the additives leave
    named = {lab: {GASOLINE_ADDITIVES[a] for a in gasoline_additives(lab)}
             for lab in d["mixture_label"].unique()}
    for _, g in d.groupby("mixture_id", sort=False):
        is_add = g["component_cas"].isin(list(named[g["mixture_label"].iloc[0]])).to_numpy()
        if not is_add.any():
            continue
        base, added = g[~is_add], g[is_add]
        known = base["density"].notna()
        rho = base["density"].fillna((base["mass"] * base["density"]).sum()
                                     / base.loc[known, "mass"].sum())
        volume = float((base["mass"] / rho).sum())
        left = max(1.0 - float(added["fraction"].sum()), 0.0)
        d.loc[base.index, "mass"] = base["mass"] * left / volume
        d.loc[added.index, "mass"] = added["fraction"] * added["density"]
    d["mass_pct"] = 100.0 * d["mass"] / d.groupby("mixture_id")["mass"].transform("sum")
    d["family"] = d["mixture_label"].map(family_of)
    out = d.rename(columns={"mixture_label": "label", "component_name": "source_name"})
    return out[["mixture_id", "label", "family", "component", "source_name",
                "mass_pct"]].reset_index(drop=True)


def fuel_table(library: Any) -> pd.DataFrame:
    """One row per fuel: ``mixture_id, label, family, n_components, unmatched_mass_pct``."""
    f = real_fuels(library)
    g = f.groupby("mixture_id", sort=True)
    return pd.DataFrame({
        "label": g["label"].first(), "family": g["family"].first(),
        "n_components": g["component"].size(),
        "unmatched_mass_pct": g.apply(lambda x: x.loc[x["component"].isna(), "mass_pct"].sum(),
                                      include_groups=False),
    }).reset_index()


def composition(library: Any, mixture_id: str) -> dict[str, float]:
    """{library name: mass %} of one fuel, its components the library lacks left out and the
    rest renormalised to 100 (for synthetic runs)."""
    f = real_fuels(library)
    f = f[(f["mixture_id"] == mixture_id) & f["component"].notna()]
    if f.empty:
        from dha.errors import InputError
        raise InputError(f"real fuels: no mixture {mixture_id!r}")
    m = f.groupby("component", sort=True)["mass_pct"].sum()
    return (100.0 * m / m.sum()).to_dict()


#: A component is a blend component of a family member when its mass share exceeds the base
#: fuel's by at least this many points [%] (what a blending study added; common practice,
#: no source).
BLEND_MIN_PCT = 5.0


def blended_components(library: Any, mixture_id: str) -> list[str]:
    """Library names of what was blended into a base fuel to make this fuel: the components
    whose mass share exceeds the family base's (the member labelled by the family name alone)
    by :data:`BLEND_MIN_PCT` points or more. Empty for a base fuel or a family without one.
    What a blending study states as ``identify.blend_components`` (for evaluations)."""
    f = real_fuels(library)
    f = f[f["component"].notna()]
    me = f[f["mixture_id"] == mixture_id]
    if me.empty:
        from dha.errors import InputError
        raise InputError(f"real fuels: no mixture {mixture_id!r}")
    family = me["family"].iat[0]
    base_id = f.loc[(f["family"] == family) & (f["label"].str.strip() == family), "mixture_id"]
    if base_id.empty or base_id.iat[0] == mixture_id:
        return []
    mine = pd.Series(composition(library, mixture_id))
    base = pd.Series(composition(library, base_id.iat[0])).reindex(mine.index).fillna(0.0)
    return sorted(mine.index[(mine - base) >= BLEND_MIN_PCT])
