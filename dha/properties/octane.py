"""Octane numbers (RON, MON, AKI, sensitivity) of a petrol from its composition.

Three blending models, chosen with settings ``[octane] model``:

``linear_volume``
    RON = sum of volume fraction x neat RON (the same for MON).
``linear_mole``
    Each hydrocarbon group (paraffins, olefins, naphthenes, aromatics) is a lump whose octane
    number is the volume average of its members; the lumps and every oxygenate blend linearly
    **by mole** (Anderson, Kramer, Mueller and Wallington, Energy Fuels 24 (2010) 6576 for
    ethanol and methanol; Knop, Loos, Pera and Jeuland, Fuel 115 (2014) 666, from memory, for
    n-heptane/isooctane/toluene blends). Inside the
    paraffin lump blending is by volume, so primary reference fuels keep their definition.
``interaction`` (default)
    Our own model in the family of Ghosh, Hickey and Jaffe (Ind. Eng. Chem. Res. 45 (2006) 337:
    lump octane numbers weighted by lump-specific factors, plus interaction terms) and of Twu and
    Coon's pairwise interaction method, with oxygenates weighted by mole as in Anderson et al.
    (2010) and an oxygenate-base interaction term as in Anderson and Wallington (Energy Fuels
    2020, ON = (1 - x) ON_base + x ON_oxy + Z x (1 - x)). See :func:`blend` for the equations.
    Parameters are fitted by ``scripts/fit_octane.py`` on open data and stored in
    ``octane_params.json`` beside this module.

Components without a measured neat octane number get an estimate (:func:`estimate_neat`) from
group, carbon number and structure; the result reports the volume share resting on estimates.
A lab calibration (``[octane] calibration``, a JSON file written by ``dha octane calibrate``)
corrects the model with the lab's own engine results.

The scale itself is defined by the primary reference fuels: RON = MON = volume % isooctane in
n-heptane (ASTM D2699 / D2700). Every model here reproduces it exactly. A calculated octane
number is an estimate; only an engine test certifies it.
"""
from __future__ import annotations

import datetime as _dt
import io
import json
import logging
import math
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from dha.errors import CalibrationError, LibraryError, SettingsError
from dha.memo import ObjectMemo
from dha.properties import PropertyResult

log = logging.getLogger("dha.octane")

PARAMS_FILE = Path(__file__).with_name("octane_params.json")
MODEL_NAMES = ("linear_volume", "linear_mole", "interaction")
PROPERTIES = ("ron", "mon")

#: Blending classes ("lumps"). Paraffins (normal and iso) are one class: the reference-fuel scale.
HYDROCARBON_CLASSES = ("paraffin", "olefin", "naphthene", "aromatic")
#: "light_alcohol" = methanol and ethanol (C1-C2), the alcohols Anderson et al. (2010) found
#: to blend linearly by mole; "alcohol" = C3+ alcohols.
OXYGENATE_CLASSES = ("light_alcohol", "alcohol", "ether")
CLASSES = HYDROCARBON_CLASSES + OXYGENATE_CLASSES

#: Partner classes of the ``interaction`` model's suppression term: a hydrocarbon with an octane
#: deficit d_i = max(0, 100 - ON_i)/100 (1 for n-heptane, 0 for isooctane) blends higher when
#: components of another class are present: + k_c * z_i * d_i * Z_c for every class c other
#: than the class of i. No term within a class: paraffins among themselves stay linear by
#: volume, which keeps the PRF scale exact.
INTERACTION_PAIRS = tuple(("deficit", c) for c in CLASSES)

#: Oxygenate-base terms (Anderson and Wallington 2020 form Z x (1 - x)): + k * Z_c (1 - Z_c).
OXYGENATE_PAIRS = tuple((c, "rest") for c in OXYGENATE_CLASSES)

#: Class-pair terms (Twu and Coon style, on the class mole fractions): + k_ab * Z_a * Z_b,
#: parameter name "a*b". Only pairs of two *different* classes are allowed, so paraffins among
#: themselves stay linear by volume and the PRF scale stays exact. The fitted model uses
#: "aromatic*paraffin": toluene blends below its mole share in isooctane (KUZ2022_MON: toluene
#: 50 + isooctane 50 MON 99.3, 74 + 26 MON 100.8, against 102 and 103 linear by mole) and the
#: deficit term alone cannot give a negative interaction where the base has no deficit.
CLASS_PAIRS = tuple((a, b) for i, a in enumerate(CLASSES) for b in CLASSES[i + 1:])

#: Volume share [%] resting on estimated neat values above which a warning is given
#: (common practice, no source).
ESTIMATED_SHARE_WARN_PCT = 10.0

#: Volume fractions that the domain check compares: the four hydrocarbon classes and the
#: oxygenates together.
DOMAIN_CLASSES = HYDROCARBON_CLASSES + ("oxygenate",)
#: An oxygenate outside those the model was checked on counts from this share [% v/v]
#: (common practice, no source).
UNUSUAL_OXYGENATE_PCT = 1.0
#: Factor on the stated uncertainty of a sample outside the model's domain (composition far
#: from every real fuel of the validation, or an unusual oxygenate): our choice, no source; the
#: held-out error grows with the distance (RBOB5, the fuel farthest from the others, has the
#: largest leave-one-family-out error).
OUT_OF_DOMAIN_FACTOR = 2.0
#: Volume share [%] of aromatics and olefins whose sensitivity (RON - MON) no measured RON in
#: the data has checked (only toluene, 1-hexene and the diisobutylenes have: the COOPTIMA
#: blends), above which the RON gets a warning and a doubled uncertainty (our choice, no
#: source). Such petrols are where the model's RON is least grounded: their S comes from neat
#: values alone, and neat S of the C8+ aromatics in the compilations is small.
RON_UNCHECKED_SHARE_PCT = 10.0


def ron_unchecked_share(inputs: pd.DataFrame, checked: list[str] | None) -> float:
    """Volume share [%] of aromatics and olefins not among ``checked`` (the components whose
    sensitivity measured RONs have checked, ``octane_params.json`` domain); 0 when the
    parameter file names none."""
    if not checked:
        return 0.0
    total = float(inputs["vol_frac"].sum())
    if total <= 0:
        return 0.0
    sel = inputs["class"].isin(("aromatic", "olefin")).to_numpy() & \
        ~inputs["name"].isin(list(checked)).to_numpy()
    return 100.0 * float(inputs.loc[sel, "vol_frac"].sum()) / total


def class_volume_fractions(vol_frac: np.ndarray, classes: list[str]) -> np.ndarray:
    """Volume fractions of :data:`DOMAIN_CLASSES` (rows of ``vol_frac`` normalised).

    >>> class_volume_fractions(np.array([0.5, 0.3, 0.2]), ["paraffin", "aromatic", "light_alcohol"])
    array([0.5, 0. , 0. , 0.3, 0.2])
    """
    phi = np.atleast_2d(np.asarray(vol_frac, dtype=float))
    phi = phi / phi.sum(axis=1, keepdims=True)
    c = np.asarray(classes)
    cols = [phi @ (c == k) for k in HYDROCARBON_CLASSES]
    cols.append(phi @ np.isin(c, OXYGENATE_CLASSES))
    out = np.column_stack(cols)
    return out[0] if np.asarray(vol_frac).ndim == 1 else out


def domain_distance(class_fractions: np.ndarray, reference: np.ndarray) -> float:
    """L1 distance of a sample's class fractions to the nearest reference fuel [-] (0..2)."""
    ref = np.atleast_2d(np.asarray(reference, dtype=float))
    return float(np.abs(ref - np.asarray(class_fractions, dtype=float)[None, :]).sum(axis=1).min())


