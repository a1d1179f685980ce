"""Speed and accuracy of identification on a 600-peak synthetic run.

Builds an unnamed 600-peak run (every library component, invented reformate-rich amounts plus
traces, peaks kept apart, unknown peaks added to reach 600; index noise sd 0.5) and times
``dha.identify.identify`` warm (library loaded, name index built), best of N, in three modes:
n-alkane markers given in the settings, a fully named export, and the automatic marker search.
Prints the time and the mass fraction identified correctly (``identification_accuracy``).
Target: <= 50 ms for the 600-peak run (issue 5).

    .venv/bin/python benchmarks/bench_identify.py [N]
"""
from __future__ import annotations

import sys
import time

from dha.identify import identify
from dha.library import load_library
from dha.settings import default_settings
from dha.synthetic import example_composition, identification_accuracy, synthetic_run

N_PEAKS = 600


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


def best_of(fn, n):
    times = []
    out = None
    for _ in range(n):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return min(times), out


def main(n: int = 5) -> None:
    lib = load_library()
    peaks, named, truth = build(lib)
    base = default_settings()
    base["identify"].update(isothermal_until_min=15.0, holdup_time_min=4.0)
    markers = {str(int(round(i / 100))): float(t) for c, i, t in
               zip(truth["component"], truth["true_index"], truth["rt_min"])
               if c is not None and lib.components.at[c, "group"] == "n_paraffins"}
    with_markers = {**base, "identify": {**base["identify"], "markers": markers}}
    identify(peaks, lib, with_markers)               # warm: name index, caches
    print(f"run: {len(peaks)} peaks, {truth['component'].notna().sum()} components, "
          f"library {len(lib.components)} entries")
    for label, table, settings in (("markers given", peaks, with_markers),
                                   ("named export", named, base),
                                   ("automatic markers", peaks, base)):
        t, out = best_of(lambda: identify(table, lib, settings), n)
        acc = identification_accuracy(out, truth)
        flag = "ok" if t <= 0.050 else "SLOWER than 50 ms target"
        print(f"{label:18s} {1000 * t:7.1f} ms  ({flag})  mass identified correctly "
              f"{100 * acc:6.2f} %")


if __name__ == "__main__":
    import logging
    logging.disable(logging.WARNING)
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 5)
