"""Test-wide fixtures."""
import logging

import pytest


@pytest.fixture(autouse=True)
def _restore_dha_log_level():
    """``dha batch`` quiets the "dha" logger for its run (``batch.quiet_run_warnings``); a
    later test in the same process must not inherit that (a caplog test would see nothing)."""
    logger = logging.getLogger("dha")
    level = logger.level
    yield
    logger.setLevel(level)


@pytest.fixture(scope="module")
def library():
    """The shipped component library (a module may define its own ``library`` instead)."""
    from dha.library import load_library
    return load_library()


@pytest.fixture(scope="module")
def settings():
    """The default settings, one copy per test module (a module may define its own)."""
    from dha.settings import load_settings
    return load_settings()
