"""Write the reader's test corpus: export variants and, beside each, what it must read as.

Run once from the repository root; the outputs are committed and the tests read them:

    .venv/bin/python tests/exports/make_corpus.py

Scenario (invented): Harbour Point refinery, lab 2, chromatographs GC-3 and GC-5; Saltmarsh
terminal QC lab; all people, tanks and sample ids are invented. The layouts are our own.

The truth of every variant is written here, from the same peak list that produced the file,
not from the reader: ``<variant>.expected.json`` holds, per run, the sample metadata, every
kept row as ``[row, rt_min, area, name]`` in retention-time order (row = 1-based line in the
text file or row in the sheet), extra column values to check, and every row the reader must
log as ``[row, action, keyword in the reason]``. Binary variants (UTF-16, Windows-1252, XLSX,
XLS) exist only as generated files; the XLS is written with xlwt (a writer used only here).
"""
from __future__ import annotations

import json
import random
from datetime import datetime
from pathlib import Path

HERE = Path(__file__).resolve().parent

# name, CAS, approximate retention time on a 100 m dimethylpolysiloxane column [min]
# (invented times in the usual elution order; CAS numbers are the substances' own)
COMPONENTS = [
    ("propane", "74-98-6", 6.412), ("isobutane", "75-28-5", 7.104), ("n-butane", "106-97-8", 7.768),
    ("isopentane", "78-78-4", 9.653), ("n-pentane", "109-66-0", 10.571),
    ("2,2-dimethylbutane", "75-83-2", 12.226), ("cyclopentane", "287-92-3", 14.047),
    ("2,3-dimethylbutane", "79-29-8", 14.205), ("2-methylpentane", "107-83-5", 14.488),
    ("3-methylpentane", "96-14-0", 15.402), ("n-hexane", "110-54-3", 16.716),
    ("methyl tert-butyl ether", "1634-04-4", 17.061), ("methylcyclopentane", "96-37-7", 19.384),
    ("2,4-dimethylpentane", "108-08-7", 19.923), ("benzene", "71-43-2", 22.458),
    ("cyclohexane", "110-82-7", 23.109), ("2-methylhexane", "591-76-4", 24.377),
    ("2,3-dimethylpentane", "565-59-3", 24.606), ("3-methylhexane", "589-34-4", 25.499),
    ("2,2,4-trimethylpentane", "540-84-1", 26.954), ("n-heptane", "142-82-5", 29.163),
    ("methylcyclohexane", "108-87-2", 32.611), ("toluene", "108-88-3", 38.522),
    ("n-octane", "111-65-9", 44.877), ("ethylbenzene", "100-41-4", 52.904),
    ("m-xylene", "108-38-3", 54.155), ("p-xylene", "106-42-3", 54.389),
    ("o-xylene", "95-47-6", 57.714), ("n-nonane", "111-84-2", 60.233),
    ("1,2,4-trimethylbenzene", "95-63-6", 73.468), ("n-decane", "124-18-5", 75.702),
    ("naphthalene", "91-20-3", 98.317),
]


def make_peaks(seed: int, n_unknown: int = 4) -> list[dict]:
    """A peak list: every component plus a few unnamed peaks, areas as exact decimal text."""
    rng = random.Random(seed)
    peaks = []
    for name, cas, rt in COMPONENTS:
        rt_txt = f"{rt + rng.uniform(-0.05, 0.05):.3f}"
        peaks.append({"name": name, "cas": cas, "rt": rt_txt})
    for k in range(n_unknown):
        peaks.append({"name": "", "cas": "", "rt": f"{rng.uniform(30, 95):.3f}"})
    peaks.sort(key=lambda p: float(p["rt"]))
    total = 0.0
    for p in peaks:
        a = rng.lognormvariate(11, 1.6)
        p["area"] = f"{a:.3f}"
        p["height"] = f"{a / rng.uniform(4, 12):.2f}"
        p["ri"] = f"{300 + float(p['rt']) * 9.3:.1f}"
        total += float(p["area"])
    for p in peaks:
        p["area_pct"] = f"{100 * float(p['area']) / total:.4f}"
        p["mass_pct"] = f"{100 * float(p['area']) / total * 1.01:.4f}"
    return peaks


