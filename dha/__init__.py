"""dha: from a detailed hydrocarbon analysis (DHA) peak table to a petrol certificate draft.

The pipeline runs in one direction, one module per stage:

reader -> identify -> quantify -> groups / properties -> specs -> report

Every stage is a pure function over pandas tables; the CLI (``dha.cli``) is a thin layer on top.
"""
import logging

__version__ = "0.1.0"

#: The one package logger; modules use ``logging.getLogger("dha." + name)``.
log = logging.getLogger("dha")
log.addHandler(logging.NullHandler())
