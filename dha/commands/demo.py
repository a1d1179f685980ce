"""``dha demo``: the main job on the shipped example runs."""
from __future__ import annotations

from pathlib import Path

import click

from dha.commands.options import jobs_option

from dha import batch, specs
from dha.errors import InputError
from dha.settings import load_settings
from dha.batch import quiet_run_warnings


#: The example runs ship inside the package (package data), so the demo works after any install.
EXAMPLE_RUNS = Path(__file__).resolve().parents[1] / "example_runs"


def find_example_runs() -> Path:
    """The example runs shipped with the package (``dha/example_runs/``)."""
    if EXAMPLE_RUNS.is_dir() and any(EXAMPLE_RUNS.iterdir()):
        return EXAMPLE_RUNS
    raise InputError("the example runs are missing from this installation of dha "
                     "(dha/example_runs/): reinstall the package")


def _shown(path: Path) -> str:
    """A path as the user gave it, or relative to the current folder when inside it."""
    try:
        return str(Path(path).resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)


@click.command("demo")
@click.option("-o", "--out", "out_dir", default="out/demo", show_default=True,
              type=click.Path(file_okay=False, path_type=Path), help="Folder for the reports.")
@jobs_option()
def demo_command(out_dir: Path, jobs: int) -> None:
    """Run the example runs (an invented refinery's tanks) into reports and a batch summary.

    Every example is processed as `dha report` would (JSON, Excel, PDF draft), then summarised
    as `dha batch` would. Existing demo outputs are replaced.

    \b
    Example:
        dha demo -o out/demo
    """
    folder = find_example_runs()
    # the invented lab's own settings: its identity and its column's n-alkane markers
    settings = load_settings(folder / "harbour-point-lab.toml")
    quiet_run_warnings()
    files = batch.expand_inputs([folder])
    spec = settings["report"]["spec"]
    click.echo(f"dha demo: {len(files)} example runs (invented tanks, shipped with dha) -> "
               f"{_shown(out_dir)}/ (specification {spec})")
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
    click.echo(f"summary: {_shown(out_dir / 'summary.xlsx')}")
    readme = folder / "README.md"
    if readme.is_file():
        (out_dir / "EXAMPLES.md").write_text(readme.read_text(encoding="utf-8"), encoding="utf-8")
        click.echo(f"what each example run is: {_shown(out_dir / 'EXAMPLES.md')}")
    click.echo("Calculated properties are estimates, not standard test results; reports are "
               "drafts until an authorised person releases them.")
    if batch.is_failure(table).any():
        raise SystemExit(1)


COMMANDS = [demo_command]
