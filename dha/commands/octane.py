"""`dha octane ...`: validate the octane models and fit a lab calibration (see
dha/properties/octane.py and dha/properties/octane_fit.py)."""
from __future__ import annotations

import json
from pathlib import Path

import click

from dha.commands.options import library_option, settings_option, out_option


@click.group("octane")
def octane_group() -> None:
    """Octane models: their validation on open data, and a lab's own calibration."""


@octane_group.command("validate")
@click.option("--details", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Also write every mixture's measured, fitted and held-out values (CSV).")
def validate_command(details: Path | None) -> None:
    """Print each model's error on the open mixture data, per dataset family.

    "fitted" = the model fitted on all mixtures (what the data were used for); "held-out" =
    each mixture group left out of the fit in turn (leave-one-group-out): the honest error,
    used as the result's uncertainty. Families marked * contain a component whose neat value
    is estimated; they are not fitted on and are shown apart.

    \b
    Example:
        dha octane validate
        dha octane validate --details octane_cv.csv
    """
    import pandas as pd

    from dha.properties import octane_fit as of

    data = of.load_mixtures()
    table, cv = of.validate_all(data)
    click.echo(of.describe_data(data))
    click.echo(of.format_table(table))
    click.echo(of.format_conflicts(data))
    click.echo(of.format_estimator())
    if details is not None:
        rows = [df.assign(model=m, property=p.upper()) for (m, p), df in cv.items()]
        pd.concat(rows).to_csv(details, index_label="mixture_id")
        click.echo(f"wrote {details}")


@octane_group.command("calibrate")
@click.argument("samples", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@out_option("output", aliases=("--output",), type=click.Path(dir_okay=False, path_type=Path),
            required=True, help="Calibration file to write (JSON).")
@click.option("--kind", type=click.Choice(["bias", "slope", "groups"]), default="bias",
              show_default=True,
              help="bias: + b (>= 3 samples); slope: a + b x (>= 5); groups: bias + "
                   "aromatics, olefins, naphthenes, oxygenates volume fractions (>= 11).")
@library_option
@settings_option
@click.option("--overwrite", is_flag=True, help="Replace an existing output file.")
def calibrate_command(samples: Path, output: Path, kind: str, library_dir: Path | None,
                      settings_file: Path | None, overwrite: bool) -> None:
    """Fit a correction of the octane model to the lab's own engine results.

    SAMPLES is a CSV with one row per sample: a column `result` (path of a dha result JSON)
    or `composition` (path of a composition file), and `ron` and/or `mon` (measured; blank
    = not measured). Paths are relative to the CSV's folder. Prints the fitted numbers and
    the leave-one-out error; use the file with settings [octane] calibration = "CAL.json".

    \b
    Example:
        dha octane calibrate engine_results.csv -o lab_octane.json --kind slope
    """
    from dha.errors import InputError
    from dha.library import load_library
    from dha.properties import octane_fit as of
    from dha.settings import load_settings

    if output.exists() and not overwrite:
        raise InputError(f"{output}: exists; choose another name or add --overwrite")
    cal = of.calibrate_from_samples(samples, kind, load_library(library_dir),
                                    load_settings(settings_file))
    output.write_text(json.dumps(cal, indent=1) + "\n", encoding="utf-8")
    click.echo(f"model {cal['model']}, kind {kind}")
    for prop, entry in cal["properties"].items():
        coefs = ", ".join(f"{k} {v:+.3f}" for k, v in entry["coefficients"].items())
        click.echo(f"{prop.upper()}: n {entry['n']}; {coefs}; RMSE uncalibrated "
                   f"{entry['model_rmse_uncalibrated']:.2f}, fitted {entry['rmse_fit']:.2f}, "
                   f"leave-one-out {entry['loo_rmse']:.2f}")
    click.echo(f"wrote {output}; use it with [octane] calibration = \"{output}\"")


COMMANDS: list[click.Command] = [octane_group]
