"""Problem records: the order in which every front shows them."""

from __future__ import annotations

from models.problems import error, ordered, warning


def test_errors_come_before_warnings_then_file_then_row_stably():
    # docs/case-format.md, "Reading rules", Problems: "listed errors first, then warnings; within each, by file,
    # then a problem of the whole file or column before the rows, then by row"
    found = [
        warning("assets.csv", None, "colour", None, "unknown column 'colour' was ignored"),
        error("sites.csv", 3, "site_id", "S1", "duplicate site_id"),
        error("assets.csv", 4, "poles", "5", "poles must be an even number"),
        warning("assets.csv", 2, "rated_p_kw", "7,5", "decimal comma read as a decimal point"),
        error("assets.csv", None, "poles", None, "required column 'poles' is missing"),
        error("assets.csv", 4, "rated_v_v", "4", "'rated_v_v' must lie between 100 and 15000 V"),
    ]
    assert [(p.severity, p.file, p.row, p.column) for p in ordered(found)] == [
        ("error", "assets.csv", None, "poles"),
        ("error", "assets.csv", 4, "poles"),       # same row: the order found is kept
        ("error", "assets.csv", 4, "rated_v_v"),
        ("error", "sites.csv", 3, "site_id"),
        ("warning", "assets.csv", None, "colour"),
        ("warning", "assets.csv", 2, "rated_p_kw"),
    ]


def test_a_summary_line_follows_the_rows_it_continues():
    # docs/case-format.md, "Reading rules", Problems: the "N more ..." line "stands on the row of the first one it
    # counts, after the rows listed" (models.case._listed gives it that row)
    listed = [error("profiles.csv", r, "timestamp", "x", "timestamp not readable") for r in (2, 3)]
    summary = error("profiles.csv", 4, "timestamp", "x", "7 more unreadable timestamps, the first of them in this row")
    other = error("profiles.csv", None, None, None, "no value column: give shaft_load_pct or input_kw")
    assert ordered([summary, *reversed(listed), other]) == [other, *listed, summary]


def test_causes_come_before_the_rows_that_follow_from_them_across_files():
    # docs/case-format.md, "Reading rules", Problems: "among errors, a missing required table first (the rows
    # that refer to it fail too), then the other errors of a whole file or column, by file, then the errors of
    # rows, by file and row"
    from models.problems import MISSING_TABLE_RULE

    found = [
        error("assets.csv", 2, "site_id", "S9", "unknown site_id"),
        error("assets.csv", 3, "site_id", "S9", "unknown site_id"),
        error("profiles.csv", None, None, None, "no value column: give shaft_load_pct or input_kw"),
        warning("assets.csv", None, "colour", None, "unknown column 'colour' was ignored"),
        error("sites.csv", None, None, None, MISSING_TABLE_RULE.format(table="sites")),
    ]
    assert [(p.file, p.row) for p in ordered(found)] == [
        ("sites.csv", None),      # the missing table leads
        ("profiles.csv", None),   # then errors of a whole file, before any row of any file
        ("assets.csv", 2),
        ("assets.csv", 3),
        ("assets.csv", None),     # the warning last
    ]


def test_a_tariff_files_line_errors_come_before_the_rows_that_name_the_file():
    # a TOML syntax error on line 72 of a tariff is why a site's row cannot read it: the cause is listed first,
    # though "sites.csv" sorts before "tariffs/..." and both carry a line or row
    found = [error("sites.csv", 2, "tariff_file", "t.toml", "the tariff file named here could not be read"),
             error("tariffs/t.toml", 72, None, None, "TOML syntax error"),
             error("book.xlsx:assets", 3, "poles", 5, "poles must be an even number"),
             error("book.xlsx:tariff t.toml", 4, "ratchet_frac", "x", "must be a number")]
    assert [p.file for p in ordered(found)] == ["book.xlsx:tariff t.toml", "tariffs/t.toml", "book.xlsx:assets",
                                               "sites.csv"]


def test_a_problems_table_row_writes_whole_numbers_as_the_messages_do():
    # User report: the dashboard's validation grid showed "3.0" and "2975.0" where the command line printed 3 and
    # 2975; a table row now writes a value as the message does, text without quotes
    from models.problems import error

    assert error("assets.csv", 2, "poles", 3.0, "rule").as_dict()["value"] == "3"
    assert error("assets.csv", 2, "rated_speed_rpm", 2975.0, "rule").as_dict()["value"] == "2975"
    assert error("assets.csv", 2, "mean_load_pct", 0.5, "rule").as_dict()["value"] == "0.5"
    assert error("assets.csv", 2, "application", "pmup", "rule").as_dict()["value"] == "pmup"
    assert error("assets.csv", 2, "application", None, "rule").as_dict()["value"] is None
