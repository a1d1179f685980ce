"""The ``dha`` command line: a thin layer over the library.

Each command lives in ``dha/commands/<name>.py`` and only parses arguments, calls library
functions and formats the result. Library errors (``DhaError``) become one-line messages with
exit code 1 here, and nowhere else; click's usage errors exit 2.
"""
from __future__ import annotations

import functools
import importlib
import logging
import os
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


class _TerminalFormatter(logging.Formatter):
    """Log lines with control characters of names (escape sequences, BEL) made visible."""

    def formatMessage(self, record: logging.LogRecord) -> str:  # noqa: N802 - logging's name
        from dha.safety import terminal_text
        return terminal_text(super().formatMessage(record))


def _module_file(module_name: str) -> str | None:
    """The source file of a command module, found without importing anything."""
    if module_name.startswith("dha."):
        path = os.path.join(os.path.dirname(__file__), *module_name.split(".")[1:]) + ".py"
        if os.path.isfile(path):
            return path
    import importlib.util
    spec = importlib.util.find_spec(module_name)
    return spec.origin if spec is not None and spec.origin else None


def _declared_commands(module_name: str) -> list[tuple[str, str]]:
    """(command name, docstring) of the top-level click commands a module declares, read from
    its source without importing it (so ``dha --help`` does not import pandas)."""
    import ast

    origin = _module_file(module_name)
    if origin is None:
        return []
    try:
        tree = ast.parse(open(origin, encoding="utf-8").read())
    except (OSError, SyntaxError):
        return []
    found = []
    for node in tree.body:
        if not isinstance(node, ast.FunctionDef):
            continue
        for deco in node.decorator_list:
            if (isinstance(deco, ast.Call) and isinstance(deco.func, ast.Attribute)
                    and deco.func.attr in ("command", "group")
                    and isinstance(deco.func.value, ast.Name) and deco.func.value.id == "click"
                    and deco.args and isinstance(deco.args[0], ast.Constant)):
                found.append((str(deco.args[0].value), ast.get_docstring(node) or ""))
    return found


def _command_table() -> dict[str, list[tuple[str, str]]]:
    """``_declared_commands`` of every command module, kept in a small JSON file in the user
    cache folder (``$DHA_CACHE_DIR``, else ``$XDG_CACHE_HOME/dha`` or ``~/.cache/dha``) under the
    size and modification time of each module: parsing the eleven sources took about half of
    the time of ``dha --help`` and of every command's start. A cache that cannot be read or
    written is ignored (the sources are parsed)."""
    import json

    stamps = []
    for module in COMMAND_MODULES:
        path = _module_file(module)
        try:
            st = os.stat(path) if path else None
        except OSError:
            st = None
        stamps.append([module, path, st.st_mtime_ns if st else None, st.st_size if st else None])
    base = os.environ.get("DHA_CACHE_DIR") or os.path.join(
        os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache"), "dha")
    cache = os.path.join(base, "cli-commands.json")
    try:
        with open(cache, encoding="utf-8") as fh:
            data = json.load(fh)
        if data.get("stamps") == stamps and data.get("version") == __version__:
            return {m: [tuple(x) for x in v] for m, v in data["commands"].items()}
    except (OSError, ValueError, AttributeError, TypeError):
        pass
    table = {module: _declared_commands(module) for module in COMMAND_MODULES}
    if all(s[2] is not None for s in stamps):
        try:
            from dha.safety import atomic_write_text
            os.makedirs(base, exist_ok=True)
            atomic_write_text(cache, json.dumps({"version": __version__, "stamps": stamps,
                                                 "commands": table}))
        except Exception:  # noqa: BLE001 - a cache is optional (read-only home, full disk)
            pass
    return table


class _LazyCommands(dict):
    """The group's command table: reading it as a whole (``items()``, ``[name]``) imports every
    command module first; the CLI itself reads single entries without that."""

    def __init__(self, load_all):
        super().__init__()
        self._load_all = load_all
        self._complete = False

    def _fill(self) -> None:
        if not self._complete:
            self._complete = True
            self._load_all()

    def __getitem__(self, key):
        if not dict.__contains__(self, key):
            self._fill()
        return dict.__getitem__(self, key)

    def __contains__(self, key):
        if not dict.__contains__(self, key):
            self._fill()
        return dict.__contains__(self, key)

    def get(self, key, default=None):
        return self[key] if key in self else default

    def __iter__(self):
        self._fill()
        return dict.__iter__(self)

    def __len__(self):
        self._fill()
        return dict.__len__(self)

    def keys(self):
        self._fill()
        return dict.keys(self)

    def values(self):
        self._fill()
        return dict.values(self)

    def items(self):
        self._fill()
        return dict.items(self)


class _Main(click.Group):
    """Loads each command's module only when that command runs (fast ``dha --help``), and
    turns a ``DhaError`` raised anywhere below into a one-line message and exit 1."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.commands = _LazyCommands(self._load_all)

    def _load_all(self) -> None:
        for module in COMMAND_MODULES:
            self._load(module)

    def _load(self, module: str) -> None:
        for command in importlib.import_module(module).COMMANDS:
            dict.setdefault(self.commands, command.name, command)

    @functools.cached_property
    def _where(self) -> dict[str, tuple[str, str]]:
        """Command name -> (module, docstring), from the sources of ``COMMAND_MODULES``."""
        where: dict[str, tuple[str, str]] = {}
        table = _command_table()
        for module in COMMAND_MODULES:
            declared = table.get(module)
            if declared is None:
                declared = _declared_commands(module)
            if not declared:        # not readable: import it
                self._load(module)
            for name, doc in declared:
                where.setdefault(name, (module, doc))
        return where

    def list_commands(self, ctx):
        return sorted(set(self._where) | set(dict.keys(self.commands)))

    def get_command(self, ctx, name):
        if not dict.__contains__(self.commands, name):
            if name not in self._where:
                return None
            self._load(self._where[name][0])
        return dict.get(self.commands, name)

    def format_commands(self, ctx, formatter):
        rows = []
        names = self.list_commands(ctx)
        limit = formatter.width - 6 - max((len(n) for n in names), default=0)
        for name in names:
            if dict.__contains__(self.commands, name):
                text = dict.__getitem__(self.commands, name).get_short_help_str(limit)
            else:
                text = click.utils.make_default_short_help(self._where[name][1], limit)
            rows.append((name, text))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except DhaError as err:
            from dha.safety import terminal_text
            click.echo(terminal_text(f"dha: error: {err}"), err=True)
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
    for handler in logging.getLogger().handlers:
        if not isinstance(handler.formatter, _TerminalFormatter):
            handler.setFormatter(_TerminalFormatter("dha: %(levelname)s: %(message)s"))


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="dha")