#: Molar volume used as the hydrocarbon base when a sample has no hydrocarbon [cm3/mol]
#: (only then; any value gives the same result for an oxygenate-only sample of one species).
_DEFAULT_BASE_MOLAR_VOLUME_CM3_MOL = 130.0


# --------------------------------------------------------------------------------------------
# Structure from SMILES (a small reader for the organic subset; no external package needed)
# --------------------------------------------------------------------------------------------

_ATOM_RE = re.compile(r"\[[^\]]+\]|Br|Cl|[BCNOPSFI]|[bcnops]|[=#:\-/\\]|\(|\)|%\d\d|\d|\.")


@dataclass(frozen=True)
class Structure:
    """Counts read from a SMILES string (heavy atoms only).

    n_c, n_o : carbon and oxygen atoms
    n_ch3 : carbons with one heavy neighbour joined by a single bond (methyl ends)
    n_tertiary, n_quaternary : sp3 carbons with three / four carbon neighbours
    n_double, n_double_terminal : C=C double bonds, of them with a =CH2 end
    n_triple : C#C triple bonds
    n_rings : ring closures
    n_aromatic_c : aromatic carbons
    alcohol : an O bonded to one carbon only (OH); ether : an O bonded to two carbons
    """

    n_c: int
    n_o: int
    n_ch3: int
    n_tertiary: int
    n_quaternary: int
    n_double: int
    n_double_terminal: int
    n_triple: int
    n_rings: int
    n_aromatic_c: int
    alcohol: bool
    ether: bool
    longest_chain: int = 0


def _longest_path(nbrs: list[list[tuple[int, int]]], nodes: list[int]) -> int:
    """Atoms on the longest path among ``nodes`` (double breadth-first sweep; exact for trees)."""
    if not nodes:
        return 0
    allowed = set(nodes)

    def far(start: int) -> tuple[int, int]:
        dist = {start: 1}
        queue = [start]
        for a in queue:
            for b, _ in nbrs[a]:
                if b in allowed and b not in dist:
                    dist[b] = dist[a] + 1
                    queue.append(b)
        end = max(dist, key=dist.get)
        return end, dist[end]

    end, _ = far(nodes[0])
    return far(end)[1]


@lru_cache(maxsize=4096)
def parse_smiles(smiles: str) -> Structure:
    """Count carbons, branching, unsaturation and oxygen functions in a SMILES string.

    Parameters
    ----------
    smiles : str
        SMILES of a hydrocarbon or oxygenate (organic subset, bracket atoms allowed).

    Returns
    -------
    Structure

    Examples
    --------
    >>> s = parse_smiles("CC(C)CC(C)(C)C")        # isooctane
    >>> (s.n_c, s.n_ch3, s.n_tertiary, s.n_quaternary)
    (8, 5, 1, 1)
    >>> parse_smiles("C=CCCCC").n_double_terminal   # 1-hexene
    1
    >>> parse_smiles("CCO").alcohol, parse_smiles("COC(C)(C)C").ether
    (True, True)
    """
    if not isinstance(smiles, str) or not smiles.strip():
        raise LibraryError(f"empty SMILES {smiles!r}; give the component a SMILES in the library")
    atoms: list[tuple[str, bool]] = []          # (element, aromatic)
    bonds: list[tuple[int, int, int]] = []      # (i, j, order; 4 = aromatic)
    stack: list[int] = []
    rings: dict[str, tuple[int, int | None]] = {}
    prev: int | None = None
    pending = 0
    n_ring_closures = 0
    pos = 0
    text = smiles.strip()
    for tok in _ATOM_RE.finditer(text):
        if tok.start() != pos:
            raise LibraryError(f"SMILES {smiles!r}: cannot read {text[pos:tok.start()]!r}")
        pos = tok.end()
        t = tok.group()
        if t == "(":
            stack.append(prev)
        elif t == ")":
            prev = stack.pop() if stack else prev
        elif t in "=#:-/\\":
            pending = {"=": 2, "#": 3, ":": 4}.get(t, 1)
        elif t == ".":
            prev = None
        elif t[0].isdigit() or t[0] == "%":
            key = t.lstrip("%")
            if key in rings:
                j, order = rings.pop(key)
                o = pending or order or (4 if atoms[prev][1] and atoms[j][1] else 1)
                bonds.append((j, prev, o))
                n_ring_closures += 1
            else:
                rings[key] = (prev, pending or None)
            pending = 0
        else:
            if t.startswith("["):
                m = re.match(r"\[\d*([A-Za-z][a-z]?)", t)
                sym = m.group(1) if m else "X"
            else:
                sym = t
            aromatic = sym[0].islower()
            element = sym.capitalize() if aromatic else sym
            atoms.append((element, aromatic))
            idx = len(atoms) - 1
            if prev is not None:
                o = pending or (4 if aromatic and atoms[prev][1] else 1)
                bonds.append((prev, idx, o))
            pending = 0
            prev = idx
    if pos != len(text):
        raise LibraryError(f"SMILES {smiles!r}: cannot read {text[pos:]!r}")
    nbrs: list[list[tuple[int, int]]] = [[] for _ in atoms]
    for i, j, o in bonds:
        nbrs[i].append((j, o))
        nbrs[j].append((i, o))
    n_ch3 = n_tert = n_quat = n_dbl = n_dbl_term = n_tri = 0
    alcohol = ether = False
    for i, (el, aro) in enumerate(atoms):
        if el == "C" and not aro:
            c_nbrs = [(j, o) for j, o in nbrs[i] if atoms[j][0] == "C"]
            if len(nbrs[i]) == 1 and nbrs[i][0][1] == 1:
                n_ch3 += 1
            if all(o == 1 for _, o in nbrs[i]):
                if len(c_nbrs) == 3:
                    n_tert += 1
                elif len(c_nbrs) == 4:
                    n_quat += 1
        if el == "O" and not aro:
            n_carbon = sum(1 for j, o in nbrs[i] if atoms[j][0] == "C" and o == 1)
            alcohol |= n_carbon == 1 and len(nbrs[i]) == 1
            ether |= n_carbon == 2
    for i, j, o in bonds:
        if atoms[i][0] == atoms[j][0] == "C":
            if o == 2:
                n_dbl += 1
                if len(nbrs[i]) == 1 or len(nbrs[j]) == 1:
                    n_dbl_term += 1
            elif o == 3:
                n_tri += 1
    return Structure(
        n_c=sum(1 for el, _ in atoms if el == "C"), n_o=sum(1 for el, _ in atoms if el == "O"),
        n_ch3=n_ch3, n_tertiary=n_tert, n_quaternary=n_quat, n_double=n_dbl,
        n_double_terminal=n_dbl_term, n_triple=n_tri, n_rings=n_ring_closures,
        n_aromatic_c=sum(1 for el, aro in atoms if el == "C" and aro), alcohol=alcohol, ether=ether,
        longest_chain=_longest_path(nbrs, [i for i, (el, _) in enumerate(atoms) if el == "C"]))


