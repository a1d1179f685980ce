"""Fitting and validation of the octane models on open mixture data, and lab calibration.

Data (copied unchanged into ``octane_data/``, provenance in ``octane_data/PROVENANCE.md``):

* ``mixtures_mon_training.csv`` -- 293 mixtures with measured MON, mole fractions
  (KUZ2022_MON: Kuzhagaliyeva et al., Communications Chemistry 5 (2022) 111; CC BY 4.0).
* ``surrogate_oxygenate_blends_ron_mon_training.csv`` -- a 4-component surrogate with
  ethanol, methanol, butanols and diisobutylene at 10/20/30 % v/v; measured RON and MON
  (COOPTIMA, NREL Co-Optima fuel property database; BSD-3-clause style).

Data decisions (also printed by ``dha octane validate``):

* The ten rows labelled "PRFnn" (isooctane + n-heptane only) are left out: they
  restate the scale's definition (their MON equals their label), and their fractions are
  volume fractions mislabelled as mole fractions (e.g. "PRF50" is 0.50/0.50 with MON 50, which
  by mole would be 52.9 by volume); one of them ("PRF10") has MON 0.0, a data error.
* The COOPTIMA base is isooctane 45.8, toluene 33.0, n-heptane 14.2, 1-hexene 5.0 (sums to 98,
  basis not stated): we read it as % v/v, normalised to 100; the additive is placed by its
  stated mass %. Diisobutylene is taken as 3:1 2,4,4-trimethyl-1-pentene : -2-pentene.
* Families whose labels say "vol%" (SF-*, Surr) or follow the "X+n" pattern of one pure
  hydrocarbon + ethanol (Hex, TMB, CP) are read as volume fractions although labelled mole (see
  VOLUME_BASIS_FAMILIES for the evidence: as volume fractions, 1-hexene + ethanol blends
  linearly by mole within 0.8 MON as Anderson et al. 2010 lead one to expect; as mole
  fractions it misses by up to 10). PRF+ (PRF40 + ethanol) is read by mole like the other
  PRF/TPRF ethanol series (evidence in VOLUME_BASIS_FAMILIES).
* Mixtures containing a component whose neat value is estimated (not measured in the library)
  are not fitted on; they are validated apart (families marked *), because the estimate's
  error is not the blending model's.
* Folds for cross-validation are mixture *groups*: the family read from the label (TPRF, MC,
  TRF, PRF, PRF+, SF-AR, SF-P, SF-N, SF-OL, Hex, TMB, CP, Surr, S4) combined with the oxygenate added
  (none, ethanol, MTBE, ...). Each group is held out in turn (leave-one-group-out); no row of a
  held-out group is seen in the fit.
"""
from __future__ import annotations

import datetime as _dt
import io
import json
import logging
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from scipy.optimize import least_squares

from dha.errors import CalibrationError, InputError, LibraryError
# the labels of the real gasolines are read in dha.fuel_data, for this fit and the
# identification alike
from dha.fuel_data import GASOLINE_ADDITIVES, ISOPRENOL_DATA_CAS, gasoline_additives
from dha.properties import octane as oc

log = logging.getLogger("dha.octane_fit")

DATA_DIR = Path(__file__).with_name("octane_data")
MON_FILE = DATA_DIR / "mixtures_mon_training.csv"
SURROGATE_FILE = DATA_DIR / "surrogate_oxygenate_blends_ron_mon_training.csv"
FALLBACK_FILE = DATA_DIR / "mixture_components.csv"
GASOLINE_FILE = DATA_DIR / "gasolines_mon_training.csv"
STEREO_FILE = DATA_DIR / "stereo_unspecified.csv"

#: Free parameters of the interaction model for MON (names "beta:<class>", "gamma:<class>",
#: "k:<a>*<b>"), their neutral values (linear by volume / oxygenates by mole, no interaction)
#: and the ridge prior width: a deviation of one "scale" costs as much as 1 ON of residual
#: across SCALE_ROWS rows. The prior keeps poorly determined terms near neutral.
PARAM_SPEC = {
    **{f"k:deficit*{c}": (0.0, 50.0) for c in oc.CLASSES},
    **{f"k:{c}*rest": (0.0, 20.0) for c in oc.OXYGENATE_CLASSES},
    "k:aromatic*paraffin": (0.0, 20.0),
    "beta:aromatic": (1.0, 1.0),
    **{f"s:{c}": (0.0, 20.0) for c in oc.STRUCTURE_CATEGORIES},
    **{f"k:{o}*{h}": (0.0, 20.0) for o in oc.OXYGENATE_CLASSES for h in oc.HYDROCARBON_CLASSES},
}
#: MON: the seven suppression coefficients, the three oxygenate-base terms and one class-pair
#: term (aromatic*paraffin). Model selection (held-out MON RMSE, PRF+ read by mole; see
#: MODEL_SELECTION): 21 variants were tried on the same leave-one-group-out split, so their
#: held-out figures are optimistic by the selection; a nested check (the variant chosen
#: inside each outer fold by an inner leave-one-group-out among the five best) gave 2.52,
#: no better than this, the smallest of them (11 parameters, 2.49 on the plain split).
#: Since then: eight structure shifts s:<category>, ethanol x paraffin / aromatic / olefin
#: (MODEL_SELECTION_2) and C3+ alcohol x paraffin / naphthene (MODEL_SELECTION_3).
MON_FITTED = tuple(f"k:deficit*{c}" for c in oc.CLASSES) + tuple(
    f"k:{c}*rest" for c in oc.OXYGENATE_CLASSES) + ("k:aromatic*paraffin",) + tuple(
    f"s:{c}" for c in oc.STRUCTURE_CATEGORIES) + tuple(
    f"k:light_alcohol*{h}" for h in ("paraffin", "aromatic", "olefin")) + (
    "k:alcohol*paraffin", "k:alcohol*naphthene")

#: Second round on the 40 real gasolines, same figures as MODEL_SELECTION_2 (leave-one-family-out
#: MON RMSE / bias | surrogate held-out RMSE). The RBOB5 family's prenol and isoprenol blends
#: held out came out 2-4 low: the C3+ alcohols had no term with the hydrocarbon classes (ethanol
#: had), so their synergy with a paraffinic base could only come from the oxygenate-base term
#: fitted on the SF-* isopropanol / n-butanol rows. Adding C3+ alcohol x paraffin and x
#: naphthene (the two hydrocarbon classes of RBOB5's base besides olefins; the same Twu-Coon
#: class-pair form as ethanol's) met the targets. Eleven variants were compared on this one
#: split, so the chosen figure is optimistic by the selection (not nested). Kept for the record.
MODEL_SELECTION_3 = {
    "model of MODEL_SELECTION_2 (chosen there)": "1.81 / -1.07 | 2.43",
    "real-fuel weight 4 / 8": "1.74 / -1.04 | 2.79 ; 1.51 / -0.68 | 3.29",
    "C3+ alcohols share the ethanol terms": "1.96 / +0.47 | 3.76",
    "SF-* surrogates (derived MON values?) out of the fit": "1.40 / -0.45 | 2.61",
    "SF-* surrogates at weight 0.5 / 0.25": "1.48 / -0.71 | 2.59 ; 1.41 / -0.55 | 2.85",
    "structure shifts split at C5 / C6 (light and heavy)": "1.87 / -1.05 | 2.42 ; 4.43 / -3.04 | 2.44",
    "+ olefin*paraffin, naphthene*paraffin": "1.77 / -1.03 | 2.44",
    "+ C3+ alcohol x paraffin, olefin, aromatic": "2.06 / +1.01 | 2.36",
    "+ C3+ alcohol x paraffin": "1.39 / -0.63 | 2.38",
    "+ C3+ alcohol x paraffin, prior width 40": "1.34 / -0.56 | 2.39",
    "+ C3+ alcohol x paraffin and x naphthene (chosen)": "1.24 / +0.04 | 2.44",
    # refit on library 2026.12.3/.4 (real-fuel components shipped instead of lumped, their
    # neat values and densities from the library): same form, no new choice
    "the chosen form, refit on library 2026.12.4": "1.31 / +0.11 | 2.44",
}

