"""Chemistry the demo library and the salt rule rely on, checked with periodictable (PyPI)."""

import periodictable as pt
import pytest

from labelcalc.components import SALT_PER_SODIUM


def test_salt_factor_close_to_molar_ratio():
    # molar mass NaCl / Na = 58.44 / 22.99 = 2.542; Reg. (EU) No 1169/2011 Annex I point 11 fixes 2.5
    ratio = pt.formula("NaCl").mass / pt.Na.mass
    assert ratio == pytest.approx(2.542, abs=0.001)
    assert SALT_PER_SODIUM == 2.5
    assert abs(ratio - SALT_PER_SODIUM) / ratio < 0.02


def test_sodium_in_demo_salt_and_bicarbonate(demo_lib):
    # sodium share of NaCl = 39.3 %, of NaHCO3 = 27.4 % (periodictable molar masses)
    na_nacl = pt.Na.mass / pt.formula("NaCl").mass * 100_000  # mg per 100 g
    na_bicarb = pt.Na.mass / pt.formula("NaHCO3").mass * 100_000
    salt = demo_lib.get("sea_salt").values["sodium"]
    soda = demo_lib.get("baking_soda").values["sodium"]
    assert salt == pytest.approx(na_nacl, rel=0.03)  # sea salt is not pure NaCl
    assert soda == pytest.approx(na_bicarb, rel=0.02)
