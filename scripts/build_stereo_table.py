"""Write component_library/stereo_unspecified.csv: names and CAS numbers without cis/trans.

Maintainer script, never used at run time. For every library component whose name carries a
cis/trans (E/Z) descriptor, the SMILES without stereo (RDKit, canonical) groups it with its
isomers. Each group becomes one row: the name without the descriptor, the SMILES without
stereo, the isomers, equal shares (blank ``shares``; a lab sets its own in an overlay or in
``[quantify] stereo_shares``) and the CAS number of the stereo-unspecified compound.

CAS rule: the PubChem compound in the identifier tables of the ``chemicals`` package
(version in ``references.toml``) whose SMILES has no stereo and the same structure; its CAS
number if no library component holds it and no stereo-specific compound of those tables has it
as its main CAS number, else the first CAS-number synonym passing the same test. Where those
tables attach the unspecified number to one isomer (PubChem merges some), the number is
given in ``FROM_MEMORY``; a CAS number also listed by a stereo-specific compound
is not taken. Without a number passing the test the cell stays blank (names still match) and marked ``from-memory``.

    python scripts/build_stereo_table.py          # rewrite the file
    python scripts/build_stereo_table.py --check  # exit 1 if the file is not current
"""
from __future__ import annotations

import csv
import io
import os
import re
import sys
from pathlib import Path

from rdkit import Chem, RDLogger

import chemicals

from dha.library import STEREO_COLUMNS, load_library, normalise_key, split_synonyms

RDLogger.DisableLog("rdApp.*")

OUT = Path(__file__).resolve().parents[1] / "component_library" / "stereo_unspecified.csv"
SOURCE = "chemicals-1.5.2:identifiers"
#: Stereo-unspecified CAS numbers the identifier tables attach to one isomer (from memory).
FROM_MEMORY = {
    "2-butene": "107-01-7",
    "2-pentene": "109-68-2",
    "2-heptene": "592-77-8",
    "3-heptene": "592-78-9",
    "3-octene": "592-98-3",
    "4-octene": "592-99-4",
    "2-hexene": "592-43-8",
    "1,4-dimethylcyclohexane": "589-90-2",
    "1,3-pentadiene": "504-60-9",
    "decahydronaphthalene": "91-17-8",
}
_CAS = re.compile(r"\d{2,7}-\d\d-\d")
_DESCRIPTOR = re.compile(r"^(?:(?:cis|trans)(?:,(?:cis|trans))*|\((?:e|z)\))-", re.I)


def _plain(smiles: str) -> str:
    mol = Chem.MolFromSmiles(smiles)
    Chem.RemoveStereochemistry(mol)
    return Chem.MolToSmiles(mol)


def _has_stereo(smiles: str) -> bool:
    return any(ch in smiles for ch in "/\\@")


def build() -> str:
    lib = load_library()
    comps = lib.components
    taken = lib.lookup_table()
    groups: dict[str, list[str]] = {}
    for name, smi in comps["smiles"].items():
        if _DESCRIPTOR.match(name) and smi:
            groups.setdefault(_plain(smi), []).append(name)
    formulas = {comps.at[n, "formula"] for v in groups.values() for n in v}
    folder = Path(os.path.dirname(chemicals.__file__)) / "Identifiers"
    plain_rows: dict[str, list[list[str]]] = {k: [] for k in groups}
    stereo_cas: set[str] = set()
    for fn in ("chemical identifiers pubchem small.tsv", "chemical identifiers pubchem large.tsv"):
        with open(folder / fn, encoding="utf-8") as fh:
            for line in fh:
                p = line.rstrip("\n").split("\t")
                if len(p) < 9 or p[2] not in formulas:
                    continue
                if _has_stereo(p[4]):
                    stereo_cas.update([p[1]] + [c for c in p[9:] if _CAS.fullmatch(c)])
                    continue
                try:
                    key = _plain(p[4])
                except Exception:  # noqa: BLE001 - an unreadable SMILES is not ours
                    continue
                if key in plain_rows:
                    plain_rows[key].append(p)
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(STEREO_COLUMNS)
    rows = []
    for key, isomers in groups.items():
        names = {_DESCRIPTOR.sub("", n) for n in isomers}
        if len(names) != 1:
            print(f"skipped {isomers}: names differ without descriptor", file=sys.stderr)
            continue
        name = names.pop()
        if normalise_key(name) in taken:
            continue  # the library holds the unspecified compound itself
        cas, source, synonyms = "", "", []
        for p in plain_rows[key]:
            for cand in [p[1]] + [c for c in p[9:] if _CAS.fullmatch(c)]:
                if normalise_key(cand) not in taken and cand not in stereo_cas:
                    cas, source = cand, SOURCE
                    break
            synonyms += [t for t in p[7:9] if t and not _CAS.fullmatch(t) and normalise_key(t) != normalise_key(name)
                         and normalise_key(t) not in taken]
            if cas:
                break
        if name in FROM_MEMORY:
            cas, source = FROM_MEMORY[name], "from-memory"
        if not source:
            source = SOURCE if plain_rows[key] else "from-memory"
        syn = ";".join(dict.fromkeys(s for s in synonyms if not _DESCRIPTOR.match(s)))
        order = sorted(isomers, key=lambda n: (not n.startswith("cis"), n))
        note = ("the library holds only this isomer" if len(isomers) == 1
                else "equal shares unless the lab sets its own")
        rows.append([name, syn, cas, key, ";".join(order), "", source, "common-practice", note])
    for r in sorted(rows, key=lambda r: (len(r[3]), r[0])):
        w.writerow(r)
    return out.getvalue()


def main(argv: list[str]) -> int:
    text = build()
    if "--check" in argv:
        current = OUT.read_text(encoding="utf-8") if OUT.exists() else ""
        print("current" if current == text else f"{OUT.name} is not current; rerun the script")
        return 0 if current == text else 1
    OUT.write_text(text, encoding="utf-8")
    print(f"wrote {OUT} ({text.count(chr(10)) - 1} rows)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
