"""`dha index`: the lab's own retention-index table (see dha/cli.py)."""
from __future__ import annotations

from pathlib import Path

import click

from dha.commands.options import library_option, settings_option, out_option

COMMANDS: list[click.Command] = []


@click.group("index")
def index_group() -> None:
    """The lab's own retention-index table, learnt from named reference runs."""


#: Share of a typical petrol's hydrocarbon mass [%] below which `index learn` advises more
#: reference petrols: most of the mass should be on learnt indices (common practice, no source).
GOOD_COVER_PCT = 90


@index_group.command("learn")
@click.argument("refruns", nargs=-1, required=True,
                type=click.Path(exists=True, dir_okay=False, path_type=Path))
@out_option("out_dir", aliases=("--out-dir",), required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder to write the library overlay to.")
@library_option
@settings_option
@click.option("--overwrite", is_flag=True, help="Replace an overlay that exists.")
@click.option("--recalibrate", is_flag=True,
              help="Also shift the estimated indices of components the runs did not contain by "
                   "the learnt offsets of their neighbours (same group, close boiling point).")
def learn_command(refruns, out_dir, library_dir, settings_file, overwrite, recalibrate) -> None:
    """Learn retention indices from named reference runs and write a library overlay.

    Each REFRUN is a peak-table export whose peaks (n-alkanes included) carry names. The
    indices are computed from each run's own n-alkanes and averaged over the runs; later runs
    use them with --library DIR (their matches then say ri_source "learnt").

    \b
    Example:
        dha index learn ref_2026-11-30.csv ref_2026-12-01.csv -o lab_indices/
        dha report sample.csv --library lab_indices/
    """
    from dha.library import load_library
    from dha.reader import read_input
    from dha.retention import learn_indices, write_index_overlay
    from dha.settings import load_settings

    settings = load_settings(settings_file)
    library = load_library(overlay=library_dir) if library_dir else load_library()
    runs = []
    for path in refruns:
        for run in read_input(path, settings):
            if run.kind != "peaks":
                from dha.errors import InputError
                raise InputError(f"{path}: a composition table, not a peak table; give a "
                                 "named reference run")
            rid = (run.sample or {}).get("id") or path.stem
            if run.injection:
                rid = f"{rid}-{run.injection}"
            runs.append((str(rid), run.table))
    table = learn_indices(runs, library, settings, recalibrate=recalibrate)
    out = write_index_overlay(table, out_dir, runs=[r for r, _ in runs], overwrite=overwrite)
    sd = table["retention_index_sd"].dropna()
    kinds = table["index_kind"].value_counts() if "index_kind" in table else {}
    click.echo(f"learnt {int(kinds.get('learnt', len(table)))} retention indices from "
               f"{len(runs)} run(s)"
               + (f", recalibrated {int(kinds.get('recalibrated', 0))} from their neighbours"
                  if recalibrate else "") + f" -> {out}")
    if len(sd):
        worst = table.loc[table["retention_index_sd"].idxmax()]
        click.echo(f"spread over runs: median sd {sd.median():.2f}, largest {worst['name']} "
                   f"({worst['retention_index_sd']:.2f})")
    # how much of a typical petrol the learnt entries cover: the others keep their estimates
    from dha.identify import prior_shares
    typical = prior_shares(library)[2]
    learnt = set(table["name"][table["index_kind"] == "learnt"]) if "index_kind" in table \
        else set(table["name"])
    cover = round(100.0 * sum(v for k, v in typical.items() if k in learnt)
                  / sum(typical.values()))
    click.echo(f"the learnt components make up {cover} % of the hydrocarbon mass of a typical "
               "petrol (mean of 40 real fuels, Kuzhagaliyeva et al. 2022); the others keep their "
               "estimated index"
               + ("; learn from several different petrols to cover more"
                  if cover < GOOD_COVER_PCT else ""))
    click.echo(f"use it with: --library {out}")


COMMANDS.append(index_group)