def blending_class(group: str, smiles: str | None = None, subgroup: str | None = None) -> str:
    """The blending class of a component from its library group (and subgroup / SMILES).

    >>> blending_class("isoparaffins"), blending_class("oxygenates", "COC(C)(C)C")
    ('paraffin', 'ether')
    """
    g = str(group)
    if g in ("n_paraffins", "isoparaffins", "unidentified"):
        return "paraffin"
    if g in ("olefins", "naphthenes", "aromatics"):
        return g[:-1]
    if g == "oxygenates":
        st = parse_smiles(smiles) if isinstance(smiles, str) and smiles else None
        if isinstance(subgroup, str) and subgroup == "ether" or (st is not None and st.ether
                                                                  and not st.alcohol):
            return "ether"
        return "light_alcohol" if st is not None and st.n_c <= 2 else "alcohol"
    raise LibraryError(f"unknown group {group!r}; expected one of n_paraffins, isoparaffins, "
                       "olefins, naphthenes, aromatics, oxygenates")


#: Structure categories of the blending shift (see :func:`blend`): what every octane text names
#: as the structural factors -- chain length and branching of paraffins, rings, unsaturation
#: (terminal or internal double bond), aromatic substitution. Oxygenates have none.
STRUCTURE_CATEGORIES = ("n_paraffin", "paraffin_1branch", "paraffin_multibranch", "naphthene",
                        "olefin_terminal", "olefin_internal", "aromatic_mono", "aromatic_poly")


def structure_category(group: str, smiles: str | None) -> str:
    """Blending-structure category of a hydrocarbon ("" for oxygenates and unknown structure).

    >>> structure_category("n_paraffins", "CCCCCCC"), structure_category("isoparaffins", "CC(C)CCCC")
    ('n_paraffin', 'paraffin_1branch')
    >>> structure_category("isoparaffins", "CC(C)CC(C)(C)C"), structure_category("aromatics", "Cc1ccccc1C")
    ('paraffin_multibranch', 'aromatic_poly')
    """
    if not isinstance(smiles, str) or not smiles:
        return ""
    cls = blending_class(group, smiles)
    st = parse_smiles(smiles)
    if cls == "paraffin":
        branches = st.n_tertiary + 2 * st.n_quaternary
        return ("n_paraffin" if branches == 0 else "paraffin_1branch" if branches == 1
                else "paraffin_multibranch")
    if cls == "naphthene":
        return "naphthene"
    if cls == "olefin":
        return "olefin_terminal" if st.n_double_terminal else "olefin_internal"
    if cls == "aromatic":
        # substituents on the ring: non-aromatic carbons joined to it, read as methyl ends + chains
        subst = st.n_c - st.n_aromatic_c
        return "aromatic_mono" if subst <= 1 or st.n_aromatic_c > 6 else (
            "aromatic_poly" if _ring_substituents(smiles) >= 2 else "aromatic_mono")
    return ""


@lru_cache(maxsize=4096)
def _ring_substituents(smiles: str) -> int:
    """Number of aromatic carbons bearing a non-aromatic carbon (substitution positions)."""
    toks = [t.group() for t in _ATOM_RE.finditer(smiles)]
    # cheap: count aromatic atoms followed or preceded by a branch/aliphatic carbon in the string
    n = 0
    prev_aromatic = False
    depth_aromatic: list[bool] = []
    for t in toks:
        if t == "(":
            depth_aromatic.append(prev_aromatic)
        elif t == ")":
            prev_aromatic = depth_aromatic.pop() if depth_aromatic else prev_aromatic
        elif t == "c":
            prev_aromatic = True
        elif t == "C":
            if prev_aromatic:
                n += 1
            prev_aromatic = False
    first_c = next((t for t in toks if t in ("c", "C")), None)
    if first_c == "C":
        n += 1
    return n


def two_methyl_alkane_smiles(carbon_number: int) -> str:
    """SMILES of the 2-methylalkane with ``carbon_number`` carbons (stand-in for unknown peaks).

    >>> two_methyl_alkane_smiles(6)
    'CC(C)CCC'
    """
    n = max(int(carbon_number), 4)
    return "CC(C)" + "C" * (n - 3)


_ALKANE_STEMS = {3: "propane", 4: "butane", 5: "pentane", 6: "hexane", 7: "heptane",
                 8: "octane", 9: "nonane", 10: "decane", 11: "undecane", 12: "dodecane",
                 13: "tridecane", 14: "tetradecane"}


def two_methyl_alkane_name(carbon_number: int) -> str | None:
    """Library name of the 2-methylalkane with ``carbon_number`` carbons.

    >>> two_methyl_alkane_name(9)
    '2-methyloctane'
    """
    stem = _ALKANE_STEMS.get(int(carbon_number) - 1)
    return f"2-methyl{stem}" if stem else None


# --------------------------------------------------------------------------------------------
# Estimated neat octane numbers
# --------------------------------------------------------------------------------------------

_ESTIMATOR_CLASSES = ("saturated", "olefin", "naphthene", "aromatic", "oxygenate")
_RIDGE_LAMBDA = 1.0


def _estimator_class(group: str) -> str:
    if group in ("n_paraffins", "isoparaffins", "unidentified"):
        return "saturated"
    if group == "oxygenates":
        return "oxygenate"
    return blending_class(group)


def structure_features(group: str, smiles: str) -> np.ndarray:
    """Regression features of the neat-value estimator (see :func:`fit_neat_estimator`)."""
    s = parse_smiles(smiles)
    cls = _estimator_class(group)
    onehot = [1.0 if cls == c else 0.0 for c in _ESTIMATOR_CLASSES]
    chain = float(s.longest_chain)
    by_class_c = [chain if cls == c else 0.0 for c in _ESTIMATOR_CLASSES]
    by_class_c += [chain ** 2 / 10.0 if cls == c else 0.0 for c in _ESTIMATOR_CLASSES]
    n_c = max(s.n_c, 1)
    side_methyls = s.n_ch3 - (0 if s.n_rings else 2) - (1 if s.n_double_terminal else 0)
    return np.array(onehot + by_class_c + [
        max(side_methyls, 0) / n_c * 10.0,     # branching per carbon
        s.n_quaternary, s.n_tertiary,
        s.n_double - s.n_double_terminal, s.n_double_terminal, s.n_triple,
        1.0 if s.alcohol else 0.0, 1.0 if s.ether else 0.0,
    ], dtype=float)


@dataclass(frozen=True)
class NeatEstimator:
    """A ridge regression of neat octane number on structure, fitted on the library.

    coef : regression coefficients [octane number per feature]
    loo_rmse : leave-one-out RMSE on the library's measured values [octane number]
    n : number of measured values used
    """

    prop: str
    coef: tuple[float, ...]
    loo_rmse: float
    n: int
    loo_rmse_by_group: tuple[tuple[str, int, float], ...] = ()

    def predict(self, group: str, smiles: str) -> float:
        """Estimated neat octane number, bounded to [-60, 130] (n-decane is rated -41 RON)."""
        return float(np.clip(structure_features(group, smiles) @ np.array(self.coef), -60, 130))


