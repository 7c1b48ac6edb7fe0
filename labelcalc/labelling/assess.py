"""Claims, required statements, allergens, the ingredient list and front-of-pack verdicts for one
composition under one market pack.

Claims are tested on unrounded figures.  Where a figure is missing (unknown value, no reference
amount, no reference formula) the verdict is "cannot tell" with what is missing — never a confident
answer built on a zero.  Where the work can hurt someone (allergens, laxative or phenylalanine
statements, missing fortification) the engine errs toward flagging.  The rules themselves live in
the engine (:mod:`engine`); this is its single-product entry point.
"""

from __future__ import annotations

from labelcalc.formulation.composition import Composition
from labelcalc.labelling.model import Assessment, Declaration
from labelcalc.labelling.record import label_one
from labelcalc.labelling.rulepack import RulePack


def assess(
    comp: Composition,
    pack: RulePack,
    decl: Declaration | None = None,
    reference: tuple[Composition, Declaration] | None = None,
    *,
    with_ingredient_list: bool = True,
) -> Assessment:
    """The assessment of ``comp`` under ``pack``; ``reference`` (a reference formula's composition and
    declaration) makes comparative claims testable.  ``decl``, when given, is the declaration already
    made for ``comp``: its record is reused."""
    ref = reference[0] if reference else None
    rec = decl.record if decl is not None else None
    if rec is None or ref is not None or rec.with_ingredient_list != with_ingredient_list:
        rec = label_one(comp, pack, ref, with_ingredient_list=with_ingredient_list)
    return rec.assessment


def assess_against(
    comp: Composition, pack: RulePack, reference: list[Composition] | None, index: int = 0, **kw
) -> Assessment:
    """Assess ``comp``; with a reference formula's compositions, comparative claims use the reference
    scenario of the same index (low with low, high with high)."""
    ref = reference[min(index, len(reference) - 1)] if reference else None
    return label_one(comp, pack, ref, **kw).assessment
