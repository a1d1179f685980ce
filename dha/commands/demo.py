"""``dha demo``: the main job on the shipped example runs."""
from __future__ import annotations

from pathlib import Path

import click

from dha import batch, specs
from dha.errors import InputError
from dha.settings import load_settings
from dha.batch import quiet_run_warnings


def find_example_runs() -> Path:
    """The ``example_runs/`` folder: in the current directory, else beside the source tree."""
    for candidate in (Path.cwd() / "example_runs", Path(__file__).resolve().parents[2] / "example_runs"):
        if candidate.is_dir() and any(candidate.iterdir()):
            return candidate
    raise InputError("example_runs/ not found: run `dha demo` from the project folder "
                     "(the example runs ship with the source, not the wheel)")


@click.command("demo")
@click.option("-o", "--out", "out_dir", default="out/demo", show_default=True,
              type=click.Path(file_okay=False, path_type=Path), help="Folder for the reports.")
@click.option("--jobs", type=click.IntRange(1, 64), default=2, show_default=True,
              help="Runs processed in parallel.")
def demo_command(out_dir: Path, jobs: int) -> None:
    """Run the example runs (an invented refinery's tanks) into reports and a batch summary.

    Every example is processed as `dha report` would (JSON, Excel, PDF draft), then summarised
    as `dha batch` would. Existing demo outputs are replaced.

    \b
    Example:
        dha demo -o out/demo
    """
    settings = load_settings()
    quiet_run_warnings()
    folder = find_example_runs()
    files = batch.expand_inputs([folder])
    spec = settings["report"]["spec"]
    click.echo(f"dha demo: {len(files)} example runs from {folder} -> {out_dir}/ "
               f"(specification {spec})")
    with click.progressbar(length=len(files), label="runs", file=click.get_text_stream("stderr")) as bar:
        table = batch.run_batch(files, out_dir, settings, spec=spec,
                                formats=tuple(settings["report"]["formats"]), jobs=jobs,
                                overwrite=True, progress=bar.update)
    batch.write_summary(table, out_dir, specs.load_profile(spec), settings["batch"]["trend_quantities"])
    for _, row in table.iterrows():
        if row["status"] != batch.NOT_PROCESSED:
            click.echo(f"  {row['input']:<40} benzene {row['benzene_vol_pct']:.2f} % v/v  "
                       f"flags: {row['flags'] or 'none'}  -> {row['output']}")
        else:
            click.echo(f"  {row['input']:<40} FAILED: {row['error']}")
    click.echo(f"summary: {out_dir / 'summary.xlsx'}")
    click.echo("Calculated properties are estimates, not standard test results; reports are "
               "drafts until an authorised person releases them.")
    if batch.is_failure(table).any():
        raise SystemExit(1)


COMMANDS = [demo_command]
