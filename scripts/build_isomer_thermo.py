"""Write dha/levers_data/isomer_thermo.csv: ideal-gas thermochemistry of the C4-C7 alkanes.

Maintainer script (not used at run time). Values are read from the ``chemicals`` package
(Caleb Bell and contributors, MIT licence), version printed into the file's PROVENANCE:

- enthalpy of formation and absolute entropy of the ideal gas at 298.15 K and 1 bar:
  ``chemicals.reaction.Hfg(cas, method="YAWS")`` and ``S0g(cas, method="YAWS")``, from
  Yaws, C. L., *Thermophysical Properties of Chemicals and Hydrocarbons*, 2nd ed. (2014);
- ideal-gas heat capacity: the TRC polynomial coefficients
  ``chemicals.heat_capacity.TRC_gas_data`` (Kabo, Roganov, Frenkel et al., TRC Thermodynamic
  Tables, as compiled in chemicals), used with the TRC equation (``TRCCp``).

Run: ``python scripts/build_isomer_thermo.py`` (needs ``pip install chemicals``).
"""
from __future__ import annotations

from pathlib import Path

import chemicals
import pandas as pd
from chemicals import heat_capacity, reaction

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "dha" / "levers_data" / "isomer_thermo.csv"
COEFS = ("a0", "a1", "a2", "a3", "a4", "a5", "a6", "a7")


def main() -> None:
    lib = pd.read_csv(ROOT / "component_library" / "components.csv")
    alk = lib[lib["group"].isin(["n_paraffins", "isoparaffins"])
              & lib["carbon_number"].between(4, 7)
              & ~lib["smiles"].str.contains("=|#|1", regex=True)]
    rows = []
    for _, r in alk.sort_values(["carbon_number", "name"]).iterrows():
        cas = r["cas"]
        trc = heat_capacity.TRC_gas_data
        if cas not in trc.index or "YAWS" not in reaction.S0g_methods(cas):
            print(f"skipped {r['name']}: no data")
            continue
        c = trc.loc[cas]
        rows.append({"name": r["name"], "cas": cas, "carbon_number": int(r["carbon_number"]),
                     "hf298_gas_j_mol": reaction.Hfg(cas, method="YAWS"),
                     "s298_gas_j_mol_k": reaction.S0g(cas, method="YAWS"),
                     **{f"trc_{k}": float(c[k]) for k in COEFS},
                     "trc_tmin_k": float(c["Tmin"]), "trc_tmax_k": float(c["Tmax"]),
                     "source": f"chemicals-{chemicals.__version__}:Hfg,S0g:YAWS;Cpg:TRC"})
    OUT.parent.mkdir(parents=True, exist_ok=True)
    pd.DataFrame(rows).to_csv(OUT, index=False, float_format="%.10g")
    print(f"wrote {OUT} ({len(rows)} rows)")


if __name__ == "__main__":
    main()
