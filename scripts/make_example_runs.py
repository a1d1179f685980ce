"""Write the demo's example runs into example_runs/ (maintainer script; output committed).

The scenario is invented: the Harbour Point refinery, its QC lab 2 and gas chromatograph GC-3,
and tanks T-11, T-14, T-17, T-22. The compositions come from ``dha.synthetic``'s invented
petrol profiles and the peak tables from its run generator, so nothing here is a real sample.

Files:
- hp-t14-e10-summer.csv          E10 summer blend, names in the export, comma separated, metadata
- hp-t11-reformate-unnamed.txt   reformate-rich petrol, no names (identified by retention index),
                                 semicolon separated with decimal commas
- hp-t22-alkylate.xlsx           alkylate-rich petrol, two injections (one sheet each), names
- hp-t17-high-benzene.csv        a reformate batch with benzene above the EN 228 limit
- hp-blend-recipe.csv            a composition table (component, vol_pct) from a blend recipe

Run:  .venv/bin/python scripts/make_example_runs.py
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from dha.library import load_library
from dha.synthetic import example_composition, synthetic_run

# Main components of the invented tanks [mass %], shaped after general knowledge of petrol
# (isopentane, C6-C7 isoparaffins, toluene, xylenes and trimethylbenzenes dominate; alkylate is
# mostly trimethylpentanes and dimethylhexanes). Invented for the demo; not a real sample.
_BASE_COMMON = {
    "n-butane": 2.5, "2-methylpropane": 0.8, "2-methylbutane": 8.5, "n-pentane": 3.0,
    "2,2-dimethylbutane": 0.8, "2,3-dimethylbutane": 1.4, "2-methylpentane": 4.2,
    "3-methylpentane": 2.8, "n-hexane": 2.2, "methylcyclopentane": 1.6, "cyclohexane": 0.6,
    "2-methylhexane": 1.4, "3-methylhexane": 1.5, "2,3-dimethylpentane": 1.1,
    "2,4-dimethylpentane": 0.7, "n-heptane": 1.1, "methylcyclohexane": 0.9,
    "2,2,4-trimethylpentane": 3.5, "2,3,4-trimethylpentane": 1.3, "2,3,3-trimethylpentane": 0.6,
    "2,5-dimethylhexane": 0.6, "2,4-dimethylhexane": 0.7, "2,3-dimethylhexane": 0.5,
    "2-methylheptane": 0.6, "3-methylheptane": 0.7, "n-octane": 0.4, "n-nonane": 0.2,
    "benzene": 0.6, "toluene": 9.5, "ethylbenzene": 1.9, "1,3-dimethylbenzene": 4.3,
    "1,4-dimethylbenzene": 1.8, "1,2-dimethylbenzene": 2.4, "1,2,4-trimethylbenzene": 3.4,
    "1,3,5-trimethylbenzene": 1.1, "1,2,3-trimethylbenzene": 0.6, "1-ethyl-3-methylbenzene": 1.6,
    "1-ethyl-4-methylbenzene": 0.8, "1-ethyl-2-methylbenzene": 0.6, "n-propylbenzene": 0.5,
    "isopropylbenzene": 0.2, "naphthalene": 0.3, "2-methyl-2-butene": 1.2,
    "trans-2-pentene": 0.6, "2-methyl-1-butene": 0.6, "cis-2-pentene": 0.3, "1-pentene": 0.3,
    "trans-2-butene": 0.3, "cis-2-butene": 0.2, "2-methyl-2-pentene": 0.4, "cyclopentene": 0.2,
}
_BASE_EXTRA = {
    "e10": {"ethanol": 9.8},
    "reformate": {"toluene": 6.0, "1,3-dimethylbenzene": 2.5, "1,2,4-trimethylbenzene": 2.0,
                  "benzene": 0.3, "ethylbenzene": 0.8, "1,2-dimethylbenzene": 1.2},
    "alkylate": {"2,2,4-trimethylpentane": 12.0, "2,3,4-trimethylpentane": 5.0,
                 "2,3,3-trimethylpentane": 4.0, "2,4-dimethylhexane": 1.5, "2,5-dimethylhexane": 1.5,
                 "2,2,5-trimethylhexane": 1.2, "MTBE": 4.0},
}
#: share of the tank made of the many minor components (spread by dha.synthetic) [mass %]
_MINOR_PCT = 8.0


def tank_composition(kind: str, lib, seed: int) -> dict[str, float]:
    """Main components of an invented tank plus minor ones, summing to 100 mass %."""
    main: dict[str, float] = {}
    for table in (_BASE_COMMON, _BASE_EXTRA[kind]):
        for name, pct in table.items():
            canonical = lib.find(name)
            if canonical is None:
                raise SystemExit(f"example component {name!r} not in the library")
            main[canonical] = main.get(canonical, 0.0) + pct
    minor = example_composition(kind, lib, seed=seed)
    minor = {k: v for k, v in minor.items() if k not in main}
    scale_main = (100.0 - _MINOR_PCT) / sum(main.values())
    scale_minor = _MINOR_PCT / sum(minor.values())
    out = {k: v * scale_main for k, v in main.items()}
    out.update({k: v * scale_minor for k, v in minor.items()})
    return out

OUT = Path(__file__).resolve().parents[1] / "example_runs"


def _metadata(sample: str, when: str, vial: int, tank: str) -> list[str]:
    return [
        "Harbour Point refinery - QC lab 2",
        f"Sample name: {sample}",
        f"Tank: {tank}",
        f"Injection date: {when}",
        "Instrument: GC-3 (FID, 100 m x 0.25 mm x 0.5 um dimethylpolysiloxane)",
        "Method: petrol detailed hydrocarbons, 35 C hold 15 min, 2 C/min",
        "Operator: shift B",
        f"Vial: {vial}",
        "",
    ]


def _table(peaks: pd.DataFrame, names: bool) -> pd.DataFrame:
    out = pd.DataFrame({
        "Peak": np.arange(1, len(peaks) + 1),
        "RT [min]": peaks["rt_min"].round(3),
        "Area [pA*s]": peaks["area"].round(2),
        "Height [pA]": peaks["height"].round(2),
        "Area %": (100 * peaks["area"] / peaks["area"].sum()).round(4),
    })
    if names:
        out["Component"] = peaks["name"].fillna("")
    return out


def _boost(comp: dict[str, float], name: str, target_mass_pct: float) -> dict[str, float]:
    rest = 100.0 - comp.get(name, 0.0)
    scale = (100.0 - target_mass_pct) / rest
    out = {k: v * scale for k, v in comp.items() if k != name}
    out[name] = target_mass_pct
    return out


def main() -> None:
    lib = load_library()
    OUT.mkdir(exist_ok=True)
    common = dict(index_noise_sd=0.4, missing_trace_below_pct=0.002, extra_unknowns=12)

    # T-14: E10 summer blend, named export
    comp = tank_composition("e10", lib, seed=14)
    peaks, _ = synthetic_run(comp, lib, seed=1401, names=True, drift_pct=0.2, **common)
    lines = _metadata("T-14 E10 summer blend", "2026-11-30 07:42", 14, "T-14")
    text = "\n".join(lines) + _table(peaks, True).to_csv(index=False, lineterminator="\n")
    (OUT / "hp-t14-e10-summer.csv").write_text(text + "Total,,%.2f,,100.0000,\n" % peaks["area"].sum(),
                                               encoding="utf-8")

    # T-11: reformate-rich, unnamed, European number format
    comp = tank_composition("reformate", lib, seed=11)
    peaks, _ = synthetic_run(comp, lib, seed=1101, names=False, drift_pct=0.4, **common)
    lines = _metadata("T-11 reformate-rich base", "2026-11-30 10:15", 11, "T-11")
    table = _table(peaks, False).to_csv(index=False, sep=";", decimal=",", lineterminator="\n")
    (OUT / "hp-t11-reformate-unnamed.txt").write_text("\n".join(lines) + table, encoding="utf-8")

    # T-22: alkylate-rich, two injections in one workbook
    comp = tank_composition("alkylate", lib, seed=22)
    with pd.ExcelWriter(OUT / "hp-t22-alkylate.xlsx", engine="openpyxl") as xw:
        for inj, seed in (("Injection 1", 2201), ("Injection 2", 2202)):
            peaks, _ = synthetic_run(comp, lib, seed=seed, names=True, **common)
            meta = pd.DataFrame({"a": _metadata(f"T-22 alkylate-rich {inj.lower()}",
                                                "2026-12-01 08:05" if seed == 2201 else "2026-12-01 11:20",
                                                22, "T-22")[:-1]})
            meta.to_excel(xw, sheet_name=inj, index=False, header=False)
            _table(peaks, True).to_excel(xw, sheet_name=inj, index=False, startrow=len(meta) + 1)

    # T-17: a reformate batch with benzene above the limit
    comp = _boost(tank_composition("reformate", lib, seed=17), "benzene", 1.9)
    peaks, _ = synthetic_run(comp, lib, seed=1701, names=True, **common)
    lines = _metadata("T-17 reformate batch 48", "2026-12-01 14:30", 17, "T-17")
    (OUT / "hp-t17-high-benzene.csv").write_text(
        "\n".join(lines) + _table(peaks, True).to_csv(index=False, lineterminator="\n"), encoding="utf-8")

    # Blend recipe as a composition table (vol %), as a LIMS or another lab would send it
    recipe = pd.DataFrame({
        "component": ["2,2,4-trimethylpentane", "toluene", "n-heptane", "2-methylbutane", "n-butane",
                      "o-xylene", "1,2,4-trimethylbenzene", "methylcyclohexane", "1-hexene",
                      "ethanol", "MTBE", "benzene", "2-methylpentane", "cyclohexane"],
        "vol_pct": [22.0, 16.0, 8.0, 12.0, 3.0, 6.0, 5.0, 6.0, 4.0, 9.5, 2.0, 0.5, 4.0, 2.0],
    })
    with open(OUT / "hp-blend-recipe.csv", "w", encoding="utf-8") as fh:
        fh.write("# Harbour Point refinery - blend recipe B-0412 for tank T-14 (planned)\n")
        recipe.to_csv(fh, index=False, lineterminator="\n")
    print("written:", *sorted(p.name for p in OUT.iterdir()))


if __name__ == "__main__":
    main()
