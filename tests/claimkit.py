"""Shared test helpers for claims tests: a small library and formulas written to tmp_path, assessed
under a pack.  The numbers are invented test data, not foods."""

from __future__ import annotations

import yaml

from labelcalc import components as C
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library
from labelcalc.labelling.assess import assess
from labelcalc.labelling.declare import declare


def _ingredient(
    per100: dict,
    *,
    name="Test food",
    kinds=(),
    allergens=(),
    substance=None,
    omit_allergens=False,
    nitrogen_factor=6.25,
    functional_class=None,
):
    body = dict(per100)
    per_mg = {"mg": 1.0, "ug": 1e-3}
    minerals_mg = sum(body.get(c.key, 0) * per_mg[c.unit] for c in C.COMPONENTS if c.part_of == "ash")
    if minerals_mg and "ash" not in body:
        body["ash"] = minerals_mg / 1000 * 3
    solids = sum(
        v
        for k, v in body.items()
        if k
        in (
            "protein",
            "fat",
            "sugars",
            "starch",
            "fibre_soluble",
            "fibre_insoluble",
            "nonabsorbed_lipid",
            "sorbitol",
            "mannitol",
            "maltitol",
            "xylitol",
            "isomalt",
            "lactitol",
            "erythritol",
            "glycerol",
            "ash",
        )
    )
    body.setdefault("water", max(0.0, 100.0 - solids - 0.001))
    ing = {
        "label_name": name,
        "source": "test data (invented round numbers)",
        "assumed_zero": [
            {
                "components": [
                    "proximates",
                    "lipids",
                    "carbohydrates",
                    "polyols",
                    "fibre",
                    "minerals",
                    "vitamins",
                    "others",
                ],
                "reason": "test fixture: every component not given is none",
            }
        ],
        "per_100g": body,
        "kinds": list(kinds),
    }
    if body.get("protein"):  # test data given as nitrogen x 6.25
        ing["nitrogen_factor"] = nitrogen_factor
    if not omit_allergens:
        ing["allergens"] = list(allergens)
    if substance:
        ing["substance"] = substance
    if functional_class:
        ing["functional_class"] = functional_class
    return ing


class Lab:
    """A small library and formulas in tmp_path, assessed under a pack."""

    def __init__(self, tmp_path, pack):
        self.dir, self.pack = tmp_path, pack
        self.ingredients: dict[str, dict] = {}

    def add(self, ing_id, per100, **kw):
        self.ingredients[ing_id] = _ingredient(per100, **kw)
        return ing_id

    def library(self):
        return self._library()

    def _library(self):
        d = self.dir / "ingredients"
        d.mkdir(exist_ok=True)
        (d / "lib.yaml").write_text(
            yaml.safe_dump({"ingredients": self.ingredients}, sort_keys=False), encoding="utf-8"
        )
        return load_library(d)

    def formula(
        self,
        fid,
        batch,
        *,
        category="snacks",
        serving="30 g",
        sub=False,
        processing=None,
        name=None,
        extra=None,
        claims=(),
        label_name=None,
    ):
        head = {"id": fid, "name": name or f"Test {fid}", **(extra or {})}
        if sub:
            head["label_name"] = label_name or name or f"Test {fid}"
            doc = {"subformula": head, "batch": batch}
        else:
            head.update({"category": category, "serving": {"size": serving, "household": "1 piece"}})
            if claims:
                head["claims"] = list(claims)
            doc = {"product": head, "batch": batch}
        if processing:
            doc["processing"] = processing
        p = self.dir / f"{fid}.yaml"
        p.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
        return p

    def assess(self, path, reference_path=None, pack=None):
        pack = pack or self.pack
        lib = self._library()
        (c,) = compose(load_formula(path, lib), lib)
        ref = None
        if reference_path is not None:
            (rc,) = compose(load_formula(reference_path, lib), lib)
            ref = (rc, declare(rc, pack))
        return assess(c, pack, declare(c, pack), ref)


def one(lab, per100, *, fid="p", category="snacks", serving="30 g", extra=None, claims=(), **kw):
    """A product of one ingredient (100 g) with the given composition per 100 g."""
    ing = lab.add(f"{fid}_food", per100, **kw)
    return lab.formula(
        fid, [{"ingredient": ing, "amount": "100 g"}], category=category, serving=serving, extra=extra, claims=claims
    )


def verdict(a, claim_id):
    (c,) = [c for c in a.claims if c.claim == claim_id]
    return c.verdict


def claim(a, claim_id):
    (c,) = [c for c in a.claims if c.claim == claim_id]
    return c


def statement(a, st_id):
    hits = [s for s in a.statements if s.statement == st_id]
    return hits[0] if hits else None
