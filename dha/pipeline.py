"""The pipeline: one input file -> one result per run -> files on disk.

``process_file`` runs reader -> identify (peak runs) -> quantify -> groups -> every property
model of ``dha.properties.MODELS`` -> specification checks -> result. ``write_outputs`` writes a
result in the formats asked for; a writer is one function per format in ``WRITERS`` (the report
package adds ``xlsx`` and ``pdf`` there).
"""
from __future__ import annotations

import importlib
import logging
import math
import re
from pathlib import Path
from typing import Any, Callable

from dha.errors import InputError, SettingsError
from dha.groups import group_totals
from dha import properties as _properties
from dha.properties import PropertyResult
from dha.quantify import quantify_run
from dha.result import build_result, jsonable, write_json
from dha.safety import check_target, make_folder

log = logging.getLogger("dha.pipeline")

FORMATS = ("json", "xlsx", "pdf")


def writers() -> dict[str, Callable[[dict, Path], Any] | None]:
    """Writer per format: ``writer(result, path)``; None where no writer exists.

    JSON is written here; the others come from ``dha.report.WRITERS``.
    """
    table: dict[str, Callable[[dict, Path], Any] | None] = {f: None for f in FORMATS}
    table["json"] = write_json
    try:
        from dha.report import WRITERS as report_writers
    except ImportError:
        report_writers = {}
    table.update({f: w for f, w in report_writers.items() if f in table and f != "json"})
    return table


def run_stem(run, n_runs: int) -> str:
    """Output stem: the input's stem, plus ``__<sheet>`` for a workbook with several runs.

    >>> from types import SimpleNamespace as NS
    >>> run_stem(NS(source_file="a/tank 7.xlsx", injection="Inj 2"), 3)
    'tank 7__Inj_2'
    """
    stem = Path(str(run.source_file)).stem
    injection = getattr(run, "injection", None)
    if injection and n_runs > 1:
        stem += "__" + re.sub(r"[^\w.-]+", "_", str(injection)).strip("_")
    return stem


def run_properties(comp, library, settings) -> list[tuple[str, Any]]:
    """(module name, PropertyResult) for every module in ``dha.properties.MODELS``."""
    out = []
    for name in _properties.MODELS:
        short = name.rsplit(".", 1)[-1]
        try:
            module = importlib.import_module(name)
            res = module.compute(comp, library, settings)
        except Exception as err:  # noqa: BLE001 - one model's failure must not lose the run
            log.warning("property model %s failed (%s: %s); its properties are null", short,
                        type(err).__name__, err)
            log.debug("property model %s failed", name, exc_info=True)
            res = PropertyResult(warnings=[
                f"property model {short} failed ({type(err).__name__}: {err}); "
                "its properties are null"])
        out.append((short, res))
    return out


def process_run(run, settings: dict, library, spec: str | None = None,
                generated_at: str | None = None) -> dict[str, Any]:
    """The result of one ``Run`` (see ``process_file``)."""
    identified = None
    id_warnings: list[str] = []
    identification = None
    if run.kind == "peaks":
        from dha.identify import identify
        identified = identify(run.table, library, settings)
        attrs = dict(getattr(identified, "attrs", {}) or {})
        id_warnings = [str(w) for w in attrs.pop("warnings", [])]
        identification = attrs or None
    quant = quantify_run(run, identified, library, settings)
    groups = group_totals(quant.table, library, settings)
    properties = run_properties(quant.table, library, settings)

    result = build_result(run, quant, groups, properties, library, settings,
                          extra_warnings=id_warnings, identification=identification,
                          generated_at=generated_at)
    check_totals(result, run)
    from dha.explain import result_keys as _octane_keys
    result.update(jsonable(_octane_keys(quant.table, library, settings, result["properties"])))
    if spec is None:
        spec = settings.get("report", {}).get("spec", "")
    if spec:
        # The checks read the finished result; they and their warnings are added to it.
        from dha import specs
        checks, spec_warnings = specs.check(result, specs.load_profile(spec), library)
        result["checks"] = jsonable(checks)
        result["warnings"] += spec_warnings
    _add_identification(result, identified, quant.table, library)
    return result


