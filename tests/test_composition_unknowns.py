"""Composition tables with components outside the library, and names without cis/trans.

Outside sources:
- 40 real gasoline-like fuels with detailed mole-fraction compositions by CAS number:
  Kuzhagaliyeva et al., Commun. Chem. 5, 111 (2022), CC BY 4.0 (copied unchanged to
  ``dha/properties/octane_data/gasolines_mon_training.csv``); their SMILES give the carbon
  numbers and classes the name reader is checked against (RDKit counts the atoms);
- the CAS check-digit rule (CAS Registry: weighted digit sum modulo 10);
- the ``chemicals`` package's identifier tables for the CAS numbers of the stereo table.
"""
from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

import dha
from dha.cli import cli
from dha.fuel_data import write_composition_tables
from dha.identify import identify, match_stereo
from dha.library import check_library, load_library
from dha.quantify import quantify_composition
from dha.settings import default_settings
from dha.unknown_components import cas_suggestions, guess_from_formula, guess_from_name

FUELS = Path(dha.__file__).parent / "properties" / "octane_data" / "gasolines_mon_training.csv"


@pytest.fixture(scope="module")
def lib():
    return load_library()


@pytest.fixture(scope="module")
def fuels():
    return pd.read_csv(FUELS)


#: one fuel per kind (alkylate, aromatic certification fuel, research gasolines neat and with
#: ethanol, blendstock neat, with prenol, with ethanol and prenol, with isoprenol); all 40
#: go through ``dha report`` in benchmarks/real_fuels_composition.py
SAMPLE = ("KUZ-0367", "KUZ-0668", "KUZ-0628", "KUZ-0376", "KUZ-0689", "KUZ-0380", "KUZ-0701",
          "KUZ-0390")


def test_forty_real_fuels_by_cas_all_quantified(fuels, lib, tmp_path):
    # Kuzhagaliyeva et al. 2022: every one of the 40 fuels as a composition table by CAS number
    from dha.reader import read_input
    paths = write_composition_tables(tmp_path, fuels)
    assert len(paths) == 40
    s = default_settings()
    for path in paths:
        run = read_input(path, s)[0]
        q = quantify_composition(run.table, run.basis, lib, s, source=path.name)
        mb = q.mass_balance
        assert mb["closes"] and mb["rows"]["total"] == len(fuels[fuels.mixture_id == path.stem])
        assert q.table["mol_pct"].sum() == pytest.approx(100.0)
        assert sum(mb["amount_share_pct"].values()) == pytest.approx(100.0)
        if mb["rows"]["not_in_library"]:
            assert any("not in the library" in w for w in q.warnings)
            assert mb["not_in_library_pct"]["mol_pct"] > 0


def test_real_fuels_through_dha_report_exit_0(fuels, tmp_path):
    paths = [p for p in write_composition_tables(tmp_path, fuels) if p.stem in SAMPLE]
    out = tmp_path / "out"
    r = CliRunner().invoke(cli, ["report", *map(str, paths), "-o", str(out), "--format", "json",
                                 "--spec", ""])
    assert r.exit_code == 0, r.output
    for path in paths:
        data = json.loads((out / f"{path.stem}.json").read_text(encoding="utf-8"))
        mb = data["mass_balance"]
        assert mb["closes"]
        # every amount is in the result: the totals add up to 100 in each basis
        for basis in ("mass_pct", "vol_pct", "mol_pct"):
            assert sum(data["totals"][basis].values()) == pytest.approx(100.0, abs=1e-6)
        if mb["rows"]["stereo_split"]:
            assert any("no cis/trans" in e["reason"] for e in data["import_log"])


def test_name_reader_against_the_fuels_smiles(fuels):
    # the data's SMILES (RDKit) give the carbon number and class of every named component
    from rdkit import Chem
    checked = 0
    for name, smi in fuels.drop_duplicates("component_name")[["component_name", "component"]] \
            .dropna().itertuples(index=False):
        guess = guess_from_name(name)
        if guess.group is None:
            continue
        mol = Chem.MolFromSmiles(smi)
        carbons = sum(1 for a in mol.GetAtoms() if a.GetSymbol() == "C")
        has_o = any(a.GetSymbol() == "O" for a in mol.GetAtoms())
        aromatic = any(a.GetIsAromatic() for a in mol.GetAtoms())
        ring = mol.GetRingInfo().NumRings() > 0
        double = any(b.GetBondTypeAsDouble() == 2 for b in mol.GetBonds())
        expected = ("oxygenates" if has_o else "aromatics" if aromatic else
                    "olefins" if double else "naphthenes" if ring else None)
        assert guess.carbon_number == carbons, name
        if expected:
            assert guess.group == expected, name
        else:
            assert guess.group in ("n_paraffins", "isoparaffins"), name
        checked += 1
    assert checked >= 90


