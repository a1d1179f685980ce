"""Speed and accuracy of identification (issue 5).

1. Speed on a 600-peak synthetic run: an unnamed run (every library component, invented
   reformate-rich amounts plus traces, peaks kept apart, unknown peaks added to reach 600; index
   noise sd 0.5); ``dha.identify.identify`` timed warm (library loaded, name index built), best
   of N, with the n-alkane markers given in the settings, on a fully named export, and with the
   automatic marker search (hold given, and hold left for the search to find); the search
   alone (``dha.retention.find_markers``) is timed too.
   Targets: identification <= 50 ms, marker search <= 100 ms.
2. Accuracy on unnamed runs of the three example petrols (``dha.synthetic``; the library's
   indices are the truth there), seeds 0-9 (the methods were tuned on seeds 100-109): mass
   identified correctly (``identification_accuracy``), mean and minimum, with the true markers
   given and with the automatic search, and the share of runs whose automatic markers are all
   right; with the sample's oxygenates stated (``expected_oxygenates``,
   ``other_oxygenate_odds = 0``) as a lab that knows its blends would; and with both the
   lab's alkane standard (C3-C13 times of the same programme) as markers and the oxygenates
   stated. Conditions: index noise sd 0.5; sd 1.5 with 0.5 % retention-time drift. Targets of
   the issue: >= 99 % and >= 97 %. Beside them the ceiling
   (``identification_ceiling``: an identifier told which components are present), the most
   any identifier can expect without knowing the composition beforehand.

    .venv/bin/python benchmarks/bench_identify.py [N] [--quick]
"""
from __future__ import annotations

import sys
import time

import numpy as np

from dha import retention as rx
from dha.identify import _group_prior, _index_for, _library_indices, _peak_size, identify
from dha.library import load_library
from dha.settings import default_settings
from dha.synthetic import (EXAMPLE_KINDS, alkane_retention_times, example_composition,
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
        flag = "ok" if t <= 0.050 else "SLOWER than the 50 ms target"
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


def accuracy(lib, seeds):
    print(f"accuracy on unnamed example petrols, seeds {seeds[0]}-{seeds[-1]}: mass identified "
          "correctly, mean / min")
    print("  columns: run = the sample's own n-alkanes as markers; +oxy = and its oxygenates "
          "stated; lab = the alkane standard C3-C13 as markers and the oxygenates stated; "
          "auto = markers found (n right / runs); ceiling = told the components")
    standard = {str(c): t for c, t in alkane_retention_times().items() if 3 <= c <= 13}
    for sd, drift, target in ((0.5, 0.0, 0.99), (1.5, 0.5, 0.97)):
        print(f"  index noise sd {sd}, drift {drift} %, target {target:.2f}")
        for kind in EXAMPLE_KINDS:
            comp = example_composition(kind, lib)
            oxy = [c for c in comp if lib.components.at[c, "group"] == "oxygenates"]
            stated = dict(expected_oxygenates=oxy, other_oxygenate_odds=0.0)
            cols = {k: [] for k in ("run", "+oxy", "lab", "auto", "ceiling")}
            ok = 0
            for seed in seeds:
                peaks, truth = synthetic_run(comp, lib, seed=seed, index_noise_sd=sd,
                                             drift_pct=drift)
                own = true_markers(truth, lib)
                for key, kw in (("run", dict(markers=own)),
                                ("+oxy", dict(markers=own, **stated)),
                                ("lab", dict(markers=standard, **stated))):
                    cols[key].append(identification_accuracy(
                        identify(peaks, lib, settings(**kw)), truth))
                out = identify(peaks, lib, settings())
                cols["auto"].append(identification_accuracy(out, truth))
                cols["ceiling"].append(identification_ceiling(peaks, truth, lib))
                rt = peaks["rt_min"].to_numpy()
                true = {int(round(i / 100)): float(rt[int(r) - 1]) for c, i, r in
                        zip(truth["component"], truth["true_index"], truth["row"])
                        if c is not None and r == r
                        and lib.components.at[c, "group"] == "n_paraffins"}
                ok += all(abs(true.get(c, -1.0) - t) < 1e-9
                          for c, t in out.attrs["markers"].items())
            text = "  ".join(f"{k} {np.mean(v):.3f}/{np.min(v):.3f}" for k, v in cols.items())
            met = [k for k in ("run", "+oxy", "lab") if np.mean(cols[k]) >= target]
            below = sum(c < target for c in cols["ceiling"])
            print(f"    {kind:10s} {text}  auto markers right {ok}/{len(seeds)}; mean target "
                  f"met by: {', '.join(met) or 'none'}; ceiling runs below it {below}/{len(seeds)}")


def main(n: int = 5, quick: bool = False) -> None:
    lib = load_library()
    speed(lib, n)
    accuracy(lib, list(range(3 if quick else 10)))


if __name__ == "__main__":
    import logging
    logging.disable(logging.WARNING)
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    main(int(args[0]) if args else 5, quick="--quick" in sys.argv)
