"""Readers and mappings of the public food-composition tables, on small fixtures in each published layout.

The fixtures under tests/data/tables/ are FIXTURE DATA: the file layouts follow each database's published
description (cited in labelcalc/tables/<database>.py); the numbers are invented or typed approximately
for tests and are not reference values.  What is checked here is the reading and the conversions.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from labelcalc import components as C
from labelcalc.errors import InputError
from labelcalc.tables import DATABASES, read_table
from labelcalc.tables.library import pick
from labelcalc.tables.model import load_mapping, parse_amount

DATA = Path(__file__).parent / "data" / "tables"
FDC = DATA / "fdc" / "FoodData_Central_sr_legacy_food_csv_2018-04"
CNF = DATA / "cnf" / "cnf-fcen-csv-2015"
COFID = DATA / "cofid" / "CoFID_2021_fixture.xlsx"
AFCD = DATA / "afcd" / "AFCD Release 2 - Nutrient file (fixture).xlsx"
CIQUAL = DATA / "ciqual"


@pytest.mark.parametrize("database", sorted(DATABASES))
def test_every_mapping_loads_names_only_known_components_and_never_reads_energy(database):
    m = load_mapping(database)
    assert m.documentation
    for key, cmap in m.components.items():
        assert key in C.BY_KEY or key in ("available_carbohydrate", "fibre")
        assert cmap.citation and cmap.confidence
    assert any("energy" in reason.lower() or "computed" in reason.lower() for reason in m.not_read.values())


def test_parse_amount_reads_the_tables_markers():
    assert parse_amount("12,5") == (12.5, "")
    assert parse_amount("N") == (None, "")  # CoFID: not measured
    assert parse_amount("-") == (None, "")  # CIQUAL: missing
    assert parse_amount("Tr")[0] == 0.0 and "trace" in parse_amount("Tr")[1]
    assert parse_amount("< 0,5")[0] == 0.0 and "limit" in parse_amount("< 0,5")[1]
    assert parse_amount(None) == (None, "")


# ------------------------------------------------------------------------------------------ FDC


def test_fdc_reads_release_search_and_nitrogen_factor():
    t = read_table("fdc", FDC)
    assert t.release == "SR Legacy 2018-04"
    assert list(t.search("wheat flour").index) == ["169761"]
    assert t.foods.loc["169705", "nitrogen_factor"] == pytest.approx(5.83)


def test_fdc_entry_sources_conversions_and_unknowns():
    t = read_table("fdc", FDC)
    key, oats, unknown = pick(t, "169705", "oats")
    per = oats["per_100g"]
    # carbohydrate by difference (66.27) less total fibre (10.6); fibre held whole
    assert per["available_carbohydrate"] == pytest.approx(66.27 - 10.6)
    assert per["fibre"] == pytest.approx(10.6)
    # niacin equivalents: preformed 0.961 mg + tryptophan 0.234 g x 1000 / 60
    assert per["niacin"] == pytest.approx(0.961 + 234 / 60, rel=1e-5)
    # nitrogen derived from protein and the table's factor
    assert per["nitrogen"] == pytest.approx(16.89 / 5.83, rel=1e-6)
    assert "nutrient 1003 (Protein)" in oats["sources"]["protein"]
    assert "food 169705" in oats["sources"]["protein"] and "SR Legacy 2018-04" in oats["sources"]["protein"]
    assert oats["basis"]["protein"].startswith("nitrogen x 5.83")
    assert "trans_fa" in unknown and "trans_fa" not in per  # not given: unknown, never zero
    assert "1008" not in str(oats["sources"])  # energy is never read
    _, butter, _ = pick(t, "173410")
    assert butter["per_100g"]["vitamin_d"] == pytest.approx(60 * 0.025)  # 1 IU = 0.025 ug
    assert "0.025" in butter["sources"]["vitamin_d"]


def _copy_fdc(tmp_path: Path) -> Path:
    dest = tmp_path / "FoodData_Central_sr_legacy_food_csv_2018-04"
    shutil.copytree(FDC, dest)
    return dest


def test_fdc_unit_that_disagrees_with_the_mapping_stops_the_import(tmp_path):
    d = _copy_fdc(tmp_path)
    text = (d / "nutrient.csv").read_text().replace('"1003","Protein","G"', '"1003","Protein","MG"')
    (d / "nutrient.csv").write_text(text)
    t = read_table("fdc", d)
    with pytest.raises(InputError, match="reads fdc code '1003' as g, the table states mg"):
        pick(t, "169705")


def test_fdc_code_whose_name_disagrees_with_the_mapping_stops_the_import(tmp_path):
    d = _copy_fdc(tmp_path)
    text = (d / "nutrient.csv").read_text().replace('"Sodium, Na"', '"Potassium, K"')
    (d / "nutrient.csv").write_text(text)
    with pytest.raises(InputError, match="expects fdc code '1093' to be 'Sodium'"):
        pick(read_table("fdc", d), "169705")


def test_fdc_missing_file_is_one_clear_message(tmp_path):
    with pytest.raises(InputError, match="food.csv not found"):
        read_table("fdc", tmp_path)


# ------------------------------------------------------------------------------------------ CNF


def test_cnf_latin1_files_and_iu_vitamin_d():
    t = read_table("cnf", CNF)
    assert t.release == "2015"
    _, butter, _ = pick(t, "4")
    assert butter["per_100g"]["vitamin_d"] == pytest.approx(1.5)
    assert butter["per_100g"]["sodium"] == 576
    assert "nutrient 307 (SODIUM)" in butter["sources"]["sodium"]
    _, oats, unknown = pick(t, "2001")
    assert oats["per_100g"]["available_carbohydrate"] == pytest.approx(69.2 - 10.1)
    assert "trans_fa" in unknown


# ------------------------------------------------------------------------------------------ CoFID


def test_cofid_sheets_units_traces_and_conversions():
    t = read_table("cofid", COFID)
    assert t.release == "2021"
    _, oats, unknown = pick(t, "11-999")
    per = oats["per_100g"]
    assert per["starch"] == pytest.approx(60.0 / 1.10, rel=1e-5)  # monosaccharide equivalents to weight
    assert per["trans_fa"] == 0.0 and "trace" in oats["sources"]["trans_fa"]
    assert per["nitrogen"] == 2.0 and oats["nitrogen_factor"] == pytest.approx(5.83)
    assert "iodine" in unknown  # 'N': not measured, unknown
    _, butter, _ = pick(t, "17-999")
    assert butter["per_100g"]["vitamin_a"] == pytest.approx(958 + 608 / 12, rel=1e-5)  # RAE = retinol + carotene/12
    assert "fibre" not in butter["per_100g"]  # 'N' for AOAC fibre


# ------------------------------------------------------------------------------------------ AFCD


def test_afcd_fatty_acids_per_100g_fatty_acids_use_the_fat_factor():
    t = read_table("afcd", AFCD)
    assert t.release == "Release 2"
    assert t.foods.loc["F999002", "fat_factor"] == pytest.approx(0.945)
    _, butter, _ = pick(t, "F999002")
    # 66 g per 100 g fatty acids x fat factor 0.945 x fat 82 g / 100
    assert butter["per_100g"]["saturated_fa"] == pytest.approx(66 * 0.945 * 82 / 100)
    assert "fat conversion factor 0.945" in butter["sources"]["saturated_fa"]
    assert butter["per_100g"]["vitamin_a"] == pytest.approx(700 + 400 / 12, rel=1e-5)
    assert butter["basis"]["protein"].startswith("nitrogen x 6.38")


# ------------------------------------------------------------------------------------------ CIQUAL


def test_ciqual_xml_commas_markers_and_salt_fallback():
    t = read_table("ciqual", CIQUAL)
    assert t.release == "2020-07-07"
    _, oats, unknown = pick(t, "9310")
    assert oats["per_100g"]["water"] == 8.5
    assert oats["per_100g"]["cholesterol"] == 0.0 and "< 0,5" in oats["sources"]["cholesterol"]
    assert "vitamin_d" in unknown  # '-'
    assert oats["basis"]["protein"] == "nitrogen x Jones' factor (CIQUAL)"
    _, butter, _ = pick(t, "16400")
    assert butter["per_100g"]["sodium"] == pytest.approx(2.08 / 2.5 * 1000)  # sodium from salt
