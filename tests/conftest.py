"""Shared fixtures: a small hand-made library and helpers to write formula files."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from labelcalc.intake.library import load_library

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_products"

# Test library: round numbers chosen for hand arithmetic (invented for tests, not real foods).
TEST_LIBRARY = """
ingredients:
  tuber:
    label_name: Tuber
    source: test data (invented round numbers)
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {water: 80, protein: 2, nitrogen: 0.32, fat: 0.1, sugars: 1, starch: 15, fibre_soluble: 0.5, fibre_insoluble: 1.4}
    allergens: []
  oil:
    label_name: Sunflower oil
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {fat: 100, saturated_fa: 10, monounsaturated_fa: 60, polyunsaturated_fa: 25, vitamin_e: 40}
    allergens: []
  spe:
    label_name: Sucrose polyester
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {nonabsorbed_lipid: 100}
    allergens: []
  structured:
    label_name: Structured lipid
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {partial_lipid: 100}
    lipid_energy: {kj_per_g: 21, kcal_per_g: 5, source: test data}
    allergens: []
  salatrim:
    label_name: Salatrim
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {partial_lipid: 100}
    lipid_energy: {kj_per_g: 25, kcal_per_g: 6, kind: salatrim, source: test data}
    allergens: []
  flour:
    label_name: Wheat flour
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {water: 14, protein: 10, nitrogen: 1.6, fat: 1, sugars: 1, starch: 70, fibre_soluble: 1, fibre_insoluble: 2, ash: 1, sodium: 2}
    allergens: [wheat]
  sugar:
    label_name: Sugar
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {sugars: 100, added_sugars: 100}
    allergens: []
  salt:
    label_name: Salt
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {ash: 100, sodium: 39300}
    allergens: []
  water:
    label_name: Water
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {water: 100}
    allergens: []
  maltitol:
    label_name: Maltitol
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {maltitol: 100}
    allergens: []
  erythritol:
    label_name: Erythritol
    source: test data
    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}]
    per_100g: {erythritol: 100}
    allergens: []
  herb:
    label_name: Herb
    source: test data; vitamin K deliberately unknown
    per_100g: {water: 10, protein: 20, nitrogen: 3.2, fat: 5, sugars: 5, starch: 20, fibre_soluble: 10, fibre_insoluble: 20, ash: 10,
               sodium: 50, saturated_fa: 1, trans_fa: 0, monounsaturated_fa: 1, polyunsaturated_fa: 2, cholesterol: 0,
               nonabsorbed_lipid: 0, partial_lipid: 0, added_sugars: 0, sorbitol: 0, mannitol: 0, xylitol: 0, maltitol: 0,
               isomalt: 0, lactitol: 0, erythritol: 0, glycerol: 0, organic_acids: 0, ethanol: 0, potassium: 100,
               calcium: 100, iron: 5, vitamin_a: 0, vitamin_d: 0, vitamin_e: 1, caffeine: 0, sulphites: 0}
    allergens: []
"""


@pytest.fixture
def lib_dir(tmp_path: Path) -> Path:
    d = tmp_path / "ingredients"
    d.mkdir()
    (d / "lib.yaml").write_text(TEST_LIBRARY, encoding="utf-8")
    return d


@pytest.fixture
def lib(lib_dir):
    return load_library(lib_dir)


@pytest.fixture
def write(tmp_path: Path):
    """Write a YAML file (dedented) into the test folder and return its path."""

    def _write(name: str, text: str) -> Path:
        p = tmp_path / name
        p.write_text(textwrap.dedent(text), encoding="utf-8")
        return p

    return _write


@pytest.fixture(scope="session")
def demo_lib():
    return load_library(DEMO / "ingredients")


def demo_formulas() -> list[Path]:
    return sorted(DEMO.glob("*.yaml"))
