"""The batch store: one SQLite file (``results.sqlite`` in the output folder), WAL mode.

Only the driver writes it, one transaction per finished molecule, so a killed run (the
driver or a worker, by any signal) loses at most the molecules in flight. Tables:

``records``
    one row per input record: ``idx`` (0-based input position), ``name``, ``input_smiles``,
    ``location``, ``content_key``, ``status`` (:class:`~chairbuild.batch.records.RowStatus`),
    ``error`` (one line), ``detail`` (traceback of an unexpected error), ``wall_s``,
    ``cpu_s`` (time of the analysis itself), ``peak_rss_mb`` (peak memory of the process
    that analysed it), ``worker``, ``finished_at`` (UTC, ISO 8601), ``run_id``,
    ``summary`` (JSON of :func:`~chairbuild.batch.summary.summarise`) and ``ensemble``
    (the JSON of :meth:`~chairbuild.result.Ensemble.to_json`, energies in kJ/mol).
``computations``
    one line per result written, ever (``idx``, ``content_key``, ``status``, ``run_id``,
    ``finished_at``): a resumed run that redid nothing adds nothing for the rows it skipped.
``runs``
    one line per invocation: start and end time, workers, scheduler, rows computed.
``meta``
    key/value: ``format``, ``chairbuild`` version that created it, ``options`` (JSON),
    ``input``.

:func:`open_store` is the reader.
"""

from __future__ import annotations

import datetime as _dt
import json
import sqlite3
from pathlib import Path
from typing import Any, Iterator, Sequence

from chairbuild.errors import InputError, OptionError, OutputError

__all__ = ["Store", "StoreReader", "open_store", "STORE_NAME", "STORE_FORMAT"]

