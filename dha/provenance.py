"""What a result was made from: the ``provenance`` block every result carries.

``provenance`` = {input_sha256, library_sha256, settings_sha256, tool_version}: the checksum
of the input file's bytes, of the component library, of the settings together with the
specification profile applied, and the dha version. Two results with the same four keys were
made from the same things (and are the same apart from ``generated_at``); ``dha batch`` uses
them to skip runs that are up to date and adds where the run sits in its input
(``input_path``, ``run_index``, ``runs_in_input``). A result averaged over several injections
has the sorted checksums of its input files in ``inputs_sha256`` and, as ``input_sha256``,
the checksum of that list.
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Any, Iterable

from dha import __version__

#: The four keys that say what a result was made from.
KEYS = ("input_sha256", "library_sha256", "settings_sha256", "tool_version")


def sha256_file(path: str | Path) -> str:
    """SHA-256 of a file's bytes, read in 1 MiB blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def settings_sha256(settings: dict, profile: dict | None) -> str:
    """SHA-256 of the settings and the specification profile applied (canonical JSON)."""
    from dha.result import jsonable
    text = json.dumps({"settings": jsonable(settings), "spec": jsonable(profile)},
                      sort_keys=True, ensure_ascii=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def provenance(input_sha256: str, library: Any, settings_digest: str) -> dict[str, str]:
    """The provenance block of one result (``library`` has a ``sha256``)."""
    return {"input_sha256": input_sha256, "library_sha256": library.sha256,
            "settings_sha256": settings_digest, "tool_version": __version__}


def combined(digests: Iterable[str]) -> str:
    """One checksum for several inputs: SHA-256 of their sorted checksums, one per line."""
    text = "\n".join(sorted(set(digests))) + "\n"
    return hashlib.sha256(text.encode()).hexdigest()


def averaged(result: dict) -> dict[str, Any] | None:
    """Provenance of a result averaged over injections, from its injections' provenance."""
    injections = (result.get("replicates") or {}).get("results") or []
    provs = [r.get("provenance") for r in injections if isinstance(r.get("provenance"), dict)]
    if not provs or len(provs) != len(injections):
        return None
    digests = sorted({p["input_sha256"] for p in provs})
    out = dict(provs[0])
    out["input_sha256"] = digests[0] if len(digests) == 1 else combined(digests)
    out["inputs_sha256"] = digests
    return out