#: Model selection with the 40 real gasolines (2026-12-03), MON, figures = leave-one-family-out
#: RMSE / bias on the 40 fuels | surrogate held-out RMSE (leave-one-group-out); gasolines in
#: the fit with weight GASOLINE_WEIGHT. Kept for the record; not used by the code.
MODEL_SELECTION_2 = {
    "11 terms of 2026-12-02, surrogates only": "4.63 / -0.77 | 2.44",
    "11 terms, refit with the gasolines (weight 2)": "4.59 / -0.43 | 3.40",
    "+ 8 structure shifts s:<category> (weight 2)": "5.43 / +2.27 | 2.39",
    "+ ethanol x paraffin/aromatic/olefin terms (weight 1)": "4.40 / -0.15 | 2.53",
    "+ both, prenol MON from structure only (weight 1)": "4.05 / +0.77 | 2.27",
    "+ both, prenol MON = its RON - estimated S (weight 1)": "2.02 / -1.09 | 2.27",
    "+ both, prenol MON = its RON - estimated S (weight 2, chosen)": "1.78 / -1.00 | 2.43",
}

#: What was tried to bring the held-out MON RMSE down (issue 6 asks <= 1.5), all on the
#: KUZ2022_MON + COOPTIMA MON rows without estimated neat values, leave-one-group-out,
#: figures = held-out RMSE / fitted RMSE [MON]. Kept for the record; not used by the code.
MODEL_SELECTION = {
    "fraction basis (model of 2026-12-02, 10 parameters)": {
        "as before (PRF+ by volume)": (2.73, 2.34),
        "PRF+ by mole (chosen, see VOLUME_BASIS_FAMILIES)": (2.53, 2.18),
        "PRF+, Hex, TMB, CP by mole": (2.64, 2.28),
        "PRF+ and SF-AR by mole": (3.38, 2.31),
        "PRF+ by mole, TPRF/TRF/MC/PRF by volume": (3.68, 2.71),
        "everything by volume": (3.33, 2.42),
    },
    "model form (PRF+ by mole)": {
        "deficits per lump ON, power 1 / 0.5 / 2": ((2.83, 2.48), (3.43, 2.92), (3.40, 2.87)),
        "per lump, power 1 / 0.5, + aromatic*paraffin": ((2.76, 2.35), (3.10, 2.64)),
        "per component, power 2 (as before)": (2.58, 2.18),
        "+ aromatic*paraffin (chosen, 11 parameters)": (2.49, 2.03),
        "+ ethanol saturation deficit*Z^2": (2.59, 2.16),
        "+ aromatic*paraffin + ethanol saturation": (2.49, 2.01),
        "  ... + ethanol x paraffin-deficit term": (2.46, 1.98),
        "  power 1.5 / 3 instead of 2": ((2.53, 2.08), (2.49, 1.99)),
        "+ aromatic*paraffin + ethanol mole weight": (2.48, 2.01),
        "+ aromatic*paraffin + all oxygenate mole weights": (2.45, 1.96),
        "  ... + aromatic lump weight": (2.60, 1.98),
        "all 21 class pairs (31 parameters), fitted only": (None, 1.67),
        "50 parameters, fitted only": (None, 1.50),
    },
    "nested leave-one-group-out over the five best forms": 2.52,
}
PRIOR_WEIGHT = 1.0

#: Families of KUZ2022_MON whose fractions we read as volume fractions although labelled
#: "mol": their labels state "x vol%", and the additive's fraction follows the nominal
#: volume % whatever its molar volume (ethanol and isopropanol at "10 vol%" in SF-AR1 are
#: 0.0992 and 0.0996; as mole fractions of a 10 % v/v blend they would be about 0.19 and 0.16).
#:
#: PRF+ (PRF40 + ethanol, "PRF+10" = isooctane 0.36, n-heptane 0.54, ethanol 0.10) is read
#: by **mole**, like the TPRF and PRF ethanol series of the same data (changed 2026-12-02).
#: Evidence from the data alone: the MON gain of 10 % ethanol over its PRF base is then
#: +13.0 (PRF+10 on PRF40), +11.2 (TPRF 4+9 on PRF 55.6), +10.0 (TPRF 4+14 on PRF 66.7) and
#: +0.9 (PRF100-E10) -- one smooth trend with the base; by volume (about 0.19 mole ethanol)
#: PRF+ would need half the ethanol effect per mole of the neighbouring series, and PRF+20
#: (MON 64.0) would lie *below* PRF0-E40 (n-heptane + 0.40 mole ethanol, MON 64.5) although
#: its base is PRF40. Held-out MON RMSE 2.73 -> 2.53 with the old model form.
#:
#: Caution: the SF-* families give MON with 3-4 decimals (e.g. 66.0216; SF-P1 + 75 vol%
#: ethanol and + 75 vol% isopropanol both 95.1348), unlike the engine-rated families (one
#: decimal); they may be derived values. Their ethanol effect is far smaller than in the
#: PRF/TRF series (SF-AR1 + 10 vol% ethanol: +5.7 MON on a base of MON 66), and no reading of
#: their basis reconciles them with the TPRF toluene/n-heptane series (SF-AR1, toluene 0.542,
#: MON 66.0 against TPRF 0.50 -> 57.9 and 0.58 -> 66.9). Kept in the fit and the validation.
VOLUME_BASIS_FAMILIES = ("SF-AR", "SF-P", "SF-N", "SF-OL", "Surr", "Hex", "TMB", "CP")

#: RON: the only open RON mixture data are 15 COOPTIMA blends of one surrogate base. They
#: support two RON-specific numbers at most: the aromatic lump weight (toluene's RON blends
#: below its mole share) and the methanol/ethanol-base term; validated leave-one-additive-out.
#: The MON suppression terms are not transferred. Choice among three variants tried, by
#: held-out RON RMSE (a mild selection on the same data): this one 2.1; + a C3+ alcohol
#: term 2.6; the two alcohol terms without the aromatic weight 2.4; MON terms transferred
#: about 2.7.
RON_FITTED = ("beta:aromatic", "k:light_alcohol*rest")
RON_TRANSFERRED: tuple[str, ...] = ()


# --------------------------------------------------------------------------------------------
# Components of the data: library first, fallback file for the few the library lacks
# --------------------------------------------------------------------------------------------

def library_components(overlay=None) -> pd.DataFrame:
    """The library's component table (indexed by name)."""
    from dha.library import load_library
    return load_library(overlay).components


