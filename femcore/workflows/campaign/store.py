"""The campaign store: one SQLite file (WAL journal) holding one row per finished sample.

Tables:

* ``meta(key, value)``: JSON values: ``space`` (the space file as read), ``space_digest``
  (its identity: a store holds the runs of one space only), ``base_digest`` (identity of the
  base design), ``planned`` (number of samples), ``layout`` (this row layout's version);
* ``runs``: one row per sample id: ``sample_set`` (train | holdout), ``unit`` (the unit-cube
  point), ``inputs`` (the whole design of the sample), the :class:`RunRecord` columns
  (``status``, ``message``, ``attempts``, ``seconds``, ``keypoints`` {name: value},
  ``requirements`` {name: {value, required, unit, passed, margin, detail}}, ``dynamic`` (the
  small-strain stiffness record) and ``dynamic_stiffness`` (its value, kNm/rad), ``curve``
  (moment on the fixed rotation grid), ``piles``, ``timings``, ``model``), ``provenance``
  (versions, git hash, mesh settings) and ``finished_at`` (Unix time).
  Nested values are JSON text; NULL where a run produced nothing.

Only the coordinating process writes, one transaction per finished run, so a killed campaign
loses at most the runs in flight and a new ``run`` skips the finished ids (resume). A store
written before the requirement and dynamic columns existed opens unchanged: the missing
columns are added (NULL for the old rows).

Statuses: ``ok`` (the capacity reached: a plateau or a mechanism), ``censored`` (no plateau
up to the rotation cap: the ultimate moment is a lower bound), ``diverged``,
``invalid_input`` (never run; the reason is the message), ``timeout`` and ``error``.
"""

from __future__ import annotations

import json
import os
import sqlite3
import time
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any, Literal, TypedDict

from .paths import SpaceError

__all__ = ["RunStatus", "FINISHED", "Requirement", "RunRecord", "Store", "status_summary",
           "LAYOUT"]

RunStatus = Literal["ok", "censored", "diverged", "invalid_input", "timeout", "error"]
FINISHED: tuple[str, ...] = ("ok", "censored", "diverged", "invalid_input", "timeout", "error")
LAYOUT = 2  # 1: before the requirements / dynamic columns


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


_JSON = {"keypoints", "requirements", "dynamic", "curve", "piles", "timings", "model"}
_COLUMNS = [  # name, SQL type (in the order of the layout-1 table, new columns last)
    ("sample_id", "INTEGER PRIMARY KEY"), ("sample_set", "TEXT"), ("unit", "TEXT"),
    ("inputs", "TEXT"), ("status", "TEXT"), ("message", "TEXT"), ("attempts", "INTEGER"),
    ("seconds", "REAL"), ("keypoints", "TEXT"), ("curve", "TEXT"), ("piles", "TEXT"),
    ("timings", "TEXT"), ("model", "TEXT"), ("provenance", "TEXT"), ("finished_at", "REAL"),
    ("requirements", "TEXT"), ("dynamic", "TEXT"), ("dynamic_stiffness", "REAL")]
_DECODE = _JSON | {"unit", "inputs", "provenance"}


class Store:
    """The SQLite store of one campaign (see the module docstring)."""

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.db = sqlite3.connect(self.path, timeout=60)
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

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def meta(self, key: str) -> Any:
        row = self.db.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return None if row is None else json.loads(row[0])

    def set_meta(self, key: str, value: Any) -> None:
        with self.db:
            self.db.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, json.dumps(value)))

    def claim(self, digest: str, source: dict, base_digest: str, planned: int) -> None:
        """Bind the store to one space; SpaceError if it holds the runs of another one."""
        known = self.meta("space_digest")
        if known is not None and known != digest:
            raise SpaceError(f"{self.path}: this store belongs to another space (digest "
                             f"{known}, this space {digest}); use a new store file")
        known_base = self.meta("base_digest")
        if known_base is not None and known_base != base_digest:
            raise SpaceError(f"{self.path}: the base design changed since this store was "
                             "started; use a new store file")
        for key, value in (("space_digest", digest), ("space", source),
                           ("base_digest", base_digest), ("planned", planned)):
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
        with self.db:
            self.db.execute(f"INSERT OR REPLACE INTO runs ({names}) VALUES ({marks})",
                            tuple(row.values()))

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


def status_summary(store: Store | str | Path) -> dict:
    """Counts by status, failure rate, mean run time and the estimated time to finish."""
    own = not isinstance(store, Store)
    st = Store(store) if own else store
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