def fmt(num_txt: str, decimal: str = ".", thousands: str = "") -> str:
    """Re-write a "1234567.891" number with another decimal mark and thousands grouping."""
    neg = num_txt.startswith("-")
    body = num_txt.lstrip("-")
    whole, _, frac = body.partition(".")
    if thousands:
        groups = []
        while len(whole) > 3:
            groups.insert(0, whole[-3:])
            whole = whole[:-3]
        whole = thousands.join([whole] + groups)
    out = whole + (decimal + frac if frac else "")
    return ("-" if neg else "") + out


def quote(text: str, sep: str) -> str:
    return f'"{text}"' if (sep in text or '"' in text) else text


class Doc:
    """Lines of a text export with what each line is."""

    def __init__(self) -> None:
        self.lines: list[str] = []
        self.data: list[tuple[int, dict]] = []      # (line number, peak)
        self.log: list[list] = []                   # [row, action, keyword]

    def add(self, text: str) -> int:
        self.lines.append(text)
        return len(self.lines)

    def peak(self, text: str, peak: dict) -> int:
        n = self.add(text)
        self.data.append((n, peak))
        return n

    def skip(self, text: str, keyword: str) -> int:
        n = self.add(text)
        self.log.append([n, "skipped", keyword])
        return n


def expected_rows(data: list[tuple[int, dict]], rt_key: str = "rt", rt_div: float = 1.0,
                  extra: tuple[str, ...] = ()) -> tuple[list, dict, int | None]:
    """Kept rows in retention-time order, extra columns, and the first out-of-order row."""
    first_bad = None
    prev = None
    for row, p in data:
        rt = float(p[rt_key]) / rt_div
        if prev is not None and rt < prev and first_bad is None:
            first_bad = row
        prev = rt
    ordered = sorted(data, key=lambda rp: float(rp[1][rt_key]) / rt_div)   # stable
    rows = [[row, float(p[rt_key]) / rt_div, float(p["area_true"] if "area_true" in p else p["area"]),
             p["name"] or None] for row, p in ordered]
    cols = {c: [p.get(c + "_true", p.get(c)) for _, p in ordered] for c in extra}
    return rows, cols, first_bad