def _needed_cas() -> list[str]:
    """CAS numbers of every component the data sets use (after the gasoline mappings)."""
    fb = pd.read_csv(FALLBACK_FILE, dtype={"cas": str})
    out = list(fb["cas"])
    for _, g in _gasoline_rows().groupby("mixture_id", sort=True):
        out += [c for c in g["cas"] if c not in out]
    seen: list[str] = []
    for c in out:
        if c not in seen:
            seen.append(c)
    return seen


def data_components(components: pd.DataFrame) -> pd.DataFrame:
    """Properties of every component in the data sets, indexed by CAS.

    Library first (by CAS number); ``mixture_components.csv`` only for the few the library
    lacks. Columns: name (library name or the data's), smiles, group, subgroup,
    molar_volume_cm3_mol, class, ron, mon, ron_estimated, mon_estimated, in_library.
    """
    fb = pd.read_csv(FALLBACK_FILE, dtype={"cas": str}).drop_duplicates("cas").set_index("cas")
    lib = components.reset_index()
    lib_by_cas = lib.dropna(subset=["cas"]).drop_duplicates("cas").set_index("cas")
    est = oc.neat_estimators(components)
    rows = []
    for cas in _needed_cas():
        if cas in lib_by_cas.index:
            r = lib_by_cas.loc[cas]
            name, smiles, group = r["name"], r["smiles"], r["group"]
            subgroup = r.get("subgroup")
            vm = float(r["molar_mass_g_mol"]) / float(r["density_15c_kg_m3"]) * 1000.0
            neat = {p: r.get(p) for p in oc.PROPERTIES}
            in_lib = True
        elif cas in fb.index:
            f = fb.loc[cas]
            name, smiles = f["name"], f["smiles"]
            s = oc.parse_smiles(smiles)
            if s.n_o:
                group, subgroup = "oxygenates", "ether" if s.ether else "alcohol"
            elif s.n_double or s.n_triple:
                group, subgroup = "olefins", "alkene"
            elif s.n_aromatic_c:
                group, subgroup = "aromatics", "monoaromatic"
            elif s.n_rings:
                group, subgroup = "naphthenes", "cycloalkane"
            else:
                group = "isoparaffins" if s.n_ch3 > 2 else "n_paraffins"
                subgroup = "alkane"
            vm = float(f["molar_mass_g_mol"]) / float(f["density_15c_kg_m3"]) * 1000.0
            # sourced neat values of the few components kept outside the library (column
            # octane_source of mixture_components.csv); blank = estimated
            neat = {p: float(f[p]) if p in f and pd.notna(f[p]) else np.nan
                    for p in oc.PROPERTIES}
            in_lib = False
        else:
            raise LibraryError(f"octane data: component CAS {cas} is neither in the library nor "
                               f"in {FALLBACK_FILE.name}; add it to one of them")
        row = {"cas": cas, "name": name, "smiles": smiles, "group": group,
               "subgroup": subgroup, "molar_volume_cm3_mol": vm, "in_library": in_lib,
               "class": oc.blending_class(group, smiles, subgroup),
               "structure": oc.structure_category(group, smiles)}
        r_, m_, r_est, m_est = oc.estimate_neat_pair(group, smiles, neat["ron"], neat["mon"], est)
        row.update({"ron": r_, "mon": m_, "ron_estimated": r_est, "mon_estimated": m_est})
        rows.append(row)
    return pd.DataFrame(rows).set_index("cas")


# --------------------------------------------------------------------------------------------
# The real gasolines (KUZ2022_MON, 40 fuels in 6 families)
# --------------------------------------------------------------------------------------------

def gasoline_family(label: str) -> str:
    """The family of a gasoline label: the base fuel (a base and all its blends are one family).

    >>> gasoline_family("FACE_G+E40"), gasoline_family("RBOB5 + 10 vol%  ethanol")
    ('FACE_G', 'RBOB5')
    >>> gasoline_family("TG alkylate")
    'TG alkylate'
    """
    lab = " ".join(label.split())
    m = re.match(r"(FACE_[A-Z]|RBOB\d+)", lab)
    return m.group(1) if m else lab


@lru_cache(maxsize=1)
def _gasoline_rows() -> pd.DataFrame:
    """The gasoline table after the two mappings (isoprenol by label; stereo-unspecified CAS
    numbers split onto the library's isomers by ``stereo_unspecified.csv``).

    Columns: mixture_id, label, cas, fraction, mon.
    """
    raw = pd.read_csv(GASOLINE_FILE, dtype={"component_cas": str})
    stereo = pd.read_csv(STEREO_FILE, dtype={"data_cas": str})
    lib_cas = _library_cas_by_name()
    rows = []
    for r in raw.itertuples(index=False):
        cas = r.component_cas
        if not isinstance(cas, str) or not cas.strip():
            cas = f"smiles:{r.component}"      # no CAS number in the data (two FACE_G lumps)
        if cas == ISOPRENOL_DATA_CAS and "isoprenol" in r.mixture_label:
            cas = GASOLINE_ADDITIVES["isoprenol"]
        split = stereo[stereo["data_cas"] == cas]
        targets = ([(lib_cas[n], float(sh)) for n, sh in zip(split["library_name"], split["share"])]
                   if len(split) else [(cas, 1.0)])
        for c, sh in targets:
            rows.append({"mixture_id": r.mixture_id, "label": r.mixture_label, "cas": c,
                         "fraction": float(r.fraction) * sh, "mon": float(r.mon)})
    return pd.DataFrame(rows)


@lru_cache(maxsize=1)
def _library_cas_by_name() -> dict[str, str]:
    comps = library_components()
    return {str(n): str(c) for n, c in zip(comps.index, comps["cas"])}


def gasoline_volume_fractions(comps: pd.DataFrame) -> tuple[list[dict], list[pd.Series]]:
    """Info rows and volume fractions of the 40 gasolines.

    Reading (evidence in the data): the additive named in the label carries its nominal
    volume fraction (FACE_A+E10 has ethanol 0.1000, +E25 0.2500, RBOB5 + 90 vol% prenol 0.9000;
    mole fractions of a 10 % v/v ethanol blend would be about 0.2), while the base fuel's own
    components are mole fractions of the base scaled by (1 - additive share). So the base part is
    turned into volumes with the molar volumes, and scaled to the volume the additive leaves.
    """
    g = _gasoline_rows()
    vm = comps["molar_volume_cm3_mol"]
    info, fracs = [], []
    for mid, d in g.groupby("mixture_id", sort=True):
        label = d["label"].iloc[0]
        adds = gasoline_additives(label)
        add_cas = {GASOLINE_ADDITIVES[a] for a in adds}
        x = d.groupby("cas")["fraction"].sum()
        is_add = x.index.isin(list(add_cas))
        add_vol = x[is_add]
        base = x[~is_add]
        base_vol = base * vm.reindex(base.index).to_numpy()
        base_vol = base_vol / base_vol.sum() * max(1.0 - add_vol.sum(), 0.0)
        vol = pd.concat([base_vol, add_vol])
        vol = (vol / vol.sum()).rename(mid)
        fam = gasoline_family(label)
        info.append({"mixture_id": mid, "label": " ".join(label.split()), "family": fam,
                     "group": fam, "source": "KUZ2022_GAS", "ron": np.nan,
                     "mon": float(d["mon"].iloc[0])})
        fracs.append(vol)
    return info, fracs


# --------------------------------------------------------------------------------------------
# The mixtures
# --------------------------------------------------------------------------------------------