def fit_neat_estimator(components: pd.DataFrame, prop: str) -> NeatEstimator:
    r"""Fit the neat-value estimator on the measured values of a component table.

    Parameters
    ----------
    components : DataFrame
        Columns ``group``, ``smiles`` and ``prop`` (blank = not measured).
    prop : {"ron", "mon"}

    Returns
    -------
    NeatEstimator

    Notes
    -----
    Linear in: a class intercept, a class slope and curvature on the longest carbon chain
    (classes saturated, olefin, naphthene, aromatic, oxygenate), side methyl groups per 10
    carbons, quaternary and
    tertiary carbons, internal and terminal C=C, C#C, alcohol and ether. Ridge penalty
    :math:`\lambda = 1` on all coefficients; the leave-one-out residual is
    :math:`e_i / (1 - h_{ii})` with the ridge hat matrix
    :math:`H = X (X^T X + \lambda I)^{-1} X^T` (exact for ridge regression).
    Our own design; the features follow the known trends (branching raises, chain length
    lowers the octane number of paraffins; common trade practice).
    """
    rows = components.dropna(subset=[prop])
    rows = rows[rows["smiles"].fillna("").astype(str).str.len() > 0]
    if len(rows) < 20:
        raise LibraryError(f"only {len(rows)} components with a measured {prop}; the neat-value "
                           "estimator needs at least 20")
    x = np.vstack([structure_features(g, s) for g, s in zip(rows["group"], rows["smiles"])])
    y = rows[prop].astype(float).to_numpy()
    a = x.T @ x + _RIDGE_LAMBDA * np.eye(x.shape[1])
    coef = np.linalg.solve(a, x.T @ y)
    hat = np.einsum("ij,ji->i", x, np.linalg.solve(a, x.T))
    loo = (y - x @ coef) / (1.0 - hat)
    groups = rows["group"].astype(str).to_numpy()
    by_group = tuple((g, int((groups == g).sum()), float(np.sqrt(np.mean(loo[groups == g] ** 2))))
                     for g in sorted(set(groups)))
    return NeatEstimator(prop, tuple(float(c) for c in coef),
                         float(np.sqrt(np.mean(loo ** 2))), int(len(y)), by_group)


@lru_cache(maxsize=8)
def _estimators_for(key: str, table_json: str) -> dict[str, NeatEstimator]:
    comps = pd.read_json(io.StringIO(table_json), orient="split")
    out = {p: fit_neat_estimator(comps, p) for p in PROPERTIES}
    both = comps.dropna(subset=["ron", "mon"]).copy()
    both["sensitivity"] = both["ron"].astype(float) - both["mon"].astype(float)
    out["sensitivity"] = fit_neat_estimator(both, "sensitivity")
    return out


def estimate_neat_pair(group: str, smiles: str, ron: float, mon: float,
                       estimators: dict[str, NeatEstimator]) -> tuple[float, float, bool, bool]:
    """Fill a missing neat RON or MON: from the other one and an estimated sensitivity when one is
    measured (S = RON - MON regressed on structure, fitted on the components with both), from
    structure alone when neither is.

    Returns (ron, mon, ron_estimated, mon_estimated).
    """
    r_ok, m_ok = pd.notna(ron), pd.notna(mon)
    if r_ok and m_ok:
        return float(ron), float(mon), False, False
    if r_ok:
        return float(ron), float(ron) - estimators["sensitivity"].predict(group, smiles), False, True
    if m_ok:
        return float(mon) + estimators["sensitivity"].predict(group, smiles), float(mon), True, False
    return (estimators["ron"].predict(group, smiles), estimators["mon"].predict(group, smiles),
            True, True)


_ESTIMATORS = ObjectMemo()


def neat_estimators(components: pd.DataFrame) -> dict[str, NeatEstimator]:
    """Estimators for RON and MON fitted on ``components`` (cached per table content, and per
    table object so that a run does not serialise the library to find them)."""
    def by_content() -> dict[str, NeatEstimator]:
        blob = components.reindex(columns=["group", "smiles", "ron", "mon"]).to_json(
            orient="split")
        return _estimators_for(str(hash(blob)), blob)

    return _ESTIMATORS.get(components, by_content)


def estimate_neat(group: str, smiles: str, components: pd.DataFrame, prop: str) -> float:
    """Estimated neat RON or MON of a structure, from the library's measured values.

    >>> import pandas as pd
    >>> lib = pd.DataFrame({"group": ["n_paraffins"] * 5 + ["isoparaffins"] * 15 + ["aromatics"] * 5,
    ...     "smiles": ["CCCCC", "CCCCCC", "CCCCCCC", "CCCCCCCC", "CCCCCCCCC"]
    ...       + ["CC(C)" + "C" * k for k in range(1, 6)] + ["CC(C)(C)" + "C" * k for k in range(1, 6)]
    ...       + ["CC(C)C(C)" + "C" * k for k in range(1, 6)]
    ...       + ["c1ccccc1C" + "C" * k for k in range(5)],
    ...     "ron": [62, 25, 0, -19, -45, 92, 73, 42, 21, 0, 92, 92, 73, 55, 40, 104, 91, 65, 53, 35,
    ...             120, 108, 101, 98, 94], "mon": [62.0] * 25})
    >>> round(estimate_neat("isoparaffins", "CC(C)CCCCC", lib, "ron")) < 40
    True
    """
    return neat_estimators(components)[prop].predict(group, smiles)


# --------------------------------------------------------------------------------------------
# The blending models
# --------------------------------------------------------------------------------------------

_CLASS_MATRICES: dict[tuple, dict[str, np.ndarray]] = {}


def _class_matrix(classes: list[str]) -> dict[str, np.ndarray]:
    """Indicator vector of each class (and hydrocarbon / oxygenate) over the components;
    remembered per class sequence (read-only arrays: a sample's contributions call the model
    many times on the same components)."""
    key = tuple(classes)
    hit = _CLASS_MATRICES.get(key)
    if hit is not None:
        return hit
    c = np.asarray(classes)
    out = {k: (c == k).astype(float) for k in CLASSES}
    out["hydrocarbon"] = np.isin(c, HYDROCARBON_CLASSES).astype(float)
    out["oxygenate"] = np.isin(c, OXYGENATE_CLASSES).astype(float)
    for v in out.values():
        v.flags.writeable = False
    if len(_CLASS_MATRICES) > 64:
        _CLASS_MATRICES.clear()
    _CLASS_MATRICES[key] = out
    return out


def structure_shift(neat_on: np.ndarray, categories: list[str] | None,
                    shifts: dict[str, float]) -> np.ndarray:
    r"""Blending-value shift of each component from its structure category.

    :math:`\Delta_i = s_{cat(i)}\,4\,d_i (1 - d_i)` with :math:`d_i = \min(1, \max(0,
    (100 - ON_i)/100))`: zero at neat values 0 and 100 (n-heptane and isooctane, so the PRF
    scale stays exact whatever :math:`s`), largest for mid-range components.

    >>> structure_shift(np.array([0.0, 100.0, 50.0]), ["n_paraffin"] * 3, {"n_paraffin": 8.0})
    array([0., 0., 8.])
    """
    on = np.asarray(neat_on, dtype=float)
    if not categories or not shifts:
        return np.zeros_like(on)
    amp = np.array([float(shifts.get(c, 0.0)) for c in categories])
    d = np.clip((100.0 - on) / 100.0, 0.0, 1.0)
    return amp * 4.0 * d * (1.0 - d)


