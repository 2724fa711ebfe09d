"""A results cache for expensive single calculations, keyed by geometry and level.

:class:`ResultCache` keeps one JSON value per key in a SQLite file, written as soon as
each result arrives (one transaction per :meth:`~ResultCache.put`), so a run that is
killed resumes without recomputing what had finished. Any other store can stand in for
it by providing the same two methods, ``get(key)`` and ``put(key, value)``.

:func:`result_key` builds the key: a SHA-256 over the level's name, the operation, the
charge and multiplicity, the element symbols and the coordinates rounded to 1e-6 Å.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from chairbuild.errors import OutputError

__all__ = ["ResultCache", "result_key", "check_cache_path", "COORDINATE_DECIMALS"]

#: Decimals of Å kept in the geometry hash.
COORDINATE_DECIMALS = 6


def result_key(level: str, operation: str, symbols: Sequence[str], coords: np.ndarray, charge: int, multiplicity: int) -> str:
    """Hex SHA-256 key of one calculation.

    Parameters
    ----------
    level : str
        Full level name (functional, basis, dispersion, solvent), e.g. ``"B3LYP-D3(BJ)/def2-SVP"``.
    operation : str
        ``"energy"``, ``"optimize"`` or ``"hessian"``.
    symbols : sequence of str
    coords : numpy.ndarray
        Å, shape ``(n_atoms, 3)``.
    charge, multiplicity : int
    """
    x = np.round(np.asarray(coords, dtype=float), COORDINATE_DECIMALS) + 0.0  # +0.0: no negative zeros
    h = hashlib.sha256()
    h.update(json.dumps([level, operation, list(symbols), int(charge), int(multiplicity)]).encode())
    h.update(np.ascontiguousarray(x).tobytes())
    return h.hexdigest()


def check_cache_path(path: str | Path) -> None:
    """Refuse a cache path that cannot be used, without creating or changing anything.

    An existing file must be a SQLite database (a results cache or an empty one); a new one
    needs an existing, writable folder.

    Raises
    ------
    OutputError
    """
    import os

    p = Path(path)
    if p.is_dir():
        raise OutputError(f"cannot use {str(p)!r} as a results cache: it is a folder")
    if p.exists():
        try:
            db = sqlite3.connect(f"file:{p.resolve()}?mode=ro", uri=True)
            try:
                db.execute("SELECT name FROM sqlite_master").fetchall()
            finally:
                db.close()
        except sqlite3.DatabaseError as exc:
            raise OutputError(f"cannot use {str(p)!r} as a results cache: {exc}") from None
        if not os.access(p, os.W_OK):
            raise OutputError(f"cannot use {str(p)!r} as a results cache: not writable")
        return
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir() or not os.access(folder, os.W_OK):
        raise OutputError(f"cannot use {str(p)!r} as a results cache: no writable folder {str(folder)!r}")


class ResultCache:
    """Results by key in a SQLite file.

    Parameters
    ----------
    path : str or pathlib.Path
        The cache file; created with its table when missing.

    Raises
    ------
    OutputError
        The file cannot be opened or is not a cache of this kind.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        try:
            self._db = sqlite3.connect(str(self.path))
            self._db.execute("CREATE TABLE IF NOT EXISTS results (key TEXT PRIMARY KEY, value TEXT NOT NULL)")
            self._db.commit()
        except sqlite3.DatabaseError as exc:
            raise OutputError(f"cannot use {self.path} as a results cache: {exc}") from None

    def get(self, key: str) -> Any | None:
        """The value stored under ``key``, or None."""
        row = self._db.execute("SELECT value FROM results WHERE key = ?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def put(self, key: str, value: Any) -> None:
        """Store ``value`` (JSON-serialisable) under ``key``, replacing what was there."""
        self._db.execute("INSERT OR REPLACE INTO results (key, value) VALUES (?, ?)", (key, json.dumps(value)))
        self._db.commit()

    def __len__(self) -> int:
        return int(self._db.execute("SELECT COUNT(*) FROM results").fetchone()[0])

    def close(self) -> None:
        """Close the file."""
        self._db.close()
