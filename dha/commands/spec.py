"""``dha spec``: the specification profiles."""
from __future__ import annotations

import click

from dha import specs


@click.group("spec")
def spec_group() -> None:
    """Specification profiles that results are checked against."""


@spec_group.command("list")
def spec_list() -> None:
    """List the shipped profiles: one name a line, then a short description.

    \b
    Example:
        dha spec list
    """
    profiles = specs.list_profiles()
    for name, _ in profiles:
        click.echo(name)
    click.echo("")
    for name, description in profiles:
        click.echo(f"{name}: {description}")


@spec_group.command("show")
@click.argument("profile")
def spec_show(profile: str) -> None:
    """Show every limit of one profile (shipped name or path to a .toml file).

    \b
    Example:
        dha spec show en228-e10-summer
    """
    prof = specs.load_profile(profile)
    click.echo(f"{prof['name']}: {prof['description']}")
    click.echo(f"source: {prof['source']}")
    for lim in prof["limits"]:
        unit = specs.QUANTITIES[lim["quantity"]]
        note = f"   ({lim['note']})" if lim.get("note") else ""
        click.echo(f"  {lim['quantity']:<24} {lim['kind']:<3} {lim['value']:>8g} {unit}{note}")


COMMANDS = [spec_group]
