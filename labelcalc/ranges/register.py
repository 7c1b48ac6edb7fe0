"""The label register: an SQLite file recording every label a range run produced.

For each label (product x market x scenario) it keeps the hashes of the
formula, of each ingredient library entry used and of the rule pack, the tool
version, the declared values, statements, allergens and claims.  A new run
is compared with it: new, unchanged or changed labels, and for changed ones
what moved and why (formula, ingredient or rule).
"""

from __future__ import annotations

import json
import sqlite3
from datetime import UTC, datetime
from pathlib import Path

from labelcalc import __version__
from labelcalc.ranges.rangerun import LabelRecord

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
    def __init__(self, path: Path):
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self.db = sqlite3.connect(self.path)
        self.db.executescript(SCHEMA)

    def close(self) -> None:
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
        """Changes against the register, then the register updated to this run."""
        prev = self.previous()
        changes = []
        now = datetime.now(UTC).isoformat(timespec="seconds")
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
        if record:
            with self.db:
                self.db.executemany(
                    "INSERT OR REPLACE INTO labels VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)",
                    [
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
                    ],
                )
        return changes

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
