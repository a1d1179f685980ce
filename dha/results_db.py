"""The results database: every run of an output folder in one SQLite file (``results.sqlite``).

A batch writes one row per run into ``runs`` (sample metadata, totals, benzene, oxygen,
properties, verdicts, flags, provenance), its specification checks into ``checks`` and its
components into ``components``, in one transaction per run as the run finishes. The database
is in WAL mode with a busy timeout, so two batches writing into one folder wait for each other
instead of failing, and readers never block writers. A batch killed at any moment leaves the
database consistent: a run is in it completely or not at all (SQLite's transactions).

The JSON results stay the record; the database is an index over them that ``dha history``
queries (and that a batch fills again from the JSON files when it is missing or behind).
The schema is in DEVELOPERS.md ("The results database").
"""
from __future__ import annotations

import datetime as _dt
import sqlite3
from pathlib import Path
from typing import Any, Iterable

DB_NAME = "results.sqlite"
SCHEMA_VERSION = 1
#: Seconds a writer waits for another one's transaction before giving up.
BUSY_TIMEOUT_S = 60.0

GROUPS = ("n_paraffins", "isoparaffins", "olefins", "naphthenes", "aromatics", "oxygenates",
          "unidentified")
PROPERTIES = ("ron", "mon", "aki", "sensitivity", "dvpe_kpa", "density_kg_m3", "e70_vol_pct",
              "e100_vol_pct", "e150_vol_pct", "t10_c", "t50_c", "t90_c", "fbp_c",
              "net_heat_mj_kg", "mean_molar_mass_g_mol", "h_to_c_molar")
PROVENANCE = ("input_sha256", "library_sha256", "settings_sha256", "tool_version")

#: runs columns after the key, with their SQL types.
RUN_COLUMNS: list[tuple[str, str]] = (
    [("input_path", "TEXT"), ("run_index", "INTEGER"), ("sample_id", "TEXT"),
     ("injection", "TEXT"), ("injection_time", "TEXT"), ("source_file", "TEXT"),
     ("instrument", "TEXT"), ("method", "TEXT"), ("operator", "TEXT"), ("product", "TEXT"),
     ("spec", "TEXT"), ("status", "TEXT"), ("flags", "TEXT"), ("checks_failed", "INTEGER"),
     ("checks_marginal", "INTEGER"), ("identification_verdict", "TEXT"),
     ("benzene_vol_pct", "REAL"), ("benzene_mass_pct", "REAL"), ("oxygen_mass_pct", "REAL"),
     ("ethanol_vol_pct", "REAL")]
    + [(f"{g}_{basis}", "REAL") for basis in ("mass_pct", "vol_pct") for g in GROUPS]
    + [(p, "REAL") for p in PROPERTIES]
    + [(p, "TEXT") for p in PROVENANCE]
    + [("library_version", "TEXT"), ("generated_at", "TEXT"), ("recorded_at", "TEXT")])

COMPONENT_COLUMNS = ("position", "name", "cas", "group_name", "carbon_number", "rt_min",
                     "retention_index", "area", "mass_pct", "vol_pct", "mol_pct", "match",
                     "confidence")
CHECK_COLUMNS = ("spec", "property", "kind", "limit_value", "value", "uncertainty", "verdict")

_DDL = f"""
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT);
CREATE TABLE IF NOT EXISTS runs (
    run_key TEXT PRIMARY KEY,
    {', '.join(f'{c} {t}' for c, t in RUN_COLUMNS)}
);
CREATE INDEX IF NOT EXISTS runs_sample ON runs (sample_id);
CREATE INDEX IF NOT EXISTS runs_time ON runs (injection_time);
CREATE INDEX IF NOT EXISTS runs_product ON runs (product, spec);
CREATE TABLE IF NOT EXISTS checks (
    run_key TEXT NOT NULL REFERENCES runs (run_key) ON DELETE CASCADE,
    spec TEXT, property TEXT, kind TEXT, limit_value REAL, value REAL, uncertainty REAL,
    verdict TEXT
);
CREATE INDEX IF NOT EXISTS checks_run ON checks (run_key);
CREATE TABLE IF NOT EXISTS components (
    run_key TEXT NOT NULL REFERENCES runs (run_key) ON DELETE CASCADE,
    position INTEGER, name TEXT, cas TEXT, group_name TEXT, carbon_number INTEGER,
    rt_min REAL, retention_index REAL, area REAL, mass_pct REAL, vol_pct REAL, mol_pct REAL,
    match TEXT, confidence REAL
);
CREATE INDEX IF NOT EXISTS components_run ON components (run_key);
CREATE INDEX IF NOT EXISTS components_name ON components (name);
"""


