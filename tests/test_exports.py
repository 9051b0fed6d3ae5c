"""Validation record for models.exports: result tables written safe for a spreadsheet.

Expected values are written out by hand beside each test.
"""

import numpy as np
import pandas as pd

from models.exports import csv_bytes, neutralise_text, safe_frame

TEXTS = ["pump", "=SUM(A1)", "+1", "-x", "@cmd", "\tTab", "\rCR", None, "", "plain-text", "a=b"]


def _cell_by_cell(frame: pd.DataFrame) -> pd.DataFrame:
    """The rule applied one cell at a time (reference for the vectorised text columns)."""
    out = frame.copy()
    for column in out.columns:
        if pd.api.types.is_string_dtype(out[column].dtype) or out[column].dtype == object:
            out[column] = [neutralise_text(v) if isinstance(v, str) else v for v in out[column]]
    return out


class TestSafeFrame:
    def test_text_column_by_hand(self):
        # hand: every text starting with = + - @ tab or CR gets an apostrophe; others and missing cells stay
        frame = pd.DataFrame({"asset_id": pd.array(TEXTS, dtype="str")})
        got = safe_frame(frame)["asset_id"].tolist()
        assert got[:7] == ["pump", "'=SUM(A1)", "'+1", "'-x", "'@cmd", "'\tTab", "'\rCR"]
        assert pd.isna(got[7]) and got[8:] == ["", "plain-text", "a=b"]

    def test_the_written_file_is_the_cell_by_cell_rule(self):
        rng = np.random.default_rng(6)
        n = 500
        frame = pd.DataFrame({
            "asset_id": pd.array(rng.choice(TEXTS[:7] + TEXTS[8:], n), dtype="str"),
            "mixed": pd.Series(rng.choice(np.array(["=x", 3, None, "ok"], dtype=object), n), dtype=object),
            "component": pd.Categorical(rng.choice(["energy", "capital"], n)),
            "amount": rng.normal(0, 1000, n),
        })
        frame.loc[7, "asset_id"] = None
        expected = _cell_by_cell(frame).to_csv(index=False, float_format="%.10g", lineterminator="\n").encode("utf-8")
        assert csv_bytes(frame) == expected

    def test_the_input_is_left_alone(self):
        frame = pd.DataFrame({"asset_id": pd.array(["=x", "y"], dtype="str")})
        safe_frame(frame)
        assert frame["asset_id"].tolist() == ["=x", "y"]


class TestColumnByColumnWriter:
    """Plain tables are written column by column with pyarrow's string kernels: the same bytes as
    pandas' ``to_csv(index=False, float_format="%.10g", lineterminator="\\n")`` (the reference here), and
    pandas writes what that path does not cover."""

    @staticmethod
    def pandas_bytes(frame: pd.DataFrame) -> bytes:
        return safe_frame(frame).to_csv(index=False, float_format="%.10g", lineterminator="\n").encode("utf-8")

    def plain(self, n: int = 2000) -> pd.DataFrame:
        rng = np.random.default_rng(8)
        amount = rng.normal(0, 1e4, n) * 10.0 ** rng.integers(-8, 12, n)
        amount[:6] = [np.nan, np.inf, -np.inf, -0.0, 0.0, 1e-320][:n]
        codes = rng.integers(-1, 3, n)
        return pd.DataFrame({
            "asset_id": pd.array([None if i % 97 == 0 else f"A{i % 37:03d}" for i in range(n)], dtype="str"),
            "year": rng.integers(0, 30, n),
            "component": pd.Categorical.from_codes(codes, ["energy", "capital", "=tax"]),
            "amount": amount,
            "repeated": rng.choice([1.5, -2.25, np.nan, 1e21], n),  # few distinct values: formatted once each
            "proven": rng.random(n) > 0.5,
            "text": pd.array(rng.choice(["-x", "plain", "a=b", "ünïcode"], n), dtype="str"),
        })

    def test_plain_table_same_bytes_as_pandas(self):
        from models.exports import _csv_bytes_by_columns

        frame = self.plain()
        assert _csv_bytes_by_columns(safe_frame(frame)) is not None  # the column path was taken
        assert csv_bytes(frame) == self.pandas_bytes(frame)

    def test_hand_written_example(self):
        # hand: header, then each row's fields joined by commas; NaN and missing text empty, -0.0 as a plain 0
        frame = pd.DataFrame({"a": pd.array(["x", None], dtype="str"), "b": [np.nan, -0.0], "c": [3, 4],
                              "d": [True, False]})
        assert csv_bytes(frame) == b"a,b,c,d\nx,,3,True\n,0,4,False\n"
        assert np.signbit(frame.loc[1, "b"])  # the caller's table keeps its value

    def test_fields_that_would_be_quoted_go_to_pandas(self):
        from models.exports import _csv_bytes_by_columns

        for bad in ["a,b", 'say "hi"', "two\nlines", "cr\rhere"]:
            frame = self.plain(50)
            frame.loc[3, "asset_id"] = bad
            assert _csv_bytes_by_columns(safe_frame(frame)) is None
            assert csv_bytes(frame) == self.pandas_bytes(frame)

    def test_other_tables_go_to_pandas(self):
        from models.exports import _csv_bytes_by_columns

        mixed = pd.DataFrame({"a": pd.Series(["x", 3, None], dtype=object), "b": [1.0, 2.0, 3.0]})
        one_column = pd.DataFrame({"a": [1.0, np.nan]})
        no_rows = self.plain(0)
        for frame in (mixed, one_column, no_rows):
            assert _csv_bytes_by_columns(safe_frame(frame)) is None
            assert csv_bytes(frame) == self.pandas_bytes(frame)


