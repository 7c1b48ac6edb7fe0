"""The label register: an SQLite file recording every label a range run produced.

For each label (product x market x scenario) it keeps the hashes of the
formula, of each ingredient library entry used and of the rule pack, the tool
version, the declared values, statements, allergens and claims.  A new run
is compared with it: new, unchanged or changed labels, and for changed ones
what moved and why (formula, ingredient or rule).

The file carries a schema version (SQLite ``user_version``). A range run holds the register's write lock from
its start until its outputs are in place (:meth:`Register.lock`, :meth:`Register.record`), so a second run on
the same register waits up to :data:`BUSY_SECONDS` and then stops with a clear message instead of losing an
update, and a run that is interrupted records nothing: its rerun reports the same changes.
"""

from __future__ import annotations

import json
import sqlite3
from datetime import UTC, datetime
from pathlib import Path

from labelcalc import __version__
from labelcalc.errors import InputError, Problem, display_path
from labelcalc.ranges.rangerun import LabelRecord

SCHEMA_VERSION = 1
BUSY_SECONDS = 10.0

SCHEMA = """
CREATE TABLE IF NOT EXISTS labels (
    product_id TEXT NOT NULL,
    market TEXT NOT NULL,
    scenario TEXT NOT NULL,
    formula_hash TEXT NOT NULL,
    ingredient_hashes TEXT NOT NULL,
    rules_hash TEXT NOT NULL,
    tool_version TEXT NOT NULL,
    declared TEXT NOT NULL,
    statements TEXT NOT NULL,
    allergens TEXT NOT NULL,
    claims TEXT NOT NULL,
    file TEXT NOT NULL,
    recorded_at TEXT NOT NULL,
    PRIMARY KEY (product_id, market, scenario)
);
"""


class Register:
    def __init__(self, path: Path, *, create: bool = True):
        self.path = Path(path)
        shown = display_path(self.path) or str(self.path)
        if not create and not self.path.exists():
            raise InputError(
                Problem("no label register here", file=shown, fix="run 'labelcalc range' first or pass --db")
            )
        self.path.parent.mkdir(parents=True, exist_ok=True)
        try:
            self.db = sqlite3.connect(self.path, timeout=BUSY_SECONDS, isolation_level=None)
            version = self.db.execute("PRAGMA user_version").fetchone()[0]
            if version > SCHEMA_VERSION:
                self.db.close()
                raise InputError(
                    Problem(
                        f"label register has schema version {version}; this labelcalc reads up to {SCHEMA_VERSION}",
                        file=shown,
                        fix="use a newer labelcalc, or another --register file",
                    )
                )
            tables = {r[0] for r in self.db.execute("SELECT name FROM sqlite_master WHERE type='table'")}
            if version < SCHEMA_VERSION or "labels" not in tables:
                self.db.executescript(SCHEMA + f"PRAGMA user_version = {SCHEMA_VERSION};")
        except sqlite3.OperationalError as exc:
            raise _sqlite_problem(exc, shown) from None
        except sqlite3.DatabaseError as exc:
            raise InputError(
                Problem(
                    f"not a label register ({exc})",
                    file=shown,
                    fix="pass another --register file, or move this one away",
                )
            ) from None
        self._shown = shown
        self._locked = False

    def lock(self) -> None:
        """Take the register's write lock for a run (waits up to BUSY_SECONDS for another run)."""
        try:
            self.db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise _sqlite_problem(exc, self._shown) from None
        self._locked = True

    def close(self) -> None:
        """Close; a lock still held (the run did not reach :meth:`record`) is released with nothing written."""
        if self._locked:
            self.db.execute("ROLLBACK")
            self._locked = False
        self.db.close()

    def previous(self) -> dict[tuple[str, str, str], dict]:
        cur = self.db.execute("SELECT * FROM labels")
        cols = [c[0] for c in cur.description]
        out = {}
        for row in cur.fetchall():
            r = dict(zip(cols, row))
            for k in ("ingredient_hashes", "declared", "statements", "allergens", "claims"):
                r[k] = json.loads(r[k])
            out[(r["product_id"], r["market"], r["scenario"])] = r
        return out

    def compare_and_record(self, labels: list[LabelRecord], *, record: bool = True) -> list[dict]:
        """Changes against the register, then (with ``record``) the register updated to this run."""
        changes = self.compare(labels)
        if record:
            self.record(labels)
        return changes

    def compare(self, labels: list[LabelRecord], failed_files: set[str] | None = None) -> list[dict]:
        """What this run's labels change against the register: new, changed (what moved, why) or unchanged;
        and "not labelled" for a recorded label of a file that failed in this run (its record is kept)."""
        prev = self.previous()
        changes = []
        now_keys = {(lab.product_id, lab.market, lab.scenario) for lab in labels}
        for key, old in sorted(prev.items()):
            if key not in now_keys and old["file"] in (failed_files or set()):
                changes.append(
                    {
                        "status": "not labelled",
                        "product_id": key[0],
                        "market": key[1],
                        "scenario": key[2],
                        "what_moved": "",
                        "why": "the file failed in this run (see errors.csv); the register keeps its last label",
                    }
                )
        for lab in labels:
            key = (lab.product_id, lab.market, lab.scenario)
            old = prev.get(key)
            if old is None:
                changes.append(
                    {
                        "status": "new",
                        "product_id": lab.product_id,
                        "market": lab.market,
                        "scenario": lab.scenario,
                        "what_moved": "",
                        "why": "",
                    }
                )
            else:
                moved = describe_moves(old, lab)
                why = describe_why(old, lab)
                changes.append(
                    {
                        "status": "changed" if moved else "unchanged",
                        "product_id": lab.product_id,
                        "market": lab.market,
                        "scenario": lab.scenario,
                        "what_moved": "; ".join(moved),
                        "why": "; ".join(why) if moved or why else "",
                    }
                )
        return changes

    def record(self, labels: list[LabelRecord]) -> None:
        """Write this run's labels and release the lock (call once the run's outputs are in place)."""
        now = datetime.now(UTC).isoformat(timespec="seconds")
        rows = [
            (
                lab.product_id,
                lab.market,
                lab.scenario,
                lab.formula_hash,
                json.dumps(lab.ingredient_hashes, sort_keys=True),
                lab.rules_hash,
                __version__,
                json.dumps(lab.declared, sort_keys=True),
                json.dumps(lab.statements),
                json.dumps(lab.allergens),
                json.dumps(lab.claims),
                lab.file,
                now,
            )
            for lab in labels
        ]
        try:
            if not self._locked:
                self.lock()
            self.db.executemany("INSERT OR REPLACE INTO labels VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)", rows)
            self.db.execute("COMMIT")
        except sqlite3.OperationalError as exc:
            raise _sqlite_problem(exc, self._shown) from None
        finally:
            self._locked = False

    def rows(self) -> list[dict]:
        out = []
        for r in self.previous().values():
            out.append(
                {
                    "product_id": r["product_id"],
                    "market": r["market"],
                    "scenario": r["scenario"],
                    "formula_hash": r["formula_hash"],
                    "rules_hash": r["rules_hash"],
                    "tool_version": r["tool_version"],
                    "ingredients": ", ".join(sorted(r["ingredient_hashes"])),
                    "allergens": ", ".join(r["allergens"]),
                    "statements": ", ".join(r["statements"]),
                    "claims": ", ".join(r["claims"]),
                    "recorded_at": r["recorded_at"],
                    "file": r["file"],
                }
            )
        return sorted(out, key=lambda x: (x["product_id"], x["market"], x["scenario"]))

    def where_used(self, ingredient: str) -> list[dict]:
        return [r for r in self.rows() if ingredient in r["ingredients"].split(", ")]


