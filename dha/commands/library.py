"""`dha` commands of this area (see dha/cli.py)."""
import click

COMMANDS: list[click.Command] = []
