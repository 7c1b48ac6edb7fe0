"""UK pack (rules/markets/uk_retained_1169_2011.yaml): rounding, reference values, worked example.

Great Britain applies Regulation (EU) No 1169/2011 as retained in UK law (UK version on
legislation.gov.uk), enforced in England by the Food Information Regulations 2014.  No UK
divergence in the nutrition declaration was found: the rounding, reference-value and worked-
example tests of tests/test_rounding_eu.py run on the UK pack too.  This file holds what is
UK-only, and a test that fails (on purpose) the day the two packs diverge.

Rounding cases come from the European Commission's "Guidance document for competent
authorities ... with regard to the setting of tolerances for nutrient values declared on
a label" (DG SANCO, December 2012), section 6, Table 4 (rounding guidelines).  Each
threshold of the table is tested exactly at, just below and just above.  Of the two
forms the guidance allows for small amounts ("0 g" or "<0.5 g" / "<0.1 g" / "<0.01 g"),
the pack prints the "<" form.

Reference values come from retained Regulation (EU) No 1169/2011, Annex XIII (Part A point 1:
NRVs; Part B: reference intakes).
"""

import pytest

from labelcalc.formulation.energy import load_factor_set
from labelcalc.labelling.rulepack import load_packs

MARKET = "uk"
FACTOR_SET = "uk_retained_1169_2011_annex_xiv"


@pytest.fixture(scope="module")
def pack():
    return load_packs()[MARKET]


# --- UK specifics -------------------------------------------------------------------------


def test_uk_instruments(pack):
    urls = {i.id: i.url for i in pack.pack.instruments}
    assert urls["retained_reg_1169_2011"].startswith("https://www.legislation.gov.uk/eur/2011/1169")
    assert urls["fir_2014"].startswith("https://www.legislation.gov.uk/uksi/2014/1855")
    assert all("retained" in r.citation for r in pack.rows)


def test_same_as_eu_today():
    """No GB divergence found (2026-12): same rounding bands, reference values and rows as the EU pack."""
    packs = load_packs()
    uk, eu = packs["uk"], packs["eu"]
    strip = lambda rule: [b.model_dump() for b in rule.bands]  # noqa: E731
    assert {k: strip(v) for k, v in uk.rounding.items()} == {k: strip(v) for k, v in eu.rounding.items()}
    assert {k: (v.amount, v.unit) for k, v in uk.reference_values.items()} == {
        k: (v.amount, v.unit) for k, v in eu.reference_values.items()
    }
    assert [(r.nutrient, r.label, r.requirement) for r in uk.rows] == [
        (r.nutrient, r.label, r.requirement) for r in eu.rows
    ]
    assert {k: (n.unit, n.sum, n.energy) for k, n in uk.nutrients.items()} == {
        k: (n.unit, n.sum, n.energy) for k, n in eu.nutrients.items()
    }
    uk_fs, eu_fs = load_factor_set(FACTOR_SET), load_factor_set("eu_1169_2011_annex_xiv")
    assert [(f.components, f.kj, f.kcal) for f in uk_fs.factors] == [
        (f.components, f.kj, f.kcal) for f in eu_fs.factors
    ]
