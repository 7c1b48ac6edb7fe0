"""Declared values of one composition under one market pack.

A single product is a range of one: this runs the labelling engine (:mod:`engine`) on one
composition and returns the declaration of its label record (:mod:`record`).
"""

from __future__ import annotations

from labelcalc.formulation.composition import Composition
from labelcalc.labelling.model import Declaration
from labelcalc.labelling.record import label_one
from labelcalc.labelling.rulepack import RulePack


def declare(comp: Composition, pack: RulePack, *, rules_root: str | None = None) -> Declaration:
    """Declared values of ``comp`` under ``pack``: columns, rounded rows, percentages, which rows show."""
    return label_one(comp, pack, rules_root=rules_root).declaration
