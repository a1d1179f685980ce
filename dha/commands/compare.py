"""``dha compare``: what differs between two results."""
from __future__ import annotations

from pathlib import Path

import click
import pandas as pd

from dha.compare import compare_paths


@click.command("compare")
@click.argument("a", type=click.Path(path_type=Path))
@click.argument("b", type=click.Path(path_type=Path))
@click.option("--tolerance", type=float, default=0.005, show_default=True,
              help="Numbers closer than this (in their own unit) count as equal.")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Also write the difference table to this CSV file.")
def compare_command(a: Path, b: Path, tolerance: float, csv_path: Path | None) -> None:
    """Show what differs between two results (JSON files, or folders paired by file name).

    Lists library and settings changes first, then group totals, benzene, oxygen, properties,
    check verdicts, peaks identified differently and component mass % changes. Exit 0.

    \b
    Example:
        dha compare archive-2019/ rerun-2026/ --csv changes.csv
    """
    table = compare_paths(a, b, tolerance)
    if table.empty:
        click.echo("no differences beyond the tolerance")
    else:
        with pd.option_context("display.max_rows", None, "display.width", 200,
                               "display.max_colwidth", 40):
            click.echo(table.to_string(index=False))
        click.echo(f"\n{len(table)} differences in {table['pair'].nunique()} pair(s)")
    if csv_path is not None:
        table.to_csv(csv_path, index=False)
        click.echo(f"written {csv_path}")


COMMANDS = [compare_command]