def write_expected(name: str, runs: list[dict], settings: dict | None = None) -> None:
    out = {"file": name, "settings": settings or {}, "runs": runs}
    (HERE / f"{Path(name).stem}.expected.json").write_text(
        json.dumps(out, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")


def peak_run(doc: Doc, sample: dict, rt_div: float = 1.0, extra=(), injection=None,
             extra_log=()) -> dict:
    rows, cols, first_bad = expected_rows(doc.data, rt_div=rt_div, extra=extra)
    log = list(doc.log) + [list(e) for e in extra_log]
    if first_bad is not None:
        log.append([first_bad, "changed", "sorted"])
    return {"injection": injection, "kind": "peaks", "basis": None, "sample": sample,
            "rows": rows, "cols": cols, "log": sorted(log, key=lambda e: (e[0], e[1]))}


def save_text(name: str, doc: Doc, encoding: str = "utf-8", newline: str = "\n",
              bom: bool = False) -> None:
    text = newline.join(doc.lines) + newline
    data = text.encode(encoding)
    if bom and encoding == "utf-8":
        data = b"\xef\xbb\xbf" + data
    if bom and encoding == "utf-16-le":
        data = b"\xff\xfe" + data
    if bom and encoding == "utf-16-be":
        data = b"\xfe\xff" + data
    (HERE / name).write_bytes(data)


# ----------------------------------------------------------------------------- variants

def v01() -> None:
    """Comma CSV, key: value metadata, quoted names with commas, units, CAS, a total row."""
    peaks = make_peaks(1)
    d = Doc()
    d.add("Harbour Point refinery, lab 2 - detailed hydrocarbon analysis")
    d.add("Sample: HP-2231-T4")
    d.add("Injection time: 2026-03-01 10:32:05")
    d.add("Instrument: GC-3")
    d.add("Method: DHA-100m-long-v4")
    d.add("Operator: R. Quill")
    d.add("Vial: 14")
    d.add("")
    d.add("Peak,RT [min],Area [pA*s],Height [pA],Area %,Name,CAS")
    for i, p in enumerate(peaks, 1):
        d.peak(",".join([str(i), p["rt"], p["area"], p["height"], p["area_pct"],
                         quote(p["name"], ","), p["cas"]]), p)
    total = sum(float(p["area"]) for p in peaks)
    d.skip(f"Total,,{total:.3f},,100.0000,,", "total")
    save_text("v01_comma_meta_total.csv", d)
    write_expected("v01_comma_meta_total.csv", [peak_run(
        d, {"id": "HP-2231-T4", "injection_time": "2026-03-01 10:32:05", "instrument": "GC-3",
            "method": "DHA-100m-long-v4", "operator": "R. Quill", "vial": "14"},
        extra=("cas", "height"))])


def v02() -> None:
    """Semicolon, decimal comma, '.' thousands, UTF-8 with BOM, CRLF, key;value, 'Sum' row."""
    peaks = make_peaks(2)
    d = Doc()
    d.add("Sample name;HP-2240-R2")
    d.add("Injection date;2026-03-02 07:15")
    d.add("Instrument;GC-5")
    d.add("Analyst;M. Okonjo-Hale")
    d.add("Tank;T-17")
    d.add("")
    d.add("Nr;Ret. Time (min);Peak area;Area%;Component")
    for i, p in enumerate(peaks, 1):
        d.peak(";".join([str(i), fmt(p["rt"], ","), fmt(p["area"], ",", "."),
                         fmt(p["area_pct"], ","), p["name"]]), p)
    d.skip(";Sum;" + fmt(f"{sum(float(p['area']) for p in peaks):.3f}", ",", ".") + ";100,0000;",
           "total")
    save_text("v02_semicolon_decimal_comma_bom.csv", d, newline="\r\n", bom=True)
    write_expected("v02_semicolon_decimal_comma_bom.csv", [peak_run(
        d, {"id": "HP-2240-R2", "injection_time": "2026-03-02 07:15", "instrument": "GC-5",
            "operator": "M. Okonjo-Hale", "method": None, "vial": None, "tank": "T-17"},
        extra=("area_pct",))])


def v03() -> None:
    """Tab, UTF-16 LE with BOM, retention time in seconds, blank lines inside the table."""
    peaks = make_peaks(3)
    for p in peaks:
        p["rt_s"] = f"{float(p['rt']) * 60:.2f}"
    d = Doc()
    d.add("Sample\tHP-2251")
    d.add("Acquired\t2026-03-03 22:40")
    d.add("System\tGC-3")
    d.add("Method\tDHA-100m-long-v4")
    d.add("Tray position\t7")
    d.add("Time [s]\tArea\tHeight\tName\tCAS No.")
    for i, p in enumerate(peaks, 1):
        d.peak("\t".join([p["rt_s"], p["area"], p["height"], p["name"], p["cas"]]), p)
        if i % 10 == 0:
            d.add("")
    save_text("v03_tab_utf16le_seconds.txt", d, encoding="utf-16-le", bom=True, newline="\r\n")
    rows, cols, _ = expected_rows(d.data, rt_key="rt_s", rt_div=60.0, extra=("cas",))
    write_expected("v03_tab_utf16le_seconds.txt", [{
        "injection": None, "kind": "peaks", "basis": None,
        "sample": {"id": "HP-2251", "injection_time": "2026-03-03 22:40", "instrument": "GC-3",
                   "method": "DHA-100m-long-v4", "vial": "7", "operator": None},
        "rows": rows, "cols": cols, "log": [[6, "changed", "seconds"]]}])


def v04() -> None:
    """Whitespace-aligned report with page breaks: repeated headers, page lines, blank lines."""
    peaks = make_peaks(4)
    d = Doc()
    d.add("HARBOUR POINT REFINERY   LAB 2   DETAILED HYDROCARBON REPORT")
    d.add("")
    d.add("Sample ID      : HP-2262")
    d.add("Injection time : 2026-03-04 13:05")
    d.add("Instrument     : GC-5")
    d.add("Operator       : T. Varga")
    d.add("")
    widths = (6, 12, 16, 12, 28)
    heads = ("Peak", "RT (min)", "Area (pA*s)", "Height", "Name")

    def line(cells):
        out = ""
        for k, (c, w) in enumerate(zip(cells, widths)):
            out += (c.ljust(w) if k == len(cells) - 1 else c.rjust(w)) + ("  " if k < 4 else "")
        return out.rstrip()
    d.add(line(heads))
    page = 1
    for i, p in enumerate(peaks, 1):
        d.peak(line((str(i), p["rt"], p["area"], p["height"], p["name"])), p)
        if i % 12 == 0 and i < len(peaks):
            page += 1
            d.add("")
            d.skip(f"Page {page}", "not a number")
            d.skip(line(heads), "header")
    save_text("v04_aligned_pages.txt", d)
    write_expected("v04_aligned_pages.txt", [peak_run(
        d, {"id": "HP-2262", "injection_time": "2026-03-04 13:05", "instrument": "GC-5",
            "operator": "T. Varga", "method": None, "vial": None},
        extra=("height",))])


def v05() -> None:
    """Windows-1252, semicolon, decimal comma; µ and · in units; zero and negative areas."""
    peaks = make_peaks(5)
    d = Doc()
    d.add("Saltmarsh terminal QC lab – Tank 9 rundown")
    d.add("Sample: ST-0917")
    d.add("Operator: Zoë Brandvold")
    d.add("Method: Oven 35 °C hold 15 min")
    d.add("RT [min];Area [µV·s];Height [µV];Name")
    for i, p in enumerate(peaks, 1):
        d.peak(";".join([fmt(p["rt"], ","), fmt(p["area"], ","), fmt(p["height"], ","),
                         p["name"]]), p)
        if i == 5:
            d.skip("11,204;0;0;", "zero area")
        if i == 9:
            d.skip("15,990;-312,5;-4,1;", "negative area")
    save_text("v05_cp1252_semicolon.csv", d, encoding="cp1252")
    write_expected("v05_cp1252_semicolon.csv", [peak_run(
        d, {"id": "ST-0917", "operator": "Zoë Brandvold", "method": "Oven 35 °C hold 15 min",
            "instrument": None, "notes": ["Saltmarsh terminal QC lab – Tank 9 rundown"]})])


def v06() -> None:
    """Tab, UTF-16 BE with BOM, unsorted rows, an exact duplicate, a same-time pair kept."""
    peaks = make_peaks(6)
    rng = random.Random(6)
    order = peaks[:]
    rng.shuffle(order)
    twin = dict(order[3])
    twin["area"] = f"{float(twin['area']) / 3:.3f}"      # same rt, different area: kept
    d = Doc()
    d.add("Sample ID:\tHP-2270")
    d.add("Injected:\t2026-03-05 09:00")
    d.add("")
    d.add("RT\tArea\tName")
    for i, p in enumerate(order):
        d.peak("\t".join([p["rt"], p["area"], p["name"]]), p)
        if i == 3:
            d.peak("\t".join([twin["rt"], twin["area"], twin["name"]]), twin)
        if i == 7:
            first = d.data[-1][0]
            d.skip("\t".join([p["rt"], p["area"], p["name"]]), f"duplicate of row {first}")
    save_text("v06_utf16be_unsorted.tsv", d, encoding="utf-16-be", bom=True)
    write_expected("v06_utf16be_unsorted.tsv", [peak_run(
        d, {"id": "HP-2270", "injection_time": "2026-03-05 09:00"})])


def v07() -> None:
    """Comma CSV full of bad rows: text and empty areas, junk times, RI and area % columns."""
    peaks = make_peaks(7)
    d = Doc()
    d.add("Sample: HP-2288")
    d.add("Vial: 22")
    d.add("Ret Time,Area,Area %,RI,Compound")
    for i, p in enumerate(peaks, 1):
        d.peak(",".join([p["rt"], p["area"], p["area_pct"], p["ri"], quote(p["name"], ",")]), p)
        if i == 2:
            d.skip("8.211,n.a.,,,", "not a number")
        if i == 4:
            d.skip("9.900,,,,", "not a number")
        if i == 6:
            d.skip("--,1234.5,,,", "not a number")
        if i == 8:
            d.skip("13.001,-88.2,,,", "negative area")
        if i == 10:
            d.skip("15.800,0.000,,,", "zero area")
    d.add("")
    d.skip("Printed 2026-03-06 by workstation HP-LAB2-07", "not a number")
    save_text("v07_bad_rows.csv", d)
    write_expected("v07_bad_rows.csv", [peak_run(
        d, {"id": "HP-2288", "vial": "22"}, extra=("ri", "area_pct"))])


def v08() -> None:
    """Header on line 1, quoted thousands-grouped numbers, RI and mass %; id from file name."""
    peaks = make_peaks(8)
    d = Doc()
    d.add("RT (min),Area,Height,RI,Mass %,Peak Name")
    for p in peaks:
        d.peak(",".join([p["rt"], f'"{fmt(p["area"], ".", ",")}"', f'"{fmt(p["height"], ".", ",")}"',
                         p["ri"], p["mass_pct"], quote(p["name"], ",")]), p)
    save_text("v08_thousands_quoted.csv", d)
    write_expected("v08_thousands_quoted.csv", [peak_run(
        d, {"id": "v08_thousands_quoted", "injection_time": None}, extra=("ri", "mass_pct"))])


def _sheet_rows(peaks, meta, header, start_row, col0=0, total=True, cells=None):
    """Rows of a sheet (lists) and the expected rows; numbers stored as numbers."""
    rows = [list(m) for m in meta]
    while len(rows) < start_row - 1:
        rows.append([])
    rows.append([None] * col0 + list(header))
    data, log = [], []
    for p in peaks:
        rows.append([None] * col0 + (cells(p) if cells else
                                     [float(p["rt"]), float(p["area"]), float(p["height"]),
                                      p["name"] or None]))
        data.append((len(rows), p))
    if total:
        rows.append([None] * col0 + ["Total", sum(float(p["area"]) for p in peaks), None, None])
        log.append([len(rows), "skipped", "total"])
    return rows, data, log


def v09() -> None:
    """XLSX, one injection per sheet, metadata rows with a date cell, table from row 9."""
    import openpyxl
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    runs = []
    for k, (sheet, when) in enumerate([("Inj 1", datetime(2026, 3, 7, 8, 10)),
                                        ("Inj 2", datetime(2026, 3, 7, 11, 25)),
                                        ("Inj 3", datetime(2026, 3, 7, 14, 40))]):
        peaks = make_peaks(90 + k)
        meta = [["Harbour Point refinery, lab 2"], ["Sample", f"HP-2301-{k + 1}"],
                ["Injection time", when], ["Instrument", "GC-3"], ["Method", "DHA-100m-long-v4"]]
        rows, data, log = _sheet_rows(peaks, meta, ["RT [min]", "Area", "Height", "Name"], 9)
        ws = wb.create_sheet(sheet)
        for r in rows:
            ws.append(r)
        d = Doc()
        d.data, d.log = data, log
        runs.append(peak_run(d, {"id": f"HP-2301-{k + 1}", "injection_time": str(when),
                                 "instrument": "GC-3", "method": "DHA-100m-long-v4",
                                 "notes": ["Harbour Point refinery, lab 2"]}, injection=sheet))
    notes = wb.create_sheet("Notes")
    notes.append(["Sequence HP-2301, three injections of the same tank sample."])
    wb.save(HERE / "v09_sheets_per_injection.xlsx")
    write_expected("v09_sheets_per_injection.xlsx", runs)


def v10() -> None:
    """XLSX, table at row 14 from column C, 'key: value' cells, text numbers with decimal comma."""
    import openpyxl
    peaks = make_peaks(10)
    meta = [["Saltmarsh terminal QC lab"], [None, "Sample ID: ST-1002"],
            [None, "Operator: P. Achterberg"], [None, "Vial: 3"]]

    def cells(p):   # every third area written as text with a decimal comma, as some CDS do
        area = fmt(p["area"], ",") if int(float(p["rt"]) * 1000) % 3 == 0 else float(p["area"])
        return [float(p["rt"]), area, float(p["area_pct"]), p["cas"] or None, p["name"] or None]
    rows, data, log = _sheet_rows(peaks, meta, ["RT (min)", "Area", "Area %", "CAS", "Name"], 14,
                                  col0=2, total=False, cells=cells)
    rows.insert(20, [])         # a blank row inside the table shifts later rows by one
    data = [(r + 1 if r >= 21 else r, p) for r, p in data]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Run"
    for r in rows:
        ws.append(r)
    wb.save(HERE / "v10_offset_sheet.xlsx")
    d = Doc()
    d.data, d.log = data, log
    write_expected("v10_offset_sheet.xlsx", [peak_run(
        d, {"id": "ST-1002", "operator": "P. Achterberg", "vial": "3"}, extra=("cas",))])


def v11() -> None:
    """Legacy XLS (written with xlwt), retention time in seconds, names with commas."""
    import xlwt
    peaks = make_peaks(11)
    for p in peaks:
        p["rt_s"] = f"{float(p['rt']) * 60:.2f}"
    wb = xlwt.Workbook()
    ws = wb.add_sheet("Peaks")
    meta = [["Sample", "HP-2315"], ["Instrument", "GC-5"], ["Operator", "D. Ferreira-Lund"]]
    rows = meta + [[], ["Time (sec)", "Area", "Name"]]
    header_row = len(rows)
    data = []
    for p in peaks:
        rows.append([float(p["rt_s"]), float(p["area"]), p["name"]])
        data.append((len(rows), p))
    for r, cells in enumerate(rows):
        for c, v in enumerate(cells):
            if v is not None and v != "":
                ws.write(r, c, v)
    wb.save(str(HERE / "v11_legacy.xls"))
    r_, cols, _ = expected_rows(data, rt_key="rt_s", rt_div=60.0)
    write_expected("v11_legacy.xls", [{
        "injection": None, "kind": "peaks", "basis": None,
        "sample": {"id": "HP-2315", "instrument": "GC-5", "operator": "D. Ferreira-Lund"},
        "rows": r_, "cols": cols, "log": [[header_row, "changed", "seconds"]]}])


def _composition(seed: int, k: int = 12) -> list[tuple[str, str, str]]:
    rng = random.Random(seed)
    picks = rng.sample(COMPONENTS, k)
    amounts = [rng.uniform(0.2, 20) for _ in picks]
    s = sum(amounts)
    return [(n, cas, f"{100 * a / s:.3f}") for (n, cas, _), a in zip(picks, amounts)]


def comp_run(rows, log, basis, sample):
    return {"injection": None, "kind": "composition", "basis": basis, "sample": sample,
            "rows": rows, "cols": {}, "log": sorted(log)}


def v12() -> None:
    """Composition table, comma CSV, 'wt%' column, quoted names, a Total row."""
    comp = _composition(12)
    d = Doc()
    d.add("Sample: HP-blend-7")
    d.add("Source: blend recipe, Harbour Point blending unit")
    d.add("Component,CAS,wt%")
    rows = []
    for n, cas, a in comp:
        r = d.add(f"{quote(n, ',')},{cas},{a}")
        rows.append([r, n, float(a)])
    d.skip("Total,,100.000", "total")
    save_text("v12_composition_wt.csv", d)
    write_expected("v12_composition_wt.csv", [comp_run(
        rows, d.log, "mass_pct", {"id": "HP-blend-7",
                                  "source": "blend recipe, Harbour Point blending unit"})])


def v13() -> None:
    """Composition workbook: 'Volume %', some components given only by CAS number."""
    import openpyxl
    comp = _composition(13)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "LIMS"
    ws.append(["LIMS id", "ST-LIMS-55821"])
    ws.append(["Injection date", "2026-03-08"])
    ws.append([])
    ws.append(["Component", "Volume %"])
    rows = []
    for i, (n, cas, a) in enumerate(comp):
        comp_id = cas if i % 3 == 0 else n
        ws.append([comp_id, float(a)])
        rows.append([ws.max_row, comp_id, float(a)])
    wb.save(HERE / "v13_composition_vol.xlsx")
    write_expected("v13_composition_vol.xlsx", [comp_run(
        rows, [], "vol_pct", {"id": "ST-LIMS-55821", "injection_time": "2026-03-08"})])


def v14() -> None:
    """Composition, semicolon, decimal comma, 'Mol %', UTF-8 BOM, bad rows and a Sum row."""
    comp = [(n, cas, f"{float(a):.2f}") for n, cas, a in _composition(14)]
    d = Doc()
    d.add("Name;Mol %")
    rows = []
    for i, (n, cas, a) in enumerate(comp):
        r = d.add(f"{n};{fmt(a, ',')}")
        rows.append([r, n, float(a)])
        if i == 2:
            d.skip(";1,250", "no component")
        if i == 5:
            d.skip("n-undecane;-0,4", "negative amount")
        if i == 7:
            d.skip("n-dodecane;trace", "not a number")
    d.skip("Sum;100,000", "total")
    save_text("v14_composition_mol.txt", d, bom=True)
    write_expected("v14_composition_mol.txt", [comp_run(
        rows, d.log, "mol_pct", {"id": "v14_composition_mol"})])


def v15() -> None:
    """Comma CSV whose exporter did not quote names: commas inside names in the middle column."""
    peaks = make_peaks(15)
    d = Doc()
    d.add("Sample: HP-2333")
    d.add("RT [min],Name,Area")
    for p in peaks:
        row = d.peak(f"{p['rt']},{p['name']},{p['area']}", p)
        if "," in p["name"]:
            d.log.append([row, "changed", "unquoted"])
    save_text("v15_unquoted_names.csv", d)
    write_expected("v15_unquoted_names.csv", [peak_run(d, {"id": "HP-2333"})])


def v16() -> None:
    """Headers no alias knows, read through a lab import profile (TOML) that pins them."""
    peaks = make_peaks(16)
    d = Doc()
    d.add("Sample = HP-2340")
    d.add("Operator = A. Nwosu")
    d.add("Apex;Resp.;Label")
    for p in peaks:
        d.peak(f"{p['rt']};{p['area']};{p['name']}", p)
    save_text("v16_profile_pinned.csv", d, newline="\r\n")
    (HERE / "v16_profile_pinned.profile.toml").write_text(
        "# Import profile of the lab-2 chromatograph GC-7 (invented): its export names columns\n"
        "# in its own way.\n"
        "[reader]\n"
        'columns = { rt_min = "Apex", area = "Resp.", name = "Label" }\n', encoding="utf-8")
    write_expected("v16_profile_pinned.csv", [peak_run(
        d, {"id": "HP-2340", "operator": "A. Nwosu"})],
        settings={"profile": "v16_profile_pinned.profile.toml"})


def v17() -> None:
    """Single spaces between cells, names with spaces in the last column, old Mac CR endings."""
    peaks = make_peaks(17)
    d = Doc()
    d.add("Sample HP-2351")
    d.add("Peak RT Area Name")
    for i, p in enumerate(peaks, 1):
        d.peak(f"{i} {p['rt']} {p['area']} {p['name']}".rstrip(), p)
    save_text("v17_single_space_cr.txt", d, newline="\r")
    write_expected("v17_single_space_cr.txt", [peak_run(d, {"id": "HP-2351"})])


def v18() -> None:
    """Tab, 'Time/sec' header, UTF-8 without BOM, metadata after a title, trailing tabs."""
    peaks = make_peaks(18)
    for p in peaks:
        p["rt_s"] = f"{float(p['rt']) * 60:.1f}"
    d = Doc()
    d.add("Harbour Point refinery lab 2 export")
    d.add("Sample no:\tHP-2362\t\t")
    d.add("Run by:\tK. Lindqvist\t\t")
    d.add("Time/sec\tArea\tName\t")
    for p in peaks:
        d.peak(f"{p['rt_s']}\t{p['area']}\t{p['name']}\t", p)
    save_text("v18_tab_time_per_sec.txt", d)
    rows, cols, _ = expected_rows(d.data, rt_key="rt_s", rt_div=60.0)
    write_expected("v18_tab_time_per_sec.txt", [{
        "injection": None, "kind": "peaks", "basis": None,
        "sample": {"id": "HP-2362", "operator": "K. Lindqvist"},
        "rows": rows, "cols": cols, "log": [[4, "changed", "seconds"]]}])


VARIANTS = [v01, v02, v03, v04, v05, v06, v07, v08, v09, v10, v11, v12, v13, v14, v15, v16, v17,
            v18]


def main() -> None:
    for make in VARIANTS:
        make()
    print(f"wrote {len(VARIANTS)} variants to {HERE}")


if __name__ == "__main__":
    main()
