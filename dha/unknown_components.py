"""What a composition table's unknown component probably is: carbon number and group.

A composition table (LIMS export, literature data) may name components the library lacks.
They are kept as unidentified rows (``dha.quantify.quantify_composition``); this module reads
what it can from the text:

- :func:`guess_from_name`: a systematic name of an alkane, alkene, cycloalkane, alkylbenzene
  (also toluene, xylene, indane, indene, naphthalene parents), alcohol or ether, also inverted
  index names (``"Benzene, 1-butyl-2-methyl-"``);
- :func:`guess_from_smiles`: a SMILES given in place of a name (literature data sets);
- :func:`guess_from_formula`: a Hill formula (``C11H24``; oxygen makes an oxygenate, CnH2n+2 a
  paraffin, CnH2n-6 and below with n >= 6 an aromatic; CnH2n alone stays unknown: olefin or
  naphthene);
- :func:`cas_suggestions`: for a CAS number that is not the library's, whether its check digit
  is right and which library CAS numbers are one or two digit edits away.

The rules are plain nomenclature (IUPAC names of hydrocarbons), no fitted numbers.
"""
from __future__ import annotations

import re
from typing import Any, NamedTuple

#: Carbon count of the parent chain stems (IUPAC numerical roots).
_STEMS = {
    "meth": 1, "eth": 2, "prop": 3, "but": 4, "pent": 5, "hex": 6, "hept": 7, "oct": 8,
    "non": 9, "dec": 10, "undec": 11, "dodec": 12, "tridec": 13, "tetradec": 14,
    "pentadec": 15,
}
_MULT = {"": 1, "di": 2, "tri": 3, "tetra": 4, "penta": 5, "hexa": 6, "hepta": 7, "octa": 8,
         "nona": 9, "deca": 10}
#: Substituent prefixes -> carbons (``vinyl`` and ``allyl`` carry a double bond).
_SUBST = {
    "methyl": 1, "ethyl": 2, "propyl": 3, "isopropyl": 3, "butyl": 4, "isobutyl": 4,
    "pentyl": 5, "isopentyl": 5, "amyl": 5, "hexyl": 6, "heptyl": 7, "octyl": 8,
    "vinyl": 2, "ethenyl": 2, "allyl": 3, "methylene": 1, "methylidene": 1, "ethylidene": 2,
    "phenyl": 6, "hydro": 0,
}
_UNSATURATED_SUBST = {"vinyl", "ethenyl", "allyl", "methylene", "methylidene", "ethylidene"}
#: Aromatic parents -> carbons.
_AROMATIC = {
    "benzene": 6, "toluene": 7, "xylene": 8, "cumene": 9, "mesitylene": 9, "cymene": 10,
    "durene": 10, "styrene": 8, "indane": 9, "indan": 9, "indene": 9, "naphthalene": 10,
    "tetralin": 10, "biphenyl": 12,
}
_SUBST_RE = re.compile(r"(di|tri|tetra|penta|hexa|hepta|octa|nona|deca)?(" + "|".join(
    sorted(_SUBST, key=len, reverse=True)) + ")")
_CHAIN_RE = re.compile(
    r"^(?P<prefix>.*?)(?P<cyclo>cyclo)?(?P<stem>" + "|".join(sorted(_STEMS, key=len, reverse=True))
    + r")(?P<suffix>ane|an|adiene|adien|diene|dien|ene|en|yne|yn)(?P<ol>ol|diol)?$")
_AROM_RE = re.compile(r"^(?P<prefix>.*?)(?P<parent>" + "|".join(
    sorted(_AROMATIC, key=len, reverse=True)) + r")$")
_ETHER_RE = re.compile(r"^(?P<prefix>.+?)ether$")
_HILL_RE = re.compile(r"^(?:([A-Z][a-z]?)(\d*))+$")


class Guess(NamedTuple):
    """Carbon number and group (the result's group keys) read from a name or formula."""

    carbon_number: int | None
    group: str | None
    how: str