def test_files_without_rows_keep_their_header(tmp_path):
    # a run without risk writes risk.csv and tornado.csv with their header row only (docs/outputs.md)
    import pandas as pd

    from drivecase.cli import main

    from pathlib import Path

    REPO = Path(__file__).resolve().parents[1]
    assert main(["run", str(REPO / "data" / "demo"), "--out", str(tmp_path / "o"), "--no-risk", "--quiet"]) == 0
    for name in ("risk.csv", "tornado.csv", "plan_risk.csv", "plan_tornado.csv", "npv_draws.csv"):
        frame = pd.read_csv(tmp_path / "o" / name)
        assert frame.empty and list(frame.columns)[:2] in (["asset_id", "option_id"], ["variable", "low_value"],
                                                            ["draw", "best_options_npv"])


def test_empty_headers_are_those_of_a_full_run(tmp_path):
    # the header written for an empty table is the one a run with rows writes (no drift between the two)
    from pathlib import Path

    from drivecase.cli import main
    from models.exports import EMPTY_COLUMNS

    demo = Path(__file__).resolve().parents[1] / "data" / "demo"
    assert main(["run", str(demo), "--out", str(tmp_path / "o"), "--quiet"]) == 0
    for name, columns in EMPTY_COLUMNS.items():
        header = (tmp_path / "o" / name).read_text(encoding="utf-8").splitlines()[0].split(",")
        assert header == columns, name


def test_plan_rows_carry_each_projects_saving_alone_and_as_the_plan_counts_it():
    from models.exports import EMPTY_COLUMNS, plan_with_savings

    plan = pd.DataFrame({"asset_id": ["A", "B"], "option_id": ["ie4", "cap"], "start_yr": [0, 1],
                         "capital": [1000.0, 500.0], "npv": [3000.0, 200.0], "npv_at_plan_start": [3000.0, 180.0]})
    results = pd.DataFrame({"asset_id": ["A", "A", "B"], "option_id": ["ie4", "pm", "cap"],
                            "bill_saving_per_yr": [400.0, 600.0, 100.0], "saving_maintenance_per_yr": [20.0, 30.0, -5.0]})
    out = plan_with_savings(plan, results, {"B/cap": 0.25})
    # hand calculation: A/ie4 alone and counted 400 + 20 = 420 (share 1); B/cap alone 100 - 5 = 95, counted
    # 0.25 x 100 - 5 = 20
    assert out["saving_per_yr"].tolist() == [420.0, 95.0]
    assert out["bill_saving_counted_frac"].tolist() == [1.0, 0.25]
    assert out["saving_counted_per_yr"].tolist() == [420.0, 20.0]
    assert list(plan.columns) == ["asset_id", "option_id", "start_yr", "capital", "npv", "npv_at_plan_start"]  # untouched
    empty = plan_with_savings(plan.iloc[:0], results, None)
    assert empty.empty and list(empty.columns) == EMPTY_COLUMNS["plan.csv"]


