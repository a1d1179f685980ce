"""Write the demo's example runs into dha/example_runs/ (maintainer script; output committed).

The scenario is invented (see dha/example_runs/README.md): the Harbour Point refinery, its QC
lab 2 and gas chromatograph GC-3, and tanks T-11, T-14, T-17, T-22. Each tank is a blend, in
volume %, of refinery streams whose compositions follow published typical compositions of
those stream types (sources beside each stream below). The peak tables are then made by
``dha.synthetic.synthetic_run``, so nothing here is a real sample, and nothing was tuned to
make the property models look good: the recipes were written first and the reports show what
the models make of them.

Run:  .venv/bin/python scripts/make_example_runs.py
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from dha.library import load_library
from dha.synthetic import DEFAULT_PROGRAMME, alkane_retention_times, synthetic_run

OUT = Path(__file__).resolve().parents[1] / "dha" / "example_runs"
#: GC-3's hold-up time (the generator's) [min]
HOLDUP_MIN = DEFAULT_PROGRAMME["holdup_min"]

# ---- stream compositions [mass %] ----------------------------------------------------------
# Each stream: main components by name, then "minor" mass spread over many library components
# of the named groups and carbon numbers (log-normal weights, so a few dominate), as a real DHA
# shows a few hundred small peaks. A component already among the main ones is not a minor one.

STREAMS: dict[str, dict] = {
    # Catalytic reformate from a high-severity (continuous regeneration) reformer, RON about
    # 100: about 55 % aromatics, 40 % alkanes, 5 % cycloalkanes (Hrvatska enciklopedija,
    # "reformiranje benzina"; reformate is over 30 % of motor petrol there). High-severity
    # units run nearer 60-65 % aromatics (common practice, no source); benzene 1-3 % of
    # reformate is the usual range unless a splitter removes it (common practice, no source).
    "reformate": {
        "main": {
            "benzene": 2.0, "toluene": 17.0, "ethylbenzene": 3.5, "p-xylene": 4.0,
            "m-xylene": 9.0, "o-xylene": 5.0, "1,2,4-trimethylbenzene": 6.5,
            "1,3,5-trimethylbenzene": 2.0, "1,2,3-trimethylbenzene": 1.2,
            "1-ethyl-3-methylbenzene": 3.0, "1-ethyl-4-methylbenzene": 1.5,
            "1-ethyl-2-methylbenzene": 1.0, "n-propylbenzene": 1.0, "cumene": 0.3,
            "naphthalene": 0.3, "n-butane": 1.0, "isopentane": 3.5, "n-pentane": 2.5,
            "2,2-dimethylbutane": 0.5, "2,3-dimethylbutane": 0.8, "2-methylpentane": 4.0,
            "3-methylpentane": 3.0, "n-hexane": 2.5, "2-methylhexane": 3.0,
            "3-methylhexane": 3.0, "2,3-dimethylpentane": 1.0, "2,4-dimethylpentane": 0.6,
            "n-heptane": 1.8, "2-methylheptane": 1.0, "3-methylheptane": 1.0, "n-octane": 0.4,
            "methylcyclopentane": 0.6, "cyclohexane": 0.2, "methylcyclohexane": 0.4,
            # the heavy n-paraffins the reformer did not convert (from memory)
            "n-nonane": 0.6, "n-decane": 0.2,
        },
        "minor": {"aromatics": (6.0, range(9, 12)), "isoparaffins": (2.5, range(7, 10)),
                  "naphthenes": (1.0, range(6, 9)), "olefins": (0.5, range(5, 8))},
    },
    # Alkylate (isobutane + butenes, sulfuric acid or HF): isoparaffins only, mostly the
    # trimethylpentanes, then dimethylhexanes and light ends; 10-16 wt % C10+ "heavy ends"
    # (Albright & Wood, Ind. Eng. Chem. Res. 36 (1997) 2110); under 0.1 wt % olefins and
    # aromatics (WO 2018/044406 A1, claims). RON about 94-96 (common practice, no source).
    "alkylate": {
        "main": {
            "isobutane": 0.5, "n-butane": 0.5, "isopentane": 6.0, "2,3-dimethylbutane": 3.5,
            "2-methylpentane": 1.2, "3-methylpentane": 0.6, "2,4-dimethylpentane": 3.0,
            "2,3-dimethylpentane": 2.5, "2-methylhexane": 0.5, "2,2,4-trimethylpentane": 26.0,
            "2,3,4-trimethylpentane": 11.0, "2,3,3-trimethylpentane": 10.0,
            "2,2,3-trimethylpentane": 1.5, "2,4-dimethylhexane": 4.0, "2,5-dimethylhexane": 4.0,
            "2,3-dimethylhexane": 2.5, "3,4-dimethylhexane": 0.5, "2,2,5-trimethylhexane": 4.0,
        },
        "minor": {"isoparaffins": (12.0, range(9, 12))},
    },
    # Full-range FCC naphtha: 15-30 vol % aromatics with up to 2 vol % benzene (India
    # Science & Technology portal, benzene-reduction technology note citing EPA420-F-07-017);
    # FCC naphtha is 35-45 % of US refinery gasoline pools (Gary, Handwerk & Kaiser, Petroleum
    # Refining, 5th ed., ch. 6). Olefins about 25-35 vol %, mostly C5-C7 (from memory).
    "fcc": {
        "main": {
            "isobutane": 0.3, "n-butane": 0.5, "1-butene": 0.2, "2-methylpropene": 0.2,
            "trans-2-butene": 0.5, "cis-2-butene": 0.4, "isopentane": 8.0, "n-pentane": 1.5,
            "3-methyl-1-butene": 0.3, "1-pentene": 0.8, "2-methyl-1-butene": 1.8,
            "trans-2-pentene": 2.0, "cis-2-pentene": 1.1, "2-methyl-2-butene": 3.5,
            "cyclopentene": 0.3, "2-methylpentane": 3.5, "3-methylpentane": 2.5,
            "n-hexane": 1.0, "2-methyl-1-pentene": 0.6, "2-methyl-2-pentene": 1.2,
            "trans-2-hexene": 0.6, "methylcyclopentane": 2.0, "benzene": 0.8,
            "cyclohexane": 0.3, "2-methylhexane": 1.2, "3-methylhexane": 1.3,
            "methylcyclohexane": 0.8, "toluene": 3.5, "ethylbenzene": 1.0, "p-xylene": 1.3,
            "m-xylene": 3.0, "o-xylene": 1.5, "1,2,4-trimethylbenzene": 3.0,
            "1-ethyl-3-methylbenzene": 1.2,
            # the heavy end of a full-range naphtha (final boiling point about 210-220 C)
            # holds the n-paraffins up to n-dodecane (b.p. 216 C) (from memory)
            "n-nonane": 0.7, "n-decane": 0.5, "n-undecane": 0.3, "n-dodecane": 0.15,
        },
        "minor": {"olefins": (16.0, range(5, 10)), "isoparaffins": (13.0, range(6, 11)),
                  "naphthenes": (8.0, range(6, 10)), "aromatics": (10.0, range(9, 12)),
                  "n_paraffins": (2.0, range(7, 12))},
    },
    # Isomerate of a C5/C6 isomerisation unit with recycle of the normal paraffins: RON
    # 87-93 (once-through 82-84) from a light straight-run naphtha of RON about 70 (Gary &
    # Handwerk, Petroleum Refining, isomerisation chapter); practically free of benzene,
    # which the unit saturates to cyclohexane (Valavarasu & Sairam, Pet. Sci. Technol. 31
    # (2013) 580). Isomer shares near equilibrium (from memory).
    "isomerate": {
        "main": {
            "isobutane": 1.0, "n-butane": 2.0, "isopentane": 30.0, "n-pentane": 6.0,
            "2,2-dimethylbutane": 16.0, "2,3-dimethylbutane": 6.0, "2-methylpentane": 15.0,
            "3-methylpentane": 8.0, "n-hexane": 3.0, "methylcyclopentane": 2.0,
            "cyclohexane": 3.0,
        },
        "minor": {"isoparaffins": (3.0, range(7, 8)), "naphthenes": (1.0, range(7, 8))},
    },
    "butane": {"main": {"n-butane": 70.0, "isobutane": 30.0}, "minor": {}},
    "ethanol": {"main": {"ethanol": 100.0}, "minor": {}},
    "ETBE": {"main": {"ETBE": 100.0}, "minor": {}},
}

# ---- tank recipes [volume % of streams] -----------------------------------------------------
# Written as a blender would for each grade (common practice, no source); not adjusted after
# seeing what the models compute. The summer grades keep butane low for a DVPE of 45-60 kPa
# (EN 228 class A).
RECIPES = {
    # T-14: E10 summer, 95 RON grade
    "T-14": {"fcc": 30.0, "reformate": 29.0, "isomerate": 15.0, "alkylate": 15.3,
             "butane": 1.0, "ethanol": 9.7},
    # T-11: premium 98 RON E5 summer grade, reformate-rich
    "T-11": {"reformate": 45.0, "alkylate": 22.0, "fcc": 12.0, "isomerate": 13.0,
             "butane": 3.0, "ethanol": 5.0},
    # T-22: premium 98 RON summer grade, alkylate-rich, with ETBE as its oxygenate
    "T-22": {"alkylate": 35.0, "reformate": 33.0, "isomerate": 15.0, "fcc": 6.0,
             "butane": 4.0, "ETBE": 7.0},
    # T-17: 95 RON E5 batch blended with reformate whose benzene was not split off (see below)
    "T-17": {"reformate": 40.0, "fcc": 30.0, "isomerate": 12.0, "alkylate": 11.0,
             "butane": 2.0, "ethanol": 5.0},
}
#: benzene in T-17's reformate: a reformer run without the benzene splitter [mass %]; light
#: reformate carries about 4-8 % benzene then (from memory).
T17_REFORMATE_BENZENE = 5.0


def _canonical(lib, name: str) -> str:
    found = lib.find(name)
    if found is None:
        raise SystemExit(f"example component {name!r} not in the library")
    return found


def stream_composition(stream: dict, lib, rng) -> dict[str, float]:
    """Mass % of one stream: main components plus minor ones, summing to 100."""
    comps = lib.components
    main: dict[str, float] = {}
    for name, pct in stream["main"].items():
        key = _canonical(lib, name)
        main[key] = main.get(key, 0.0) + pct
    out = dict(main)
    ri = pd.to_numeric(comps["retention_index"], errors="coerce")
    for group, (pct, carbons) in stream["minor"].items():
        pool = comps[(comps["group"] == group) & comps["carbon_number"].isin(list(carbons))
                     & ri.notna() & ~comps.index.isin(list(main))].index
        w = np.exp(rng.normal(0.0, 1.0, len(pool)))
        for name, share in zip(sorted(pool), w / w.sum()):
            out[name] = out.get(name, 0.0) + pct * share
    total = sum(out.values())
    return {k: 100.0 * v / total for k, v in out.items()}


def blend(recipe_vol: dict[str, float], streams: dict[str, dict[str, float]], lib) -> dict[str, float]:
    """Mass % of a blend given volume % of streams (volume additivity at 15 °C)."""
    rho = lib.components["density_15c_kg_m3"]
    out: dict[str, float] = {}
    for stream, vol in recipe_vol.items():
        comp = streams[stream]
        # stream density from its mass fractions: 1/rho = sum(w_i / rho_i)
        rho_stream = 1.0 / sum(w / 100.0 / rho[k] for k, w in comp.items())
        mass = vol * rho_stream
        for k, w in comp.items():
            out[k] = out.get(k, 0.0) + mass * w / 100.0
    total = sum(out.values())
    return {k: 100.0 * v / total for k, v in sorted(out.items())}


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


def run_peaks(composition: dict[str, float], lib, **kwargs) -> pd.DataFrame:
    """The peak table of a tank: ``synthetic_run``, with each merged peak's apex at its
    largest member.

    The generator merges components closer than its peak width into one peak placed at their
    area centre. A peak of unequal unresolved members has its maximum near the larger one's
    (the sum of a large and a small Gaussian, from memory), so the apex is moved there: a
    merged n-alkane peak then sits at the marker time of the lab's alkane standard instead of
    up to 0.1 min away (n-octane in T-11, n-nonane with 2,3,3,5-tetramethylhexane in T-22),
    which made the demo warn "n-alkane marker C8/C9 has no peak".
    """
    peaks, truth = synthetic_run(composition, lib, **kwargs)
    members = truth.dropna(subset=["row", "mass_pct"])
    largest = members.loc[members.groupby("row")["mass_pct"].idxmax()]
    apex = dict(zip(largest["row"].astype(int), largest["rt_min"]))
    peaks = peaks.copy()
    peaks["rt_min"] = [apex.get(int(r), t) for r, t in zip(peaks["row"], peaks["rt_min"])]
    peaks = peaks.sort_values("rt_min", kind="stable").reset_index(drop=True)
    # a peak now at the same printed time as a larger one (an extra unknown inside a merged
    # peak) is part of it: its area joins the larger peak's
    when = peaks["rt_min"].round(3)
    for _, same in peaks.groupby(when).groups.items():
        if len(same) > 1:
            big = peaks.loc[same, "area"].idxmax()
            for col in ("area", "height"):
                peaks.loc[big, col] = peaks.loc[same, col].sum()
            peaks = peaks.drop(index=[i for i in same if i != big])
    return peaks.reset_index(drop=True)


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


def tank_compositions(lib) -> dict[str, dict[str, float]]:
    rng = np.random.default_rng(2026)
    streams = {name: stream_composition(s, lib, rng) for name, s in STREAMS.items()}
    # T-17's reformate: the same stream with more benzene (the splitter was bypassed)
    hb = dict(streams["reformate"])
    scale = (100.0 - T17_REFORMATE_BENZENE) / (100.0 - hb["benzene"])
    hb = {k: v * scale for k, v in hb.items()}
    hb["benzene"] = T17_REFORMATE_BENZENE
    out = {tank: blend(recipe, streams, lib) for tank, recipe in RECIPES.items() if tank != "T-17"}
    out["T-17"] = blend(RECIPES["T-17"], {**streams, "reformate": hb}, lib)
    return out


def main() -> None:
    lib = load_library()
    OUT.mkdir(exist_ok=True)
    # No retention drift: the lab's marker times (harbour-point-lab.toml) come from the alkane
    # standard injected in the same sequence, so the runs keep to them. Runs drifting against
    # the marker table (0.1 % was used before) put the n-alkane peaks outside the marker
    # window and every demo run warned "marker C9 has no peak".
    common = dict(index_noise_sd=0.4, missing_trace_below_pct=0.002, extra_unknowns=12)
    tanks = tank_compositions(lib)

    # T-14: E10 summer blend, named export
    peaks = run_peaks(tanks["T-14"], lib, seed=1401, names=True, **common)
    lines = _metadata("T-14 E10 summer 95", "2026-11-30 07:42", 14, "T-14")
    text = "\n".join(lines) + _table(peaks, True).to_csv(index=False, lineterminator="\n")
    (OUT / "hp-t14-e10-summer.csv").write_text(
        text + "Total,,%.2f,,100.0000,\n" % peaks["area"].sum(), encoding="utf-8")

    # T-11: premium, reformate-rich, unnamed, European number format
    peaks = run_peaks(tanks["T-11"], lib, seed=1101, names=False, **common)
    lines = _metadata("T-11 premium 98 E5 (reformate-rich)", "2026-11-30 10:15", 11, "T-11")
    table = _table(peaks, False).to_csv(index=False, sep=";", decimal=",", lineterminator="\n")
    (OUT / "hp-t11-premium-reformate.txt").write_text("\n".join(lines) + table, encoding="utf-8")

    # T-22: premium, alkylate-rich with ETBE, two injections in one workbook
    with pd.ExcelWriter(OUT / "hp-t22-premium-alkylate.xlsx", engine="openpyxl") as xw:
        for inj, seed in (("Injection 1", 2201), ("Injection 2", 2202)):
            peaks = run_peaks(tanks["T-22"], lib, seed=seed, names=True, **common)
            meta = pd.DataFrame({"a": _metadata(
                f"T-22 premium 98 ETBE (alkylate-rich) {inj.lower()}",
                "2026-12-01 08:05" if seed == 2201 else "2026-12-01 11:20", 22, "T-22")[:-1]})
            meta.to_excel(xw, sheet_name=inj, index=False, header=False)
            _table(peaks, True).to_excel(xw, sheet_name=inj, index=False, startrow=len(meta) + 1)

    # T-17: a 95 E5 batch with benzene above the limit
    peaks = run_peaks(tanks["T-17"], lib, seed=1701, names=True, **common)
    lines = _metadata("T-17 regular 95 E5 batch 48", "2026-12-01 14:30", 17, "T-17")
    (OUT / "hp-t17-high-benzene.csv").write_text(
        "\n".join(lines) + _table(peaks, True).to_csv(index=False, lineterminator="\n"),
        encoding="utf-8")

    # Planned composition of T-14's next batch as a composition table (vol %), as a blending
    # program would send it: the same recipe, every component (rounded to 0.001 % v/v).
    rho = lib.components["density_15c_kg_m3"]
    comp = tanks["T-14"]
    vol = {k: v / rho[k] for k, v in comp.items()}
    tot = sum(vol.values())
    rows = sorted(((k, 100 * v / tot) for k, v in vol.items() if 100 * v / tot >= 0.0005),
                  key=lambda kv: -kv[1])
    rounded = [[k, round(v, 3)] for k, v in rows]
    # the rounded amounts sum to exactly 100.000: the largest takes the rounding remainder
    rounded[0][1] = round(rounded[0][1] + 100.0 - sum(v for _, v in rounded), 3)
    rows = rounded
    with open(OUT / "hp-blend-recipe.csv", "w", encoding="utf-8") as fh:
        fh.write("# Harbour Point refinery - planned composition of blend B-0412 for tank T-14\n")
        fh.write("# from the blend recipe and typical stream compositions; not a measurement\n")
        pd.DataFrame({"component": [k for k, _ in rows],
                      "vol_pct": [v for _, v in rows]}).to_csv(
            fh, index=False, lineterminator="\n")
    # The lab's settings for the demo: its identity and the n-alkane markers of GC-3 from the
    # alkane standard injected at the start of the sequence (the same retention times as the
    # runs' generator uses for the n-alkanes).
    markers = {c: round(t, 3) for c, t in alkane_retention_times().items() if 4 <= c <= 12}
    (OUT / "harbour-point-lab.toml").write_text(
        "# Settings of the invented Harbour Point QC lab 2, used by `dha demo`.\n"
        "[lab]\n"
        'name = "Harbour Point Refinery - QC Laboratory 2"\n'
        'address = "1 Quay Road, Harbour Point (invented address)"\n'
        'accreditation = "ISO/IEC 17025, invented accreditation no. HP-0042 (demo only)"\n\n'
        "[report]\n"
        'certificate_number = "HP2/{date}/{stem}"\n\n'
        "[identify]\n"
        "# the method: 35 C held for 15 min, then 2 C/min; hold-up time from methane [min]\n"
        "isothermal_until_min = 15.0\n"
        f"holdup_time_min = {HOLDUP_MIN}\n"
        "# n-alkane retention times of GC-3 from the alkane standard C4-C12 [min]\n"
        "markers = { " + ", ".join(f"{c} = {t}" for c, t in markers.items()) + " }\n",
        encoding="utf-8")
    print("written:", *sorted(p.name for p in OUT.iterdir()))


if __name__ == "__main__":
    main()