def describe_moves(old: dict, lab: LabelRecord) -> list[str]:
    moved = []
    keys = sorted(set(old["declared"]) | set(lab.declared))
    for k in keys:
        a, b = old["declared"].get(k), lab.declared.get(k)
        if a != b:
            moved.append(f"{k.replace('|', ' ')}: {a or '-'} -> {b or '-'}")
    for what in ("statements", "allergens", "claims"):
        a, b = set(old[what]), set(getattr(lab, what))
        if a != b:
            added, removed = sorted(b - a), sorted(a - b)
            moved.append(f"{what}: " + ", ".join([f"+{x}" for x in added] + [f"-{x}" for x in removed]))
    return moved


def describe_why(old: dict, lab: LabelRecord) -> list[str]:
    why = []
    if old["formula_hash"] != lab.formula_hash:
        why.append("formula changed")
    oi, ni = old["ingredient_hashes"], lab.ingredient_hashes
    changed = sorted(k for k in set(oi) & set(ni) if oi[k] != ni[k])
    if changed:
        why.append("ingredient specification changed: " + ", ".join(changed))
    if set(oi) != set(ni):
        why.append("ingredients used changed: " + ", ".join(sorted(set(oi) ^ set(ni))))
    if old["rules_hash"] != lab.rules_hash:
        why.append("rule pack changed")
    return why


def _sqlite_problem(exc: sqlite3.OperationalError, shown: str) -> InputError:
    if "locked" in str(exc) or "busy" in str(exc):
        return InputError(
            Problem(
                f"label register is in use by another run (waited {BUSY_SECONDS:g} s)",
                file=shown,
                fix="wait for that run to finish, or pass another --register file",
            )
        )
    return InputError(Problem(f"cannot use the label register: {exc}", file=shown))