def blend(vol_frac: np.ndarray, neat_on: np.ndarray, molar_volume_cm3_mol: np.ndarray,
          classes: list[str], model: str, params: dict[str, Any] | None = None,
          categories: list[str] | None = None) -> np.ndarray:
    r"""Octane number of one or many blends.

    Parameters
    ----------
    vol_frac : array (n_blends, n_components) or (n_components,)
        Volume fractions [-] (rows are normalised to sum 1).
    neat_on : array (n_components,)
        Neat octane numbers of the components (RON or MON) [-].
    molar_volume_cm3_mol : array (n_components,)
        Molar volumes at 15 degC [cm3/mol].
    classes : list of str
        Blending class of each component (:data:`CLASSES`).
    model : {"linear_volume", "linear_mole", "interaction"}
    categories : list of str, optional
        Structure category of each component (:func:`structure_category`), for the
        ``interaction`` model's blending shifts ``params["s"]`` (:func:`structure_shift`).
    params : dict, optional
        For ``interaction``: ``{"beta": {class: value}, "gamma": {class: value},
        "k": {name: value}, "deficit_power": q}``; missing entries mean beta = gamma = 1,
        k = 0, q = 1.

    Returns
    -------
    array (n_blends,) or float

    Notes
    -----
    Lumps: each hydrocarbon class c (paraffins, olefins, naphthenes, aromatics) is one lump
    with molar volume :math:`V_c = \sum_{i\in c}\phi_i / \sum_{i\in c}(\phi_i/V_i)`; inside a
    lump its members weigh by volume. Lumps and oxygenates weigh by moles:

    .. math:: w_i = \beta_c\,\phi_i / V_c \;(i \in c),\qquad w_i = \gamma_c\,\phi_i / V_i
              \;(\text{oxygenates}),\qquad z_i = w_i / \sum_j w_j

    ``linear_mole`` is :math:`ON = \sum_i z_i ON_i` with all :math:`\beta = \gamma = 1`
    (Anderson et al. 2010 for alcohols; lumps by mole). ``interaction`` adds, with the octane
    deficit :math:`d_i = \max(0, (100 - ON_i)/100)^q` of each hydrocarbon, its class sums
    :math:`D_c = \sum_{i \in c} z_i d_i`, :math:`D = \sum_c D_c` and the class fractions
    :math:`Z_c = \sum_{i\in c} z_i`,

    .. math:: ON = \sum_i z_i ON_i + \sum_c k_c\,(D - D_c)\,Z_c
              + \sum_{o} k_o\,Z_o (1 - Z_o) + \sum_{a < b} k_{ab} Z_a Z_b

    over the oxygenate classes o (light_alcohol = methanol and ethanol, alcohol = C3+,
    ether). The first sum is a suppression term: a low-octane hydrocarbon (n-heptane) blends higher
    in the presence of another class (lump weights and pairwise terms in the spirit of Ghosh,
    Hickey and Jaffe 2006 and Twu and Coon); the last is the oxygenate-base term of Anderson
    and Wallington (Energy Fuels 2020); the pair terms :math:`k_{ab}` join two different classes
    (Twu and Coon's pairwise form on class mole fractions; the fit uses aromatic-paraffin
    only). ``linear_volume`` is :math:`\sum \phi_i ON_i`.
    Paraffins only blend among themselves by volume in every model (no paraffin-paraffin
    term), so a primary reference fuel gives exactly its volume % isooctane (ASTM D2699/D2700).

    Examples
    --------
    >>> import numpy as np
    >>> v = np.array([165.0, 147.0])     # isooctane, n-heptane molar volumes [cm3/mol]
    >>> round(float(blend(np.array([0.9, 0.1]), np.array([100.0, 0.0]), v,
    ...                   ["paraffin", "paraffin"], "linear_mole")), 6)
    90.0
    """
    phi = np.atleast_2d(np.asarray(vol_frac, dtype=float))
    phi = phi / phi.sum(axis=1, keepdims=True)
    on = np.asarray(neat_on, dtype=float)
    vm = np.asarray(molar_volume_cm3_mol, dtype=float)
    cm = _class_matrix(list(classes))
    single = np.asarray(vol_frac).ndim == 1
    if model == "linear_volume":
        out = phi @ on
        return float(out[0]) if single else out
    if model not in ("linear_mole", "interaction"):
        raise SettingsError(f"[octane] model = {model!r} is not known; use one of "
                            f"{', '.join(MODEL_NAMES)}")
    hc = cm["hydrocarbon"]
    hc_vol = phi @ hc
    hc_mol = phi @ (hc / vm)
    with np.errstate(invalid="ignore", divide="ignore"):
        v_base = np.where(hc_mol > 0, hc_vol / hc_mol, _DEFAULT_BASE_MOLAR_VOLUME_CM3_MOL)
    # lumps: each hydrocarbon class by volume inside, lumps and oxygenates by mole.
    # lump molar volume V_c = sum(phi_i, c) / sum(phi_i / V_i, c); weight = moles of the lump
    p = params or {}
    beta = p.get("beta", {})
    gamma = p.get("gamma", {})
    k = p.get("k", {}) if model == "interaction" else {}
    w = np.zeros_like(phi)
    for c in HYDROCARBON_CLASSES:
        m = cm[c]
        vol_c = phi @ m
        mol_c = phi @ (m / vm)
        with np.errstate(invalid="ignore", divide="ignore"):
            vc = np.where(mol_c > 0, vol_c / mol_c, 1.0)
        f = float(beta.get(c, 1.0)) if model == "interaction" else 1.0
        w += f * phi * m[None, :] / vc[:, None]
    for c in OXYGENATE_CLASSES:
        f = float(gamma.get(c, 1.0)) if model == "interaction" else 1.0
        w += f * phi * (cm[c] / vm)[None, :]
    z = w / w.sum(axis=1, keepdims=True)
    shift = structure_shift(on, categories, p.get("s", {})) if model == "interaction" else 0.0
    out = z @ (on + shift)
    power = float(p.get("deficit_power", 1.0))
    deficit = cm["hydrocarbon"] * np.clip((100.0 - on) / 100.0, 0.0, None) ** power
    d_total = z @ deficit
    for _, c in INTERACTION_PAIRS:
        kc = float(k.get(f"deficit*{c}", 0.0))
        if kc and cm[c].any():
            out = out + kc * (d_total - z @ (deficit * cm[c])) * (z @ cm[c])
    for c, _ in OXYGENATE_PAIRS:
        kc = float(k.get(f"{c}*rest", 0.0))
        if kc and cm[c].any():
            zc = z @ cm[c]
            out = out + kc * zc * (1.0 - zc)
    for a, b in CLASS_PAIRS:
        kab = float(k.get(f"{a}*{b}", k.get(f"{b}*{a}", 0.0)))
        if kab and cm[a].any() and cm[b].any():
            out = out + kab * (z @ cm[a]) * (z @ cm[b])
    unknown = [n for n in k if not _known_k_name(n)]
    if unknown:
        raise SettingsError(f"octane parameters: unknown interaction term(s) {unknown}; "
                            "refit with scripts/fit_octane.py")
    return float(out[0]) if single else out


def blend_ron(vol_frac: np.ndarray, neat_ron: np.ndarray, neat_mon: np.ndarray,
              molar_volume_cm3_mol: np.ndarray, classes: list[str], params: dict[str, Any],
              categories: list[str] | None = None) -> np.ndarray:
    r"""RON of the ``interaction`` model: the MON model plus a blended sensitivity.

    .. math:: RON = MON + \sum_i z_i\,a\,S_i + \sum_o k_o Z_o (1 - Z_o)

    with :math:`S_i = RON_i - MON_i` the neat sensitivity (paraffins about 0, olefins,
    aromatics and alcohols well above), :math:`z_i` the mole-lump weights of :func:`blend`,
    a fitted scale :math:`a` and oxygenate-base terms (Anderson and Wallington 2020 form).
    ``params``: ``{"mode": "mon_plus_sensitivity", "mon": <MON parameters>, "sensitivity":
    {"scale": a, "k": {...}, "beta": {...}}}``. A primary reference fuel has S = 0 (both
    reference fuels have RON = MON), so RON = MON = % v/v isooctane.
    """
    mon = blend(vol_frac, neat_mon, molar_volume_cm3_mol, classes, "interaction",
                params.get("mon", {}), categories=categories)
    sp = params.get("sensitivity", {})
    sens = float(sp.get("scale", 1.0)) * (np.asarray(neat_ron, float) - np.asarray(neat_mon, float))
    s = blend(vol_frac, sens, molar_volume_cm3_mol, classes, "interaction",
              {"k": sp.get("k", {}), "beta": sp.get("beta", {})})
    return mon + s