def _family(label: str) -> str:
    lab = label.strip()
    if lab.startswith("Surr"):
        return "Surr"
    m = re.match(r"(SF-[A-Z]+|TPRF|TRF|PRF\+|PRF|MC|Hex|TMB|CP)", lab)
    return m.group(1) if m else lab.split()[0]


@dataclass(frozen=True)
class MixtureData:
    """Mixtures as matrices over the components of the data.

    info : one row per mixture (mixture_id, label, family, group, source, ron, mon)
    mol_frac, vol_frac : DataFrames (mixtures x CAS), rows sum to 1
    comps : :func:`data_components` of the columns
    excluded : DataFrame of rows left out, with the reason
    """

    info: pd.DataFrame
    mol_frac: pd.DataFrame
    vol_frac: pd.DataFrame
    comps: pd.DataFrame
    excluded: pd.DataFrame


def _surrogate_mass_fractions(comps: pd.DataFrame, row: pd.Series) -> dict[str, float]:
    base_vol = {"540-84-1": 45.8, "108-88-3": 33.0, "142-82-5": 14.2, "592-41-6": 5.0}
    additive = {"ethanol": {"64-17-5": 1.0}, "methanol": {"67-56-1": 1.0},
                "1-butanol": {"71-36-3": 1.0}, "2-methyl-1-propanol": {"78-83-1": 1.0},
                "diisobutylene 3:1 mixture of isomers": {"107-39-1": 0.75, "107-40-4": 0.25},
                "none": {}}[row["additive"]]
    # density from molar volume: rho = M / V; use the fallback file's molar masses
    fb = pd.read_csv(FALLBACK_FILE, dtype={"cas": str}).set_index("cas")
    mass = {c: v * fb.loc[c, "molar_mass_g_mol"] / comps.loc[c, "molar_volume_cm3_mol"]
            for c, v in base_vol.items()}
    tot = sum(mass.values())
    w_add = float(row["additive_wt_pct"]) / 100.0
    out = {c: m / tot * (1 - w_add) for c, m in mass.items()}
    for c, share in additive.items():
        out[c] = out.get(c, 0.0) + w_add * share
    return out


@lru_cache(maxsize=4)
def _load_mixtures_cached(comps_json: str) -> MixtureData:
    comps = pd.read_json(io.StringIO(comps_json), orient="split")
    comps.index = comps.index.astype(str)
    fb = pd.read_csv(FALLBACK_FILE, dtype={"cas": str}).set_index("cas")
    mm = fb["molar_mass_g_mol"]
    raw = pd.read_csv(MON_FILE, dtype={"component_cas": str})
    oxy_names = {"64-17-5": "ethanol", "1634-04-4": "MTBE", "67-63-0": "isopropanol",
                 "71-36-3": "n-butanol", "556-82-1": "prenol"}
    info, fracs, excluded = [], [], []
    for mid, g in raw.groupby("mixture_id", sort=True):
        label = g["mixture_label"].iloc[0]
        cas = set(g["component_cas"])
        if re.fullmatch(r"PRF\d+", label.strip()) and cas <= {"540-84-1", "142-82-5"}:
            excluded.append({"mixture_id": mid, "label": label, "mon": g["mon"].iloc[0],
                             "reason": "primary reference fuel: restates the scale definition "
                                       "(volume fractions labelled mole)"
                                       + ("; MON 0.0 is a data error" if g["mon"].iloc[0] == 0
                                          and "PRF10" in label else "")})
            continue
        x = g.groupby("component_cas")["fraction"].sum()
        x = x / x.sum()
        oxy = sorted(oxy_names[c] for c in x.index if c in oxy_names and x[c] > 0)
        fam = _family(label)
        info.append({"mixture_id": mid, "label": label, "family": fam,
                     "group": fam + "/" + ("+".join(oxy) if oxy else "none"),
                     "source": "KUZ2022_MON", "ron": np.nan, "mon": float(g["mon"].iloc[0])})
        fracs.append(x.rename(mid))
    sur = pd.read_csv(SURROGATE_FILE)
    for _, r in sur.iterrows():
        w = _surrogate_mass_fractions(comps, r)
        mol = pd.Series({c: v / mm[c] for c, v in w.items()})
        mol = mol / mol.sum()
        add = "none" if r["additive"] == "none" else r["additive"]
        short = {"diisobutylene 3:1 mixture of isomers": "diisobutylene"}.get(add, add)
        info.append({"mixture_id": r["case_id"], "label": f"S4 + {r['additive_nominal_vol_pct']} "
                     f"% v/v {short}", "family": "S4", "group": "S4/" + short,
                     "source": "COOPTIMA", "ron": float(r["RON"]) if pd.notna(r["RON"]) else np.nan,
                     "mon": float(r["MON"]) if pd.notna(r["MON"]) else np.nan})
        fracs.append(mol.rename(r["case_id"]))
    g_info, g_fracs = gasoline_volume_fractions(comps)
    info += g_info
    fracs += g_fracs
    frac = pd.DataFrame(fracs).fillna(0.0)
    missing = [c for c in frac.columns if c not in comps.index]
    if missing:
        raise LibraryError(f"octane data: components {missing} not described; add them to "
                           f"{FALLBACK_FILE.name}")
    comps = comps.loc[list(frac.columns)]
    info_df = pd.DataFrame(info).set_index("mixture_id")
    by_volume = (info_df["family"].isin(VOLUME_BASIS_FAMILIES)
                 | (info_df["source"] == "KUZ2022_GAS")).to_numpy()
    vm = comps["molar_volume_cm3_mol"].to_numpy()
    f = frac.to_numpy()
    vol = np.where(by_volume[:, None], f, f * vm[None, :])
    mol = np.where(by_volume[:, None], f / vm[None, :], f)
    vol_frac = pd.DataFrame(vol / vol.sum(axis=1, keepdims=True), frac.index, frac.columns)
    mol_frac = pd.DataFrame(mol / mol.sum(axis=1, keepdims=True), frac.index, frac.columns)
    info_df["basis_read_as"] = np.where(by_volume, "vol", "mol")
    for p in oc.PROPERTIES:
        est = comps[f"{p}_estimated"].to_numpy()
        info_df[f"{p}_estimated_share"] = (vol_frac.to_numpy() * est[None, :]).sum(axis=1)
        oxy = est & (comps["group"] == "oxygenates").to_numpy()
        info_df[f"{p}_estimated_oxygenate_share"] = (vol_frac.to_numpy() * oxy[None, :]).sum(axis=1)
    return MixtureData(info_df, mol_frac, vol_frac, comps, pd.DataFrame(excluded))


def load_mixtures(components: pd.DataFrame | None = None) -> MixtureData:
    """The validation mixtures (MON: KUZ2022_MON + COOPTIMA; RON: COOPTIMA)."""
    comps = data_components(library_components() if components is None else components)
    return _load_mixtures_cached(comps.to_json(orient="split"))


# --------------------------------------------------------------------------------------------
# Fitting and cross-validation
# --------------------------------------------------------------------------------------------

#: Exponent q of the octane deficit d = ((100 - ON)/100)^q. Held-out MON RMSE for q = 1, 2,
#: 3, 4: 3.9 (with the earlier class set), 2.73, 2.75, 2.76; q = 1 gives hexene and
#: cyclopentane (deficits 0.37, 0.15) far too much synergy with ethanol.
DEFICIT_POWER = 2.0


