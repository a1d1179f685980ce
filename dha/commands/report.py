"""``dha report``: one result per input file (per injection for a multi-run workbook)."""
from __future__ import annotations

import logging
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

import click

from dha.commands.options import library_option, settings_option, out_option

from dha.errors import DhaError

log = logging.getLogger("dha.commands.report")

FORMATS = ("json", "xlsx", "pdf")


def _parse_formats(ctx, param, value):
    if value is None:
        return None
    formats = [f.strip().lower() for f in value.split(",") if f.strip()]
    bad = [f for f in formats if f not in FORMATS]
    if bad or not formats:
        raise click.BadParameter(f"{', '.join(bad) or value!r}: choose from {', '.join(FORMATS)} "
                                 "(comma-separated)")
    return formats


def _headline(result: dict) -> str:
    def fmt(x, unit):
        return "n/a" if x is None else f"{x:.2f} {unit}"
    benzene = (result.get("benzene") or {}).get("vol_pct")
    unid = ((result.get("totals") or {}).get("mass_pct") or {}).get("unidentified")
    return f"benzene {fmt(benzene, '% v/v')}, unidentified {fmt(unid, '% m/m')}"


@click.command("report")
@click.argument("inputs", nargs=-1, required=True, type=click.Path(path_type=Path))
@out_option("out_dir", aliases=("--out-dir",), type=click.Path(file_okay=False, path_type=Path),
              default=Path("."), show_default=True, help="Folder for the output files.")
@click.option("--format", "formats", callback=_parse_formats, metavar="LIST",
              help="Comma-separated formats: json, xlsx, pdf (default: [report] formats).")
@click.option("--spec", metavar="PROFILE",
              help="Specification profile name or .toml path (default: [report] spec).")
@library_option
@settings_option
@click.option("--overwrite", is_flag=True, help="Replace output files that exist.")
@click.option("--strict", is_flag=True, help="Exit 3 when any specification or identification check fails.")
@click.option("--average-injections", is_flag=True,
              help="Average the injections of one sample (sheets of one workbook, or files "
                   "with the same sample id) into one result with a repeatability check "
                   "([injections] in the settings).")
def report_command(inputs, out_dir, formats, spec, library_dir, settings_file, overwrite,
                   strict, average_injections) -> None:
    """Turn peak tables or composition tables into results: JSON (and Excel, PDF).

    Writes DIR/<stem>.json (.xlsx, .pdf) per input file, or DIR/<stem>__<sheet>.* per
    injection of a workbook with several, and prints one line per result: the file written,
    benzene (% v/v) and the unidentified share (% m/m). Existing files are kept unless
    --overwrite. Exit 0 on success (also when a specification fails, unless --strict: then 3),
    1 when an input cannot be processed, 2 on wrong usage.

    \b
    Example:
        dha report runs/tank7_0412.csv runs/blend.xlsx -o out/ --format json --spec en228-e10-summer
    """
    from dha.library import load_library
    from dha.pipeline import process_file_stems, write_outputs
    from dha.provenance import averaged as averaged_provenance
    from dha.provenance import provenance as make_provenance
    from dha.provenance import settings_sha256, sha256_file
    from dha.safety import terminal_text
    from dha.settings import load_settings
    from dha import specs

    settings = load_settings(settings_file)
    if formats is None:
        formats = list(settings.get("report", {}).get("formats", ["json"]))
    library = load_library(overlay=library_dir) if library_dir else load_library()
    profile = settings.get("report", {}).get("spec", "") if spec is None else spec
    # a bad profile is the profile's error, not an input's
    loaded = specs.load_profile(profile) if profile else None
    settings_digest = settings_sha256(settings, loaded)

    def stems_of(p):
        """(stem, result) of one input, each result with its provenance."""
        got = process_file_stems(p, settings, library, spec)
        digest = sha256_file(p)
        for _stem, result in got:
            result["provenance"] = make_provenance(digest, library, settings_digest)
        return got
    failed_checks = 0
    failed_inputs = 0
    average = average_injections or settings.get("injections", {}).get("average", False)
    todo = [None] if average else list(inputs)     # None: the injections averaged together
    for path in todo:
        try:
            if path is None:
                from dha.replicates import report_averaged
                results = report_averaged(inputs, settings, library, spec, stems_of)
                for _stem, result in results:
                    if result.get("replicates"):
                        result["provenance"] = averaged_provenance(result)
            else:
                with warnings_name_input(path):
                    results = stems_of(path)
            for stem, result in results:
                written = write_outputs(result, out_dir, stem, formats, overwrite=overwrite)
                failed_checks += sum(1 for c in result.get("checks", [])
                                     if c.get("verdict") == "fail")
                shown = ", ".join(str(p) for p in written) or f"{stem}: nothing written"
                click.echo(terminal_text(f"{shown}  {_headline(result)}"))
        except DhaError as err:
            failed_inputs += 1
            click.echo(terminal_text(f"dha: error: {err}"), err=True)
        except Exception as err:  # noqa: BLE001 - the edge: one line, never a traceback
            failed_inputs += 1
            log.debug("unexpected error on %s", path, exc_info=True)
            click.echo(terminal_text(
                f"dha: error: {path}: could not be processed ({type(err).__name__}: {err}); "
                "run with -vv for details"), err=True)
    if failed_inputs:
        if len(todo) > 1:
            click.echo(f"dha: {failed_inputs} of {len(todo)} input(s) failed", err=True)
        click.get_current_context().exit(1)
    if strict and failed_checks:
        click.echo(f"dha: {failed_checks} specification check(s) failed", err=True)
        click.get_current_context().exit(3)


@contextmanager
def warnings_name_input(path) -> Iterator[None]:
    """While ``path`` is processed, every warning printed on stderr starts with its file name
    ("dha: WARNING: tank-14.csv: ..."), so that warnings of several inputs can be told apart."""
    name = Path(str(path)).name.replace("%", "%%")

    class _NameInput(logging.Filter):
        def filter(self, record: logging.LogRecord) -> bool:
            if record.levelno >= logging.WARNING and not str(record.msg).startswith(name):
                record.msg = f"{name}: {record.msg}"
            return True

    flt = _NameInput()
    handlers = list(logging.getLogger().handlers)
    for h in handlers:
        h.addFilter(flt)
    try:
        yield
    finally:
        for h in handlers:
            h.removeFilter(flt)


COMMANDS = [report_command]