def _normalise(text: str) -> str:
    s = str(text).strip().lower()
    m = re.match(r"^([^,]+),\s*(.+?)-?$", s)          # "benzene, 1-butyl-2-methyl-"
    if m and re.search(r"[a-z]{3}", m.group(1)) and re.search(r"[a-z]", m.group(2)):
        s = f"{m.group(2)}-{m.group(1)}"
    s = re.sub(r"\((?:[ezrs]|\d+[ezrs])(?:,\s*(?:\d+)?[ezrs])*\)", "", s)  # (E), (2Z), (R,S)
    s = re.sub(r"\b(?:cis|trans|sec|tert|t|n|normal|gem|o|m|p|ortho|meta|para)\b-?", "", s)
    s = re.sub(r"\b\d+a?h\b-?", "", s)                # 1h-indene
    s = s.replace("alcohol", "ol")
    return re.sub(r"[^a-z]", "", s)


def _prefix_carbons(prefix: str) -> tuple[int, bool, bool] | None:
    """(carbons, has substituents, unsaturated substituent) of a prefix, or None."""
    pos, carbons, unsat, any_sub = 0, 0, False, False
    while pos < len(prefix):
        m = _SUBST_RE.match(prefix, pos)
        if not m:
            return None
        mult, sub = _MULT[m.group(1) or ""], m.group(2)
        carbons += mult * _SUBST[sub]
        any_sub |= sub != "hydro"
        unsat |= sub in _UNSATURATED_SUBST
        pos = m.end()
    return carbons, any_sub, unsat


def guess_from_name(text: Any) -> Guess:
    """Carbon number and group from a systematic name; ``Guess(None, None, ...)`` if unclear.

    >>> guess_from_name("2,2,6-trimethyloctane")
    Guess(carbon_number=11, group='isoparaffins', how='name')
    >>> guess_from_name("Benzene, 1-butyl-2-methyl-").group
    'aromatics'
    >>> guess_from_name("3-methyl-2-buten-1-ol")
    Guess(carbon_number=5, group='oxygenates', how='name')
    """
    if text is None or not str(text).strip():
        return Guess(None, None, "")
    s = _normalise(str(text))
    if not s:
        return Guess(None, None, "")
    m = _ETHER_RE.match(s)
    if m:
        pre = _prefix_carbons(m.group("prefix"))
        if pre and pre[0] > 0:
            return Guess(pre[0], "oxygenates", "name")
        return Guess(None, None, "")
    m = _AROM_RE.match(re.sub(r"^iso(?=durene)", "", s))
    if m:
        pre = _prefix_carbons(m.group("prefix"))
        if pre is None:
            return Guess(None, None, "")
        parent = m.group("parent")
        if parent == "naphthalene" and "hydro" in m.group("prefix"):
            # decahydro- is a naphthene, tetrahydro- (tetralin) an aromatic
            group = "naphthenes" if re.search(r"(octa|deca)hydro", m.group("prefix")) \
                else "aromatics"
            return Guess(_AROMATIC[parent] + pre[0], group, "name")
        return Guess(_AROMATIC[parent] + pre[0], "aromatics", "name")
    m = re.match(r"^iso(but|pent|hex|hept|oct|non|dec)ane$", s)   # isopentane: C5, branched
    if m:
        return Guess(_STEMS[m.group(1)], "isoparaffins", "name")
    m = _CHAIN_RE.match(s)
    if not m:
        return Guess(None, None, "")
    pre = _prefix_carbons(m.group("prefix"))
    if pre is None:
        return Guess(None, None, "")
    carbons = _STEMS[m.group("stem")] + pre[0]
    suffix, cyclo = m.group("suffix"), bool(m.group("cyclo"))
    if m.group("ol"):
        group = "oxygenates"
    elif suffix.startswith(("en", "yn", "adien", "dien")) or pre[2]:
        group = "olefins"
    elif cyclo:
        group = "naphthenes"
    elif not pre[1]:
        group = "n_paraffins"
    else:
        group = "isoparaffins"
    return Guess(carbons, group, "name")


def guess_from_formula(formula: Any) -> Guess:
    """Carbon number and group from a Hill formula (``C8H18``, ``C5H10O``).

    >>> guess_from_formula("C11H24")
    Guess(carbon_number=11, group='isoparaffins', how='formula')
    >>> guess_from_formula("C8H16").group is None
    True
    """
    text = str(formula or "").strip().replace(" ", "")
    if not text or not _HILL_RE.match(text):
        return Guess(None, None, "")
    atoms: dict[str, int] = {}
    for el, n in re.findall(r"([A-Z][a-z]?)(\d*)", text):
        atoms[el] = atoms.get(el, 0) + (int(n) if n else 1)
    c, h = atoms.get("C", 0), atoms.get("H", 0)
    if c < 1 or set(atoms) - {"C", "H", "O"}:
        return Guess(c or None, None, "formula")
    if atoms.get("O"):
        return Guess(c, "oxygenates", "formula")
    if h == 2 * c + 2:
        # every n-alkane of petrol is in the library: an unknown paraffin is branched
        return Guess(c, "isoparaffins", "formula")
    if c >= 6 and h <= 2 * c - 6:
        return Guess(c, "aromatics", "formula")
    return Guess(c, None, "formula")