def theta_to_params(names: tuple[str, ...], theta: np.ndarray,
                    base: dict[str, Any] | None = None) -> dict[str, Any]:
    """Turn a parameter vector into the nested dict that :func:`octane.blend` takes."""
    out = {"beta": {}, "gamma": {}, "k": {}, "s": {}, "deficit_power": DEFICIT_POWER}
    if base:
        for kind in ("beta", "gamma", "k", "s"):
            out[kind].update(base.get(kind, {}))
        out["deficit_power"] = base.get("deficit_power", DEFICIT_POWER)
    for nm, v in zip(names, theta):
        kind, key = nm.split(":", 1)
        out[kind][key] = float(v)
    return out


def params_to_theta(names: tuple[str, ...], params: dict[str, Any]) -> np.ndarray:
    return np.array([params.get(n.split(":")[0], {}).get(n.split(":", 1)[1],
                                                           PARAM_SPEC[n][0]) for n in names])


def predict(data: MixtureData, prop: str, model: str, params: dict[str, Any] | None = None,
            rows: np.ndarray | None = None) -> np.ndarray:
    """Model values for the mixtures (all, or the boolean selection ``rows``)."""
    phi = data.vol_frac.to_numpy()
    if rows is not None:
        phi = phi[rows]
    c = data.comps
    if params and params.get("mode") == "mon_plus_sensitivity":
        return oc.blend_ron(phi, c["ron"].to_numpy(), c["mon"].to_numpy(),
                            c["molar_volume_cm3_mol"].to_numpy(), list(c["class"]), params,
                            categories=list(c["structure"]))
    return oc.blend(phi, c[prop].to_numpy(), c["molar_volume_cm3_mol"].to_numpy(),
                    list(c["class"]), model, params, categories=list(c["structure"]))


#: RON = MON model + blended sensitivity (octane.blend_ron): lump weights of the aromatic and
#: olefin sensitivities and the two alcohol-base terms, fitted on the 15 COOPTIMA RON rows with
#: the MON parameters fixed. Prior widths: weights 0.5 around 1, k 20 around 0. Chosen by the
#: held-out RON RMSE (leave-one-additive-out on the 15 rows; the MON part refitted without the
#: group too): this 1.97; a global scale instead of the aromatic weight 3.15; scale +
#: alcohols only 3.18; olefin weight + alcohols 2.32; + aromatic*paraffin 2.11. The previous
#: RON model (MON-independent, 2 parameters) had 2.12 but gave paraffinic fuels S = -9.
SENSITIVITY_FITTED = ("beta:aromatic", "beta:olefin", "k:light_alcohol*rest", "k:alcohol*rest")
SENSITIVITY_PRIOR = {"scale": (1.0, 0.5), "k:light_alcohol*rest": (0.0, 20.0),
                     "k:alcohol*rest": (0.0, 20.0), "beta:aromatic": (1.0, 0.5),
                     "beta:olefin": (1.0, 0.5), "k:aromatic*paraffin": (0.0, 20.0),
                     "k:olefin*paraffin": (0.0, 20.0)}


def fit_sensitivity(data: MixtureData, rows: np.ndarray, p_mon: dict[str, Any]) -> dict[str, Any]:
    """RON parameters (mode mon_plus_sensitivity) fitted on the selected RON rows."""
    y = data.info["ron"].to_numpy()[rows]
    phi = data.vol_frac.to_numpy()[rows]
    c = data.comps
    args = (c["ron"].to_numpy(), c["mon"].to_numpy(), c["molar_volume_cm3_mol"].to_numpy(),
            list(c["class"]))
    cats = list(c["structure"])
    neutral = np.array([SENSITIVITY_PRIOR[n][0] for n in SENSITIVITY_FITTED])
    scale = np.array([SENSITIVITY_PRIOR[n][1] for n in SENSITIVITY_FITTED])

    def params(theta):
        sp: dict[str, Any] = {"scale": 1.0, "k": {}, "beta": {}}
        for n, v in zip(SENSITIVITY_FITTED, theta):
            if n == "scale":
                sp["scale"] = float(v)
            else:
                kind, key = n.split(":", 1)
                sp[kind][key] = float(v)
        return {"mode": "mon_plus_sensitivity", "mon": p_mon, "sensitivity": sp}

    def resid(theta):
        r = oc.blend_ron(phi, *args, params(theta), categories=cats) - y
        return np.concatenate([r, (theta - neutral) / scale])

    sol = least_squares(resid, neutral.copy(), x_scale=scale, method="trf")
    return params(sol.x)


def fit_interaction(data: MixtureData, prop: str, rows: np.ndarray,
                    names: tuple[str, ...], base: dict[str, Any] | None = None
                    ) -> dict[str, Any]:
    """Least-squares fit of the interaction parameters ``names`` on the selected mixtures.

    Residuals are (model - measured) over the rows plus a ridge prior
    ``sqrt(PRIOR_WEIGHT) * (theta - neutral) / scale`` per parameter.
    """
    y = data.info[prop].to_numpy()[rows]
    phi = data.vol_frac.to_numpy()[rows]
    c = data.comps
    on, vm, cls = c[prop].to_numpy(), c["molar_volume_cm3_mol"].to_numpy(), list(c["class"])
    cats = list(c["structure"])
    wts = row_weights(data)[rows]
    neutral = np.array([PARAM_SPEC[n][0] for n in names])
    scale = np.array([PARAM_SPEC[n][1] for n in names])
    start = params_to_theta(names, base or {}) if base else neutral.copy()

    def resid(theta):
        p = theta_to_params(names, theta, base)
        r = (oc.blend(phi, on, vm, cls, "interaction", p, categories=cats) - y) * wts
        return np.concatenate([r, np.sqrt(PRIOR_WEIGHT) * (theta - neutral) / scale])

    lower = np.array([0.2 if n.split(":")[0] in ("beta", "gamma") else -300.0 for n in names])
    upper = np.array([5.0 if n.split(":")[0] in ("beta", "gamma") else 300.0 for n in names])
    sol = least_squares(resid, np.clip(start, lower, upper), bounds=(lower, upper),
                        x_scale=scale, method="trf")
    return theta_to_params(names, sol.x, base)


#: Weight of a real gasoline's residual in the fit relative to a surrogate mixture's (40 real
#: fuels against about 280 surrogates; chosen on the leave-one-family-out error, see
#: MODEL_SELECTION_2).
GASOLINE_WEIGHT = 2.0


def row_weights(data: MixtureData) -> np.ndarray:
    """Residual weight of every mixture in the fit (GASOLINE_WEIGHT for real gasolines)."""
    return np.where(data.info["source"].to_numpy() == "KUZ2022_GAS", GASOLINE_WEIGHT, 1.0)


#: A real gasoline always holds some heavy components without a measured neat value; it is
#: fitted on when at most this volume share rests on estimates and no oxygenate does (the
#: estimator has no unsaturated alcohol to learn from: prenol's estimate is far off).
GASOLINE_MAX_ESTIMATED_SHARE = 0.20


