"""The 40 real fuels of Kuzhagaliyeva et al. 2022 as composition tables through ``dha report``.

Data: Kuzhagaliyeva et al., "Artificial intelligence-driven design of fuel mixtures",
Commun. Chem. 5, 111 (2022), CC BY 4.0 (``dha/properties/octane_data/gasolines_mon_training.csv``).
Each fuel is written as a table ``component`` (CAS number; the SMILES where the data give no
CAS number), ``mol_pct`` and reported in one ``dha report`` call (JSON only). Printed per fuel:
exit code of the call, rows in the library / split over cis-trans isomers / not in the
library, the share not in the library (% mol and % m/m) and the seconds per fuel.

    .venv/bin/python benchmarks/real_fuels_composition.py
"""
from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

import dha
from dha.cli import cli
from dha.fuel_data import write_composition_tables

DATA = Path(dha.__file__).parent / "properties" / "octane_data" / "gasolines_mon_training.csv"


def main() -> int:
    fuels = pd.read_csv(DATA)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        paths = write_composition_tables(folder, fuels)
        t0 = time.perf_counter()
        r = CliRunner().invoke(cli, ["report", *map(str, paths), "-o", str(folder / "out"),
                                     "--format", "json", "--spec", ""])
        dt = time.perf_counter() - t0
        print(f"dha report on {len(paths)} fuels: exit {r.exit_code}, {dt / len(paths):.2f} s "
              "per fuel")
        print(f"{'fuel':10s} {'label':42s} {'lib':>4s} {'split':>5s} {'unk':>4s} "
              f"{'unk %mol':>8s} {'unk %m/m':>8s}")
        labels = fuels.groupby("mixture_id")["mixture_label"].first()
        worst = 0.0
        for path in paths:
            out = folder / "out" / f"{path.stem}.json"
            if not out.exists():
                print(f"{path.stem:10s} no result")
                continue
            mb = json.loads(out.read_text(encoding="utf-8"))["mass_balance"]
            rows, unk = mb["rows"], mb["not_in_library_pct"]
            worst = max(worst, unk["mol_pct"])
            print(f"{path.stem:10s} {labels[path.stem][:42]:42s} {rows['in_library']:4d} "
                  f"{rows['stereo_split']:5d} {rows['not_in_library']:4d} "
                  f"{unk['mol_pct']:8.3f} {unk['mass_pct']:8.3f}")
        print(f"largest share not in the library: {worst:.3f} % mol")
    return r.exit_code


if __name__ == "__main__":
    sys.exit(main())