STORE_NAME = "results.sqlite"
STORE_FORMAT = "1"

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS records (
    idx INTEGER PRIMARY KEY,
    name TEXT NOT NULL,
    input_smiles TEXT NOT NULL,
    location TEXT NOT NULL,
    content_key TEXT NOT NULL,
    status TEXT NOT NULL,
    error TEXT NOT NULL DEFAULT '',
    detail TEXT NOT NULL DEFAULT '',
    wall_s REAL,
    cpu_s REAL,
    peak_rss_mb REAL,
    worker TEXT,
    finished_at TEXT,
    run_id INTEGER,
    summary TEXT,
    ensemble TEXT
);
CREATE TABLE IF NOT EXISTS computations (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    idx INTEGER NOT NULL,
    content_key TEXT NOT NULL,
    status TEXT NOT NULL,
    run_id INTEGER NOT NULL,
    finished_at TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS runs (
    run_id INTEGER PRIMARY KEY AUTOINCREMENT,
    started_at TEXT NOT NULL,
    finished_at TEXT,
    workers TEXT,
    scheduler TEXT,
    n_records INTEGER,
    n_to_compute INTEGER,
    n_computed INTEGER NOT NULL DEFAULT 0
);
"""


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="milliseconds")


def _connect(path: Path, readonly: bool = False) -> sqlite3.Connection:
    if readonly:  # a plain connection that only reads (mode=ro cannot always open a WAL file)
        conn = sqlite3.connect(str(path), timeout=30)
    else:
        conn = sqlite3.connect(str(path), timeout=30, isolation_level=None)
        conn.execute("PRAGMA journal_mode=WAL")
        conn.execute("PRAGMA synchronous=NORMAL")  # WAL + NORMAL: a commit survives a killed process
    conn.row_factory = sqlite3.Row
    return conn


class Store:
    """The writer (the batch driver's only handle on the database).

    Parameters
    ----------
    folder : str or pathlib.Path
        Output folder; created if missing.
    resume : bool
        Continue an existing store; without it an existing store is refused unless
        ``overwrite`` is set.
    overwrite : bool
        Delete an existing store and start over.
    """

    def __init__(self, folder: "str | Path", *, resume: bool = False, overwrite: bool = False) -> None:
        self.folder = Path(folder)
        if self.folder.exists() and not self.folder.is_dir():
            raise OutputError(f"{str(self.folder)!r} exists and is not a directory")
        if resume and overwrite:
            raise OptionError("resume and overwrite exclude each other")
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"cannot create {str(self.folder)!r}: {exc.strerror or exc}") from None
        self.path = self.folder / STORE_NAME
        exists = self.path.exists()
        if exists and overwrite:
            for suffix in ("", "-wal", "-shm"):
                Path(str(self.path) + suffix).unlink(missing_ok=True)
            exists = False
        if exists and not resume:
            raise OptionError(
                f"{str(self.folder)!r} already holds a batch store; add --resume to continue it "
                "(rows whose input and options are unchanged are kept) or --overwrite to start over"
            )
        try:
            self.conn = _connect(self.path)
            self.conn.executescript(_SCHEMA)
        except sqlite3.DatabaseError as exc:
            raise OutputError(f"cannot use {str(self.path)!r} as a batch store: {exc}") from None
        fmt = self._meta("format")
        if fmt is not None and fmt != STORE_FORMAT:
            raise OptionError(f"{str(self.path)!r} has store format {fmt}; this chairbuild writes format {STORE_FORMAT}")
        self.run_id: int | None = None

    # ------------------------------------------------------------------ helpers
    def _meta(self, key: str) -> str | None:
        row = self.conn.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return None if row is None else row[0]

    def close(self) -> None:
        self.conn.close()

    # --------------------------------------------------------------- run set-up
    def begin_run(
        self, records: Sequence, keys: Sequence[str], options: dict, source: str, workers: str, scheduler: str | None,
        retry: Sequence[str] = (),
    ) -> list[int]:
        """Register the input; return the indices still to compute, in input order.

        A stored row is kept when its content key equals the new one and its status is
        final (not ``pending``, nor one of ``retry``); every other row is reset to
        ``pending``. Rows past the end of the input are deleted.
        """
        from chairbuild import __version__

        todo: list[int] = []
        c = self.conn
        c.execute("BEGIN IMMEDIATE")
        try:
            for key, value in (("format", STORE_FORMAT), ("chairbuild", __version__)):
                c.execute("INSERT OR IGNORE INTO meta (key, value) VALUES (?, ?)", (key, value))
            c.execute("INSERT OR REPLACE INTO meta (key, value) VALUES ('options', ?)", (json.dumps(options, sort_keys=True, default=str),))
            c.execute("INSERT OR REPLACE INTO meta (key, value) VALUES ('input', ?)", (source,))
            stored = {row["idx"]: (row["content_key"], row["status"]) for row in c.execute("SELECT idx, content_key, status FROM records")}
            for rec, key in zip(records, keys):
                old = stored.get(rec.index)
                if old is not None and old[0] == key and old[1] != "pending" and old[1] not in retry:
                    continue
                todo.append(rec.index)
                c.execute(
                    "INSERT OR REPLACE INTO records (idx, name, input_smiles, location, content_key, status) "
                    "VALUES (?, ?, ?, ?, ?, 'pending')",
                    (rec.index, rec.name, rec.input_smiles, rec.location, key),
                )
            c.execute("DELETE FROM records WHERE idx >= ?", (len(records),))
            cur = c.execute(
                "INSERT INTO runs (started_at, workers, scheduler, n_records, n_to_compute) VALUES (?, ?, ?, ?, ?)",
                (_now(), workers, scheduler, len(records), len(todo)),
            )
            self.run_id = cur.lastrowid
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise
        return todo

    def write_result(self, index: int, key: str, reply: dict[str, Any]) -> None:
        """Store one finished molecule (one transaction)."""
        now = _now()
        summary = reply.get("summary")
        c = self.conn
        c.execute("BEGIN IMMEDIATE")
        try:
            c.execute(
                "UPDATE records SET status = ?, error = ?, detail = ?, wall_s = ?, cpu_s = ?, peak_rss_mb = ?, worker = ?, "
                "finished_at = ?, run_id = ?, summary = ?, ensemble = ? WHERE idx = ? AND content_key = ?",
                (
                    reply["status"],
                    reply.get("error", ""),
                    reply.get("detail", ""),
                    reply.get("wall_s"),
                    reply.get("cpu_s"),
                    reply.get("peak_rss_mb"),
                    reply.get("worker"),
                    now,
                    self.run_id,
                    None if summary is None else json.dumps(summary, allow_nan=False),
                    reply.get("ensemble_json"),
                    index,
                    key,
                ),
            )
            c.execute(
                "INSERT INTO computations (idx, content_key, status, run_id, finished_at) VALUES (?, ?, ?, ?, ?)",
                (index, key, reply["status"], self.run_id, now),
            )
            c.execute("UPDATE runs SET n_computed = n_computed + 1 WHERE run_id = ?", (self.run_id,))
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise

    def end_run(self) -> None:
        """Mark the run finished."""
        self.conn.execute("UPDATE runs SET finished_at = ? WHERE run_id = ?", (_now(), self.run_id))


class StoreReader:
    """Read access to a batch store: DataFrames and Ensembles.

    Obtain one with :func:`open_store`. Tables come back one row per input record, in
    input order.
    """

    def __init__(self, path: "str | Path") -> None:
        path = Path(path)
        if path.is_dir():
            path = path / STORE_NAME
        if not path.is_file():
            raise InputError(f"no batch store at {str(path)!r}")
        self.path = path
        try:
            self.conn = _connect(path, readonly=True)
            self.conn.execute("SELECT count(*) FROM records").fetchone()
        except sqlite3.DatabaseError as exc:
            raise InputError(f"{str(path)!r} is not a chairbuild batch store: {exc}") from None

    def __enter__(self) -> "StoreReader":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        self.conn.close()

    def __len__(self) -> int:
        return int(self.conn.execute("SELECT count(*) FROM records").fetchone()[0])

    def __repr__(self) -> str:
        counts = dict(self.conn.execute("SELECT status, count(*) FROM records GROUP BY status").fetchall())
        text = ", ".join(f"{n} {s}" for s, n in sorted(counts.items()))
        return f"<chairbuild batch store {str(self.path)!r}: {len(self)} rows ({text})>"

    # ----------------------------------------------------------------- access
    def rows(self) -> Iterator[sqlite3.Row]:
        """Raw rows of ``records`` in input order (without the ensemble JSON)."""
        yield from self.conn.execute(
            "SELECT idx, name, input_smiles, location, content_key, status, error, detail, wall_s, cpu_s, peak_rss_mb, "
            "worker, finished_at, run_id, summary FROM records ORDER BY idx"
        )

    def meta(self) -> dict[str, str]:
        """The store's key/value metadata (``options`` is JSON text)."""
        return dict(self.conn.execute("SELECT key, value FROM meta").fetchall())

    def ensemble_json(self, index: int) -> str | None:
        """The stored JSON of row ``index`` (None when the row has no result)."""
        row = self.conn.execute("SELECT ensemble FROM records WHERE idx = ?", (int(index),)).fetchone()
        if row is None:
            raise KeyError(index)
        return row[0]

    def ensemble(self, index: int):
        """The :class:`~chairbuild.result.Ensemble` of row ``index`` (None for a failed row)."""
        from chairbuild.result import Ensemble

        text = self.ensemble_json(index)
        return None if text is None else Ensemble.from_json(text)

    def ensembles(self) -> Iterator[tuple[int, Any]]:
        """(index, Ensemble) for every row with a result, in input order."""
        from chairbuild.result import Ensemble

        for idx, text in self.conn.execute("SELECT idx, ensemble FROM records WHERE ensemble IS NOT NULL ORDER BY idx"):
            yield idx, Ensemble.from_json(text)

    def summary(self, unit: str = "kJ/mol"):
        """The summary table (pandas DataFrame), one row per input record."""
        from chairbuild.batch.export import summary_frame

        return summary_frame(self, unit)

    def families(self, unit: str = "kJ/mol"):
        """The ring-family table (pandas DataFrame), one row per family of every analysed record."""
        from chairbuild.batch.export import families_frame

        return families_frame(self, unit)

    def computations(self):
        """Every result ever written (pandas DataFrame): idx, content_key, status, run_id, finished_at."""
        import pandas as pd

        return pd.read_sql_query("SELECT idx, content_key, status, run_id, finished_at FROM computations ORDER BY id", self.conn)

    def runs(self):
        """One row per invocation (pandas DataFrame)."""
        import pandas as pd

        return pd.read_sql_query("SELECT * FROM runs ORDER BY run_id", self.conn)


def open_store(path: "str | Path") -> StoreReader:
    """Open a batch store for reading.

    Parameters
    ----------
    path : str or pathlib.Path
        The output folder of ``chairbuild batch`` or the ``results.sqlite`` file in it.

    Returns
    -------
    StoreReader
        ``.summary()`` and ``.families()`` give DataFrames, ``.ensemble(i)`` and
        ``.ensembles()`` the :class:`~chairbuild.result.Ensemble` objects (rebuilt from the
        stored JSON), ``.computations()`` and ``.runs()`` the bookkeeping.

    Raises
    ------
    InputError
        No store there, or not a batch store.
    """
    return StoreReader(path)
