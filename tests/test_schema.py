"""The case schemas: units match name suffixes, and the format documentation covers every column."""

from pathlib import Path

import pytest

from models import io

DOC = Path(__file__).resolve().parents[1] / "docs" / "case-format.md"
SUFFIX_UNITS = {
    "_kw": "kW", "_hp": "hp", "_hz": "Hz", "_v": "V", "_pct": "%", "_rpm": "rpm", "_kvar": "kVAr",
    "_h_per_yr": "h/yr", "_frac": "-", "_per_h": "currency/h", "_per_kvar": "currency/kVAr",
    "_per_kw_yr": "currency/kW/yr", "_yr": "yr",
}


@pytest.mark.parametrize("table", io.CASE_TABLES)
def test_units_match_name_suffixes(table):
    schema = io.read_schema(table)
    for name, unit in zip(schema["name"], schema["unit"]):
        expected = next((u for s, u in sorted(SUFFIX_UNITS.items(), key=lambda kv: -len(kv[0])) if name.endswith(s)), None)
        if expected is not None:
            assert unit == expected, f"{table}.{name}: unit {unit!r} does not match its suffix"
        else:
            assert not any(name.endswith(s) for s in SUFFIX_UNITS), name


@pytest.mark.parametrize("table", io.CASE_TABLES)
def test_every_column_documented(table):
    text = DOC.read_text(encoding="utf-8")
    for name in io.read_schema(table)["name"]:
        assert f"`{name}`" in text, f"docs/case-format.md does not describe {table}.{name}"


def test_every_schema_row_has_a_source_and_description():
    for table in io.CASE_TABLES:
        schema = io.read_schema(table)
        assert (schema["description"].str.len() > 0).all(), table
        assert (schema["source"].str.len() > 0).all(), table


def test_reference_tables_name_their_source():
    for name in ("iec_60034_30_1_coefficients_50hz", "us_10cfr431_min_efficiency_60hz"):
        table = io.read_reference(name)
        assert table["source"].notna().all() and (table["source"].str.len() > 10).all()


@pytest.mark.parametrize("table", io.CASE_TABLES)
def test_every_column_has_a_title_in_words(table):
    # the dashboard names a case column by its description's first clause and unit (io.column_title): never
    # the raw name, never a clause cut inside its brackets ("Mean non-motor load at the meter (lighting; ...)")
    for name in io.read_schema(table)["name"]:
        title = io.column_title(table, name)
        assert title != name and title[0].isupper(), (name, title)
        assert title.count("(") == title.count(")") and title.count("[") == title.count("]"), (name, title)


def test_column_titles_of_the_asset_register():
    # the schema's descriptions (data/schema/assets.csv) with the unit column, as the template's comment lines give them
    assert io.column_title("assets", "rated_efficiency_pct") == "Nameplate full-load efficiency [%]"
    assert io.column_title("assets", "static_head_frac") == ("Share of the design head that is static (lift) "
                                                             "for pumps and fans")
    assert io.column_title("sites", "base_p_kw") == ("Mean non-motor load at the meter (lighting; heating; motors "
                                                     "not in the register) [kW]")
    assert io.column_title("assets", "not_a_column") == "not_a_column"
