"""Options shared by several commands, defined once."""
from __future__ import annotations

from pathlib import Path

import click

#: ``--library DIR``: a lab library folder layered over the shipped one.
library_option = click.option(
    "--library", "library_dir", type=click.Path(exists=True, file_okay=False, path_type=Path),
    help="Lab library overlay folder (same files as component_library/), layered over the "
         "shipped library.")

#: ``--settings FILE``: a TOML file with the keys that differ from dha/defaults.toml.
settings_option = click.option(
    "--settings", "settings_file", type=click.Path(exists=True, dir_okay=False, path_type=Path),
    help="Settings TOML holding only the keys that differ from the defaults.")


class AliasOption(click.Option):
    """An option with old spellings that still work but are left out of ``--help``."""

    def __init__(self, *args, hidden_aliases: tuple[str, ...] = (), **kwargs):
        super().__init__(*args, **kwargs)
        self.hidden_aliases = set(hidden_aliases)

    def get_help_record(self, ctx):
        shown, self.opts = self.opts, [o for o in self.opts if o not in self.hidden_aliases]
        try:
            return super().get_help_record(ctx)
        finally:
            self.opts = shown


def out_option(dest: str, *, aliases: tuple[str, ...] = (), **kwargs):
    """``-o/--out``: the one spelling of the output option in every command.

    ``aliases`` are the command's earlier spellings (``--out-dir``, ``--output``), kept working
    but not shown in the help.
    """
    return click.option("-o", "--out", *aliases, dest, cls=AliasOption, hidden_aliases=aliases,
                        **kwargs)


def jobs_option(**kwargs):
    """``-j/--jobs``: runs processed in parallel."""
    kwargs.setdefault("default", 2)
    return click.option("-j", "--jobs", "jobs", type=click.IntRange(1, 64), show_default=True,
                        help="Runs processed in parallel.", **kwargs)