def fit_rows(data: MixtureData, prop: str) -> np.ndarray:
    """Mixtures the fit uses: a measured ``prop`` and no component on an estimated neat value
    (an estimate's error is not the blending model's; those rows are validated apart); for real
    gasolines up to GASOLINE_MAX_ESTIMATED_SHARE on estimates, none on an oxygenate."""
    info = data.info
    gas = info["source"] == "KUZ2022_GAS"
    exact = info[f"{prop}_estimated_share"] == 0
    gas_ok = gas & (info[f"{prop}_estimated_share"] <= GASOLINE_MAX_ESTIMATED_SHARE) & (
        info[f"{prop}_estimated_oxygenate_share"] == 0)
    return (info[prop].notna() & ((~gas & exact) | gas_ok)).to_numpy()


def ron_base(p_mon: dict[str, Any]) -> dict[str, Any]:
    """Starting point of the RON fit: the MON parameters named in RON_TRANSFERRED."""
    out = {"beta": {}, "gamma": {}, "k": {}, "deficit_power": p_mon.get("deficit_power")}
    for name in RON_TRANSFERRED:
        kind, key = name.split(":", 1)
        out[kind][key] = p_mon[kind][key]
    return out


def fit_all(data: MixtureData) -> dict[str, dict[str, Any]]:
    """Interaction parameters for MON (all MON mixtures) and RON (transfer + RON_FITTED)."""
    mon_rows = fit_rows(data, "mon")
    p_mon = fit_interaction(data, "mon", mon_rows, MON_FITTED)
    ron_rows = fit_rows(data, "ron")
    p_ron = fit_sensitivity(data, ron_rows, p_mon)
    return {"mon": p_mon, "ron": p_ron}


def cross_validate(data: MixtureData, model: str, prop: str) -> pd.DataFrame:
    """Fitted (all data) and held-out (leave-one-group-out) predictions for ``prop``.

    Returns a DataFrame over the mixtures with a measured ``prop``: label, family, group,
    measured, fitted, held_out. For the linear models nothing is fitted: fitted = held_out.
    For RON the held-out prediction leaves out the mixture's group from *both* the MON fit that
    the RON model inherits and the RON-specific fit.
    """
    has = data.info[prop].notna().to_numpy()
    info = data.info[has]
    out = info[["label", "family", "group", "source"]].copy()
    out["estimated_neat"] = ~fit_rows(data, prop)[has]
    out["measured"] = info[prop].to_numpy()
    out["decimals"] = [stated_decimals(v) for v in out["measured"]]
    if model != "interaction":
        pred = predict(data, prop, model, rows=has)
        out["fitted"] = pred
        out["held_out"] = pred
        return out
    full = fit_all(data)
    out["fitted"] = predict(data, prop, model, full[prop], rows=has)
    held = np.full(len(out), np.nan)
    groups = data.info["group"].to_numpy()
    mon_has = fit_rows(data, "mon")
    ron_has = fit_rows(data, "ron")
    idx_has = np.flatnonzero(has)
    for g in pd.unique(info["group"]):
        keep = groups != g
        p = fit_interaction(data, "mon", mon_has & keep, MON_FITTED, base=full["mon"])
        if prop == "ron":
            p = fit_sensitivity(data, ron_has & keep, p) \
                if (ron_has & keep).sum() >= 3 else {**full["ron"], "mon": p}
        test = has & ~keep
        held[np.isin(idx_has, np.flatnonzero(test))] = predict(data, prop, model, p, rows=test)
    out["held_out"] = held
    return out


def error_table(cv: dict[tuple[str, str], pd.DataFrame]) -> pd.DataFrame:
    """RMSE, bias (mean of predicted - measured) and max |error| per model, property, family."""
    recs = []
    for (model, prop), df in cv.items():
        known = df[~df["estimated_neat"]]
        parts = [(fam, d) for fam, d in known.groupby("family", sort=True)] + [("ALL", known)]
        gas = df["source"] == "KUZ2022_GAS"
        surr = known[known["source"] != "KUZ2022_GAS"]
        if 0 < len(surr) < len(known):
            parts.append(("SURR", surr))
        rated = surr[surr["decimals"] <= 1]
        if 0 < len(rated) < len(surr):
            parts.append(("SURR-0.1", rated))
        if gas.any():
            # the 40 real fuels, every one (also those on estimated neat values), each family
            # held out whole: the figure the stated uncertainty comes from
            parts.append(("GAS", df[gas]))
        est = df[df["estimated_neat"]]
        if len(est):
            parts += [(f"{fam}*", d) for fam, d in est.groupby("family", sort=True)]
            parts += [("ALL*", est)]
        for fam, d in parts:
            rec = {"model": model, "property": prop.upper(), "family": fam, "n": len(d)}
            for col in ("fitted", "held_out"):
                e = d[col] - d["measured"]
                rec[f"{col}_rmse"] = float(np.sqrt(np.mean(e ** 2)))
                rec[f"{col}_bias"] = float(e.mean())
                rec[f"{col}_max"] = float(e.abs().max())
            recs.append(rec)
    return pd.DataFrame(recs)


def stated_decimals(value: float) -> int:
    """Decimals with which a measured octane number is stated (62.6 -> 1, 66.0216 -> 4).

    Engine ratings (ASTM D2699/D2700) are reported to 0.1 ON (from memory); values stated to
    2-4 decimals (the SF-* families of KUZ2022_MON) were derived or read off a figure, not
    rated on an engine. ``error_table`` therefore also shows the error on the mixtures
    stated to 0.1 (family "SURR-0.1", the surrogate mixtures).
    """
    if not np.isfinite(value):
        return 0
    text = f"{float(value):.6f}".rstrip("0")
    return len(text.split(".")[1]) if "." in text else 0


def conflicting_pairs(data: MixtureData, prop: str = "mon", max_l1: float = 0.03,
                      min_diff: float = 2.0) -> pd.DataFrame:
    """Mixtures of different families with (nearly) the same composition but different values.

    Two mixtures whose volume fractions differ by at most ``max_l1`` in sum (L1 distance) are
    the same fuel for any composition model, so a difference in their measured ``prop`` of
    ``min_diff`` or more is a conflict between the data sources that no model can fit: a
    pair differing by D adds at least D^2 / 2 to the sum of squared errors. Returns label_a,
    label_b, l1, value_a, value_b, diff (a - b), sorted by |diff|, largest first.
    """
    info = data.info
    vf = data.vol_frac.to_numpy()
    val = info[prop].to_numpy(dtype=float)
    fam = info["family"].to_numpy()
    lab = info["label"].to_numpy()
    idx = np.flatnonzero(np.isfinite(val))
    recs = []
    for a_pos, i in enumerate(idx):
        rest = idx[a_pos + 1:]
        if not len(rest):
            break
        l1 = np.abs(vf[rest] - vf[i]).sum(axis=1)
        for j, d in zip(rest[l1 <= max_l1], l1[l1 <= max_l1]):
            if fam[i] != fam[j] and abs(val[i] - val[j]) >= min_diff:
                recs.append({"label_a": lab[i], "label_b": lab[j], "l1": float(d),
                             "value_a": float(val[i]), "value_b": float(val[j]),
                             "diff": float(val[i] - val[j])})
    out = pd.DataFrame(recs, columns=["label_a", "label_b", "l1", "value_a", "value_b", "diff"])
    return out.sort_values("diff", key=np.abs, ascending=False, ignore_index=True)


