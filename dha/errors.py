"""One error family for the whole package.

Each subclass also inherits the matching built-in error, so callers may catch either.
Messages say where (file, row, column) and what to do; the CLI prints them as one line.
"""


class DhaError(Exception):
    """Base class of every error that dha raises on purpose."""


class InputError(DhaError, ValueError):
    """An input file (peak table, composition table) cannot be used as it is."""


#: Name kept for the reader stage; the same class.
PeakTableError = InputError


class LibraryError(DhaError, ValueError):
    """The component library (shipped or a lab overlay) is not sound."""


class SettingsError(DhaError, ValueError):
    """A settings file or a setting value is wrong."""


class SpecError(DhaError, ValueError):
    """A specification profile is missing or malformed."""


class CalibrationError(DhaError, ValueError):
    """A lab calibration cannot be fitted or applied."""


class OutputError(DhaError, OSError):
    """An output file cannot be written (disk full, permission, a symbolic link in the way)."""
