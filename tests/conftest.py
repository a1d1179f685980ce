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
