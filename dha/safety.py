"""Safe output: inert spreadsheet text, visible control characters, atomic file writes.

Every writer of the package goes through these helpers, so that hostile or careless input
(a peak named ``=HYPERLINK(...)``, a BEL in a sample id, a dangling symbolic link where an output
should go, a full disk) can neither run in a client's spreadsheet nor leave a broken file.

Text
----
- ``visible_controls(text)`` replaces control characters (C0 except tab/newline/CR, DEL, C1,
  bidirectional overrides, unpaired surrogates) by a visible ASCII form: ``<BEL>``, ``<ESC>``,
  ``<U+0085>``, ``<U+202E>``.
- ``inert_text(value)`` is for CSV cells (and any text a spreadsheet may open): control
  characters made visible, and text starting with ``=``, ``+``, ``-``, ``@``, tab or carriage
  return prefixed by an apostrophe, so a spreadsheet shows it as text instead of running it.
- ``inert_frame(table)`` applies ``inert_text`` to every text cell of a DataFrame.
- ``inert_workbook(wb)`` is for openpyxl workbooks, called just before saving: every cell
  holding text is a string cell (never a formula), control characters made visible.
- ``terminal_text(text)`` is for anything echoed to a terminal: also tab, newline and carriage
  return made visible, so a name cannot move the cursor, recolour or retitle the terminal.

Files
-----
``atomic_path(path)`` (context manager), ``atomic_write(path, fn)``, ``atomic_write_bytes`` and
``atomic_write_text`` write into a temporary file in the target's folder, flush and fsync it,
then rename it over the target. A full disk or a kill leaves either the old file or no file;
the rename replaces a symbolic link at the target itself, never the file it points to.
``check_target(path, overwrite)`` refuses an existing file (or any symbolic link, dangling or
not) unless ``overwrite``. OS errors become ``OutputError`` with one line in words ("disk full",
"permission denied") naming the file and what to do.

>>> inert_text('=HYPERLINK("http://x","y")')
'\\'=HYPERLINK("http://x","y")'
>>> inert_text("-12.5"), inert_text(-12.5)
("'-12.5", -12.5)
>>> visible_controls("n-bu\\x07tane")
'n-bu<BEL>tane'
>>> terminal_text("a\\x1b[31mred\\nb")
'a<ESC>[31mred<LF>b'
"""
from __future__ import annotations

import contextlib
import errno
import logging
import os
import re
import tempfile
from pathlib import Path
from typing import IO, Any, Callable, Iterator

from dha.errors import OutputError

log = logging.getLogger("dha.safety")

#: First characters that make a spreadsheet read a text cell as a formula.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")

_C0_NAMES = ("NUL SOH STX ETX EOT ENQ ACK BEL BS HT LF VT FF CR SO SI DLE DC1 DC2 DC3 DC4 NAK "
             "SYN ETB CAN EM SUB ESC FS GS RS US").split()

# C0 without tab, LF, CR; DEL; C1; bidirectional embeddings/overrides/isolates; lone surrogates.
_CONTROL_RE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069"
                         "\ud800-\udfff]")
# The same, plus tab, LF and CR (for the terminal).
_TERMINAL_RE = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\ud800-\udfff]")


def _name(ch: str) -> str:
    code = ord(ch)
    if code < 0x20:
        return f"<{_C0_NAMES[code]}>"
    if code == 0x7F:
        return "<DEL>"
    return f"<U+{code:04X}>"


def has_controls(text: str) -> bool:
    """True when ``text`` holds a character that ``visible_controls`` would replace."""
    return bool(_CONTROL_RE.search(text))


def visible_controls(text: str) -> str:
    """``text`` with each control character replaced by a visible ASCII form (``<BEL>``).

    Tab, newline and carriage return are kept (they are legal in a cell); see
    ``terminal_text`` for the terminal.

    >>> visible_controls("a\\x00b\\u202ec")
    'a<NUL>b<U+202E>c'
    """
    return _CONTROL_RE.sub(lambda m: _name(m.group()), text)


def terminal_text(value: Any) -> str:
    """``str(value)`` safe to echo: every control character, newline and tab made visible.

    >>> terminal_text("tank\\r7\\t")
    'tank<CR>7<HT>'
    """
    return _TERMINAL_RE.sub(lambda m: _name(m.group()), str(value))


def visible_data(data: Any) -> Any:
    """Copy of nested dicts/lists/tuples with ``visible_controls`` applied to every string.

    Writers of spreadsheets and PDFs call it on the result first (openpyxl refuses control
    characters on assignment; a PDF would show nothing or garbage).

    >>> visible_data({"sample": {"id": "t\\x07"}, "n": [1, "a\\x00"]})
    {'sample': {'id': 't<BEL>'}, 'n': [1, 'a<NUL>']}
    """
    if isinstance(data, str):
        return visible_controls(data)
    if isinstance(data, dict):
        return {visible_data(k): visible_data(v) for k, v in data.items()}
    if isinstance(data, (list, tuple)):
        return type(data)(visible_data(v) for v in data)
    return data


def inert_text(value: Any) -> Any:
    """A text cell that a spreadsheet shows as text; other values unchanged.

    Control characters are made visible; text starting with ``=``, ``+``, ``-``, ``@``, tab or
    carriage return gets a leading apostrophe (the usual neutralisation for CSV). Numbers,
    None and other non-text values are returned as they are.
    """
    if not isinstance(value, str):
        return value
    text = visible_controls(value)
    if text.startswith(FORMULA_START):
        text = "'" + text
    return text


def inert_frame(table):
    """Copy of a DataFrame with ``inert_text`` applied to every text cell and column name."""
    out = table.copy()
    for col in out.columns:
        if out[col].dtype == object or str(out[col].dtype) in ("string", "str"):
            out[col] = out[col].map(inert_text)
    out.columns = [inert_text(c) for c in out.columns]
    return out


