"""Speed and accuracy of identification (issue 5).

1. Speed on a 600-peak synthetic run: an unnamed run (every library component, invented
   reformate-rich amounts plus traces, peaks kept apart, unknown peaks added to reach 600; index
   noise sd 0.5); ``dha.identify.identify`` timed warm (library loaded, name index built), best
   of N, with the n-alkane markers given in the settings, on a fully named export, and with the
   automatic marker search (hold given, and hold left for the search to find); the search
   alone (``dha.retention.find_markers``) is timed too.
   Targets: identification <= 50 ms with markers given, <= 150 ms with automatic markers
   (issue 13); marker search <= 100 ms.
2. Accuracy on unnamed runs of REAL compositions (``dha.fuel_data``: the 40 fuels of
   Kuzhagaliyeva et al. 2022 whose components the library holds; ``dha.synthetic`` only places
   the peaks), seeds 7001-7003 (never used while choosing the methods), priors refitted without
   the fuel's family (held out): mass identified correctly with the lab's alkane standard as
   markers and with automatic markers, beside the ceiling (``identification_ceiling``: an
   identifier told which components are present), and how many runs the identification check
   flags. Conditions: index noise sd 0.5; sd 1.5 with 0.5 % retention-time drift. Targets of
   issue 13: mean >= 97 % and every run >= 93 % (sd 0.5), >= 90 % (sd 1.5), or within 1 / 2
   points of the ceiling; automatic markers: no run below 90 % without a flag.

    .venv/bin/python benchmarks/bench_identify.py [N] [--quick]
"""
from __future__ import annotations

import sys
import time

import numpy as np
import pandas as pd

from dha import retention as rx
from dha.identify import _group_prior, _index_for, _library_indices, _peak_size, identify
from dha.library import load_library
from dha.settings import default_settings
from dha.synthetic import (example_composition,
                           identification_accuracy, identification_ceiling, synthetic_run)

N_PEAKS = 600
METHOD = {"isothermal_until_min": 15.0, "holdup_time_min": 4.0}   # the synthetic runs' method


def build(lib):
    comp = example_composition("reformate", lib)
    for name, ri in lib.components["retention_index"].items():
        if ri == ri:
            comp.setdefault(name, 0.002)
    kw = dict(seed=42, index_noise_sd=0.5, merge_unresolved=False)
    n_own = len(synthetic_run(comp, lib, **kw)[0])     # co-eluting pairs share a peak
    extra = max(0, N_PEAKS - n_own)
    peaks, truth = synthetic_run(comp, lib, extra_unknowns=extra, **kw)
    named, _ = synthetic_run(comp, lib, extra_unknowns=extra, names=True, **kw)
    return peaks, named, truth


def true_markers(truth, lib):
    return {str(int(round(i / 100))): float(t) for c, i, t in
            zip(truth["component"], truth["true_index"], truth["rt_min"])
            if c is not None and lib.components.at[c, "group"] == "n_paraffins"}


def best_of(fn, n):
    times = []
    out = None
    for _ in range(n):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def settings(**identify_keys):
    s = default_settings()
    s["identify"].update(METHOD, **identify_keys)
    return s


def speed(lib, n):
    peaks, named, truth = build(lib)
    base = settings()
    with_markers = settings(markers=true_markers(truth, lib))
    identify(peaks, lib, with_markers)               # warm: name index, caches
    print(f"run: {len(peaks)} peaks, {truth['component'].notna().sum()} components, "
          f"library {len(lib.components)} entries")
    no_hold = default_settings()             # method's hold not given: found by the search
    for label, table, s in (("markers given", peaks, with_markers),
                            ("named export", named, base),
                            ("automatic markers", peaks, base),
                            ("auto, hold not set", peaks, no_hold)):
        t, out = best_of(lambda: identify(table, lib, s), n)
        acc = identification_accuracy(out, truth)
        # issue 13: 50 ms with the markers given (or names), 150 ms with automatic markers
        limit = 0.150 if label.startswith("auto") else 0.050
        flag = "ok" if t <= limit else f"SLOWER than the {1000 * limit:.0f} ms target"
        print(f"  identify, {label:19s} {1000 * t:7.1f} ms  ({flag})  mass identified "
              f"correctly {100 * acc:6.2f} %")
    lib_tab = _library_indices(lib)
    bonus = _group_prior(lib, lib_tab["name"].to_numpy(), base["identify"])
    rt = peaks["rt_min"].to_numpy(dtype=float)
    size = _peak_size(peaks)
    t, _ = best_of(lambda: rx.find_markers(
        rt, size, lib_tab["retention_index"].to_numpy(dtype=float), 3.0, base["identify"],
        alkane_carbons=sorted(_index_for(lib).n_alkanes), lib_bonus=bonus), n)
    flag = "ok" if t <= 0.100 else "SLOWER than the 100 ms target"
    print(f"  marker search alone (hold given)  {1000 * t:7.1f} ms  ({flag})")


