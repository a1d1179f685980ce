"""Speed of the reader against plain ``pandas.read_csv`` on the same 600-peak CSV.

Writes a 600-peak export (metadata block, quoted names with commas, units in the headers, a
total row) to a temporary folder, then times ``dha.reader.read_input`` and ``pandas.read_csv``
in this warm process, best of N, and prints both and the ratio. Target: ratio <= 3
(common practice, no source: the reader's extra work - header search, number parsing, row
rules - should cost no more than a few parses).

    .venv/bin/python benchmarks/bench_reader.py [N]
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from dha.reader import read_input
from dha.settings import load_settings

N_PEAKS = 600
NAMES = ["propane", "n-butane", "2,2-dimethylbutane", "2,3-dimethylpentane", "toluene",
         "2,2,4-trimethylpentane", "1,2,4-trimethylbenzene", "methylcyclohexane"]


def write_export(folder: Path) -> tuple[Path, int]:
    """A 600-peak CSV like a lab export; returns the path and the header's 0-based line."""
    rng = np.random.default_rng(7)
    rt = np.sort(rng.uniform(3.0, 150.0, N_PEAKS)).round(4)
    area = rng.lognormal(10, 2, N_PEAKS).round(3)
    height = (area / rng.uniform(5, 20, N_PEAKS)).round(2)
    pct = (100 * area / area.sum()).round(5)
    lines = ["Harbour Point refinery, lab 2 - detailed hydrocarbon run",
             "Sample: HP-2231", "Injection time: 2026-03-01 10:32", "Instrument: GC-3",
             "Method: DHA-100m-long", "Operator: R. Quill", "Vial: 14", "",
             "Peak,RT [min],Area [pA*s],Height [pA],Area %,Name"]
    header = len(lines) - 1
    for i in range(N_PEAKS):
        name = f'"{NAMES[i % len(NAMES)]}"' if i % 3 else ""
        lines.append(f"{i + 1},{rt[i]},{area[i]},{height[i]},{pct[i]},{name}")
    lines.append(f"Total,,{area.sum():.3f},,100.0,")
    path = folder / "bench_600.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path, header


def best_of(fn, n: int) -> float:
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(n: int = 30) -> None:
    settings = load_settings()
    with tempfile.TemporaryDirectory() as tmp:
        path, header = write_export(Path(tmp))
        runs = read_input(path, settings)          # warm-up, and a sanity check
        assert len(runs[0].table) == N_PEAKS, len(runs[0].table)
        pd.read_csv(path, skiprows=header)
        t_reader = best_of(lambda: read_input(path, settings), n)
        t_pandas = best_of(lambda: pd.read_csv(path, skiprows=header), n)
    print(f"peaks: {N_PEAKS}, best of {n}")
    print(f"dha.reader.read_input: {t_reader * 1e3:8.2f} ms")
    print(f"pandas.read_csv:       {t_pandas * 1e3:8.2f} ms")
    print(f"ratio:                 {t_reader / t_pandas:8.2f}  (target <= 3)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 30)
