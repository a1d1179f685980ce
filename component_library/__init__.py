"""The shipped component library: data files only (see README.md in this folder).

Packaged into the wheel; ``dha.library`` finds this folder through this package, so editable
and regular installs need no configuration.
"""
from pathlib import Path

#: Folder that holds the shipped library files.
FOLDER = Path(__file__).parent
