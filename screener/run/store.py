"""The result store of a batch: one SQLite file (standard-library ``sqlite3``, WAL journal).

Tables
------
``runs``        one row per batch started: time, tool version, settings (JSON) and their hash.
``structures``  one row per structure and settings: path, content hash, formula, space group, status
                ('ranked' or 'error'), the headline verdict and ΔE, the error message, seconds, the whole
                ``rank --json`` object. (content_hash, settings_hash) is unique: a structure is never stored twice.
``candidates``  one row per candidate of a ranked structure, its main fields as columns and the whole candidate
                object of ``rank --json`` as JSON.

Each structure's rows are written in one transaction, so a batch killed at any moment leaves only complete
structures behind and can simply be started again.
"""

from __future__ import annotations

import json
import sqlite3
import time
from pathlib import Path

from screener.errors import ParameterError

SCHEMA = """
CREATE TABLE IF NOT EXISTS runs (
    id INTEGER PRIMARY KEY,
    started TEXT NOT NULL,
    version TEXT NOT NULL,
    settings_json TEXT NOT NULL,
    settings_hash TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS structures (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    path TEXT NOT NULL,
    content_hash TEXT NOT NULL,
    settings_hash TEXT NOT NULL,
    formula TEXT,
    space_group TEXT,
    n_atoms INTEGER,
    status TEXT NOT NULL CHECK (status IN ('ranked', 'error')),
    verdict TEXT,
    generator TEXT,
    q_label TEXT,
    delta_E_meV_per_atom REAL,
    delta_E_low_meV_per_atom REAL,
    delta_E_high_meV_per_atom REAL,
    error TEXT,
    seconds REAL,
    result_json TEXT,
    UNIQUE (content_hash, settings_hash)
);
CREATE TABLE IF NOT EXISTS candidates (
    structure_id INTEGER NOT NULL REFERENCES structures(id),
    rank INTEGER NOT NULL,
    generator TEXT,
    q_label TEXT,
    space_group TEXT,
    verdict TEXT,
    displacement_A REAL,
    delta_E_meV_per_atom REAL,
    delta_E_low_meV_per_atom REAL,
    delta_E_high_meV_per_atom REAL,
    gap_eV REAL,
    converged INTEGER,
    candidate_json TEXT,
    PRIMARY KEY (structure_id, rank)
);
"""


class Store:
    """An open result store. ``Store(path)`` creates the file and its tables when needed."""

    def __init__(self, path):
        self.path = Path(path)
        if self.path.exists() and self.path.is_dir():
            raise ParameterError(f"--store {self.path} is a folder; give a file name such as results.sqlite")
        try:
            self.conn = sqlite3.connect(self.path, timeout=30)
            self.conn.execute("PRAGMA journal_mode=WAL")
            self.conn.execute("PRAGMA foreign_keys=ON")
            self.conn.executescript(SCHEMA)
        except sqlite3.DatabaseError as exc:
            raise ParameterError(f"--store {self.path}: not a usable result store ({exc})") from None

    def close(self) -> None:
        """Close the connection."""
        self.conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def start_run(self, version: str, settings: dict, settings_hash: str) -> int:
        """Record a new run; returns its id."""
        with self.conn:
            cur = self.conn.execute(
                "INSERT INTO runs (started, version, settings_json, settings_hash) VALUES (?, ?, ?, ?)",
                (time.strftime("%Y-%m-%dT%H:%M:%S%z"), version, json.dumps(settings, sort_keys=True),
                 settings_hash))
        return int(cur.lastrowid)

    def done(self, settings_hash: str) -> set[str]:
        """Content hashes already stored (ranked or failed) with these settings."""
        rows = self.conn.execute("SELECT content_hash FROM structures WHERE settings_hash = ?", (settings_hash,))
        return {r[0] for r in rows}

    def add(self, run_id: int, outcome: dict, settings_hash: str) -> bool:
        """Store one structure's outcome and its candidates in one transaction; False if it was already there."""
        result = outcome.get("result")
        best = (result or {}).get("candidates", [None])[0] if result else None
        with self.conn:
            cur = self.conn.execute(
                "INSERT OR IGNORE INTO structures (run_id, path, content_hash, settings_hash, formula, space_group, "
                "n_atoms, status, verdict, generator, q_label, delta_E_meV_per_atom, delta_E_low_meV_per_atom, "
                "delta_E_high_meV_per_atom, error, seconds, result_json) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (run_id, outcome["path"], outcome["content_hash"], settings_hash,
                 result["formula"] if result else None,
                 f"{result['space_group']['symbol']} ({result['space_group']['number']})" if result else None,
                 result["n_atoms"] if result else None,
                 outcome["status"],
                 best["verdict"] if best else ("stable" if result else None),
                 best["generator"] if best else None,
                 best["q_label"] if best else None,
                 best["delta_E_meV_per_atom"] if best else None,
                 best["delta_E_range_meV_per_atom"][0] if best else None,
                 best["delta_E_range_meV_per_atom"][1] if best else None,
                 outcome.get("error"), outcome.get("seconds"),
                 json.dumps(result) if result else None))
            if cur.rowcount == 0:
                return False
            sid = cur.lastrowid
            for n, c in enumerate((result or {}).get("candidates", []), start=1):
                self.conn.execute(
                    "INSERT INTO candidates VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (sid, n, c["generator"], c["q_label"],
                     f"{c['space_group']['symbol']} ({c['space_group']['number']})", c["verdict"],
                     c["displacement_A"], c["delta_E_meV_per_atom"], c["delta_E_range_meV_per_atom"][0],
                     c["delta_E_range_meV_per_atom"][1], c["gap_eV"], int(bool(c["converged"])), json.dumps(c)))
        return True


def load_store(path):
    """One row per stored structure (pandas.DataFrame): path, formula, space group, status, headline verdict,
    top candidate, ΔE and its range (meV/atom), error message, seconds."""
    import pandas as pd

    p = Path(path)
    if not p.is_file():
        raise ParameterError(f"no result store at {p}")
    conn = sqlite3.connect(p)
    try:
        return pd.read_sql_query(
            "SELECT path, content_hash, formula, space_group, n_atoms, status, verdict, generator, q_label, "
            "delta_E_meV_per_atom, delta_E_low_meV_per_atom, delta_E_high_meV_per_atom, error, seconds "
            "FROM structures ORDER BY id", conn)
    finally:
        conn.close()
