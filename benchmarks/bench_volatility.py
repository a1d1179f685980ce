"""Benchmark: DVPE plus distillation estimate for a 400-row composition (target <= 200 ms warm).

Run: ``.venv/bin/python benchmarks/bench_volatility.py``. The composition is synthetic (a
seeded random petrol-like spread over the library's components, C4-C12, with 5 % ethanol);
when the library has fewer than 400 components, unidentified rows (mapped to model
components) fill up to 400 rows. Prints the figures and the timings.
"""
from __future__ import annotations

import statistics
import time

import numpy as np
import pandas as pd

from dha.library import load_library
from dha.properties import bulk, volatility
from dha.settings import default_settings

N_ROWS = 400


def synthetic_composition(lib, n_rows: int = N_ROWS, seed: int = 1) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    comps = lib.components
    comps = comps[(comps["carbon_number"] >= 4) & (comps["carbon_number"] <= 12)
                  & (comps.index != "ethanol") & (comps["group"] != "oxygenates")]
    names = list(comps.index[: n_rows - 1])
    # petrol-like weights: peak around C6-C8, long tail
    cn = comps.loc[names, "carbon_number"].to_numpy()
    weight = np.exp(-0.5 * ((cn - 6.0) / 1.6) ** 2) * rng.lognormal(0, 1.0, len(names))
    rows = pd.DataFrame({"name": names, "model_component": names,
                         "group": comps.loc[names, "group"].to_numpy(), "carbon_number": cn,
                         "vol_pct": weight})
    n_unid = n_rows - 1 - len(rows)
    if n_unid > 0:
        pick = rng.integers(0, len(names), n_unid)
        unid = rows.iloc[pick].copy()
        unid["name"], unid["group"] = "unidentified", "unidentified"
        unid["vol_pct"] = rng.lognormal(-3, 1.0, n_unid)
        rows = pd.concat([rows, unid], ignore_index=True)
    rows["vol_pct"] = rows["vol_pct"] / rows["vol_pct"].sum() * 95.0
    eth = pd.DataFrame({"name": ["ethanol"], "model_component": ["ethanol"],
                        "group": ["oxygenates"], "carbon_number": [2], "vol_pct": [5.0]})
    rows = pd.concat([rows, eth], ignore_index=True)
    lib_rows = lib.components.loc[rows["model_component"]]
    mass = rows["vol_pct"].to_numpy() * lib_rows["density_15c_kg_m3"].to_numpy()
    mol = mass / lib_rows["molar_mass_g_mol"].to_numpy()
    rows["mass_pct"] = mass / mass.sum() * 100
    rows["mol_pct"] = mol / mol.sum() * 100
    return rows


def main() -> None:
    lib = load_library()
    settings = default_settings()
    comp = synthetic_composition(lib)
    n_distinct = comp["model_component"].nunique()
    t0 = time.perf_counter()
    res = volatility.compute(comp, lib, settings)          # cold: builds the Psat grid
    cold = time.perf_counter() - t0
    times = []
    for _ in range(7):
        t0 = time.perf_counter()
        res = volatility.compute(comp, lib, settings)
        times.append(time.perf_counter() - t0)
    mix = volatility.mixture_from_composition(comp, lib, "unifac")
    t0 = time.perf_counter()
    for _ in range(20):
        volatility.flash_volume_ratio(mix)
    flash_ms = (time.perf_counter() - t0) / 20 * 1e3
    t0 = time.perf_counter()
    for _ in range(3):
        volatility.rayleigh_distillation(mix)
    dist_ms = (time.perf_counter() - t0) / 3 * 1e3
    t0 = time.perf_counter()
    b = bulk.compute(comp, lib, settings)
    bulk_ms = (time.perf_counter() - t0) * 1e3

    print(f"composition: {len(comp)} rows, {n_distinct} distinct model components "
          f"(library has {len(lib.components)}), 5 % v/v ethanol")
    for key, value in res.values.items():
        print(f"  {key:14s} {value:8.2f} ± {res.uncertainty[key]:.2f}")
    print(f"  rvp_psi        {res.details['rvp_psi']:8.2f}   vli {res.details['vli']:.0f}   "
          f"P_tot {res.details['total_pressure_kpa']:.2f} kPa")
    print(f"  density {b.values['density_kg_m3']:.1f} kg/m3, net heat "
          f"{b.values['net_heat_mj_kg']} MJ/kg")
    for warning in res.warnings + b.warnings:
        print("  warning:", warning)
    print(f"volatility.compute: cold {cold * 1e3:.0f} ms (Psat grid built once per library), "
          f"warm median {statistics.median(times) * 1e3:.0f} ms, "
          f"min {min(times) * 1e3:.0f} ms  (target <= 200 ms)")
    print(f"  of which flash at V/L=4 {flash_ms:.1f} ms, Rayleigh distillation {dist_ms:.0f} ms;"
          f" bulk.compute {bulk_ms:.1f} ms")


if __name__ == "__main__":
    main()