def test_formula_reader():
    # Hill formulas: C11H24 is a paraffin, C9H12 an alkylbenzene, C5H10O an oxygenate
    assert guess_from_formula("C11H24") == (11, "isoparaffins", "formula")
    assert guess_from_formula("C9H12").group == "aromatics"
    assert guess_from_formula("C5H10O").group == "oxygenates"
    assert guess_from_formula("C8H16").group is None and guess_from_formula("C8H16")[0] == 8


def test_unknown_component_kept_and_named_in_the_log(lib):
    # issue 12's example (1,3-dimethylcyclohexane without cis/trans, CAS 591-21-9) with a C11
    # isoparaffin the library lacks at 0.01 mol %: 2,4,7-trimethyloctane (C11H24, IUPAC name;
    # issue 12's 2,2,6-trimethyloctane is in the library since version 2026.12.3)
    table = pd.DataFrame({"row": [2, 3, 4, 5],
                          "component": ["2,2,4-trimethylpentane", "n-heptane",
                                        "2,4,7-trimethyloctane", "591-21-9"],
                          "amount": [60.0, 29.99, 0.01, 10.0]})
    q = quantify_composition(table, "mol_pct", lib, default_settings(), source="fuel.csv")
    assert "2,4,7-trimethyloctane" not in lib.components.index
    t = q.table.set_index("name")
    row = t.loc["2,4,7-trimethyloctane"]
    assert row["match"] == "unidentified" and row["group"] == "isoparaffins"
    assert row["carbon_number"] == 11 and row["mol_pct"] == pytest.approx(0.01, rel=1e-6)
    assert t.loc["cis-1,3-dimethylcyclohexane", "mol_pct"] == pytest.approx(5.0)
    assert t.loc["trans-1,3-dimethylcyclohexane", "mol_pct"] == pytest.approx(5.0)
    assert [e["row"] for e in q.import_log] == [5, 4]
    assert q.mass_balance["not_in_library_pct"]["mol_pct"] == pytest.approx(0.01, rel=1e-6)


def test_lab_split_of_a_stereo_unspecified_name(lib):
    s = default_settings()
    s["quantify"]["stereo_shares"] = {"2-hexene": {"cis-2-hexene": 1, "trans-2-hexene": 3}}
    table = pd.DataFrame({"row": [2, 3], "component": ["592-43-8", "toluene"],
                          "amount": [40.0, 60.0]})
    t = quantify_composition(table, "mol_pct", lib, s).table.set_index("name")
    assert t.loc["cis-2-hexene", "mol_pct"] == pytest.approx(10.0)
    assert t.loc["trans-2-hexene", "mol_pct"] == pytest.approx(30.0)


def test_mistyped_cas_suggests_cas_numbers(lib):
    # CAS check digit of 591-21-9: (1*1 + 2*2 + 1*3 + 9*4 + 5*5) mod 10 = 9
    note, close = cas_suggestions("591-21-8", list(lib.components["cas"]) + ["591-21-9"])
    assert "should end in 9" in note and close[0] == "591-21-9"
    table = pd.DataFrame({"row": [2, 3], "component": ["71-43-3", "toluene"],
                          "amount": [1.0, 99.0]})
    q = quantify_composition(table, "mol_pct", lib, default_settings())
    reason = q.import_log[0]["reason"]
    assert "71-43-2 (benzene)" in reason and "should end in 2" in reason


def test_stereo_table_is_checked(lib, tmp_path):
    assert not [p for p in check_library(lib) if "stereo" in p.file]
    (tmp_path / "stereo_unspecified.csv").write_text(
        "name,isomers,shares,identity_source,share_source\n"
        "2-hexene,cis-2-hexene;trans-2-hexen,0.5;x,from-memory,common-practice\n",
        encoding="utf-8")
    (tmp_path / "library.toml").write_text('name = "lab"\nversion = "2026.12.1"\n')
    problems = [p for p in check_library([lib.folders[0], tmp_path]) if "stereo" in p.file]
    assert any(p.column == "isomers" for p in problems)
    assert any(p.column == "shares" for p in problems)


