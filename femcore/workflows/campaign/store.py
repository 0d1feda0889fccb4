"""The campaign store: one SQLite file (WAL journal) holding one row per finished sample.

Tables:

* ``meta(key, value)``: JSON values: ``space`` (the space file as read), ``space_digest``
  (its identity: a store holds the runs of one space only), ``base`` and ``base_digest``
  (the base design with the space's overrides and the schema's defaults, and its identity),
  ``planned`` (number of samples), ``layout`` (this row layout's version);
* ``runs``: one row per sample id: ``sample_set`` (train | holdout), ``unit`` (the unit-cube
  point), ``inputs`` (the whole design of the sample), the :class:`RunRecord` columns
  (``status``, ``message``, ``attempts``, ``seconds``, ``keypoints`` {name: value},
  ``requirements`` {name: {value, required, unit, passed, margin, detail}}, ``dynamic`` (the
  small-strain stiffness record) and ``dynamic_stiffness`` (its value, kNm/rad), ``curve``
  (moment on the fixed rotation grid), ``piles``, ``timings``, ``model``), ``provenance``
  (versions, git hash, mesh settings) and ``finished_at`` (Unix time).
  Nested values are JSON text; NULL where a run produced nothing.

Only the coordinating process writes, one transaction per finished run, so a killed campaign
loses at most the runs in flight and a new ``run`` skips the finished ids (resume). The
coordinator holds ``STORE.lock`` (an ``flock``, released with the process however it ends)
for the whole run; a second coordinator is refused. A changed space file or base design is
refused naming the values that changed. ``status`` and ``export`` open the store read-only
and may run beside a campaign. A store
written before the requirement and dynamic columns existed opens unchanged: the missing
columns are added (NULL for the old rows).

Statuses: ``ok`` (the capacity reached: a plateau or a mechanism), ``censored`` (no plateau
up to the rotation cap: the ultimate moment is a lower bound), ``diverged``,
``invalid_input`` (never run; the reason is the message), ``timeout`` and ``error``.
"""

from __future__ import annotations

import json
import os
import socket
import sqlite3
import time
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any, Literal, TypedDict

from .paths import SpaceError

__all__ = ["RunStatus", "FINISHED", "Requirement", "RunRecord", "Store", "StoreError",
           "status_summary", "LAYOUT"]

RunStatus = Literal["ok", "censored", "diverged", "invalid_input", "timeout", "error"]
FINISHED: tuple[str, ...] = ("ok", "censored", "diverged", "invalid_input", "timeout", "error")
LAYOUT = 3  # 1: before the requirements / dynamic columns; 2: before quantities


class Requirement(TypedDict):
    """One requirement check of a run (as in result.json, without its extra details)."""

    value: float | None
    required: float | None
    unit: str
    passed: bool | None
    margin: float | None
    detail: str


@dataclass
class RunRecord:
    """The outcome of one sample; every outcome, including failures, is one record."""

    status: RunStatus
    message: str = ""
    attempts: int = 0
    seconds: float = 0.0
    keypoints: dict[str, float | None] | None = None
    requirements: dict[str, Requirement] | None = None
    dynamic: dict | None = None  # {"value": kNm/rad or None, "moduli", "reason", ...}
    curve: dict[str, list] | None = None  # {"rotation": rad, "moment": kNm or None}
    piles: list[dict] | None = None
    timings: dict | None = None
    model: dict | None = None
    quantities: dict | None = None  # material quantities (m3, m, counts), see quantities.py

    @property
    def dynamic_stiffness(self) -> float | None:
        """The dynamic (small-strain) rotational stiffness, kNm/rad (None if not computed)."""
        return None if not self.dynamic else self.dynamic.get("value")

    def to_row(self) -> dict[str, Any]:
        """The ``runs`` columns of this record (nested values as JSON text)."""
        row: dict[str, Any] = {}
        for f in fields(self):
            v = getattr(self, f.name)
            row[f.name] = json.dumps(v) if f.name in _JSON else v
        row["dynamic_stiffness"] = self.dynamic_stiffness
        return row

    @classmethod
    def from_row(cls, row: dict[str, Any]) -> RunRecord:
        """The record of a ``runs`` row (JSON text or already decoded values)."""
        kw: dict[str, Any] = {}
        for f in fields(cls):
            v = row.get(f.name)
            kw[f.name] = json.loads(v) if f.name in _JSON and isinstance(v, str) else v
        kw["message"] = kw["message"] or ""
        kw["attempts"] = kw["attempts"] or 0
        kw["seconds"] = kw["seconds"] or 0.0
        return cls(**kw)

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


