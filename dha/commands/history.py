"""``dha history``: query the results database of a batch folder; CSV and trend charts."""
from __future__ import annotations

from pathlib import Path

import click


@click.command("history")
@click.argument("source", type=click.Path(exists=True, path_type=Path))
@click.option("--sample", "sample", default=None,
              help="Sample-id pattern, * and ? as wildcards (e.g. 'T4-*').")
@click.option("--spec", "spec", default=None, help="Only runs checked against this profile.")
@click.option("--product", "product", default=None,
              help="Only runs of this product (the sample's product, else its profile).")
@click.option("--since", default=None, help="First injection date, YYYY-MM-DD (included).")
@click.option("--until", default=None, help="Last injection date, YYYY-MM-DD (included).")
@click.option("-q", "--quantity", "quantities", multiple=True,
              help="Quantity to chart (repeat); default: [batch] trend_quantities.")
@click.option("-o", "--out", "out_dir", default=None, type=click.Path(file_okay=False, path_type=Path),
              help="Folder for history.csv and the charts (default: print the CSV only).")
def history_command(source, sample, spec, product, since, until, quantities, out_dir):
    """Runs from a results database (a batch output folder or its results.sqlite).

    Selects runs by sample-id pattern, profile, product and injection-date range, writes them
    to history.csv and draws one trend chart per product and quantity with the profile's
    limits. Without -o the CSV goes to the screen.

    \b
    Example:
        dha history qc/2026-12 --spec en228-e10-summer --since 2026-12-01 -o qc/trends
    """
    from dha import batch
    from dha.results_db import query_runs
    from dha.settings import load_settings

    runs = query_runs(source, sample=sample, spec=spec, product=product, since=since, until=until)
    if out_dir is None:
        click.echo(runs.to_csv(index=False), nl=False)
        return
    out_dir.mkdir(parents=True, exist_ok=True)
    csv_path = out_dir / "history.csv"
    from dha.safety import atomic_write_text, inert_frame
    atomic_write_text(csv_path, inert_frame(runs).to_csv(index=False), newline="")
    keys = list(quantities) or load_settings()["batch"]["trend_quantities"]
    charts = []
    if not runs.empty:
        runs["_product"] = runs["product"].fillna(runs["spec"]).fillna("no-spec").astype(str)
        for prod, group in runs.groupby("_product", sort=True):
            profile_name = group["spec"].dropna().iloc[0] if group["spec"].notna().any() else None
            for key in keys:
                if key not in group or group[key].isna().all():
                    continue
                label = batch._TREND_UNITS.get(key, key)
                limits = batch.profile_limits(profile_name, key)
                title = f"{label}: {prod}, {len(group)} runs" + (
                    f" (limits of {profile_name})" if limits else "")
                path = out_dir / f"history_{batch._safe_name(prod)}__{key}.png"
                charts.append(batch.draw_trend(group["injection_time"], group[key], limits,
                                               title, label, path))
    click.echo(f"{len(runs)} runs -> {csv_path}; {len(charts)} trend charts in {out_dir}")


COMMANDS = [history_command]