def real_accuracy(lib, seeds, auto=True):
    """Accuracy on unnamed runs of the real fuels (dha.fuel_data), held out by family."""
    from dha.fuel_data import blended_components, composition, fuel_table
    from dha.synthetic import lab_standard, real_fuel_run

    fuels = fuel_table(lib)
    usable = fuels[fuels["unmatched_mass_pct"] < 3.0]
    comps = lib.components
    print(f"accuracy on unnamed runs of REAL compositions ({len(usable)} of {len(fuels)} fuels of "
          "Kuzhagaliyeva et al. 2022 with < 3 % of the mass outside the library, rest "
          f"renormalised), seeds {seeds}; priors refitted without the fuel's family (HELD-OUT)")
    print("  std = the alkane standard C3-C13 as markers; stated = std, and the lab lists the "
          "sample's oxygenates ([identify] expected_oxygenates: what a blending study knows it "
          "blended); blend = stated, and the lab also lists what it blended into the base fuel "
          "([identify] blend_components: dha.fuel_data.blended_components, e.g. isoprenol); "
          "auto = markers found; ceiling = told the components; flagged = "
          "identification check not 'pass'")
    for sd, drift, target, near in ((0.5, 0.0, 0.97, 0.01), (1.5, 0.5, 0.90, 0.02)):
        rows = []
        for r in usable.itertuples():
            oxy = sorted(c for c, m in composition(lib, r.mixture_id).items()
                         if m > 0 and comps.at[c, "group"] == "oxygenates")
            blend = blended_components(lib, r.mixture_id)
            for seed in seeds:
                peaks, truth = real_fuel_run(lib, r.mixture_id, seed=seed, index_noise_sd=sd,
                                             drift_pct=drift)
                row = {"family": r.family, "label": r.label, "seed": seed, "peaks": len(peaks),
                       "ceiling": identification_ceiling(peaks, truth, lib)}
                for key, kw in (("std", dict(markers=lab_standard())),
                                ("stated", dict(markers=lab_standard(), expected_oxygenates=oxy)),
                                ("blend", dict(markers=lab_standard(), expected_oxygenates=oxy,
                                               blend_components=blend)),
                                ("auto", {})):
                    if key == "auto" and not auto:
                        continue
                    if key == "blend" and not blend:
                        row[key], row[key + "_flag"] = row["stated"], row["stated_flag"]
                        continue
                    if key == "stated" and not oxy:
                        row[key], row[key + "_flag"] = row["std"], row["std_flag"]
                        continue
                    out = identify(peaks, lib, settings(prior_exclude_families=[r.family], **kw))
                    row[key] = identification_accuracy(out, truth)
                    q = out.attrs.get("quality") or {}
                    row[key + "_flag"] = q.get("verdict", "pass") != "pass"
                rows.append(row)
        d = pd.DataFrame(rows)
        print(f"  index noise sd {sd}, drift {drift} %: target mean >= {target:.2f} (every run "
              f">= 0.93 at sd 0.5) or within {near:.2f} of the ceiling")
        for key in ("std", "stated", "blend", "auto"):
            if key not in d:
                continue
            gap = d["ceiling"].mean() - d[key].mean()
            unflagged_bad = int(((d[key] < 0.90) & ~d[key + "_flag"]).sum())
            # a run is short when below both 0.93 and its own ceiling less the allowance
            short = int((d[key] < np.minimum(0.93, d["ceiling"] - near)).sum())
            print(f"    {key:6s} mean {d[key].mean():.4f} min {d[key].min():.4f} | ceiling mean "
                  f"{d['ceiling'].mean():.4f} min {d['ceiling'].min():.4f} | gap {gap:+.4f} | "
                  f"flagged {int(d[key + '_flag'].sum())}/{len(d)}, runs < 0.90 without a flag "
                  f"{unflagged_bad}, runs < min(0.93, own ceiling - {near:.2f}) {short}")
        for key in ("stated", "blend"):
            short = d[d[key] < np.minimum(0.93, d["ceiling"] - near)]
            if len(short):
                print(f"    short runs ({key}): " + "; ".join(
                    f"{r.label} seed {r.seed} {r[key]:.3f} (ceiling {r.ceiling:.3f}"
                    f"{', flagged' if r[key + '_flag'] else ', NOT flagged'})"
                    for r in (row for _, row in short.iterrows())))
        d["kind"] = np.where(d["label"].str.contains("prenol"), "prenol/isoprenol blends",
                             "base fuels and ethanol blends")
        keys = [k for k in ("std", "stated", "blend", "auto") if k in d]
        per_fam = d.groupby(["family", "kind"])[keys + ["ceiling"]].mean()
        print("    averaged per family group (each of the groups below once): " + ", ".join(
            f"{k} {per_fam[k].mean():.4f}" for k in keys + ["ceiling"]))
        print("    per family, mean (min), held out:")
        print("      " + f"{'family':22s} {'runs':>4s} " + " ".join(f"{k:>15s}" for k in keys)
              + f" {'ceiling':>15s}")
        for (fam, blend), g in d.groupby(["family", "kind"]):
            name = fam if blend.startswith("base") else f"{fam} {blend.split()[0]}"
            print("      " + f"{name[:22]:22s} {len(g):4d} " + " ".join(
                f"{g[k].mean():7.4f} ({g[k].min():.3f})" for k in keys + ["ceiling"]))


def main(n: int = 5, quick: bool = False) -> None:
    lib = load_library()
    speed(lib, n)
    real_accuracy(lib, [7001] if quick else [7001, 7002, 7003])


if __name__ == "__main__":
    import logging
    logging.disable(logging.WARNING)
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    main(int(args[0]) if args else 5, quick="--quick" in sys.argv)
