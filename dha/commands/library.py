"""`dha library ...`: check, show and export the component library (see dha/library.py)."""
from __future__ import annotations

import math
from pathlib import Path

import click

from dha.commands.options import out_option

from dha.errors import DhaError, LibraryError

_LIBRARY_OPTION = click.option(
    "--library", "library_dir", type=click.Path(exists=True, file_okay=False, path_type=Path),
    default=None, help="Lab overlay folder merged over the shipped library.")


@click.group("library")
def library_group() -> None:
    """Check, show and export the component library (shipped files plus a lab overlay)."""


@library_group.command("check")
@_LIBRARY_OPTION
def check_command(library_dir: Path | None) -> None:
    """Validate the component library; exit 0 only if it is sound.

    Prints the version, checksum and counts, then every problem as
    file:row:column: message (row 1 is the header row, as in a spreadsheet).

    \b
    Example:
        dha library check
        dha library check --library lab_library/
    """
    from dha.library import SHIPPED_FOLDER, check_library, read_library

    folders = [SHIPPED_FOLDER] + ([library_dir] if library_dir is not None else [])
    try:
        lib = read_library(folders)
    except LibraryError as err:
        problems = list(getattr(err, "problems", []))
        lib = None
        if not problems:
            raise
    else:
        problems = check_library(lib)
        click.echo(f"library: {lib.name} {lib.version}")
        click.echo(f"sha256: {lib.sha256}")
        click.echo("folders: " + ", ".join(str(f) for f in lib.folders))
        counts = ", ".join(f"{g} {n}" for g, n in lib.group_counts().items())
        click.echo(f"components: {len(lib.components)} ({counts})")
        click.echo(f"vapour-pressure correlations: {len(lib.vapour_pressure)}; co-elution "
                   f"pairs: {len(lib.coelution)}; references: {len(lib.references)}; UNIFAC "
                   f"subgroups: {len(lib.unifac_subgroups)}")
    for line in _problem_lines(problems):
        click.echo(line)
    if problems:
        where = "the files read" if lib is None else "the rows listed above"
        raise LibraryError(f"component library is not sound: {len(problems)} problem"
                           f"{'s' if len(problems) != 1 else ''}; fix {where} and run again")
    click.echo("sound: no problems found")


#: The same problem (file, column, message) is printed for this many rows, then counted.
_REPEAT = 3


def _problem_lines(problems) -> list[str]:
    """One line per problem; a problem repeated on many rows is shown 3 times, then counted."""
    seen: dict[tuple, int] = {}
    lines: list[str] = []
    for problem in problems:
        key = (problem.file, problem.column, problem.message)
        seen[key] = seen.get(key, 0) + 1
        if seen[key] <= _REPEAT:
            lines.append(str(problem))
    for (file, column, message), count in seen.items():
        if count > _REPEAT:
            lines.append(f"{file}:-:{column or '-'}: the same problem on {count - _REPEAT} more "
                         f"rows: {message}")
    return lines


def _format(value) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "(blank)"
    if isinstance(value, dict):
        return ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}"
                         for k, v in value.items())
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


@library_group.command("show")
@click.argument("name")
@_LIBRARY_OPTION
def show_command(name: str, library_dir: Path | None) -> None:
    """Show one component (by name, synonym or CAS) with every value and its source.

    \b
    Example:
        dha library show isooctane
        dha library show 108-88-3 --library lab_library/
    """
    from dha.library import load_library

    lib = load_library(library_dir)
    entry = lib.component(name)
    width = max(len(k) for k in entry)
    click.echo(f"library: {lib.name} {lib.version}")
    for key, item in entry.items():
        line = f"{key:<{width}}  {_format(item['value'])}"
        if item["source"]:
            line += f"  [{item['source']}]"
        click.echo(line)
        if item["cite"]:
            click.echo(f"{'':<{width}}    {item['cite']}")


@library_group.command("export")
@out_option("output", aliases=("--output",), type=click.Path(dir_okay=False, path_type=Path),
            required=True, help="CSV file to write.")
@_LIBRARY_OPTION
@click.option("--overwrite", is_flag=True, help="Replace the output file if it exists.")
def export_command(output: Path, library_dir: Path | None, overwrite: bool) -> None:
    """Write the merged library as one CSV table (one row per component).

    Columns start with name, cas, formula, group, carbon_number, molar_mass_g_mol,
    density_15c_kg_m3, boiling_point_c, ron, mon, retention_index; then every other column,
    the vapour-pressure correlation (vp_*) and psat_37_8c_kpa.

    \b
    Example:
        dha library export -o library.csv
        dha library export -o lab.csv --library lab_library/ --overwrite
    """
    from dha.library import load_library

    if output.exists() and not overwrite:
        raise DhaError(f"{output} exists; pass --overwrite to replace it")
    lib = load_library(library_dir)
    table = lib.export_table()
    try:
        table.to_csv(output, index=False, lineterminator="\n")
    except OSError as err:
        raise DhaError(f"{output}: cannot write ({err.strerror}); choose another path") from None
    click.echo(f"wrote {len(table)} components of library {lib.version} to {output}")


COMMANDS: list[click.Command] = [library_group]
