"""Write the original-UNIFAC parameter tables of ``component_library/unifac/``.

Maintainer script, never used at run time. It copies the subgroup table (R, Q) and the
main-group interaction parameters a_mn [K] of the original UNIFAC model from the ``thermo``
package (``thermo.unifac.UFSG`` and ``UFIP``), which transcribe the parameter table published by
DDBST for original UNIFAC (Fredenslund et al. 1975, revised and extended by Hansen et al. 1991).

Usage::

    .venv/bin/python scripts/build_unifac_parameters.py

The source (thermo version) is recorded in ``component_library/unifac/README.md``, which this
script rewrites; rerun and commit (bumping the library version) when the parameters change.
"""
from __future__ import annotations

import csv
from pathlib import Path

import thermo
import thermo.unifac as tu

OUT = Path(__file__).resolve().parents[1] / "component_library" / "unifac"
README = """# Original UNIFAC parameters

Written by `scripts/build_unifac_parameters.py` from thermo {version} (MIT licence):
`thermo.unifac.UFSG` (subgroups: id, main group, R, Q) and `thermo.unifac.UFIP` (main-group
interaction parameters a_mn [K], Psi_mn = exp(-a_mn/T)). thermo transcribes the parameter table
for original UNIFAC published by DDBST (ddbst.com/published-parameters-unifac.html), i.e.
Fredenslund, Jones and Prausnitz, AIChE J. 21 (1975) 1086, as revised and extended by Hansen,
Rasmussen, Fredenslund, Schiller and Gmehling, Ind. Eng. Chem. Res. 30 (1991) 2352 (citation
from memory), and later
additions. Checked: `tests/test_unifac.py` reproduces thermo's activity coefficients to 1e-6.

- `subgroups.csv` ({n_sub} rows): `subgroup, main_group, name, main_group_name, r, q`
- `interactions.csv` ({n_int} rows): `main_i, main_j, a_ij_k` (a missing pair means no
  parameter is published; the model then takes 0 and warns). Pairs within one main group are 0
  by definition and not listed.
"""


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    with (OUT / "subgroups.csv").open("w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(["subgroup", "main_group", "name", "main_group_name", "r", "q"])
        for sid in sorted(tu.UFSG):
            g = tu.UFSG[sid]
            out.writerow([sid, g.main_group_id, g.group, g.main_group, repr(float(g.R)),
                          repr(float(g.Q))])
    # UFIP is filled lazily by thermo: touching the attribute loads it.
    ufip = tu.UFIP
    rows = sorted((i, j, a) for i, inner in ufip.items() for j, a in inner.items())
    with (OUT / "interactions.csv").open("w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(["main_i", "main_j", "a_ij_k"])
        for i, j, a in rows:
            out.writerow([i, j, repr(float(a))])
    (OUT / "README.md").write_text(README.format(version=thermo.__version__, n_sub=len(tu.UFSG),
                                                 n_int=len(rows)), encoding="utf-8")
    print(f"wrote {len(tu.UFSG)} subgroups and {len(rows)} interaction parameters to {OUT}")


if __name__ == "__main__":
    main()