def _known_k_name(name: str) -> bool:
    """Whether ``name`` is an interaction parameter :func:`blend` understands."""
    a, _, b = name.partition("*")
    if a == "deficit":
        return b in CLASSES
    if b == "rest":
        return a in OXYGENATE_CLASSES
    return a in CLASSES and b in CLASSES and a != b


# --------------------------------------------------------------------------------------------
# Parameters, calibration
# --------------------------------------------------------------------------------------------

@lru_cache(maxsize=4)
def _read_params(path: str) -> dict[str, Any]:
    try:
        with open(path, encoding="utf-8") as fh:
            return json.load(fh)
    except FileNotFoundError:
        raise LibraryError(f"{path}: octane parameter file missing; run "
                           "`python scripts/fit_octane.py`") from None


def load_params(path: str | Path | None = None) -> dict[str, Any]:
    """The fitted parameter file (``octane_params.json``) as a dict."""
    return _read_params(str(path or PARAMS_FILE))


def model_params(model: str, prop: str, params: dict[str, Any] | None = None) -> dict[str, Any]:
    """Blending parameters of ``model`` for ``prop`` from the parameter file (empty if none)."""
    if model not in MODEL_NAMES:
        raise SettingsError(f"[octane] model = {model!r} is not known; use one of "
                            f"{', '.join(MODEL_NAMES)}")
    p = params if params is not None else load_params()
    return p.get("models", {}).get(model, {}).get(prop, {}).get("params", {})


CALIBRATION_FORMAT = "dha-octane-calibration/1"
#: Parameters of each calibration kind; a fit needs n >= 2 p + 1 samples (two per fitted
#: number, plus one so that a leave-one-out error exists): bias 3, slope 5, groups 11.
CALIBRATION_TERMS = {
    "bias": ("bias",),
    "slope": ("bias", "slope"),
    "groups": ("bias", "aromatics", "olefins", "naphthenes", "oxygenates"),
}


def calibration_min_samples(kind: str) -> int:
    """Smallest number of samples a calibration of ``kind`` accepts (2 p + 1).

    >>> [calibration_min_samples(k) for k in ("bias", "slope", "groups")]
    [3, 5, 11]
    """
    if kind not in CALIBRATION_TERMS:
        raise CalibrationError(f"calibration kind {kind!r} is not known; use bias, slope or groups")
    return 2 * len(CALIBRATION_TERMS[kind]) + 1


def calibration_design(kind: str, predicted: np.ndarray, group_vol_frac: pd.DataFrame | None
                       ) -> np.ndarray:
    """Design matrix of a calibration: the correction is ``X @ coef`` added to the model value.

    For ``slope`` the corrected value is ``bias + slope * predicted``, written here as the
    correction ``bias + (slope - 1) * predicted``.
    """
    n = len(predicted)
    if kind == "bias":
        return np.ones((n, 1))
    if kind == "slope":
        return np.column_stack([np.ones(n), np.asarray(predicted, float)])
    cols = [np.ones(n)]
    for g in CALIBRATION_TERMS["groups"][1:]:
        cols.append(np.asarray(group_vol_frac[g], float) if group_vol_frac is not None
                    and g in group_vol_frac else np.zeros(n))
    return np.column_stack(cols)


def fit_calibration(kind: str, predicted: np.ndarray, measured: np.ndarray,
                    group_vol_frac: pd.DataFrame | None = None, prop: str = "ron"
                    ) -> dict[str, Any]:
    r"""Fit a lab correction of model values to measured engine values.

    Parameters
    ----------
    kind : {"bias", "slope", "groups"}
    predicted, measured : arrays [octane number]
    group_vol_frac : DataFrame, optional
        Volume fractions [-] of aromatics, olefins, naphthenes, oxygenates (for ``groups``).
    prop : name used in messages.

    Returns
    -------
    dict
        ``coefficients`` (name -> value), ``n``, ``rmse_fit``, ``loo_rmse``, ``loo_residuals``.

    Notes
    -----
    Ordinary least squares of :math:`y - \hat y_{model}` (bias, groups) or of :math:`y`
    (slope) on the design; the leave-one-out residual is :math:`e_i / (1 - h_{ii})`
    (exact for least squares). Refuses fewer than :func:`calibration_min_samples` samples.

    Examples
    --------
    >>> r = fit_calibration("bias", [90.0, 92.0, 94.0], [91.0, 93.5, 94.5])
    >>> r["coefficients"]["bias"], round(r["loo_rmse"], 4)
    (1.0, 0.6124)
    """
    predicted = np.asarray(predicted, dtype=float)
    measured = np.asarray(measured, dtype=float)
    need = calibration_min_samples(kind)
    n = len(measured)
    if n < need:
        raise CalibrationError(
            f"{prop}: {n} sample(s) with a measured {prop.upper()}; a '{kind}' calibration needs "
            f"at least {need} (rule n >= 2 x {len(CALIBRATION_TERMS[kind])} parameters + 1). "
            "Add samples or choose a simpler --kind.")
    x = calibration_design(kind, predicted, group_vol_frac)
    y = measured if kind == "slope" else measured - predicted
    coef, *_ = np.linalg.lstsq(x, y, rcond=None)
    rank = np.linalg.matrix_rank(x)
    if rank < x.shape[1]:
        raise CalibrationError(f"{prop}: the samples do not vary enough to fit a '{kind}' "
                               "calibration (e.g. same predicted value or no group spread); "
                               "use a simpler --kind")
    resid = y - x @ coef
    hat = np.einsum("ij,ji->i", x, np.linalg.pinv(x.T @ x) @ x.T)
    if np.any(hat > 1 - 1e-9):
        raise CalibrationError(f"{prop}: one sample alone fixes a parameter (leverage 1); "
                               "the leave-one-out error cannot be computed; add samples")
    loo = resid / (1.0 - hat)
    names = CALIBRATION_TERMS[kind]
    return {"coefficients": {nm: float(c) for nm, c in zip(names, coef)}, "n": int(n),
            "rmse_fit": float(np.sqrt(np.mean(resid ** 2))),
            "loo_rmse": float(np.sqrt(np.mean(loo ** 2))),
            "loo_residuals": [float(v) for v in loo]}


def apply_calibration(value: float, prop_cal: dict[str, Any], kind: str,
                      group_vol_frac: dict[str, float] | None = None) -> float:
    """Corrected value from a fitted calibration entry (see :func:`fit_calibration`)."""
    c = prop_cal["coefficients"]
    if kind == "bias":
        return value + c["bias"]
    if kind == "slope":
        return c["bias"] + c["slope"] * value
    gv = group_vol_frac or {}
    return value + c["bias"] + sum(c[g] * gv.get(g, 0.0) for g in CALIBRATION_TERMS["groups"][1:])


def load_calibration(path: str | Path, model: str) -> dict[str, Any]:
    """Read a calibration file and check it applies to ``model``."""
    path = Path(path)
    try:
        cal = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise CalibrationError(f"{path}: calibration file not found; check [octane] "
                               "calibration") from None
    except json.JSONDecodeError as err:
        raise CalibrationError(f"{path}: not a JSON calibration file ({err})") from None
    if cal.get("format") != CALIBRATION_FORMAT:
        raise CalibrationError(f"{path}: format {cal.get('format')!r} is not "
                               f"{CALIBRATION_FORMAT!r}; write it with `dha octane calibrate`")
    if cal.get("model") != model:
        raise CalibrationError(f"{path}: calibration was fitted for model {cal.get('model')!r} "
                               f"but [octane] model is {model!r}; refit or change the model")
    return cal