def format_conflicts(data: MixtureData) -> str:
    """The data-consistency lines printed under the validation table."""
    lines = []
    for prop in ("mon", "ron"):
        c = conflicting_pairs(data, prop)
        for r in c.itertuples(index=False):
            lines.append(f"data conflict ({prop.upper()}): {r.label_a} {r.value_a:g} and "
                         f"{r.label_b} {r.value_b:g} have the same composition (volume "
                         f"fractions within {r.l1:.3f}) but differ by {abs(r.diff):.1f}")
    info = data.info
    fine = info.loc[info["mon"].notna(), ["family", "mon"]]
    fine = fine[[stated_decimals(v) > 1 for v in fine["mon"]]]
    if len(fine):
        lines.append(f"values stated to 2-4 decimals, not engine ratings to 0.1: "
                     f"{len(fine)} MON mixtures ({', '.join(sorted(fine['family'].unique()))}); "
                     "SURR-0.1 = the error on the other surrogate mixtures")
    return "\n".join(lines)


def format_estimator(components: pd.DataFrame | None = None) -> str:
    """Leave-one-out error of the neat-value estimator per group (printed by validate)."""
    est = oc.neat_estimators(library_components() if components is None else components)
    lines = ["neat-value estimator (structure-based ridge regression), leave-one-out on the "
             "library's measured values [octane number]:"]
    for key, e in est.items():
        label = "S = RON - MON" if key == "sensitivity" else key.upper()
        parts = ", ".join(f"{g} {r:.1f} (n {n})" for g, n, r in e.loo_rmse_by_group)
        lines.append(f"  {label}: all {e.loo_rmse:.1f} (n {e.n}); {parts}")
    lines.append("  a missing MON (RON) of a component with a measured RON (MON) is that value "
                 "minus (plus) the estimated S")
    return "\n".join(lines)


def validate_all(data: MixtureData | None = None) -> tuple[pd.DataFrame, dict]:
    """Cross-validated error table of every model (the ``dha octane validate`` table)."""
    data = data or load_mixtures()
    cv = {(m, p): cross_validate(data, m, p) for m in oc.MODEL_NAMES for p in ("mon", "ron")}
    # sensitivity S = RON - MON on the mixtures with both measured (the COOPTIMA blends)
    for m in oc.MODEL_NAMES:
        r, mo = cv[(m, "ron")], cv[(m, "mon")]
        both = r.index.intersection(mo.index)
        if len(both):
            sv = r.loc[both].copy()
            for col in ("measured", "fitted", "held_out"):
                sv[col] = r.loc[both, col] - mo.loc[both, col]
            sv["estimated_neat"] = r.loc[both, "estimated_neat"] | mo.loc[both, "estimated_neat"]
            cv[(m, "s")] = sv
    return error_table(cv), cv


def describe_data(data: MixtureData) -> str:
    """What the validation data are and how they were read (printed above the table)."""
    info = data.info
    by_vol = sorted(info.loc[info["basis_read_as"] == "vol", "family"].unique())
    lines = [
        f"data: {int(info['mon'].notna().sum())} MON mixtures (KUZ2022_MON, CC BY 4.0; COOPTIMA "
        f"S4), {int(info['ron'].notna().sum())} RON mixtures (COOPTIMA S4 surrogate only), "
        f"{info['group'].nunique()} groups for leave-one-group-out",
        "fractions read as volume fractions (labels say vol%, or 'X+n' series): "
        f"{', '.join(by_vol)}; others "
        "as mole fractions",
        f"left out: {len(data.excluded)} PRFnn definition rows (one, PRF10, has MON 0.0)",
        f"MON: {len(MON_FITTED)} parameters fitted on the mixtures without estimated neat "
        f"values (deficit power {DEFICIT_POWER:g} fixed); RON = the MON model + a blended "
        f"sensitivity ({', '.join(SENSITIVITY_FITTED)} fitted on the 15 COOPTIMA rows)",
        "families marked * rest on estimated neat values (not fitted on); GAS = the 40 real "
        "gasolines (KUZ2022_MON), every one, each base fuel with all its blends held out "
        "together; SURR = the surrogate mixtures; S = RON - MON where both are measured",
        "error = predicted - measured [octane number]",
    ]
    return "\n".join(lines)


def format_table(table: pd.DataFrame) -> str:
    """Plain-text rendering of :func:`error_table`."""
    head = (f"{'model':<14}{'prop':<5}{'family':<8}{'n':>4}   "
            f"{'fitted: rmse  bias   max':>25}   {'held-out: rmse  bias   max':>27}")
    lines = [head, "-" * len(head)]
    for _, r in table.iterrows():
        lines.append(f"{r.model:<14}{r.property:<5}{r.family:<8}{r.n:>4}   "
                     f"{r.fitted_rmse:>13.2f}{r.fitted_bias:>6.2f}{r.fitted_max:>6.1f}   "
                     f"{r.held_out_rmse:>15.2f}{r.held_out_bias:>6.2f}{r.held_out_max:>6.1f}")
    return "\n".join(lines)


def domain_of(data: MixtureData) -> dict[str, Any]:
    """What a sample is compared with to judge whether the model was checked on its kind.

    ``real_fuel_class_fractions``: the 40 real gasolines' volume fractions of paraffins,
    olefins, naphthenes, aromatics, oxygenates; ``max_distance``: the largest L1 distance of a
    real fuel to the nearest fuel of *another* family (how far leave-one-family-out reached);
    ``oxygenates_checked``: library names of the oxygenates in the fitted mixtures.
    """
    info = data.info
    gas = (info["source"] == "KUZ2022_GAS").to_numpy()
    c = data.comps
    frac = oc.class_volume_fractions(data.vol_frac.to_numpy()[gas], list(c["class"]))
    fam = info["family"].to_numpy()[gas]
    reach = 0.0
    for i in range(len(frac)):
        other = frac[fam != fam[i]]
        reach = max(reach, oc.domain_distance(frac[i], other))
    used = (data.vol_frac.to_numpy()[fit_rows(data, "mon")] > 0).any(axis=0)
    oxy = sorted({str(n) for n, g, u in zip(c["name"], c["group"], used)
                  if u and g == "oxygenates"})
    # aromatics and olefins at >= 0.5 % v/v in a mixture with a measured RON: the components
    # whose sensitivity (RON - MON) the RON fit has seen
    ron_rows = data.info["ron"].notna().to_numpy()
    seen = (data.vol_frac.to_numpy()[ron_rows] >= 0.005).any(axis=0)
    sens = sorted({str(n) for n, k, u in zip(c["name"], c["class"], seen)
                   if u and k in ("aromatic", "olefin")})
    return {"real_fuel_class_fractions": [[round(float(v), 4) for v in r] for r in frac],
            "max_distance": round(reach, 3), "oxygenates_checked": oxy,
            "ron_sensitivity_checked": sens}


def _rounded(v: Any) -> Any:
    """Parameters rounded to 5 decimals, nested dicts included."""
    if isinstance(v, dict):
        return {k: _rounded(x) for k, x in v.items()}
    return round(v, 5) if isinstance(v, float) else v