def inert_workbook(wb) -> int:
    """Make every text cell of an openpyxl workbook a plain string cell; returns cells changed.

    A text cell that openpyxl would write as a formula (text starting with ``=``) is written as
    a string, shown as typed; control characters (which openpyxl refuses) are made visible.
    Sheet titles are cleaned the same way. Call just before ``wb.save``.
    """
    changed = 0
    for ws in wb.worksheets:
        title = visible_controls(ws.title)
        if title != ws.title:
            ws.title = title[:31]
            changed += 1
        for row in ws.iter_rows():
            for cell in row:
                value = cell.value
                if not isinstance(value, str):
                    continue
                text = visible_controls(value)
                if text != value or cell.data_type == "f":
                    cell._value = text  # noqa: SLF001 - set without openpyxl's formula guess
                    cell.data_type = "s"
                    changed += 1
    return changed


# --- files ----------------------------------------------------------------------------------

def _words(err: OSError, path: Path) -> str:
    """One line in words for an OS error while writing ``path``."""
    code = getattr(err, "errno", None)
    if code in (errno.ENOSPC, getattr(errno, "EDQUOT", -1)):
        return (f"{path}: disk full (no space left on the device) while writing; nothing was "
                "written there (any earlier file is kept). Free some space and run again")
    if code in (errno.EACCES, errno.EPERM):
        return (f"{path}: permission denied while writing; choose an output folder you may "
                "write to (-o DIR)")
    if code == errno.EROFS:
        return f"{path}: the file system is read-only; choose another output folder (-o DIR)"
    if code == errno.ENOENT:
        return f"{path}: the output folder does not exist or was removed; check -o DIR"
    if code == errno.ENOTDIR:
        return f"{path}: a part of the output path is a file, not a folder; check -o DIR"
    if code == errno.EISDIR:
        return f"{path}: is a folder; remove it or choose another output name"
    reason = err.strerror or type(err).__name__
    return f"{path}: could not be written ({reason}); check the output folder and free space"


def check_target(path: str | Path, overwrite: bool = False) -> Path:
    """Refuse to write ``path`` when it exists (or is a symbolic link, even a dangling one).

    With ``overwrite`` an existing file is replaced later by ``atomic_*`` (a symbolic link is
    replaced by the new file, never followed); a folder at ``path`` is always refused.
    """
    path = Path(path)
    if path.is_symlink():
        if not overwrite:
            raise OutputError(f"{path} exists as a symbolic link (not followed); remove it or "
                              "use --overwrite to replace the link by the file")
    elif path.is_dir():
        raise OutputError(f"{path}: is a folder; remove it or choose another output folder")
    elif path.exists() and not overwrite:
        raise OutputError(f"{path} exists; use --overwrite to replace it")
    return path


def make_folder(folder: str | Path) -> Path:
    """Create ``folder`` (and parents); an OS error becomes one ``OutputError`` line."""
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise OutputError(f"{folder}: exists and is not a folder; choose another output "
                          "folder (-o DIR)") from None
    except OSError as err:
        raise OutputError(_words(err, folder)) from None
    return folder


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it is fsynced and renamed to ``path``.

    For writers that need a file name (sqlite, some libraries). On any error the temporary
    file is removed and ``path`` is left as it was; OS errors become ``OutputError``.
    """
    path = Path(path)
    if path.is_dir() and not path.is_symlink():
        raise OutputError(f"{path}: is a folder; remove it or choose another output name")
    folder = make_folder(path.parent if str(path.parent) else Path("."))
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name[:60]}.", suffix=".part",
                                        dir=folder)
        os.close(fd)
    except OSError as err:
        raise OutputError(_words(err, path)) from None
    tmp = Path(tmp_name)
    try:
        yield tmp
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)  # replaces a symbolic link itself, never its target
        _sync_folder(folder)
    except OutputError:
        raise
    except OSError as err:
        raise OutputError(_words(err, path)) from None
    except BaseException as err:
        # Writers that wrap an OSError (zipfile, zlib) still mean a full disk when one is full.
        cause = _os_cause(err)
        if cause is not None:
            raise OutputError(_words(cause, path)) from None
        raise
    finally:
        with contextlib.suppress(OSError):
            if tmp.exists():
                tmp.unlink()


def _os_cause(err: BaseException) -> OSError | None:
    seen = 0
    while err is not None and seen < 10:
        if isinstance(err, OSError) and err.errno is not None:
            return err
        err = err.__cause__ or err.__context__
        seen += 1
    return None


def _sync_folder(folder: Path) -> None:
    with contextlib.suppress(OSError, AttributeError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def atomic_write(path: str | Path, write: Callable[[IO[bytes]], Any]) -> Path:
    """Call ``write(fh)`` with a binary file object, then put the file at ``path`` atomically.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> atomic_write(d / "a.txt", lambda fh: fh.write(b"ok")).read_bytes()
    b'ok'
    """
    path = Path(path)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            write(fh)
            fh.flush()
    return path


def atomic_write_bytes(path: str | Path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically."""
    return atomic_write(path, lambda fh: fh.write(data))


def atomic_write_text(path: str | Path, text: str, encoding: str = "utf-8",
                      newline: str | None = None) -> Path:
    """Write ``text`` to ``path`` atomically (``newline`` as for ``open``)."""
    path = Path(path)
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding=encoding, newline=newline) as fh:
            fh.write(text)
    return path


def save_workbook(wb, path: str | Path) -> Path:
    """``inert_workbook(wb)`` then save it to ``path`` atomically."""
    inert_workbook(wb)
    return atomic_write(path, wb.save)