def check_totals(result: dict, run=None) -> None:
    """Refuse a result whose group totals are not numbers summing to 100 %.

    Exit 1 with one line, never a result of zeros: e.g. every area unusable, or areas so
    large that their sum overflows.
    """
    where = Path(str(getattr(run, "source_file", "") or
                     (result.get("sample") or {}).get("source_file") or "input")).name
    injection = getattr(run, "injection", None)
    if injection:
        where += f" [{injection}]"
    for basis, groups in (result.get("totals") or {}).items():
        if groups is None:
            continue
        values = list(groups.values())
        bad = [v for v in values if v is None or not math.isfinite(float(v))]
        total = sum(float(v) for v in values if v is not None and math.isfinite(float(v)))
        if (basis == "mass_pct" and bad) or (not bad and abs(total - 100.0) > 0.5):
            raise InputError(
                f"{where}: the {basis.replace('_pct', ' %')} totals cannot be computed (they sum "
                f"to {total:.4g} %, {len(bad)} not a number); check the areas or amounts "
                "(see the rows in the import log) and export again")

def _add_identification(result: dict, identified, composition, library) -> None:
    """The identification check (every peak-table result), peaks to review and per-component
    confidence (null for composition tables); see dha.identify.identification_report."""
    if identified is None:
        for rec in result["components"]:
            rec.setdefault("confidence", None)
        return
    from dha.identify import identification_report
    check, review, conf = identification_report(identified, composition, library)
    result["checks"].append(jsonable(check))
    if isinstance(result.get("identification"), dict):
        result["identification"]["peaks_to_review"] = jsonable(review)
    for rec, c in zip(result["components"], conf):
        rec["confidence"] = c


def process_file(path: str | Path, settings: dict, library, spec: str | None = None) -> list[dict]:
    """One result per run of the input file.

    Parameters
    ----------
    path : peak table or composition table (CSV, TSV, TXT, XLSX)
    settings : full settings (``dha.settings.load_settings``)
    library : ``dha.library.Library``
    spec : specification profile name or path; None = ``[report] spec``; "" = no checks

    Returns
    -------
    list of result dicts (the dha-result/1 schema), in the file's run order; ``process_file_stems`` gives
    each with its output stem
    """
    return [r for _, r in process_file_stems(path, settings, library, spec)]


def check_input_path(path: str | Path) -> Path:
    """``path`` as a Path if it is a regular file; else one-line ``InputError``."""
    path = Path(path)
    if path.is_dir():
        raise InputError(f"{path}: is a folder; give the export files (or use dha batch)")
    if not path.exists():
        raise InputError(f"{path}: file not found; check the path")
    if not path.is_file():
        raise InputError(f"{path}: not a regular file (a device, pipe or socket); give the "
                         "export file itself")
    return path


def process_file_stems(path: str | Path, settings: dict, library,
                       spec: str | None = None) -> list[tuple[str, dict]]:
    """As ``process_file``, with each result's output stem."""
    path = check_input_path(path)
    from dha.reader import read_input
    runs = read_input(path, settings)
    if not runs:
        raise InputError(f"{path.name}: no peak or composition table found")
    out = []
    for run in runs:
        stem = run_stem(run, len(runs))
        result = process_run(run, settings, library, spec)
        result["sample"]["output_stem"] = stem
        out.append((stem, result))
    return out


def output_paths(out_dir: str | Path, stem: str, formats) -> dict[str, Path]:
    """Target path per format."""
    return {fmt: Path(out_dir) / f"{stem}.{fmt}" for fmt in formats}


def write_outputs(result: dict, out_dir: str | Path, stem: str | None = None,
                  formats=("json",), overwrite: bool = False) -> list[Path]:
    """Write ``result`` as ``<out_dir>/<stem>.<fmt>`` for each format; returns paths written.

    ``stem`` defaults to the one ``process_file`` stored in ``result["sample"]["output_stem"]``.

    An existing file is an error unless ``overwrite``. A format whose writer does not exist yet
    is not written; a warning in the result (and the JSON, if asked for) says so.
    """
    if stem is None:
        stem = (result.get("sample") or {}).get("output_stem") or "result"
    formats = list(dict.fromkeys(formats))
    unknown = [f for f in formats if f not in FORMATS]
    if unknown:
        raise SettingsError(f"unknown output format(s) {', '.join(unknown)}; "
                            f"use {', '.join(FORMATS)}")
    out_dir = Path(out_dir)
    targets = output_paths(out_dir, stem, formats)
    table = writers()
    missing = [f for f in formats if table.get(f) is None]
    for fmt in missing:
        msg = f"{fmt} output not written: no {fmt} writer in this version"
        if msg not in result["warnings"]:
            result["warnings"].append(msg)
        log.warning("%s: %s", stem, msg)
    todo = {f: p for f, p in targets.items() if f not in missing}
    for p in todo.values():
        check_target(p, overwrite)  # an existing file or any symbolic link: refused
    make_folder(out_dir)
    written = []
    # JSON last, so that it carries every warning the other writers added
    for fmt in sorted(todo, key=lambda f: f == "json"):
        table[fmt](result, todo[fmt])
        written.append(todo[fmt])
    return written
