"""The ``dha`` command line: a thin layer over the library.

Each command lives in ``dha/commands/<name>.py`` and only parses arguments, calls library
functions and formats the result. Library errors (``DhaError``) become one-line messages with
exit code 1 here, and nowhere else; click's usage errors exit 2.
"""
from __future__ import annotations

import importlib
import logging
import sys

import click

from dha import __version__
from dha.errors import DhaError

#: Command modules; each exposes ``COMMANDS``, a list of click commands or groups.
COMMAND_MODULES = (
    "dha.commands.report",
    "dha.commands.batch",
    "dha.commands.compare",
    "dha.commands.library",
    "dha.commands.spec",
    "dha.commands.demo",
    "dha.commands.index",
    "dha.commands.octane",
    "dha.commands.history",
    "dha.commands.levers",
    "dha.commands.blend",
)


class _Main(click.Group):
    """Turns a ``DhaError`` raised anywhere below into a one-line message and exit 1."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except DhaError as err:
            click.echo(f"dha: error: {err}", err=True)
            ctx.exit(1)


@click.group(cls=_Main, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="dha")
@click.option("-v", "--verbose", count=True, help="More log output (repeat for debug).")
@click.option("-q", "--quiet", count=True, help="Less log output.")
def cli(verbose: int, quiet: int) -> None:
    """dha: detailed hydrocarbon analysis of petrol, from peak table to certificate draft.

    Results are estimates for review: a certificate is a draft until an authorised person
    releases it. Petrol is highly flammable; benzene is a human carcinogen.
    """
    level = logging.WARNING - 10 * verbose + 10 * quiet
    logging.basicConfig(level=max(logging.DEBUG, min(level, logging.CRITICAL)),
                        format="dha: %(levelname)s: %(message)s", stream=sys.stderr)


for _name in COMMAND_MODULES:
    for _command in importlib.import_module(_name).COMMANDS:
        cli.add_command(_command)


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="dha")
