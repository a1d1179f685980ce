"""``dha batch``: many runs in parallel, incremental, with a summary, flags and trend charts."""
from __future__ import annotations

from pathlib import Path

import click

from dha.commands.options import library_option, settings_option

from dha.safety import terminal_text


@click.command("batch")
@click.argument("paths", nargs=-1, required=True)
@click.option("-o", "--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder for per-run results, summary.csv, summary.xlsx and trend charts.")
@click.option("-j", "--jobs", type=click.IntRange(1, 64), default=2, show_default=True,
              help="Runs processed in parallel.")
@click.option("--spec", "spec", default=None, help="Specification profile (name or .toml path).")
@click.option("--format", "formats", default="json", show_default=True,
              help="Per-run formats, comma separated: json, xlsx, pdf.")
@click.option("-r", "--recursive", is_flag=True,
              help="Also take the export files in the folders' sub-folders (mirrored in the output).")
@click.option("--engine", type=click.Choice(["local", "dask"]), default="local", show_default=True,
              help="local: a process pool on this machine; dask: a dask.distributed cluster.")
@click.option("--scheduler", "scheduler", default=None, metavar="ADDRESS",
              help="With --engine dask: the scheduler (tcp://host:8786); default a local "
                   "cluster of --jobs worker processes. Inputs and output folder must be on "
                   "storage every worker sees under the same path.")
@library_option
@settings_option
@click.option("--overwrite", is_flag=True,
              help="Process every run again, even those whose results are up to date.")
def batch_command(paths, out_dir, jobs, spec, formats, recursive, engine, scheduler, library_dir,
                  settings_file, overwrite):
    """Process many runs (files, folders, globs) into one folder with a summary.

    Writes one result per run, in sub-folders that mirror the inputs' folders below the
    deepest folder holding them all (so `A/run.csv` and `B/run.csv` give `A/run.json` and
    `B/run.json`). A run whose result is already there, made from the same input, library,
    settings and tool version, is up to date and skipped (--overwrite processes it again);
    a batch that was stopped picks up where it left off. summary.csv and summary.xlsx list
    every result in the folder (one row per run with benzene, aromatics, olefins, oxygen,
    octane, DVPE and flags for failed or marginal specification checks and poor
    identification), with trend charts. A file that cannot be processed is listed with its
    error; the others go on. Exit 1 if any failed.

    \b
    Example:
        dha batch runs/2026-12/ -r -o qc/2026-12 --jobs 2 --spec en228-e10-summer
        dha batch archive/ -r -o reprocessed/ --engine dask --scheduler tcp://head:8786
    """
    if scheduler and engine != "dask":
        raise click.UsageError("--scheduler is for --engine dask")
    from dha import batch, specs
    from dha.settings import load_settings

    settings = load_settings(settings_file)
    batch.quiet_run_warnings()
    spec = spec or settings["report"]["spec"]
    profile = specs.load_profile(spec)
    files = batch.expand_inputs(paths, recursive=recursive, exclude=out_dir)
    fmt = tuple(f.strip() for f in formats.split(",") if f.strip())
    click.echo(f"dha batch: {len(files)} input files -> {out_dir}/ (specification {spec})")
    with click.progressbar(length=len(files), label=f"{len(files)} inputs",
                           file=click.get_text_stream("stderr")) as bar:
        table = batch.run_batch(files, out_dir, settings, spec=spec, library_dir=library_dir,
                                formats=fmt, jobs=jobs, overwrite=overwrite, progress=bar.update,
                                engine=engine, scheduler=scheduler)
    written = batch.write_summary(table, out_dir, profile, settings["batch"]["trend_quantities"])
    counts = table.attrs["counts"]
    failed = table[batch.is_failure(table)]
    flagged = table[~batch.is_failure(table) & (table["flags"].fillna("") != "")]
    click.echo(f"{len(table)} runs in {out_dir}: {counts['processed']} processed now, "
               f"{counts['up_to_date']} up to date, {counts['earlier']} from earlier batches, "
               f"{counts['failed']} not processed; {len(flagged)} flagged")
    for _, row in failed.iterrows():
        when = " (earlier batch)" if row["this_batch"] == batch.EARLIER else ""
        click.echo(terminal_text(f"  not processed{when}: {row['input']}: {row['error']}"))
    shown = 20      # a screenful: every flag is in summary.csv / summary.xlsx
    for _, row in flagged.head(shown).iterrows():
        click.echo(terminal_text(f"  flagged: {row['input']} {row['sample_id']}: {row['flags']}"))
    if len(flagged) > shown:
        click.echo(f"  ... and {len(flagged) - shown} more flagged runs: see the flags column "
                   "of the summary")
    click.echo(terminal_text(f"summary: {', '.join(str(p) for p in written[:2])}"))
    if (failed["this_batch"] != batch.EARLIER).any():    # exit 1 for this batch's failures only
        raise SystemExit(1)


COMMANDS = [batch_command]