def build_params(data: MixtureData | None = None) -> dict[str, Any]:
    """Everything ``octane_params.json`` holds: fitted parameters and cross-validated errors."""
    data = data or load_mixtures()
    table, _ = validate_all(data)
    full = fit_all(data)
    models: dict[str, Any] = {}
    for m in oc.MODEL_NAMES:
        models[m] = {}
        sel = (table.model == m)
        gas_mon = table[sel & (table.property == "MON") & (table.family == "GAS")].iloc[0]
        for p in oc.PROPERTIES:
            row = table[sel & (table.property == p.upper()) & (table.family == "ALL")].iloc[0]
            # stated uncertainty: MON = held-out RMSE on the real gasolines (leave-one-family-
            # out); RON (no real fuel with a measured RON in the data) = that, combined with
            # the held-out RON error on the surrogate blends (the RON-specific part)
            cv = float(gas_mon.held_out_rmse) if p == "mon" else float(
                np.hypot(gas_mon.held_out_rmse, row.held_out_rmse))
            models[m][p] = {"cv_rmse": round(cv, 3),
                            "cv_rmse_mixtures": round(float(row.held_out_rmse), 3),
                            "fit_rmse": round(float(row.fitted_rmse), 3), "n": int(row.n),
                            "n_real_fuels": int(gas_mon.n)}
            if m == "interaction":
                models[m][p]["params"] = _rounded(full[p])
    comps = data.comps
    return {
        "format": "dha-octane-params/1",
        "domain": domain_of(data),
        "fitted": _dt.date.today().isoformat(),
        "produced_by": "python scripts/fit_octane.py",
        "data": {"mon_mixtures": int(data.info["mon"].notna().sum()),
                 "ron_mixtures": int(data.info["ron"].notna().sum()),
                 "groups": int(data.info["group"].nunique()),
                 "excluded": data.excluded.to_dict(orient="records"),
                 "sources": ["KUZ2022_MON (CC BY 4.0)", "COOPTIMA (BSD-3-clause style)"]},
        "estimated_neat_values": {p: sorted(comps.index[comps[f"{p}_estimated"]].map(
            lambda c: str(comps.loc[c, "name"]))) for p in oc.PROPERTIES},
        "uncertainty": ("cv_rmse: MON = held-out RMSE on the 40 real gasolines (leave-one-family-"
                        "out); RON = that combined (root sum of squares) with the held-out RON "
                        "RMSE on the surrogate blends; cv_rmse_mixtures = held-out RMSE on all "
                        "mixture groups (leave-one-group-out)"),
        "fitted_parameters": {"mon": list(MON_FITTED),
                              "ron": ["MON parameters"] + list(SENSITIVITY_FITTED),
                              "ron_transferred_from_mon": list(RON_TRANSFERRED),
                              "deficit_power": DEFICIT_POWER},
        "models": models,
    }


# --------------------------------------------------------------------------------------------
# Lab calibration from a samples file
# --------------------------------------------------------------------------------------------

def _composition_from_file(path: Path, library) -> pd.DataFrame:
    """A composition table (vol_pct, model_component, carbon_number) from a result JSON or a
    composition file (``component`` + one of mass_pct / vol_pct / mol_pct)."""
    if path.suffix.lower() == ".json":
        try:
            res = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, json.JSONDecodeError) as err:
            raise InputError(f"{path}: cannot read the result JSON ({err})") from None
        comps = pd.DataFrame(res.get("components", []))
        if comps.empty or "vol_pct" not in comps:
            raise InputError(f"{path}: result JSON has no components with vol_pct")
        comps["model_component"] = comps.get("model_component", comps["name"])
        return comps
    try:
        tab = pd.read_csv(path, sep=None, engine="python")
    except (OSError, pd.errors.ParserError) as err:
        raise InputError(f"{path}: cannot read the composition file ({err})") from None
    bases = [b for b in ("mass_pct", "vol_pct", "mol_pct") if b in tab.columns]
    if "component" not in tab.columns or len(bases) != 1:
        raise InputError(f"{path}: a composition file needs a column 'component' and exactly one "
                         "of mass_pct, vol_pct, mol_pct")
    basis = bases[0]
    lib = library.components
    names = []
    for i, text in enumerate(tab["component"], start=2):
        nm = library.find(str(text))
        if nm is None:
            raise InputError(f"{path}, row {i}: component {text!r} not in the library; correct "
                             "the name or add it to a library overlay")
        names.append(nm)
    amt = tab[basis].astype(float).to_numpy()
    mm = lib.loc[names, "molar_mass_g_mol"].astype(float).to_numpy()
    rho = lib.loc[names, "density_15c_kg_m3"].astype(float).to_numpy()
    if basis == "mass_pct":
        vol = amt / rho
    elif basis == "mol_pct":
        vol = amt * mm / rho
    else:
        vol = amt
    return pd.DataFrame({"name": names, "model_component": names,
                         "carbon_number": lib.loc[names, "carbon_number"].to_numpy(),
                         "vol_pct": 100.0 * vol / vol.sum()})


def calibrate_from_samples(samples_csv: str | Path, kind: str, library, settings: dict
                           ) -> dict[str, Any]:
    """Fit a lab calibration from a samples file.

    The samples file has one row per sample: a column ``result`` (path of a result JSON) or
    ``composition`` (path of a composition file), relative paths taken from the samples file's
    folder, and ``ron`` and/or ``mon`` (measured engine values; blank = not measured).

    Returns the calibration dict written as JSON (format ``dha-octane-calibration/1``).
    """
    samples_csv = Path(samples_csv)
    try:
        tab = pd.read_csv(samples_csv, sep=None, engine="python")
    except (OSError, pd.errors.ParserError) as err:
        raise InputError(f"{samples_csv}: cannot read the samples file ({err})") from None
    tab.columns = [c.strip().lower() for c in tab.columns]
    path_col = next((c for c in ("result", "composition") if c in tab.columns), None)
    if path_col is None:
        raise InputError(f"{samples_csv}: needs a column 'result' (result JSON path) or "
                         "'composition' (composition file path)")
    props = [p for p in oc.PROPERTIES if p in tab.columns
             and pd.to_numeric(tab[p], errors="coerce").notna().any()]
    if not props:
        raise InputError(f"{samples_csv}: needs a column 'ron' and/or 'mon' with measured values")
    model = settings.get("octane", {}).get("model", "interaction")
    params = oc.load_params()
    preds, gvs = [], []
    for i, r in tab.iterrows():
        p = Path(str(r[path_col]))
        if not p.is_absolute():
            p = samples_csv.parent / p
        if not p.exists():
            raise InputError(f"{samples_csv}, row {i + 2}, column {path_col}: file {p} not found")
        comp = _composition_from_file(p, library)
        comp = comp[comp["vol_pct"].fillna(0) > 0]
        inputs = oc.model_inputs(comp, library.components)
        preds.append(oc.predict_inputs(inputs, model, params))
        gvs.append(oc._group_vol_frac(inputs))
    pred = pd.DataFrame(preds)
    gv = pd.DataFrame(gvs)
    out_props = {}
    for prop in props:
        meas = pd.to_numeric(tab[prop], errors="coerce")
        ok = meas.notna().to_numpy()
        fit = oc.fit_calibration(kind, pred[prop].to_numpy()[ok], meas.to_numpy()[ok],
                                 gv[ok].reset_index(drop=True), prop)
        uncal = pred[prop].to_numpy()[ok] - meas.to_numpy()[ok]
        fit["model_rmse_uncalibrated"] = float(np.sqrt(np.mean(uncal ** 2)))
        out_props[prop] = fit
    return {"format": oc.CALIBRATION_FORMAT, "model": model, "kind": kind,
            "params_fitted": params.get("fitted"),
            "date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
            "samples_file": str(samples_csv), "properties": out_props}
