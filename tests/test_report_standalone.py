"""The repository stands alone: no tracked file names a path outside it.

A clone with nothing beside it must pass its own tests, so code, tests and docs never point at a
sibling folder or at an absolute path of one machine (common practice, no source).
"""
from __future__ import annotations

import re
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SKIP_DIRS = {".git", ".venv", "out", "build", "dist", "__pycache__", ".pytest_cache"}
# built from pieces so that this file does not match itself
SIBLING = re.compile(r"\.\./" + "sh" + "ared" + r"|(?<![\w-])" + "sh" + "ared" + r"/data/")
ABSOLUTE = re.compile(r"(?<![\w./~-])/(?:" + "|".join(["work", "tmp", "home", "root"]) + r")/")


def _tracked_files() -> list[Path]:
    try:
        out = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True,
                             check=True, timeout=20).stdout
        names = [n for n in out.decode().split("\0") if n]
        if names:
            return [ROOT / n for n in names]
    except (OSError, subprocess.SubprocessError):
        pass
    return [p for p in ROOT.rglob("*")
            if p.is_file() and not SKIP_DIRS.intersection(p.relative_to(ROOT).parts)]


def _offending_lines(text: str) -> list[str]:
    return [line.strip()[:120] for line in text.splitlines()
            if SIBLING.search(line) or ABSOLUTE.search(line)]


def test_patterns_catch_outside_paths():
    # the check itself must be able to fail
    for bad in ["see ../" + "sh" + "ared/DOMAIN.md", "open('/" + "work/x.csv')", "/" + "tmp/run.csv",
                "C = '/" + "home/lab/x'", "/" + "root/y", "sh" + "ared" + "/data/facts.md"]:
        assert _offending_lines(bad), bad
    for fine in ["tests/data/octane/pure_components.csv", "options shared by commands",
                 "tmp_path / 'run.csv'", "dha/report/pdf.py"]:
        assert not _offending_lines(fine), fine


def test_no_tracked_file_names_a_path_outside_the_repository():
    bad = {}
    for path in _tracked_files():
        if not path.is_file():
            continue
        data = path.read_bytes()
        if b"\0" in data[:4096]:  # binary (xlsx, png)
            continue
        lines = _offending_lines(data.decode("utf-8", errors="replace"))
        if lines:
            bad[str(path.relative_to(ROOT))] = lines[:3]
    assert not bad, bad
