"""Sweep chart helpers: human series names, coinciding series drawn once, numbered threshold table."""

from __future__ import annotations

from labelcalc.outputs.charts import merge_coinciding, series_name, threshold_rows


def test_series_names_are_words():
    assert series_name("available") == "Available energy"
    assert series_name("declared us (high)") == "Declared energy, US (high end)"


def test_coinciding_series_are_drawn_once_and_named_together():
    same = [(0.0, 100.0), (10.0, 90.0)]
    merged = merge_coinciding(
        {"available": same, "declared eu": [(0.0, 120.0), (10.0, 120.0)], "declared uk": [(0.0, 120.0), (10.0, 120.0)]}
    )
    assert list(merged) == ["Available energy", "Declared energy, EU = UK"]


def test_thresholds_share_a_mark_per_level_and_use_pack_names():
    rows = threshold_rows(
        {"us: claim low_fat": 40.0, "eu: claim low_fat": 40.0, "us: statement x": 10.0},
        {"us: claim low_fat": "US: Low fat"},
    )
    assert rows == [("1", 10.0, "us: statement x"), ("2", 40.0, "eu: claim low_fat"), ("2", 40.0, "US: Low fat")]