# --------------------------------------------------------------------------------------------
# From a composition table to model inputs
# --------------------------------------------------------------------------------------------

def _lib_row(comps: pd.DataFrame, name: Any) -> pd.Series | None:
    if isinstance(name, str) and name in comps.index:
        row = comps.loc[name]
        return row.iloc[0] if isinstance(row, pd.DataFrame) else row
    return None


#: Per-library cache of _component_inputs: components table -> {key: entry}.
_INPUTS = ObjectMemo()


def _component_inputs(components: pd.DataFrame, key: str | None, cn: int | None,
                      estimators: dict) -> dict:
    """What a library component (or, for ``key`` None, the stand-in of carbon number ``cn``)
    gives the models: group, class, molar mass, density and neat values with their
    estimated flags. Computed once per library table and key (the per-row library lookup
    and neat-value estimation cost most of ``model_inputs`` otherwise)."""
    table = _INPUTS.get(components, dict)
    ckey = key if key is not None else ("stand-in", cn)
    if ckey in table:
        return table[ckey]
    lib = _lib_row(components, key)
    if lib is not None:
        group = str(lib.get("group"))
        smiles = lib.get("smiles") if isinstance(lib.get("smiles"), str) else None
        subgroup = lib.get("subgroup") if isinstance(lib.get("subgroup"), str) else None
        mm = lib.get("molar_mass_g_mol")
        dens = lib.get("density_15c_kg_m3")
        neat = {p: lib.get(p) for p in PROPERTIES}
    else:
        group, smiles, subgroup = "isoparaffins", two_methyl_alkane_smiles(cn), "alkane"
        mm = 14.027 * cn + 2.016
        dens = np.nan
        neat = {p: np.nan for p in PROPERTIES}
    if pd.isna(neat["ron"]) or pd.isna(neat["mon"]):
        if not smiles:
            raise LibraryError(f"component {key!r} has no measured RON/MON and no SMILES to "
                               "estimate it from; add either to the library")
        if not estimators:
            estimators.update(neat_estimators(components))
    r_, m_, r_est, m_est = estimate_neat_pair(group, smiles, neat["ron"], neat["mon"],
                                              estimators)
    values = {"ron": (float(r_), bool(r_est)), "mon": (float(m_), bool(m_est))}
    entry = {"group": group, "class": blending_class(group, smiles, subgroup), "mm": mm,
             "dens": dens, "values": values, "structure": structure_category(group, smiles)}
    table[ckey] = entry
    return entry


def _missing(value: Any) -> bool:
    """``pd.isna`` for one scalar (None, NaN, pd.NA), without its per-call overhead."""
    if value is None or value is pd.NA:
        return True
    if isinstance(value, float):        # numpy float64 is a float
        return value != value
    return bool(pd.isna(value)) if not isinstance(value, (int, str)) else False


def model_inputs(composition: pd.DataFrame, components: pd.DataFrame) -> pd.DataFrame:
    """One row per composition row with what the models need.

    Columns: ``name``, ``vol_frac`` [-], ``molar_volume_cm3_mol``, ``class``, ``group``,
    ``ron``, ``mon`` (neat values), ``ron_estimated``, ``mon_estimated`` (bool).
    Rows are looked up by ``model_component`` (else ``component``/``name``); an unknown name
    is treated as the 2-methylalkane of the row's carbon number with estimated values.
    """
    if "vol_pct" not in composition:
        raise LibraryError("composition table has no vol_pct column; run the quantify stage")
    n = len(composition)

    def column(name: str) -> list:
        return composition[name].tolist() if name in composition else [None] * n

    estimators: dict[str, NeatEstimator] = {}
    index = components.index
    keys_by_col = [column(c) for c in ("model_component", "component", "name")]
    names, carbon = column("name"), column("carbon_number")
    row_mm, row_dens = column("molar_mass_g_mol"), column("density_kg_m3")
    vol_pct = composition["vol_pct"].tolist()
    # column by column (not row dicts): the same values, without a dict per row
    cols: dict[str, list] = {c: [] for c in ("name", "vol_frac", "molar_volume_cm3_mol",
                                             "group", "class", "structure")}
    for p in PROPERTIES:
        cols[p], cols[f"{p}_estimated"] = [], []
    known: dict[str, bool] = {}
    for i in range(n):
        key = None
        for candidates in keys_by_col:
            v = candidates[i]
            if isinstance(v, str):
                hit = known.get(v)
                if hit is None:
                    hit = known[v] = v in index
                if hit:
                    key = v
                    break
        cn = carbon[i]
        if key is None and not _missing(cn):
            # unidentified: the 2-methylalkane of its carbon number, if the library has it
            key = two_methyl_alkane_name(int(cn))
            key = key if key in index else None
        if key is None:
            cn = int(cn) if not _missing(cn) else 7
        else:
            cn = None
        entry = _component_inputs(components, key, cn, estimators)
        mm, dens = entry["mm"], entry["dens"]
        mm = row_mm[i] if _missing(mm) else mm
        dens = row_dens[i] if _missing(dens) else dens
        if _missing(dens) or _missing(mm):
            # molar volume only matters for oxygenate weights; a typical petrol value
            vm = _DEFAULT_BASE_MOLAR_VOLUME_CM3_MOL
        else:
            vm = float(mm) / float(dens) * 1000.0
        cols["name"].append(key or names[i])
        cols["vol_frac"].append(float(vol_pct[i]) / 100.0)
        cols["molar_volume_cm3_mol"].append(vm)
        cols["group"].append(entry["group"])
        cols["class"].append(entry["class"])
        cols["structure"].append(entry["structure"])
        for p in PROPERTIES:
            value, estimated = entry["values"][p]
            cols[p].append(value)
            cols[f"{p}_estimated"].append(estimated)
    if n == 0:
        return pd.DataFrame()
    return pd.DataFrame(cols)


def _group_vol_frac(inputs: pd.DataFrame) -> dict[str, float]:
    total = inputs["vol_frac"].sum()
    out = {}
    for g in CALIBRATION_TERMS["groups"][1:]:
        out[g] = float(inputs.loc[inputs["group"] == g, "vol_frac"].sum() / total)
    return out


def predict_many(inputs: pd.DataFrame, vol_frac: np.ndarray, model: str,
                 params: dict[str, Any] | None = None) -> dict[str, np.ndarray]:
    """RON and MON for many volume-fraction vectors (rows of ``vol_frac``) of the components of
    ``inputs`` (:func:`model_inputs`), uncalibrated, in one vectorised call; a 1-D
    ``vol_frac`` gives floats. Row i equals :func:`predict_inputs` with ``vol_frac`` row i."""
    p = params if params is not None else load_params()
    out = {}
    cats = inputs["structure"].tolist() if "structure" in inputs else None
    vm = inputs["molar_volume_cm3_mol"].to_numpy()
    cls = inputs["class"].tolist()
    for prop in PROPERTIES:
        mp = model_params(model, prop, p)
        if mp.get("mode") == "mon_plus_sensitivity":
            out[prop] = blend_ron(vol_frac, inputs["ron"].to_numpy(), inputs["mon"].to_numpy(),
                                  vm, cls, mp, categories=cats)
        else:
            out[prop] = blend(vol_frac, inputs[prop].to_numpy(), vm, cls, model, mp,
                              categories=cats)
    return out


