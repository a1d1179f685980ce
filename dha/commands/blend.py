"""``dha blend`` (properties of a blend of streams) and ``dha recipe`` (cheapest blend in spec)."""
from __future__ import annotations

from pathlib import Path

import click

from dha.commands.levers import _emit_json, _num, json_option
from dha.commands.options import library_option, settings_option


def _setup(library_dir, settings_file, spec):
    from dha import specs
    from dha.library import load_library
    from dha.settings import load_settings

    settings = load_settings(settings_file)
    library = load_library(library_dir)
    if spec is None:
        spec = settings.get("report", {}).get("spec", "")
    return settings, library, (specs.load_profile(spec) if spec else None)


def blend_text(result: dict) -> str:
    """Readable summary of a blend result: streams, blend values, linear average, checks."""
    import pandas as pd

    from dha.levers import COMPARED, key_values
    b = result["blend"]
    lines = [f"{result['sample']['id']}  (calculated estimates; volumes additive)"]
    vals = key_values(result)
    table = {"quantity": list(COMPARED), "unit": list(COMPARED.values())}
    for st in b["streams"]:
        table[f"{st['label']} ({st['vol_pct']:.1f} %)"] = [st["values"].get(k) for k in COMPARED]
    table["blend (models)"] = [vals.get(k) for k in COMPARED]
    table["linear average"] = [b["linear_volume_average"].get(k) for k in COMPARED]
    lines.append(pd.DataFrame(table).to_string(index=False, float_format=lambda v: f"{v:.3f}",
                                               na_rep="-"))
    failed = [f"{c['property']} {c['kind']} {c['limit']:g} ({c['value']:.4g})"
              for c in result.get("checks") or [] if c["verdict"] == "fail"]
    marginal = [c["property"] for c in result.get("checks") or [] if c["verdict"] == "marginal"]
    if result.get("checks"):
        lines.append("fails: " + (", ".join(failed) or "none")
                     + ("; marginal: " + ", ".join(dict.fromkeys(marginal)) if marginal else ""))
    return "\n".join(lines)


@click.command("blend")
@click.argument("inputs", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--vol-pct", "parts", multiple=True, type=float, required=True,
              help="Volume share of each input, in the same order (repeat; normalised).")
@click.option("--spec", metavar="PROFILE",
              help="Specification profile name or .toml path (default: [report] spec).")
@library_option
@settings_option
@json_option
def blend_command(inputs, parts, spec, library_dir, settings_file, json_path) -> None:
    """Blend streams (result JSONs or composition/peak tables) in volume shares.

    The blend's composition is the volume-weighted sum of the streams' compositions; all its
    properties come from the models on that composition (octane, vapour pressure and
    distillation are not linear), checked against the profile. The streams' own values and
    their linear average are shown beside it.

    \b
    Example:
        dha blend tank7.json reformate.json --vol-pct 70 --vol-pct 30
    """
    from dha.blend import blend_results
    from dha.errors import InputError
    from dha.levers import load_samples

    if len(parts) != len(inputs):
        raise InputError(f"{len(inputs)} inputs but {len(parts)} --vol-pct values; give one "
                         "share per input")
    settings, library, profile = _setup(library_dir, settings_file, spec)
    samples = [load_samples(p, settings, library)[0] for p in inputs]
    result = blend_results(samples, parts, library, settings, profile)
    if _emit_json(result, json_path):
        return
    click.echo(blend_text(result))


@click.command("recipe")
@click.argument("streams", type=click.Path(path_type=Path))
@click.option("--spec", metavar="PROFILE",
              help="Specification profile name or .toml path (default: [report] spec).")
@click.option("--guard", is_flag=True,
              help="Keep every value inside its limit by the expanded uncertainty (2u), so "
                   "that the check passes rather than being marginal.")
@library_option
@settings_option
@json_option
def recipe_command(streams, spec, guard, library_dir, settings_file, json_path) -> None:
    """Find the cheapest volume shares of streams that meet a specification profile.

    STREAMS is a CSV with columns stream, file (result JSON or input file, relative to the
    CSV), cost_per_m3 and optionally min_vol_pct, max_vol_pct. Prints the shares, the cost,
    the limits that bind, and the full check of the recipe; or which limit makes it
    impossible. Exit 0 either way (exit 3 with --strict is not offered: impossibility is an
    answer, not an error).

    \b
    Example:
        dha recipe streams.csv --spec en228-e10-summer
    """
    from dha.blend import read_streams, recipe
    from dha.errors import SpecError

    settings, library, profile = _setup(library_dir, settings_file, spec)
    if profile is None:
        raise SpecError("a recipe needs a specification profile: give --spec")
    samples, costs, lo, hi = read_streams(streams, settings, library)
    out = recipe(samples, costs, profile, library, settings, lo, hi, guard=guard)
    data = {k: v for k, v in out.items() if k != "result"}
    data["profile"] = profile["name"]
    data["properties"] = (out.get("result") or {}).get("properties")
    if _emit_json(data, json_path):
        return
    click.echo(f"recipe for {profile['name']} (calculated estimates; a blend must be tested "
               "before release)")
    if not out["feasible"]:
        imp = out["impossible"]
        click.echo(f"IMPOSSIBLE: {imp['reason']}")
        for lim in imp.get("limits", []):
            if isinstance(lim, dict):
                click.echo(f"  {lim['limit']}: best reachable {_num(lim['best_value'], '.3f')} "
                           "at " + ", ".join(f"{k} {v:.1f} %" for k, v in lim["at_vol_pct"].items()))
        return
    for name, pct in out["vol_pct"].items():
        click.echo(f"  {name:<20} {pct:7.2f} % v/v")
    click.echo(f"cost {out['cost_per_m3']:.2f} per m3; binding: "
               f"{', '.join(out['binding']) or 'none'}")
    verdicts = {}
    for c in out["checks"]:
        verdicts.setdefault(c["verdict"], []).append(f"{c['property']} {c['value']:.4g}")
    for v in ("fail", "marginal", "pass"):
        if v in verdicts:
            click.echo(f"{v}: {', '.join(verdicts[v])}")


COMMANDS = [blend_command, recipe_command]