def connect(path: str | Path) -> sqlite3.Connection:
    """Open (and create if needed) a results database: WAL, busy timeout, foreign keys."""
    con = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_S, isolation_level=None)
    con.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
    con.execute("PRAGMA journal_mode = WAL")
    con.execute("PRAGMA synchronous = NORMAL")
    con.execute("PRAGMA foreign_keys = ON")
    with transaction(con):
        for statement in _DDL.split(";"):
            if statement.strip():
                con.execute(statement)
        con.execute("INSERT OR IGNORE INTO meta VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
    return con


class transaction:
    """``with transaction(con):`` one IMMEDIATE transaction, committed or rolled back."""

    def __init__(self, con: sqlite3.Connection):
        self.con = con

    def __enter__(self):
        self.con.execute("BEGIN IMMEDIATE")
        return self.con

    def __exit__(self, kind, value, tb):
        self.con.execute("COMMIT" if kind is None else "ROLLBACK")
        return False


def run_record(run_key: str, result: dict[str, Any], row: dict[str, Any]) -> dict[str, Any]:
    """The ``runs`` row of one result (``row`` is its batch summary row)."""
    sample = result.get("sample") or {}
    totals = result.get("totals") or {}
    props = result.get("properties") or {}
    prov = result.get("provenance") or {}
    quality = [c for c in result.get("checks") or [] if c.get("property") == "identification"]
    rec: dict[str, Any] = {
        "input_path": prov.get("input_path") or sample.get("source_file"),
        "run_index": prov.get("run_index", 0),
        "sample_id": sample.get("id"),
        "injection": _text(sample.get("injection")),
        "injection_time": _iso(sample.get("injection_time")),
        "source_file": sample.get("source_file"),
        "instrument": _text(sample.get("instrument")),
        "method": _text(sample.get("method")),
        "operator": _text(sample.get("operator")),
        "product": _text(sample.get("product")) or row.get("spec"),
        "spec": row.get("spec"),
        "status": row.get("status"),
        "flags": row.get("flags"),
        "checks_failed": row.get("checks_failed"),
        "checks_marginal": row.get("checks_marginal"),
        "identification_verdict": quality[0].get("verdict") if quality else None,
        "benzene_vol_pct": (result.get("benzene") or {}).get("vol_pct"),
        "benzene_mass_pct": (result.get("benzene") or {}).get("mass_pct"),
        "oxygen_mass_pct": result.get("oxygen_mass_pct"),
        "ethanol_vol_pct": row.get("ethanol_vol_pct"),
        "library_version": (result.get("library") or {}).get("version"),
        "generated_at": result.get("generated_at"),
        "recorded_at": _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat(),
    }
    for basis in ("mass_pct", "vol_pct"):
        for g in GROUPS:
            rec[f"{g}_{basis}"] = (totals.get(basis) or {}).get(g)
    for p in PROPERTIES:
        rec[p] = props.get(p)
    for p in PROVENANCE:
        rec[p] = prov.get(p)
    return rec


def _text(value) -> str | None:
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        return "; ".join(str(v) for v in value)
    return str(value)


def _iso(value) -> str | None:
    """Injection time as sortable ISO text ("2026-03-01T10:32:05") where it can be read."""
    if value in (None, ""):
        return None
    text = str(value).strip()
    for fmt in ("%Y-%m-%d %H:%M:%S", "%Y-%m-%dT%H:%M:%S", "%Y-%m-%d %H:%M", "%Y-%m-%d",
                "%d.%m.%Y %H:%M:%S", "%d.%m.%Y %H:%M", "%d/%m/%Y %H:%M:%S", "%d/%m/%Y %H:%M"):
        try:
            return _dt.datetime.strptime(text, fmt).isoformat()
        except ValueError:
            pass
    try:
        return _dt.datetime.fromisoformat(text).isoformat()
    except ValueError:
        return text


def store(con: sqlite3.Connection, run_key: str, result: dict[str, Any], row: dict[str, Any]) -> None:
    """Insert or replace one run (runs, checks, components) in one transaction."""
    with transaction(con):
        write_run(con, run_key, result, row)


def write_run(con: sqlite3.Connection, run_key: str, result: dict[str, Any],
              row: dict[str, Any]) -> None:
    """Insert or replace one run (runs, checks, components) inside the caller's transaction."""
    rec = run_record(run_key, result, row)
    cols = ["run_key"] + [c for c, _ in RUN_COLUMNS]
    values = [run_key] + [rec.get(c) for c, _ in RUN_COLUMNS]
    checks = [(run_key, c.get("spec"), c.get("property"), c.get("kind"), _num(c.get("limit")),
               _num(c.get("value")), _num(c.get("uncertainty")), c.get("verdict"))
              for c in result.get("checks") or []]
    comps = [(run_key, i, c.get("name"), c.get("cas"), c.get("group"), c.get("carbon_number"),
              c.get("rt_min"), c.get("retention_index"), c.get("area"), c.get("mass_pct"),
              c.get("vol_pct"), c.get("mol_pct"), c.get("match"), c.get("confidence"))
             for i, c in enumerate(result.get("components") or [])]
    con.execute("DELETE FROM checks WHERE run_key = ?", (run_key,))
    con.execute("DELETE FROM components WHERE run_key = ?", (run_key,))
    con.execute(f"INSERT OR REPLACE INTO runs ({', '.join(cols)}) "
                f"VALUES ({', '.join('?' * len(cols))})", values)
    con.executemany(f"INSERT INTO checks VALUES ({', '.join('?' * 8)})", checks)
    con.executemany(f"INSERT INTO components VALUES ({', '.join('?' * 14)})", comps)


def _num(value):
    return value if isinstance(value, (int, float)) and not isinstance(value, bool) else None


def remove(con: sqlite3.Connection, run_keys: Iterable[str]) -> None:
    """Delete runs (and their checks and components) from the database."""
    keys = [(k,) for k in run_keys]
    if keys:
        with transaction(con):
            con.executemany("DELETE FROM runs WHERE run_key = ?", keys)


def is_current(con: sqlite3.Connection, run_key: str, provenance: dict[str, Any]) -> bool:
    """Whether the database holds ``run_key`` with this provenance."""
    got = con.execute(f"SELECT {', '.join(PROVENANCE)} FROM runs WHERE run_key = ?",
                      (run_key,)).fetchone()
    return got is not None and all(g == provenance.get(k) for g, k in zip(got, PROVENANCE))


class Recorder:
    """The batch driver's hook: stores every finished run (``on_result`` of ``run_batch``).

    Runs are written in groups, one transaction per ``group_runs`` runs or per ``group_s``
    seconds, whichever comes first (and at ``close``): a transaction per run cost about as much
    as writing its rows. A run is still in the database completely or not at all; a batch
    killed between two groups leaves the runs of the last group out, and the next batch stores
    them from their JSON files (they are missing, so not current).
    """

    def __init__(self, out_dir: str | Path, group_runs: int = 50, group_s: float = 2.0):
        import time

        self.con = connect(Path(out_dir) / DB_NAME)
        self.out_dir = Path(out_dir)
        self.group_runs = group_runs
        self.group_s = group_s
        self._pending: list[tuple[str, Any, Any]] = []      # ("store", key, (result, row)) ...
        self._clock = time.monotonic
        self._since = self._clock()

    def __call__(self, outcome: dict[str, Any]) -> None:
        import json

        path = outcome.get("path")
        if not path:
            return
        result = outcome.get("result")
        if outcome["row"].get("this_batch") != "processed":
            # up to date or from an earlier batch: stored again only if missing or behind
            prov = outcome.get("provenance") or (result or {}).get("provenance")
            if prov and is_current(self.con, path, prov):
                return
            if result is None:
                try:
                    result = json.loads((self.out_dir / path).read_text(encoding="utf-8"))
                except (OSError, ValueError):
                    return
        self._pending.append(("store", path, (result, outcome["row"])))
        if outcome.get("removed"):
            self._pending.append(("remove", outcome["removed"], None))
        if len(self._pending) >= self.group_runs or self._clock() - self._since >= self.group_s:
            self.flush()

    def flush(self) -> None:
        """Write the runs held back, in one transaction."""
        if self._pending:
            with transaction(self.con):
                for op, key, data in self._pending:
                    if op == "store":
                        write_run(self.con, key, *data)
                    else:
                        self.con.executemany("DELETE FROM runs WHERE run_key = ?",
                                             [(k,) for k in key])
            self._pending.clear()
        self._since = self._clock()

    def close(self) -> None:
        try:
            self.flush()
        finally:
            self.con.close()


# --------------------------------------------------------------------------------------------
# Queries

def query_runs(db: str | Path, sample: str | None = None, spec: str | None = None,
               product: str | None = None, since: str | None = None, until: str | None = None):
    """Runs of a results database as a DataFrame, oldest injection first.

    Parameters
    ----------
    db : the database file, or an output folder holding ``results.sqlite``
    sample : sample-id pattern, shell style (``HP-22*``, ``T?-*``), case-sensitive
    spec, product : specification profile / product, exact
    since, until : injection-time range, ISO dates (``2026-03-01``), both ends included
    """
    import pandas as pd

    path = Path(db)
    if path.is_dir():
        path = path / DB_NAME
    if not path.is_file():
        from dha.errors import InputError
        raise InputError(f"{path}: no results database; run dha batch into that folder first")
    where, args = [], []
    if sample:
        where.append("sample_id GLOB ?")
        args.append(sample)
    if spec:
        where.append("spec = ?")
        args.append(spec)
    if product:
        where.append("product = ?")
        args.append(product)
    if since:
        where.append("injection_time >= ?")
        args.append(_iso(since))
    if until:
        day_end = _iso(until)
        if day_end and len(str(until).strip()) == 10:   # a date: the whole day
            day_end = day_end[:10] + "T23:59:59"
        where.append("injection_time <= ?")
        args.append(day_end)
    sql = "SELECT * FROM runs" + (" WHERE " + " AND ".join(where) if where else "") + \
        " ORDER BY injection_time IS NULL, injection_time, input_path, run_index"
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=BUSY_TIMEOUT_S)
    try:
        return pd.read_sql_query(sql, con, params=args)
    finally:
        con.close()
