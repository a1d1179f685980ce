"""Benchmark: contributions, every process lever and a blend on a ~500-component sample.

Prints wall times (warm: the library, parameters and caches loaded by a first pass). The
issue's target: all levers for a 500-component sample under 1 s warm. Each lever's new
composition goes through every property model (groups, bulk, volatility, octane) and the
specification check; the chemistry itself is timed apart.

Run: ``python benchmarks/bench_levers.py``. The sample is invented (every hydrocarbon and
ethanol of the library with log-normal weights, plus unidentified peaks), for timing only.
"""
from __future__ import annotations

import time

import numpy as np
import pandas as pd

from dha import blend, explain, levers, specs
from dha.library import load_library
from dha.quantify import quantify_composition
from dha.settings import load_settings


def big_sample(library, settings, n_target: int = 500, seed: int = 3) -> pd.DataFrame:
    comps = library.components
    names = [n for n in comps.index if comps.at[n, "group"] != "oxygenates" or n == "ethanol"]
    rng = np.random.default_rng(seed)
    w = rng.lognormal(0.0, 1.2, len(names))
    w = 100 * w / w.sum()
    table = quantify_composition(pd.DataFrame({"row": range(1, len(names) + 1),
                                               "component": names, "amount": w}),
                                 "mass_pct", library, settings).table
    # unidentified peaks (2-methylalkane stand-ins, as quantify makes them) up to n_target
    extra = max(n_target - len(table), 0)
    if extra:
        reps = table[table["name"].str.match(r"^2-methyl(pentane|hexane|heptane|octane)$")]
        rows = reps.sample(extra, replace=True, random_state=seed).copy()
        rows["name"], rows["component"], rows["group"], rows["cas"] = \
            "unidentified", None, "unidentified", None
        rows["mass_pct"] = 0.02
        table = pd.concat([table, rows], ignore_index=True)
    return levers.with_masses(table, table["mass_pct"].to_numpy(float))


def main() -> None:
    settings, library = load_settings(), load_library()
    profile = specs.load_profile("en228-e10-summer")
    table = big_sample(library, settings)
    print(f"sample: {len(table)} rows")
    for label in ("cold", "warm"):
        t0 = time.perf_counter()
        base = levers.evaluate(table, library, settings, profile)
        t1 = time.perf_counter()
        keys = explain.explain(table, library, settings, base["properties"])
        t2 = time.perf_counter()
        outcomes = [levers.isomerise(table, library, settings),
                    levers.saturate_benzene(table, library, settings),
                    levers.reform(table, library, settings),
                    levers.remove_cut(table, library, settings, "light"),
                    levers.remove_cut(table, library, settings, "heavy"),
                    levers.add_oxygenate(table, library, settings, "ethanol", 10.0)]
        t3 = time.perf_counter()
        for o in outcomes:
            levers.evaluate(o.table, library, settings, profile, explain=False)
        t4 = time.perf_counter()
        rng = levers.oxygenate_range(table, library, settings, "ethanol", profile,
                                     target_ron=95.0)
        t5 = time.perf_counter()
        b = blend.blend_tables([table, outcomes[2].table], [50, 50])
        levers.evaluate(b, library, settings, profile)
        t6 = time.perf_counter()
        print(f"[{label}] evaluation of the sample (every model + checks + contributions): "
              f"{t1 - t0:.2f} s; contributions alone {t2 - t1:.3f} s "
              f"(sum {sum(c['ron'] for c in keys['octane_contributions']):.4f} = RON "
              f"{base['properties']['ron']:.4f})")
        print(f"[{label}] six levers, chemistry only: {t3 - t2:.3f} s; their six full "
              f"re-evaluations: {t4 - t3:.2f} s ({(t4 - t3) / 6:.2f} s each); oxygenate solver "
              f"(61-point scan + brentq): {t5 - t4:.2f} s; all levers: {t5 - t2:.2f} s")
        print(f"[{label}] 50/50 blend of two 500-row streams, evaluated: {t6 - t5:.2f} s")
    print("target (issue 17): all levers < 1 s warm")


if __name__ == "__main__":
    main()
