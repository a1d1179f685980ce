"""``dha batch``: many runs in parallel, with a summary, flags and trend charts."""
from __future__ import annotations

from pathlib import Path

import click

from dha.commands.options import library_option, settings_option

from dha import batch, specs
from dha.settings import load_settings
from dha.batch import quiet_run_warnings
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
@library_option
@settings_option
@click.option("--overwrite", is_flag=True, help="Replace existing per-run outputs.")
def batch_command(paths, out_dir, jobs, spec, formats, library_dir, settings_file, overwrite):
    """Process many runs (files, folders, globs) into one folder with a summary.

    Writes one result per run, summary.csv and summary.xlsx (one row per run with benzene,
    aromatics, olefins, oxygen, octane, DVPE and flags for failed or marginal specification
    checks and poor identification) and trend charts across the batch. A file that cannot be
    processed is listed in the summary with its error; the others go on. Exit 1 if any failed.

    \b
    Example:
        dha batch runs/2026-12-01/ -o qc/2026-12-01 --jobs 2 --spec en228-e10-summer
    """
    settings = load_settings(settings_file)
    quiet_run_warnings()
    spec = spec or settings["report"]["spec"]
    profile = specs.load_profile(spec)
    files = batch.expand_inputs(paths)
    fmt = tuple(f.strip() for f in formats.split(",") if f.strip())
    with click.progressbar(length=len(files), label=f"{len(files)} runs", file=click.get_text_stream("stderr")) as bar:
        table = batch.run_batch(files, out_dir, settings, spec=spec, library_dir=library_dir,
                                formats=fmt, jobs=jobs, overwrite=overwrite, progress=bar.update)
    written = batch.write_summary(table, out_dir, profile, settings["batch"]["trend_quantities"])
    n_err = int((table["status"] == "error").sum())
    n_flag = int((table["flags"].fillna("").astype(str).str.len() > 0).sum())
    click.echo(f"{len(table)} runs: {len(table) - n_err} processed, {n_flag} flagged, {n_err} failed")
    for _, row in table[table["status"] == "error"].iterrows():
        click.echo(terminal_text(f"  failed: {row['file']}: {row['error']}"))
    for _, row in table[(table["status"] == "ok") & (table["flags"].fillna("") != "")].iterrows():
        click.echo(terminal_text(f"  flagged: {row['file']} {row['sample_id']}: {row['flags']}"))
    click.echo(terminal_text(f"summary: {', '.join(str(p) for p in written[:2])}"))
    if n_err:
        raise SystemExit(1)


COMMANDS = [batch_command]