_JSON = {"keypoints", "requirements", "dynamic", "curve", "piles", "timings", "model",
         "quantities"}
_COLUMNS = [  # name, SQL type (in the order of the layout-1 table, new columns last)
    ("sample_id", "INTEGER PRIMARY KEY"), ("sample_set", "TEXT"), ("unit", "TEXT"),
    ("inputs", "TEXT"), ("status", "TEXT"), ("message", "TEXT"), ("attempts", "INTEGER"),
    ("seconds", "REAL"), ("keypoints", "TEXT"), ("curve", "TEXT"), ("piles", "TEXT"),
    ("timings", "TEXT"), ("model", "TEXT"), ("provenance", "TEXT"), ("finished_at", "REAL"),
    ("requirements", "TEXT"), ("dynamic", "TEXT"), ("dynamic_stiffness", "REAL"),
    ("quantities", "TEXT")]
_DECODE = _JSON | {"unit", "inputs", "provenance"}


class StoreError(SpaceError):
    """The store file cannot be used (a bad path, not a store, read-only, disk full, held by
    another run); the message names the file and what to do."""


def _store_error(path: Path, exc: sqlite3.Error) -> StoreError:
    text = str(exc)
    low = text.lower()
    if "not a database" in low or "malformed" in low:
        why = "is not a campaign store (not an SQLite database file)"
    elif "readonly" in low or "read-only" in low:
        why = "cannot be written (the file or its folder is read-only)"
    elif "disk is full" in low or "disk full" in low:
        why = ("cannot be written: the disk is full (every run finished before is kept; "
               "free some space and run again to resume)")
    elif "unable to open" in low:
        why = "cannot be opened (check that its folder exists and can be written)"
    elif "locked" in low:
        why = "is locked by another process"
    else:
        why = f"cannot be used ({text})"
    return StoreError(f"{path}: {why}")


