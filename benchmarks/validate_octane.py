"""Validation of the octane models on open data: prints the table of `dha octane validate`,
the neat-value estimator's leave-one-out error on the library, and its error on outside
compounds (open pure-component data not in the library).

    python benchmarks/validate_octane.py [PURE_COMPONENTS_CSV]

The optional argument is the open-data file of neat octane numbers (default: the copy in
tests/data/octane/pure_components.csv, sources in tests/data/PROVENANCE.md).
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

from dha.library import load_library
from dha.properties import octane as oc
from dha.properties import octane_fit as of


def main(argv: list[str]) -> int:
    t0 = time.perf_counter()
    lib = load_library()
    data = of.load_mixtures(lib.components)
    table, _ = of.validate_all(data)
    print(of.describe_data(data))
    print(of.format_table(table))
    print(of.format_conflicts(data))
    print(of.format_estimator(lib.components))
    cv_gas = of.cross_validate(data, "interaction", "mon")
    cv_gas = cv_gas[cv_gas["source"] == "KUZ2022_GAS"]
    print("\ninteraction MON on the 40 real gasolines, leave-one-family-out (held-out) "
          "and fitted on all:")
    print(cv_gas[["label", "family", "measured", "fitted", "held_out"]].round(1)
          .sort_values(["family", "label"]).to_string(index=False))
    print(f"(validation of 3 models x 2 properties: {time.perf_counter() - t0:.1f} s)")
    # Stricter split: whole families held out (an oxygenate series goes with its base blends).
    strict = data.info.assign(group=data.info["family"])
    cv = of.cross_validate(of.MixtureData(strict, data.mol_frac, data.vol_frac, data.comps,
                                          data.excluded), "interaction", "mon")
    cv = cv[~cv["estimated_neat"]]
    err = cv["held_out"] - cv["measured"]
    engine = ~cv["family"].str.startswith("SF-")
    print(f"\ninteraction MON, stricter split (leave-one-family-out, {cv['family'].nunique()} "
          f"groups): held-out RMSE {np.sqrt(np.mean(err ** 2)):.2f} over {len(cv)} mixtures; "
          f"without the SF-* families (MON given with 3-4 decimals): "
          f"{np.sqrt(np.mean(err[engine] ** 2)):.2f} over {int(engine.sum())}")
    est = oc.neat_estimators(lib.components)
    print("\nneat-value estimator, leave-one-out on the library's measured values:")
    for p, e in est.items():
        print(f"  {p.upper()}: n {e.n}, LOO RMSE {e.loo_rmse:.1f}")
    pure = Path(argv[1]) if len(argv) > 1 else (
        Path(__file__).resolve().parents[1] / "tests/data/octane/pure_components.csv")
    if not pure.exists():
        print(f"\n{pure} not found: outside check of the estimator skipped")
        return 0
    p = pd.read_csv(pure, dtype={"cas": str})
    p = p[p["flag"].isna() & ~p["cas"].isin(lib.components["cas"])]
    groups = {"n-paraffin": "n_paraffins", "isoparaffin": "isoparaffins", "olefin": "olefins",
              "naphthene": "naphthenes", "aromatic": "aromatics", "oxygenate": "oxygenates"}
    p = p[p["compound_class"].isin(groups)]
    print(f"\nestimator on {p['cas'].nunique()} outside compounds (pure_components.csv, not in "
          "the library, unflagged; median over sources):")
    for prop in oc.PROPERTIES:
        q = p.dropna(subset=[prop]).groupby("cas").agg(
            smiles=("smiles", "first"), cls=("compound_class", "first"), y=(prop, "median"))
        pred = np.array([est[prop].predict(groups[c], s) for c, s in zip(q["cls"], q["smiles"])])
        err = pred - q["y"].to_numpy()
        print(f"  {prop.upper()}: n {len(q)}, RMSE {np.sqrt(np.mean(err ** 2)):.1f}, "
              f"bias {err.mean():+.1f}, max |error| {np.abs(err).max():.1f}")
        for cls, g in q.assign(err=err).groupby("cls"):
            print(f"      {cls:<12} n {len(g):>3}  RMSE {np.sqrt(np.mean(g['err'] ** 2)):5.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
