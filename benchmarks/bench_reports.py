"""Speed of the report writers on a 600-peak result: PDF certificate draft and Excel workbook.

Makes a 600-peak synthetic run (``dha.synthetic``; an invented E10-like petrol with 600
components' worth of peaks), processes it into a result once, then times ``write_pdf`` and
``write_xlsx`` in this warm process (best and median of N; the first, cold call - imports,
font registration - is printed separately). Targets (issue 15): PDF < 1.5 s, workbook < 0.5 s,
warm. On a shared machine the wall time varies with the load; the CPU time of this process
is printed beside it.

    .venv/bin/python benchmarks/bench_reports.py [N]
"""
from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path


def make_result():
    import numpy as np

    from dha import pipeline
    from dha.library import load_library
    from dha.settings import load_settings
    from dha.synthetic import synthetic_run

    lib = load_library()
    comps = lib.components
    rng = np.random.default_rng(600)
    usable = comps[comps["retention_index"].notna()].index.tolist()
    names = sorted(rng.choice(usable, size=min(len(usable), 450), replace=False))
    mass = {n: float(w) for n, w in zip(names, np.exp(rng.normal(0, 1.5, len(names))))}
    peaks, _ = synthetic_run(mass, lib, seed=600, names=True, extra_unknowns=150,
                             coelute=False, merge_unresolved=False)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench-600.csv"
        table = peaks.rename(columns={"rt_min": "RT [min]", "area": "Area", "name": "Component"})
        table[["RT [min]", "Area", "Component"]].to_csv(path, index=False)
        result = pipeline.process_file(path, load_settings(), lib)[0]
    return result, len(peaks)


def main(argv: list[str]) -> int:
    n = int(argv[1]) if len(argv) > 1 else 5
    try:
        result, n_peaks = make_result()
    except Exception as err:  # the pipeline's API may move; fall back to the test fixture
        import copy
        import json

        print(f"(could not process a synthetic run: {err}; using the test fixture x 600)")
        base = json.loads((Path(__file__).resolve().parents[1] / "tests" / "data"
                           / "sample_result.json").read_text(encoding="utf-8"))
        result = copy.deepcopy(base)
        result["components"] = [dict(base["components"][i % len(base["components"])])
                                for i in range(600)]
        n_peaks = 600
    from dha.report.excel import write_xlsx
    from dha.report.pdf import write_pdf

    print(f"result with {len(result.get('components') or [])} component rows "
          f"({n_peaks} peaks)")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp)
        for name, fn, target in (("PDF", write_pdf, 1.5), ("workbook", write_xlsx, 0.5)):
            t0 = time.perf_counter()
            fn(result, out / f"cold.{name}")
            cold = time.perf_counter() - t0
            times, cpu = [], []
            for i in range(n):
                t0, c0 = time.perf_counter(), time.process_time()
                fn(result, out / f"warm{i}.{name}")
                times.append(time.perf_counter() - t0)
                cpu.append(time.process_time() - c0)
            print(f"{name:9s} cold {cold:6.3f} s   warm wall best {min(times):6.3f} s, median "
                  f"{statistics.median(times):6.3f} s; CPU median {statistics.median(cpu):6.3f} s"
                  f"   target < {target} s warm: "
                  f"{'met' if min(times) < target else 'NOT met'} (best wall time)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