def _try_lock(fh: Any) -> bool:
    """An exclusive, non-blocking lock on an open file (released when it is closed or the
    process ends); True when held."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        import msvcrt

        try:
            msvcrt.locking(fh.fileno(), msvcrt.LK_NBLCK, 1)
            return True
        except OSError:
            return False
    try:
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except OSError:
        return False


def _leaves(node: Any, prefix: str = "") -> dict[str, Any]:
    if isinstance(node, dict):
        out: dict[str, Any] = {}
        for k, v in node.items():
            out.update(_leaves(v, f"{prefix}{k}."))
        return out
    if isinstance(node, list) and node and all(isinstance(v, (dict, list)) for v in node):
        out = {}
        for i, v in enumerate(node):
            out.update(_leaves(v, f"{prefix}{i}."))
        return out
    return {prefix[:-1]: node}


def _changes(old: Any, new: Any, most: int = 5) -> str:
    """The values that differ between two versions of nested settings, as text."""
    if not isinstance(old, dict) or not isinstance(new, dict):
        return ("the store predates the record of its base design, so the changed values "
                "are not known")
    a, b = _leaves(old), _leaves(new)
    diff = []
    for k in sorted(set(a) | set(b)):
        if a.get(k, "<none>") != b.get(k, "<none>"):
            diff.append(f"{k} {a.get(k, '(not set)')!r} -> {b.get(k, '(not set)')!r}")
    if not diff:
        return "the same values in another order or form"
    more = f" and {len(diff) - most} more" if len(diff) > most else ""
    return ", ".join(diff[:most]) + more


class Store:
    """The SQLite store of one campaign (see the module docstring).

    ``mode="write"`` (the campaign run) creates the file when missing; ``mode="read"``
    (status, export) needs an existing store and never writes. Every problem with the file
    (a folder, a missing folder, not a store, read-only, disk full) is a :class:`StoreError`
    naming the file and what to do.
    """

    def __init__(self, path: str | Path, mode: Literal["write", "read"] = "write") -> None:
        self.path = Path(path)
        self._lock_fh: Any = None
        p = self.path
        if p.is_dir():
            raise StoreError(f"{p}: is a folder, not a store file (give a file name such as "
                             "runs.sqlite)")
        if mode == "read" and not p.is_file():
            raise StoreError(f"{p}: no such store file")
        if mode == "write" and not p.parent.is_dir():
            raise StoreError(f"{p}: the folder {p.parent} does not exist (create it first)")
        existed = p.is_file() and p.stat().st_size > 0
        try:
            if mode == "read":
                self.db = sqlite3.connect(f"{p.resolve().as_uri()}?mode=ro", uri=True,
                                          timeout=60)
            else:
                self.db = sqlite3.connect(p, timeout=60)
            tables = {r[0] for r in self.db.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table'")}
            if (existed or mode == "read") and not {"meta", "runs"} <= tables:
                self.db.close()
                found = ", ".join(sorted(tables)) or "none"
                raise StoreError(f"{p}: an SQLite file but not a campaign store (its tables: "
                                 f"{found}); give the store a campaign run wrote")
            if mode == "write":
                self._create()
        except sqlite3.Error as exc:
            raise _store_error(p, exc) from None

    def _create(self) -> None:
        self.db.execute("PRAGMA journal_mode=WAL")
        self.db.execute("PRAGMA synchronous=NORMAL")
        cols = ", ".join(f"{n} {t}" for n, t in _COLUMNS)
        with self.db:
            self.db.execute("CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, "
                            "value TEXT)")
            self.db.execute(f"CREATE TABLE IF NOT EXISTS runs ({cols})")
            have = {c[1] for c in self.db.execute("PRAGMA table_info(runs)")}
            for name, kind in _COLUMNS:
                if name not in have:  # a store of an older layout
                    self.db.execute(f"ALTER TABLE runs ADD COLUMN {name} {kind}")
            self.db.execute("INSERT OR REPLACE INTO meta VALUES ('layout', ?)",
                            (json.dumps(LAYOUT),))

    def lock(self) -> None:
        """Hold the store for this process until :meth:`close` (or the process ends, however
        it ends): a second campaign run on the same store is refused with StoreError."""
        lock_path = self.path.with_name(self.path.name + ".lock")
        try:
            fh = open(lock_path, "a+")  # noqa: SIM115 - held until close()
        except OSError as exc:
            raise StoreError(f"{lock_path}: cannot create the lock file beside the store "
                             f"({exc.strerror})") from None
        if not _try_lock(fh):
            fh.seek(0)
            holder = fh.read().strip() or "another process"
            fh.close()
            raise StoreError(f"{self.path}: another campaign run is writing this store "
                             f"({holder}); wait for it to finish or stop it (Ctrl-C), or use "
                             "another store file")
        fh.seek(0)
        fh.truncate()
        fh.write(f"pid {os.getpid()} on {socket.gethostname()}, since "
                 f"{time.strftime('%Y-%m-%d %H:%M:%S')}")
        fh.flush()
        self._lock_fh = fh

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def meta(self, key: str) -> Any:
        row = self.db.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def set_meta(self, key: str, value: Any) -> None:
        try:
            with self.db:
                self.db.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)",
                                (key, json.dumps(value)))
        except sqlite3.Error as exc:
            raise _store_error(self.path, exc) from None

    def claim(self, digest: str, source: dict, base_digest: str, planned: int,
              base: dict | None = None) -> None:
        """Bind the store to one space and base design; StoreError naming what changed when
        it holds the runs of another space or of an edited base design."""
        known = self.meta("space_digest")
        if known is not None and known != digest:
            raise StoreError(f"{self.path}: this store belongs to another space (the space "
                             "file changed: " + _changes(self.meta("space"), source)
                             + "); undo the change or use a new store file")
        known_base = self.meta("base_digest")
        if known_base is not None and known_base != base_digest:
            raise StoreError(f"{self.path}: the base design changed since this store was "
                             "started (" + _changes(self.meta("base"), base)
                             + "); undo the change or use a new store file")
        values = [("space_digest", digest), ("space", source), ("base_digest", base_digest),
                  ("planned", planned)] + ([("base", base)] if base is not None else [])
        for key, value in values:
            self.set_meta(key, value)

    def finished_ids(self) -> set[int]:
        return {r[0] for r in self.db.execute("SELECT sample_id FROM runs")}

    def add(self, sample: dict, inputs: dict, rec: RunRecord, provenance: dict) -> None:
        """Commit one finished sample (one transaction)."""
        row = {"sample_id": sample["id"], "sample_set": sample["set"],
               "unit": json.dumps(sample["unit"]), "inputs": json.dumps(inputs),
               **rec.to_row(), "provenance": json.dumps(provenance),
               "finished_at": time.time()}
        names = ", ".join(row)
        marks = ", ".join("?" * len(row))
        try:
            with self.db:
                self.db.execute(f"INSERT OR REPLACE INTO runs ({names}) VALUES ({marks})",
                                tuple(row.values()))
        except sqlite3.Error as exc:
            raise _store_error(self.path, exc) from None

    def rows(self) -> list[dict]:
        """Every stored row, nested values decoded, by sample id."""
        cur = self.db.execute("SELECT * FROM runs ORDER BY sample_id")
        cols = [c[0] for c in cur.description]
        out = []
        for r in cur:
            d = dict(zip(cols, r, strict=True))
            for k in _DECODE:
                d[k] = json.loads(d[k]) if d.get(k) else None
            out.append(d)
        return out

    def records(self) -> dict[int, RunRecord]:
        """The :class:`RunRecord` of every stored sample, by id."""
        return {r["sample_id"]: RunRecord.from_row(r) for r in self.rows()}

    def close(self) -> None:
        self.db.close()
        if self._lock_fh is not None:  # the lock file stays; its lock goes with the handle
            self._lock_fh.close()
            self._lock_fh = None


def status_summary(store: Store | str | Path) -> dict:
    """Counts by status, failure rate, mean run time and the estimated time to finish."""
    own = not isinstance(store, Store)
    st = Store(store, mode="read") if own else store
    try:
        planned = st.meta("planned")
        if planned is None:  # a layout-1 store: from its space file
            s = (st.meta("space") or {}).get("sampling", {})
            planned = int(s.get("size", 0)) + int(s.get("holdout", 0))
        counts = dict(st.db.execute("SELECT status, COUNT(*) FROM runs GROUP BY status")
                      .fetchall())
        mean = st.db.execute("SELECT AVG(seconds) FROM runs WHERE status IN "
                             "('ok','censored','diverged','timeout')").fetchone()[0]
    finally:
        if own:
            st.close()
    n = sum(counts.values())
    failed = sum(v for k, v in counts.items() if k not in ("ok", "censored"))
    remaining = max(planned - n, 0)
    return {"planned": planned, "finished": n, "counts": counts,
            "failure_rate": failed / n if n else 0.0, "mean_run_seconds": mean,
            "remaining": remaining,
            "time_to_finish_s": None if mean is None else
            remaining * mean / max(os.cpu_count() or 1, 1)}