_SMILES_RE = re.compile(r"^[CcOo0-9=#()\[\]@+\-/\\%.H]+$")


def guess_from_smiles(text: Any) -> Guess:
    """Carbon number and group from a SMILES written where a name was expected (C/H/O only).

    Carbons: ``C`` (not ``Cl``) and aromatic ``c``; oxygen makes an oxygenate, an aromatic
    atom an aromatic, a double bond an olefin, a ring digit a naphthene, a branch ``(`` an
    isoparaffin, else an n-paraffin (SMILES grammar, OpenSMILES specification).

    >>> guess_from_smiles("CCC(C)CC(CC)CC")
    Guess(carbon_number=10, group='isoparaffins', how='SMILES')
    >>> guess_from_smiles("CCc1c(C)c(C)cc(C)c1C").group
    'aromatics'
    """
    s = str(text or "").strip()
    outside = re.sub(r"\[[^\]]*\]", "", s)
    if not s or not _SMILES_RE.match(s) or re.search(r"[^CcOo0-9=#()\[\]@+\-/\\%.H]", s) \
            or "H" in outside or not re.search(r"[Cc]", s):
        return Guess(None, None, "")
    carbons = len(re.findall(r"C(?!l)|c", s))
    if re.search(r"[Oo]", s):
        group = "oxygenates"
    elif "c" in s:
        group = "aromatics"
    elif "=" in s or "#" in s:
        group = "olefins"
    elif re.search(r"[A-Za-z\]]\d", s):
        group = "naphthenes"
    elif "(" in s:
        group = "isoparaffins"
    else:
        group = "n_paraffins"
    return Guess(carbons, group, "SMILES")


def _cas_ok(digits: str) -> bool:
    body = digits[:-1][::-1]
    return sum((i + 1) * int(d) for i, d in enumerate(body)) % 10 == int(digits[-1])


def _edit_distance(a: str, b: str, limit: int) -> int:
    """Levenshtein distance, stopped early above ``limit``."""
    if abs(len(a) - len(b)) > limit:
        return limit + 1
    prev = list(range(len(b) + 1))
    for i, ca in enumerate(a, 1):
        cur = [i] + [0] * len(b)
        for j, cb in enumerate(b, 1):
            cur[j] = min(prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (ca != cb))
        if min(cur) > limit:
            return limit + 1
        prev = cur
    return prev[-1]


def looks_like_cas(text: Any) -> bool:
    """True for ``NNNNNNN-NN-N`` (2-7 digits first), check digit not verified."""
    return bool(re.fullmatch(r"\d{2,7}-\d{2}-\d", str(text or "").strip()))


def cas_suggestions(text: str, cas_numbers, n: int = 3) -> tuple[str, list[str]]:
    """(note on the check digit, up to ``n`` library CAS numbers within two digit edits).

    ``cas_numbers``: the library's CAS numbers (and stereo-unspecified ones). Closest first,
    then by number.

    >>> cas_suggestions("591-21-8", ["591-21-9", "71-43-2"])
    ('check digit wrong (591-21-8 should end in 9)', ['591-21-9'])
    """
    text = str(text).strip()
    digits = re.sub(r"\D", "", text)
    note = ""
    if len(digits) >= 5:
        if _cas_ok(digits):
            note = "valid check digit, not a library CAS number"
        else:
            body = digits[:-1][::-1]
            right = sum((i + 1) * int(d) for i, d in enumerate(body)) % 10
            note = f"check digit wrong ({text} should end in {right})"
    scored = []
    for cas in dict.fromkeys(c for c in cas_numbers if c):
        d = _edit_distance(digits, re.sub(r"\D", "", str(cas)), 2)
        if d <= 2:
            scored.append((d, str(cas)))
    scored.sort(key=lambda t: (t[0], t[1]))
    return note, [c for _, c in scored[:n]]
