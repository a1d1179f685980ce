"""``dha explain`` (what holds the octane number) and ``dha levers`` (what would change it)."""
from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from dha.commands.options import library_option, settings_option

LEVER_NAMES = {"isomerisation": "isomerisation", "benzene-saturation": "benzene saturation",
               "reforming": "reforming", "light-cut": "light cut", "heavy-cut": "heavy cut",
               "oxygenate": "oxygenate"}

json_option = click.option(
    "--json", "json_path", type=click.Path(dir_okay=False, path_type=Path),
    help="Also write the full output as JSON to this file ('-' = standard output only, "
         "no table).")


def _load(input_path: Path, library_dir, settings_file, spec):
    from dha import specs
    from dha.library import load_library
    from dha.levers import load_samples
    from dha.settings import load_settings

    settings = load_settings(settings_file)
    library = load_library(library_dir)
    if spec is None:
        spec = settings.get("report", {}).get("spec", "")
    profile = specs.load_profile(spec) if spec else None
    return settings, library, profile, load_samples(input_path, settings, library)


def _emit_json(data, json_path: Path | None) -> bool:
    """Write JSON; True when it went to standard output (then no table is printed)."""
    if json_path is None:
        return False
    from dha.result import dumps
    text = dumps(data)
    if str(json_path) == "-":
        sys.stdout.write(text)
        return True
    json_path.write_text(text, encoding="utf-8")
    click.echo(f"wrote {json_path}", err=True)
    return False


def _num(x, fmt=".2f") -> str:
    return "-" if x is None else format(x, fmt)


def explain_text(label: str, props: dict, keys: dict) -> str:
    """Readable tables of ``octane_contributions`` and ``octane_explained``."""
    import pandas as pd

    lines = [f"{label}: RON {_num(props.get('ron'))}, MON {_num(props.get('mon'))} "
             "(calculated estimates, not engine tests)"]
    cells = pd.DataFrame(keys["octane_contributions"])
    if cells.empty:
        lines.append("no octane number to explain: " + str(keys["octane_explained"].get("note")))
        return "\n".join(lines)
    for p in ("ron", "mon"):
        pivot = cells.pivot_table(index="group", columns="carbon_number", values=p,
                                  aggfunc="sum", fill_value=0.0, sort=False)
        order = sorted(pivot.columns, key=lambda c: (isinstance(c, str), str(c).zfill(3)))
        pivot = pivot[order]
        pivot["total"] = pivot.sum(axis=1)
        # the lowest bucket holds C1-C3 (ethanol, methanol): labelled as in the reports
        from dha.report import carbon_label
        pivot.columns = [carbon_label(c) if c != "total" else c for c in pivot.columns]
        pivot.columns.name = "carbon number"
        lines.append(f"\n{p.upper()} contribution by group and carbon number (sums to "
                     f"{cells[p].sum():.2f}):")
        lines.append(pivot.round(2).to_string())
    expl = keys["octane_explained"]
    comp = pd.DataFrame(expl["components"])
    if not comp.empty:
        lines.append("\nComponents pulling RON down most (pull = change if removed, sign "
                     "reversed; blending value in this sample):")
        lines.append(comp.rename(columns={"ron": "RON pull", "mon": "MON pull",
                                          "ron_blending_value": "RON blend value",
                                          "mon_blending_value": "MON blend value"})
                     .round(3).to_string(index=False))
    cls = pd.DataFrame(expl["classes"])
    if not cls.empty:
        lines.append("\nBy structural class:")
        lines.append(cls.rename(columns={"ron": "RON pull", "mon": "MON pull"}).round(3)
                     .to_string(index=False))
    lines.append(f"\nmethod: {expl['method']}")
    return "\n".join(lines)


@click.command("explain")
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@library_option
@settings_option
@json_option
def explain_command(input_path, library_dir, settings_file, json_path) -> None:
    """Show what gives a petrol its octane number: contributions and what pulls it down.

    INPUT is a result JSON, a peak table or a composition table. Prints the RON and MON
    contribution of each group x carbon number (they add up to the calculated number), the
    ten components that pull RON down most and the same by structural class.

    \b
    Example:
        dha explain out/hp-t17-high-benzene.json
    """
    from dha.explain import explain
    from dha.pipeline import run_properties
    from dha.result import merge_properties

    settings, library, _, samples = _load(input_path, library_dir, settings_file, "")
    outputs = []
    for s in samples:
        props = (s.result or {}).get("properties")
        if not props:
            props = merge_properties(run_properties(s.table, library, settings))[0]
        keys = explain(s.table, library, settings, props)
        outputs.append({"sample": s.label, "properties": {k: props.get(k) for k in
                                                           ("ron", "mon", "aki")}, **keys})
    if _emit_json(outputs if len(outputs) > 1 else outputs[0], json_path):
        return
    for out in outputs:
        click.echo(explain_text(out["sample"], out["properties"], out))