def predict_inputs(inputs: pd.DataFrame, model: str, params: dict[str, Any] | None = None
                   ) -> dict[str, float]:
    """RON and MON of one sample from :func:`model_inputs` (uncalibrated)."""
    return {k: float(v) for k, v in
            predict_many(inputs, inputs["vol_frac"].to_numpy(), model, params).items()}


def compute(composition: pd.DataFrame, library, settings: dict[str, Any]) -> PropertyResult:
    """RON, MON, AKI and sensitivity of a sample, with uncertainties.

    Parameters
    ----------
    composition : DataFrame
        Composition table (DEVELOPERS.md): ``vol_pct`` and ``model_component`` are used.
    library : Library
        Component library (``components`` indexed by name: group, subgroup, smiles,
        molar_mass_g_mol, density_15c_kg_m3, ron, mon).
    settings : dict
        Full settings; reads ``settings["octane"]["model"]`` and ``["calibration"]``.

    Returns
    -------
    PropertyResult
        values ``ron``, ``mon``, ``aki`` = (RON + MON)/2, ``sensitivity`` = RON - MON;
        uncertainty = the model's cross-validated RMSE on held-out mixture families (or the
        calibration's leave-one-out RMSE), widened by the volume share on estimated neat
        values times the estimator's leave-one-out RMSE (added in quadrature). AKI and
        sensitivity uncertainties assume independent RON and MON errors.
    """
    cfg = settings.get("octane", {}) if settings else {}
    model = cfg.get("model", "interaction")
    cal_path = cfg.get("calibration", "") or ""
    if model not in MODEL_NAMES:
        raise SettingsError(f"[octane] model = {model!r} is not known; use one of "
                            f"{', '.join(MODEL_NAMES)}")
    result = PropertyResult()
    comps = library.components
    if composition is None or len(composition) == 0 or composition["vol_pct"].fillna(0).sum() <= 0:
        for key in ("ron", "mon", "aki", "sensitivity"):
            result.values[key] = None
            result.uncertainty[key] = None
        result.warnings.append("octane: empty composition; no octane number computed")
        return result
    comp = composition[composition["vol_pct"].fillna(0) > 0]
    inputs = model_inputs(comp, comps)
    params = load_params()
    values = predict_inputs(inputs, model, params)
    mp = params.get("models", {}).get(model, {})
    unc = {p: float(mp.get(p, {}).get("cv_rmse", float("nan"))) for p in PROPERTIES}
    total = inputs["vol_frac"].sum()
    est = neat_estimators(comps)
    shares = {}
    for p in PROPERTIES:
        share = float(inputs.loc[inputs[f"{p}_estimated"], "vol_frac"].sum() / total)
        shares[p] = 100.0 * share
        unc[p] = math.hypot(unc[p], share * est[p].loo_rmse)
        if shares[p] > ESTIMATED_SHARE_WARN_PCT:
            result.warnings.append(
                f"octane: {shares[p]:.1f} % v/v of the sample rests on estimated neat "
                f"{p.upper()} values (no measured value in the library); the {p.upper()} is "
                "less certain")
    # the model's domain: composition near a real fuel of the validation, known oxygenates
    dom = params.get("domain", {})
    out_of_domain = []
    if dom.get("real_fuel_class_fractions"):
        frac = class_volume_fractions(inputs["vol_frac"].to_numpy(), list(inputs["class"]))
        dist = domain_distance(frac, np.array(dom["real_fuel_class_fractions"]))
        if dist > float(dom.get("max_distance", 2.0)):
            nearest = ", ".join(f"{k} {100 * v:.0f}" for k, v in zip(DOMAIN_CLASSES, frac))
            out_of_domain.append(
                f"its make-up ({nearest} % v/v) is far from every real petrol the model was "
                f"checked on (distance {dist:.2f}, checked up to {dom['max_distance']:.2f})")
    checked = set(dom.get("oxygenates_checked", []))
    if checked:
        oxy = inputs[inputs["class"].isin(OXYGENATE_CLASSES)]
        oxy = oxy.groupby("name")["vol_frac"].sum() / total * 100.0
        unusual = oxy[(oxy >= UNUSUAL_OXYGENATE_PCT) & ~oxy.index.isin(list(checked))]
        if len(unusual):
            out_of_domain.append(
                "it holds " + ", ".join(f"{v:.1f} % v/v {n}" for n, v in unusual.items())
                + ", an oxygenate the model was not checked on")
    if out_of_domain:
        for p in PROPERTIES:
            unc[p] *= OUT_OF_DOMAIN_FACTOR
        result.warnings.append(
            "octane: the sample lies outside what the octane model was checked on: "
            + "; ".join(out_of_domain) + f". RON and MON are rough estimates; their stated "
            f"uncertainty is doubled. Have them rated on the engine.")
    ron_unchecked = ron_unchecked_share(inputs, dom.get("ron_sensitivity_checked"))
    if ron_unchecked > RON_UNCHECKED_SHARE_PCT:
        if not out_of_domain:
            unc["ron"] *= OUT_OF_DOMAIN_FACTOR
        result.warnings.append(
            f"octane: {ron_unchecked:.1f} % v/v of the sample is aromatics and olefins whose "
            "effect on RON no measured RON has checked (the RON data hold only toluene, "
            "1-hexene and diisobutylene blends); the RON may be several numbers off, more "
            "likely too low than too high, and its stated uncertainty is doubled. The MON is "
            "the better-grounded figure; have the RON rated on the engine.")
    calibrated = None
    if cal_path:
        cal = load_calibration(cal_path, model)
        gv = _group_vol_frac(inputs)
        for p in PROPERTIES:
            entry = cal.get("properties", {}).get(p)
            if entry:
                values[p] = apply_calibration(values[p], entry, cal["kind"], gv)
                unc[p] = math.hypot(entry["loo_rmse"], shares[p] / 100 * est[p].loo_rmse)
        calibrated = {"file": str(cal_path), "kind": cal["kind"], "date": cal.get("date"),
                      "properties": sorted(cal.get("properties", {}))}
    ron, mon = values["ron"], values["mon"]
    result.values.update({"ron": ron, "mon": mon, "aki": (ron + mon) / 2.0,
                          "sensitivity": ron - mon})
    result.uncertainty.update({
        "ron": unc["ron"], "mon": unc["mon"],
        "aki": 0.5 * math.hypot(unc["ron"], unc["mon"]),
        "sensitivity": math.hypot(unc["ron"], unc["mon"])})
    if ron > 120 or mon > 120 or ron < -20 or mon < -20:
        result.warnings.append(f"octane: RON {ron:.1f} / MON {mon:.1f} lie far outside the "
                               "range the models were checked on")
    estimated = inputs.loc[inputs["ron_estimated"] | inputs["mon_estimated"]]
    result.details.update({
        "octane_model": model,
        "octane_params_fitted": params.get("fitted"),
        "octane_estimated_share_vol_pct": shares,
        "octane_estimated_components": sorted(set(map(str, estimated["name"]))),
        "octane_neat_estimator_loo_rmse": {p: est[p].loo_rmse for p in PROPERTIES},
        "octane_calibration": calibrated,
        "octane_out_of_domain": out_of_domain,
        "octane_ron_unchecked_share_vol_pct": ron_unchecked,
        "octane_uncertainty_basis": ("calibration leave-one-out RMSE" if calibrated else
                                     "MON: held-out RMSE on 40 real gasolines (each base fuel "
                                     "with its blends left out of the fit in turn); RON: that "
                                     "combined with the held-out RON RMSE on 15 surrogate "
                                     "blends (no real petrol with a measured RON in the data)"),
    })
    return result
