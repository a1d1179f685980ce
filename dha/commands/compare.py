"""``dha compare``: what differs between two results."""
from __future__ import annotations

from pathlib import Path

import click

from dha.compare import compare_paths, screen_rows


@click.command("compare")
@click.argument("a", type=click.Path(path_type=Path))
@click.argument("b", type=click.Path(path_type=Path))
@click.option("--tolerance", type=float, default=0.005, show_default=True,
              help="Numbers closer than this (in their own unit) count as equal.")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Also write the difference table to this CSV file.")
def compare_command(a: Path, b: Path, tolerance: float, csv_path: Path | None) -> None:
    """Show what differs between two results (JSON files, or folders paired by their path
    relative to each folder, sub-folders included).

    Lists library and settings changes first, then group totals, benzene, oxygen, properties,
    check verdicts, peaks identified differently and component mass % changes. Exit 0.

    \b
    Example:
        dha compare archive-2019/ rerun-2026/ --csv changes.csv
    """
    table = compare_paths(a, b, tolerance)
    n = table.attrs
    if table.empty:
        click.echo("no differences beyond the tolerance")
    else:
        rows = screen_rows(table)
        header = ["pair", "section", "item", "A", "B", "B - A", "note"]
        widths = [min(40, max(len(r[i]) for r in rows + [header])) for i in range(len(header))]

        def line(cells):
            out = []
            for i, (c, w) in enumerate(zip(cells, widths)):
                c = c if len(c) <= w else c[: w - 1] + "~"
                out.append(c.rjust(w) if i in (3, 4, 5) and c[:1] in "+-0123456789" else c.ljust(w))
            return "  ".join(out).rstrip()

        click.echo(line(header))
        for r in rows:
            click.echo(line(r))
        click.echo("")
    click.echo(f"{n.get('pairs', 0)} pair(s) of results compared, {n.get('pairs_differing', 0)} "
               f"with differences; {n.get('only_in_a', 0)} result(s) only in A, "
               f"{n.get('only_in_b', 0)} only in B; {len(table)} row(s) listed")
    if csv_path is not None:
        table.to_csv(csv_path, index=False)
        click.echo(f"written {csv_path}")


COMMANDS = [compare_command]