def test_an_asset_id_holding_a_slash_keeps_its_projects_apart():
    # a project is labelled "asset/option"; an asset id may hold "/" (KGQ/F01), an option id may not, so the label
    # is split at its last "/" (hand: "KGQ/F01/pm_drive" is asset KGQ/F01, option pm_drive)
    from models.exports import _by_asset_and_option

    rows = pd.DataFrame({"project_id": ["KGQ/F01/pm_drive", "P1/ie4"], "npv_p50": [1.0, 2.0]})
    out = _by_asset_and_option(rows)
    assert out["asset_id"].tolist() == ["KGQ/F01", "P1"] and out["option_id"].tolist() == ["pm_drive", "ie4"]


def test_an_option_id_holding_a_slash_is_refused(tmp_path):
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    options = (tmp_path / "case" / "options.csv")
    src = (__import__("pathlib").Path(__file__).resolve().parents[1] / "data" / "defaults" / "options.csv")
    text = src.read_text(encoding="utf-8").replace("\nie4,", "\nie/4,", 1)
    assert "\nie/4," in text  # (the catalogue's IE4 row, renamed)
    options.write_text(text, encoding="utf-8")
    case, problems = load_case(folder)
    assert case is None and any(p.column == "option_id" and "must not contain '/'" in p.rule for p in problems)


def test_option_ids_differing_only_in_capitals_are_warned(tmp_path):
    import casebuilder as cb
    from models.case import load_case

    folder = cb.write_case(tmp_path / "case")
    src = (__import__("pathlib").Path(__file__).resolve().parents[1] / "data" / "defaults" / "options.csv")
    text = src.read_text(encoding="utf-8").replace("\nie4,", "\nIE3,", 1)  # beside the catalogue's own ie3
    assert "\nIE3," in text and "\nie3," in text
    (folder / "options.csv").write_text(text, encoding="utf-8")
    case, problems = load_case(folder)
    found = [p for p in problems if p.column == "option_id" and p.severity == "warning"]
    assert found and "differs only in capitals from 'ie3'" in found[0].rule, [str(p) for p in problems]


def test_a_file_set_is_written_all_or_none(tmp_path, monkeypatch):
    # a full disk at the third file: the folder keeps the earlier set whole and no temporary file behind
    import errno

    from models import exports

    out = tmp_path / "o"
    exports.write_file_set(out, [("a.csv", b"old a\n"), ("b.csv", b"old b\n"), ("sub/c.html", b"old c\n")])
    real, calls = exports._write_temp, []

    def full_at_the_third(path, data):
        calls.append(path.name)
        if len(calls) == 3:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(path, data)

    monkeypatch.setattr(exports, "_write_temp", full_at_the_third)
    try:
        exports.write_file_set(out, [("a.csv", b"new a\n"), ("b.csv", b"new b\n"), ("sub/c.html", b"new c\n")])
    except OSError as exc:
        assert exc.errno == errno.ENOSPC
    else:
        raise AssertionError("the full disk was not reported")
    assert calls == ["a.csv", "b.csv", "c.html"]
    assert {p.relative_to(out).as_posix(): p.read_bytes() for p in out.rglob("*") if p.is_file()} == {
        "a.csv": b"old a\n", "b.csv": b"old b\n", "sub/c.html": b"old c\n"}
    monkeypatch.setattr(exports, "_write_temp", real)
    written = exports.write_file_set(out, [("a.csv", b"new a\n"), ("sub/c.html", b"new c\n")])
    assert [p.name for p in written] == ["a.csv", "c.html"]
    assert (out / "a.csv").read_bytes() == b"new a\n" and (out / "b.csv").read_bytes() == b"old b\n"
