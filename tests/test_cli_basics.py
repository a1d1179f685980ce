"""CLI basics: every command has help text; errors are one line (common practice, no source)."""
import click
from click.testing import CliRunner

from dha.cli import cli


def _walk(group, prefix=()):
    for name, cmd in group.commands.items():
        yield prefix + (name,), cmd
        if isinstance(cmd, click.Group):
            yield from _walk(cmd, prefix + (name,))


def test_version():
    r = CliRunner().invoke(cli, ["--version"])
    assert r.exit_code == 0 and "dha" in r.output


def test_every_command_has_help():
    runner = CliRunner()
    for path, cmd in _walk(cli):
        assert (cmd.help or "").strip(), f"dha {' '.join(path)} has no help text"
        r = runner.invoke(cli, list(path) + ["--help"])
        assert r.exit_code == 0, (path, r.output)


def test_unknown_command_is_usage_error():
    r = CliRunner().invoke(cli, ["no-such-command"])
    assert r.exit_code == 2
