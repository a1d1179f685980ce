"""`dha index learn`: a library overlay from named reference runs, used with --library."""
from __future__ import annotations

import re

import pandas as pd
import pytest
from click.testing import CliRunner

from dha.cli import cli
from dha.identify import identify
from dha.library import check_library, load_library
from dha.settings import default_settings
from dha.synthetic import example_composition, synthetic_run


@pytest.fixture(scope="module")
def lib():
    return load_library()


def _write_export(peaks: pd.DataFrame, path, sample_id: str) -> None:
    lines = [f"Sample ID: {sample_id}", "Instrument: GC-7 (invented Harbour Lane test lab)", ""]
    lines.append("Peak,RT [min],Area,Height,Name")
    for r in peaks.itertuples(index=False):
        lines.append(f"{r.row},{r.rt_min:.4f},{r.area:.3f},{r.height:.3f},{r.name or ''}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_learn_writes_a_checked_overlay_and_later_runs_use_it(lib, tmp_path):
    comp = example_composition("alkylate", lib)
    kw = dict(column_sd=1.0, column_seed=3, index_noise_sd=0.1)
    for k, seed in enumerate((1, 2)):
        peaks, _ = synthetic_run(comp, lib, seed=seed, names=True, **kw)
        _write_export(peaks, tmp_path / f"ref{k}.csv", f"REF-{k}")
    settings = tmp_path / "method.toml"
    settings.write_text("[identify]\nisothermal_until_min = 15.0\nholdup_time_min = 4.0\n")
    out = tmp_path / "lab_indices"
    r = CliRunner().invoke(cli, ["index", "learn", str(tmp_path / "ref0.csv"),
                                 str(tmp_path / "ref1.csv"), "-o", str(out),
                                 "--settings", str(settings)])
    assert r.exit_code == 0, r.output
    assert "learnt" in r.output
    # how much of a typical petrol the table covers (the 40 real fuels of Kuzhagaliyeva et
    # al. 2022): an alkylate's components are not a reformate's
    cover = re.search(r"make up (\d+) % of the hydrocarbon mass of a typical petrol", r.output)
    assert cover and 0 < int(cover.group(1)) <= 100, r.output
    assert ("learn from several different petrols" in r.output) == (int(cover.group(1)) < 90)
    # one real research gasoline (FACE A, 28 components) covers far less: the hint appears
    from dha.synthetic import real_fuel_run
    peaks, _ = real_fuel_run(lib, "KUZ-0628", seed=1, names=True, column_sd=1.0, column_seed=3)
    _write_export(peaks, tmp_path / "face_a.csv", "REF-A")
    r = CliRunner().invoke(cli, ["index", "learn", str(tmp_path / "face_a.csv"), "-o",
                                 str(tmp_path / "lab_a"), "--settings", str(settings)])
    assert r.exit_code == 0, r.output
    cover = re.search(r"make up (\d+) % of the hydrocarbon mass of a typical petrol", r.output)
    assert cover and int(cover.group(1)) < 90 and "several different petrols" in r.output, r.output
    learnt = pd.read_csv(out / "learnt_indices.csv")
    assert (learnt["n_runs"] == 2).sum() > 0.8 * len(learnt)
    # two runs of one column differ by run-to-run noise only (sd 0.1): spread stays small
    assert learnt["retention_index_sd"].median() < 0.3
    overlay = load_library(out)
    assert check_library(overlay) == []
    src = overlay.components.loc[learnt["name"], "retention_index_source"]
    assert src.str.startswith("learnt:REF-0+REF-1").all()
    # shipped values of other columns are kept (blank cells keep shipped values)
    name = learnt["name"].iat[0]
    assert overlay.components.at[name, "molar_mass_g_mol"] == lib.components.at[name, "molar_mass_g_mol"]
    # a later unnamed run reports ri_source "learnt"
    run, truth = synthetic_run(comp, lib, seed=9, **kw)
    s = default_settings()
    s["identify"].update(isothermal_until_min=15.0, holdup_time_min=4.0, markers={
        str(int(round(i / 100))): float(t) for c, i, t in
        zip(truth["component"], truth["true_index"], truth["rt_min"])
        if lib.components.at[c, "group"] == "n_paraffins"})
    ident = identify(run, overlay, s)
    assert (ident["ri_source"] == "learnt").sum() > 50


def test_learn_refuses_overwrite_and_unnamed_runs(lib, tmp_path):
    comp = {"n-hexane": 40.0, "n-heptane": 30.0, "toluene": 30.0}
    peaks, _ = synthetic_run(comp, lib, names=False)
    _write_export(peaks, tmp_path / "unnamed.csv", "U-1")
    r = CliRunner().invoke(cli, ["index", "learn", str(tmp_path / "unnamed.csv"), "-o",
                                 str(tmp_path / "o")])
    assert r.exit_code == 1
    assert "n-alkanes" in r.output
    peaks, _ = synthetic_run(comp, lib, names=True)
    _write_export(peaks, tmp_path / "named.csv", "N-1")
    args = ["index", "learn", str(tmp_path / "named.csv"), "-o", str(tmp_path / "o")]
    assert CliRunner().invoke(cli, args).exit_code == 0
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 1 and "--overwrite" in r.output
    assert CliRunner().invoke(cli, args + ["--overwrite"]).exit_code == 0