def levers_text(label: str, out: dict) -> str:
    """Readable tables of a ``run_levers`` output."""
    import pandas as pd

    lines = [f"{label}: process levers (profile {out.get('profile') or 'none'}); calculated "
             "estimates for planning, not a certificate"]
    if out["base"]["checks_failed"]:
        lines.append("sample fails: " + ", ".join(out["base"]["checks_failed"]))
    for rec in out["levers"]:
        h2 = rec["hydrogen_g_per_100g"]
        bal = rec["balance"]
        extra = ""
        if rec["removed_g_per_100g"]:
            extra = "; removed " + ", ".join(f"{k} {v:.2f} g" for k, v in
                                             rec["removed_g_per_100g"].items())
        if rec["added_g_per_100g"]:
            extra = "; added " + ", ".join(f"{k} {v:.2f} g" for k, v in
                                           rec["added_g_per_100g"].items())
        lines.append(f"\n== {rec['lever']}  ({', '.join(f'{k}={v}' for k, v in rec['params'].items() if not isinstance(v, dict))})")
        lines.append(f"per 100 g of sample: product {rec['product_g_per_100g']:.3f} g, hydrogen "
                     f"{h2:+.3f} g ({rec['hydrogen_note']}){extra}; balance "
                     f"{'closes' if bal['closes'] else 'DOES NOT CLOSE'} (mass residual "
                     f"{bal['mass_residual_g']:.1e} g, carbon {bal['carbon_residual_mol']:.1e} mol)")
        for note in rec["notes"]:
            lines.append(f"note: {note}")
        table = pd.DataFrame(rec["deltas"])
        table["limits"] = [" ".join(x for x in (f">= {lo:g}" if pd.notna(lo) else "",
                                                f"<= {hi:g}" if pd.notna(hi) else "") if x)
                           for lo, hi in zip(table["min"], table["max"])]
        table = table[["quantity", "unit", "before", "after", "delta", "limits", "verdict"]]
        lines.append(table.to_string(index=False, float_format=lambda v: f"{v:.3f}",
                                     na_rep="-"))
    rng = out.get("oxygenate_range")
    if rng:
        lines.append(f"\n== {rng['oxygenate']} share (scan + brentq on the same models)")
        if rng.get("target"):
            t = rng["target"]
            lines.append(f"smallest share for {t['quantity'].upper()} >= {t['value']:g}: "
                         f"{_num(rng['min_share_vol_pct'], '.2f')} % v/v")
        lines.append(f"largest share the limits allow: {_num(rng['max_share_vol_pct'], '.2f')} "
                     f"% v/v (binding: {rng['binding_limit'] or 'none'})")
        for note in rng["notes"]:
            lines.append(f"note: {note}")
    return "\n".join(lines)


@click.command("levers")
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@click.option("--spec", metavar="PROFILE",
              help="Specification profile name or .toml path (default: [report] spec).")
@click.option("--lever", "which", multiple=True, type=click.Choice(list(LEVER_NAMES)),
              help="Lever to apply (repeat); default all.")
@click.option("--isomerisation-temp", "t_c", type=float, default=150.0, show_default=True,
              help="Isomerisation temperature [°C].")
@click.option("--approach", type=click.FloatRange(0, 1), default=1.0, show_default=True,
              help="Approach to the isomer equilibrium (fraction of the way).")
@click.option("--with-c7", is_flag=True, help="Isomerise the C7 alkanes too.")
@click.option("--benzene-conversion", type=click.FloatRange(0, 1), default=1.0,
              show_default=True, help="Fraction of the benzene saturated.")
@click.option("--reforming-conversion", type=click.FloatRange(0, 1), default=0.8,
              show_default=True, help="Fraction of the C6-C8 n-paraffins and naphthenes "
                                      "converted to aromatics.")
@click.option("--oxygenate", default="ethanol", show_default=True,
              help="Oxygenate to add (library name or synonym: ethanol, MTBE, ETBE, ...).")
@click.option("--oxygenate-vol-pct", type=click.FloatRange(0, 99), default=10.0,
              show_default=True, help="Share of the oxygenate in the final blend [% v/v].")
@click.option("--target-ron", type=float, help="Find the smallest oxygenate share for this RON.")
@click.option("--target-aki", type=float, help="... or for this AKI ((RON+MON)/2).")
@library_option
@settings_option
@json_option
def levers_command(input_path, spec, which, t_c, approach, with_c7, benzene_conversion,
                   reforming_conversion, oxygenate, oxygenate_vol_pct, target_ron, target_aki,
                   library_dir, settings_file, json_path) -> None:
    """Apply process levers to a sample and show the change of every specified property.

    INPUT is a result JSON, a peak table or a composition table. Each lever (isomerisation,
    benzene saturation, reforming, light or heavy cut removal, oxygenate addition) changes
    the composition by its chemistry and the new composition goes through every property
    model and the specification check. Hydrogen used or made and the mass/carbon balance are
    shown per 100 g of sample.

    \b
    Example:
        dha levers tank7.json --lever isomerisation --lever oxygenate --target-ron 95
    """
    from dha.levers import run_levers

    settings, library, profile, samples = _load(input_path, library_dir, settings_file, spec)
    chosen = tuple(LEVER_NAMES[w] for w in which) or tuple(LEVER_NAMES.values())
    outputs = []
    for s in samples:
        out = run_levers(s.table, library, settings, profile, chosen,
                         isomerisation_t_c=t_c, isomerisation_approach=approach,
                         isomerisation_carbon_numbers=(5, 6, 7) if with_c7 else (5, 6),
                         benzene_conversion=benzene_conversion,
                         reforming_conversion=reforming_conversion, oxygenate=oxygenate,
                         oxygenate_vol_pct=oxygenate_vol_pct, target_ron=target_ron,
                         target_aki=target_aki)
        outputs.append({"sample": s.label, **out})
    if _emit_json(outputs if len(outputs) > 1 else outputs[0], json_path):
        return
    for out in outputs:
        click.echo(levers_text(out["sample"], out))


COMMANDS = [explain_command, levers_command]
