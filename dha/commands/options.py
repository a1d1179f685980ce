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