def test_stereo_cas_numbers_agree_with_chemicals(lib):
    # chemicals 1.5.x identifier tables: the CAS number's compound has our SMILES without stereo
    from chemicals.identifiers import search_chemical
    from rdkit import Chem

    def plain(smi):
        mol = Chem.MolFromSmiles(smi)
        Chem.RemoveStereochemistry(mol)
        return Chem.MolToSmiles(mol)

    checked = 0
    for name, row in lib.stereo.iterrows():
        if not row["cas"] or not row["identity_source"].startswith("chemicals"):
            continue
        found = search_chemical(row["cas"])
        assert plain(found.smiles) == plain(row["smiles"]), name
        checked += 1
    assert checked >= 15
    # and the three of issue 13 are there
    for cas in ("591-21-9", "2452-99-5", "592-43-8"):
        assert match_stereo(cas, lib) is not None


def test_peak_named_without_cis_trans_goes_to_the_nearest_isomer(lib):
    comps = lib.components
    cis, trans = (float(comps.at[n, "retention_index"]) for n in
                  ("cis-1,2-dimethylcyclopentane", "trans-1,2-dimethylcyclopentane"))
    peaks = pd.DataFrame({"row": [1, 2], "rt_min": [10.0, 10.5], "area": [100.0, 200.0],
                          "name": ["1,2-dimethylcyclopentane", "Cyclopentane, 1,2-dimethyl-"],
                          "cas": [None, None], "retention_index": [cis + 0.3, trans - 0.2]})
    out = identify(peaks, lib, default_settings())
    assert list(out["component"]) == ["cis-1,2-dimethylcyclopentane",
                                      "trans-1,2-dimethylcyclopentane"]
    assert any("without cis/trans" in w for w in out.attrs["warnings"])


def test_formula_and_cas_columns_of_a_composition_file(lib, tmp_path):
    # a LIMS table with name, CAS and Hill formula: an unknown name with a known CAS number is
    # that component; an unknown compound takes carbon number, group and molar mass from its
    # formula (C11H24: 11 x 12.011 + 24 x 1.008 = 156.313 g/mol, IUPAC 2013 weights)
    from dha.reader import read_input
    path = tmp_path / "lims.csv"
    path.write_text("component,cas,formula,mol_pct\n"
                    "toluene,108-88-3,C7H8,50\n"
                    "C11 branched paraffin,,C11H24,30\n"
                    "methylbenzene (lab name),108-88-3,,10\n"
                    "DMCH,591-21-9,C8H16,10\n", encoding="utf-8")
    run = read_input(path)[0]
    assert list(run.table.columns) == ["row", "component", "amount", "cas", "formula"]
    q = quantify_composition(run.table, run.basis, lib, default_settings())
    t = q.table.set_index("name")
    assert t.loc["toluene", "mol_pct"] == pytest.approx(60.0)
    unk = t.loc["C11 branched paraffin"]
    assert (unk["carbon_number"], unk["group"]) == (11, "isoparaffins")
    assert unk["molar_mass_g_mol"] == pytest.approx(156.313, abs=1e-3)
    assert t.loc["cis-1,3-dimethylcyclohexane", "mol_pct"] == pytest.approx(5.0)
    assert any("108-88-3 is toluene" in e["reason"] for e in q.import_log)


def test_smiles_in_place_of_a_name_against_rdkit(fuels):
    # some rows of the data give only a SMILES; RDKit counts the carbons and finds the class
    from rdkit import Chem

    from dha.unknown_components import guess_from_smiles
    for smi in fuels["component"].dropna().unique():
        mol = Chem.MolFromSmiles(smi)
        guess = guess_from_smiles(smi)
        assert guess.carbon_number == sum(a.GetSymbol() == "C" for a in mol.GetAtoms()), smi
        if any(a.GetSymbol() == "O" for a in mol.GetAtoms()):
            assert guess.group == "oxygenates", smi
        elif any(a.GetIsAromatic() for a in mol.GetAtoms()):
            assert guess.group == "aromatics", smi
    # names and formulas are not SMILES
    for text in ("toluene", "C11H24", "591-21-9", "unknown 7"):
        assert guess_from_smiles(text).carbon_number is None
