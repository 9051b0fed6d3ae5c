"""Dashboard services: physics cached per case, economics per assumptions, checked uploads, session isolation.

These tests run the real engine on a small slice of the invented demo case (seven of its motors, its two
sites, tariffs and profiles), which takes about a second, so the caching can be checked by counting calls.
"""

from __future__ import annotations

import base64
import csv
import io
import re
import shutil
import types
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dashboard import server, services
from models import scenario

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"
#: Motors of the demo kept in the small case: a throttled pump with a profile, a mixer on annual hours,
#: a sludge pump on a duty table, a crusher that can take a wound-field machine, a fan, a small fan
#: where the line-start PM options apply, and a booster pump.
SMALL_IDS = ("HRW-P01", "HRW-M01", "HRW-S01", "KGQ-CR01", "KGQ-F01", "HRW-V01", "KGQ-WP01")


def demo_rows(ids=SMALL_IDS) -> tuple[list[str], list[list[str]]]:
    """Header and the chosen rows of the demo's assets.csv."""
    with open(DEMO / "assets.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    return rows[0], [r for r in rows[1:] if r[0] in ids]


def csv_bytes(header: list[str], rows: list[list[str]]) -> bytes:
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows([header] + rows)
    return out.getvalue().encode("utf-8")


def write_small_case(folder: Path, ids=SMALL_IDS) -> Path:
    """A copy of the demo case with only ``ids`` in its asset register."""
    shutil.copytree(DEMO, folder)
    header, rows = demo_rows(ids)
    (folder / "assets.csv").write_bytes(csv_bytes(header, rows))
    return folder


def small_case_engine(tmp_path_factory, name: str, ids=SMALL_IDS) -> "services.Engine":
    """An engine whose default case is a copy of the demo with only ``ids`` (:func:`write_small_case`)."""
    eng = services.Engine(upload_root=tmp_path_factory.mktemp("uploads"))
    entry, problems = eng.set_default_case(write_small_case(tmp_path_factory.mktemp("cases") / name, ids))
    assert entry is not None, problems
    return eng


def data_url(data: bytes, mime: str = "text/csv") -> str:
    return f"data:{mime};base64," + base64.b64encode(data).decode("ascii")


class Counting:
    """Wraps an engine stage and counts its calls."""

    def __init__(self, fn):
        self.fn, self.calls = fn, 0

    def __call__(self, *args, **kwargs):
        self.calls += 1
        return self.fn(*args, **kwargs)


@pytest.fixture(scope="module")
def small_case_dir(tmp_path_factory) -> Path:
    return write_small_case(tmp_path_factory.mktemp("cases") / "small")


@pytest.fixture(scope="module")
def shared_engine(small_case_dir, tmp_path_factory):
    """One engine with the small case as default, physics computed once for the module."""
    physics, economics = Counting(scenario.physics), Counting(scenario.economics)
    engine = services.Engine(physics_fn=physics, economics_fn=economics,
                             upload_root=tmp_path_factory.mktemp("uploads"))
    entry, problems = engine.set_default_case(small_case_dir)
    assert entry is not None, problems
    engine.physics(entry.key)
    return engine, physics, economics


@pytest.fixture
def engine(shared_engine, monkeypatch):
    """The shared engine installed as the process engine for one test (restored afterwards)."""
    eng = shared_engine[0]
    monkeypatch.setattr(services, "_ENGINE", eng)
    return eng


# ---------------------------------------------------------------------------------------------------
# Caching
# ---------------------------------------------------------------------------------------------------
class TestCaching:
    def test_physics_runs_once_per_case(self, shared_engine):
        engine, physics, _ = shared_engine
        before = physics.calls
        first = engine.physics(engine.default_key)
        second = engine.physics(engine.default_key)
        assert first is second
        assert physics.calls == before  # computed in the fixture, never again

    def test_economics_cached_per_assumptions_and_physics_not_rerun(self, shared_engine):
        from dataclasses import replace

        engine, physics, economics = shared_engine
        base = engine.default_entry().case.finance
        n_phys, n_econ = physics.calls, economics.calls
        a = replace(base, discount_rate_frac=0.061)
        r1 = engine.result(engine.default_key, a)
        r2 = engine.result(engine.default_key, replace(base, discount_rate_frac=0.061))  # equal, new object
        assert r1 is r2
        assert economics.calls == n_econ + 1
        engine.result(engine.default_key, replace(base, discount_rate_frac=0.062))
        assert economics.calls == n_econ + 2
        assert physics.calls == n_phys

    def test_run_with_risk_serves_the_plain_ask(self, shared_engine):
        from dataclasses import replace

        engine, _, economics = shared_engine
        a = replace(engine.default_entry().case.finance, discount_rate_frac=0.071)
        n = economics.calls
        rich = engine.result(engine.default_key, a, with_risk=True)
        assert engine.result(engine.default_key, a) is rich
        assert economics.calls == n + 1
        assert not rich.tornado.empty

    def test_the_uncertainty_asked_after_the_plan_is_that_plans(self, shared_engine):
        # a live plan (bounded in time) shown first, its uncertainty asked for later: the plan is not solved
        # again (a second bounded solve may stop at another plan), the risk is added to the result shown
        from dataclasses import replace

        engine, _, economics = shared_engine
        a = replace(engine.default_entry().case.finance, discount_rate_frac=0.073)
        n = economics.calls
        shown = engine.result(engine.default_key, a)
        rich = engine.result(engine.default_key, a, with_risk=True)
        assert economics.calls == n + 1  # no second economics run
        assert rich.plan is shown.plan and rich.results is shown.results
        assert not rich.tornado.empty and len(rich.plan_npv_draws) == a.monte_carlo_draws
        assert engine.result(engine.default_key, a) is rich  # the plan page now gets the same result
        assert engine.result(engine.default_key, a, with_risk=True) is rich

    def test_assumption_edits_skip_risk(self, engine):
        v = services.view(None, {"case": engine.default_key, "discount_rate_pct": 5.5})
        result = v.result()
        assert result.tornado.empty and result.risk.empty  # risk is left to the risk page

    def test_live_edits_bound_the_plan_and_start_from_the_last_plan(self, small_case_dir, tmp_path):
        from dataclasses import replace

        seen = []

        def economics(*args, **kwargs):
            seen.append(kwargs["plan_settings"])
            return scenario.economics(*args, **kwargs)

        eng = services.Engine(economics_fn=economics, upload_root=tmp_path)
        entry, _ = eng.set_default_case(small_case_dir)
        base = entry.case.finance
        first = eng.result(entry.key, replace(base, discount_rate_frac=0.07))
        eng.result(entry.key, replace(base, discount_rate_frac=0.06))
        # Live asks use the live bound; the second starts from the first one's plan.
        assert seen[0].time_limit_s == scenario.LIVE_PLAN.time_limit_s and seen[0].start == ()
        assert set(seen[1].start) == set(zip(first.plan["asset_id"] + "/" + first.plan["option_id"],
                                             first.plan["start_yr"].astype(int)))
        assert first.plan_status["settings"] == seen[0]

    def test_a_precise_result_serves_later_live_asks(self, shared_engine):
        from dataclasses import replace

        engine, _, economics = shared_engine
        a = replace(engine.default_entry().case.finance, discount_rate_frac=0.0655)
        n = economics.calls
        proved = engine.result(engine.default_key, a, precise=True)
        assert proved.plan_status["settings"] == scenario.PRECISE_PLAN
        assert engine.result(engine.default_key, a) is proved
        assert economics.calls == n + 1

    def test_unknown_key_raises(self, shared_engine):
        with pytest.raises(KeyError):
            shared_engine[0].physics("0" * 32)


class TestContentKey:
    def test_same_files_same_key_and_one_byte_changes_it(self, tmp_path, small_case_dir):
        copy = tmp_path / "copy"
        shutil.copytree(small_case_dir, copy)
        assert services.content_key(copy) == services.content_key(small_case_dir)
        (copy / "assets.csv").write_bytes((copy / "assets.csv").read_bytes().replace(b"Raw water", b"Raw Water"))
        assert services.content_key(copy) != services.content_key(small_case_dir)

    def test_stray_files_do_not_count(self, tmp_path, small_case_dir):
        copy = tmp_path / "copy"
        shutil.copytree(small_case_dir, copy)
        (copy / "notes.txt").write_text("not part of the case")
        assert services.content_key(copy) == services.content_key(small_case_dir)


# ---------------------------------------------------------------------------------------------------
# Uploads
# ---------------------------------------------------------------------------------------------------
class TestFileNames:
    @pytest.mark.parametrize("name, safe", [
        ("assets.csv", "assets.csv"),
        ("../../etc/assets.csv", "assets.csv"),          # path components dropped
        ("C:\\Users\\me\\sites.csv", "sites.csv"),
        ("Case Book (2).xlsx", "Case Book (2).xlsx"),
        ("profiles.parquet", "profiles.parquet"),
    ])
    def test_accepted_names_lose_their_path(self, name, safe):
        assert services.check_file_name(name) == (safe, None)

    @pytest.mark.parametrize("name", [".hidden.csv", "run.exe", "assets.csv.exe", "model.pkl", "x" * 200 + ".csv",
                                      "", "..", "a;b.csv", "semi\x00.csv"])
    def test_refused_names(self, name):
        safe, problem = services.check_file_name(name)
        assert safe is None and problem is not None and problem.severity == "error"

    @pytest.mark.parametrize("name, where", [
        ("Assets.CSV", "assets.csv"), ("case.toml", "case.toml"), ("finance.toml", "finance.toml"),
        ("my_tariff.toml", "tariffs/my_tariff.toml"), ("profiles.parquet", "profiles.parquet"), ("book.xlsx", "book.xlsx"),
    ])
    def test_placement(self, name, where):
        assert services.place_in_case(name) == (where, None)

    def test_unknown_table_name_is_a_problem(self):
        where, problem = services.place_in_case("motors.csv")
        assert where is None and "assets.csv" in problem.hint


class TestUpload:
    def test_bad_upload_lists_problems_by_row_and_keeps_the_previous_case(self, engine):
        header, rows = demo_rows()
        rows[1][header.index("rated_p_kw")] = "-11"  # second data row = spreadsheet row 3
        n_cases = len(engine._cases)
        outcome = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        assert not outcome.ok and outcome.key is None
        hit = [p for p in outcome.problems if p["column"] == "rated_p_kw"]
        assert hit and hit[0]["file"] == "assets.csv" and hit[0]["row"] == 3 and hit[0]["value"] == "-11"
        assert set(services.PROBLEM_COLUMNS) <= set(hit[0])
        assert len(engine._cases) == n_cases
        # the session still sees the case it had
        assert services.view({"session": outcome.session, "case": None}, None).key == engine.default_key

    def test_every_refusal_says_the_previous_case_stays(self, engine):
        # an empty upload and one of too many files are refused before anything is read; the words say so
        empty = engine.accept_upload(None, None, [], [])
        many = services.MAX_UPLOAD_FILES + 1
        crowd = engine.accept_upload(None, None, [f"p{k}.csv" for k in range(many)], [data_url(b"a")] * many)
        for outcome in (empty, crowd):
            assert not outcome.ok and outcome.message.endswith("the previous case stays loaded.")
        assert crowd.message.startswith(f"Too many files ({many})")

    def test_bad_upload_leaves_no_folder_behind(self, engine):
        header, rows = demo_rows()
        rows[0][header.index("poles")] = "five"
        outcome = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        assert not outcome.ok
        folder = engine.upload_root() / f"session-{outcome.session}"
        assert not any(folder.glob("upload-*"))

    def test_good_upload_becomes_the_sessions_case_and_only_that_sessions(self, engine):
        header, rows = demo_rows(SMALL_IDS[:4])
        outcome = engine.accept_upload(None, engine.default_key, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        assert outcome.ok, outcome.problems
        assert outcome.key != engine.default_key
        mine = services.view({"session": outcome.session, "case": outcome.key}, None)
        other = services.view({"session": "f" * 32, "case": None}, None)
        assert sorted(mine.case.assets["asset_id"]) == sorted(SMALL_IDS[:4])
        assert sorted(other.case.assets["asset_id"]) == sorted(SMALL_IDS)
        # the upload's files sit in that session's own folder under the process's upload root
        root = engine.upload_root().resolve()
        assert mine.entry.files.resolve().is_relative_to(root / f"session-{outcome.session}")

    def test_two_sessions_with_different_uploads_see_their_own(self, engine):
        header, rows = demo_rows()
        a = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows[:2]))])
        b = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows[2:5]))])
        assert a.ok and b.ok and a.session != b.session and a.key != b.key
        va = services.view({"session": a.session, "case": a.key}, None)
        vb = services.view({"session": b.session, "case": b.key}, None)
        assert len(va.case.assets) == 2 and len(vb.case.assets) == 3
        # edits made for one case never leak into another
        edits = {"case": a.key, "discount_rate_pct": 3.0}
        assert services.view({"case": a.key}, edits).assumptions.discount_rate_frac == pytest.approx(0.03)
        assert services.view({"case": b.key}, edits).assumptions == vb.case.finance

    def test_identical_upload_reuses_the_cached_case_and_physics(self, engine, shared_engine):
        physics = shared_engine[1]
        n = physics.calls
        data = (engine.default_entry().files / "assets.csv").read_bytes()
        outcome = engine.accept_upload(None, engine.default_key, ["assets.csv"], [data_url(data)])
        assert outcome.ok and outcome.key == engine.default_key
        assert physics.calls == n

    def test_size_limit(self, engine, monkeypatch):
        monkeypatch.setattr(services, "MAX_UPLOAD_BYTES", 1000)
        outcome = engine.accept_upload(None, None, ["assets.csv"], [data_url(b"x" * 2000)])
        assert not outcome.ok and "limit" in outcome.message
        assert outcome.problems and outcome.problems[0]["rule"].startswith("uploads are limited")

    def test_refused_names_and_mixtures(self, engine):
        out = engine.accept_upload(None, None, ["../../model.pkl"], [data_url(b"\x80\x04")])
        assert not out.ok and "not accepted" in out.problems[0]["rule"]
        out = engine.accept_upload(None, None, ["book.xlsx", "assets.csv"], [data_url(b"PK"), data_url(b"a")])
        assert not out.ok and "alone" in out.problems[0]["rule"]
        out = engine.accept_upload(None, None, ["assets.csv"], ["data:text/csv;base64,@@not base64@@"])
        assert not out.ok and "base64" in out.problems[0]["rule"]
        out = engine.accept_upload(None, None, [], [])
        assert not out.ok

    def test_blank_template_workbook_is_refused_with_its_problems(self, engine):
        out = engine.accept_upload(None, None, ["blank.xlsx"], [data_url(services.blank_template_bytes())])
        assert not out.ok and "previous case stays loaded" in out.message
        assert any(p["file"].startswith("blank.xlsx") for p in out.problems)

    def test_workbook_that_reads_but_cannot_be_priced_is_refused(self, engine, tmp_path):
        from casebuilder import write_workbook  # a valid small case whose site has no tariff

        book = write_workbook(tmp_path / "case.xlsx").read_bytes()
        out = engine.accept_upload(None, None, ["case.xlsx"], [data_url(book)])
        assert not out.ok and "cannot be priced" in out.message
        assert any("tariff" in (p["rule"] or "") for p in out.problems)
        assert len([e for e in engine._cases.values() if e.case.settings.name == "Test case"]) == 0

    def test_malformed_session_id_is_replaced(self, engine):
        out = engine.accept_upload("../../etc", None, ["run.exe"], [data_url(b"")])
        assert len(out.session) == 32 and all(c in "0123456789abcdef" for c in out.session)

    def test_damaged_workbook_is_a_problem_not_a_traceback(self, engine):
        out = engine.accept_upload(None, None, ["case.xlsx"], [data_url(b"PK\x03\x04 not really a workbook")])
        assert not out.ok and out.problems and out.problems[0]["severity"] == "error"

    def test_oldest_upload_is_dropped_with_its_folder(self, small_case_dir, tmp_path, monkeypatch):
        eng = services.Engine(upload_root=tmp_path / "up", max_uploaded_cases=1)
        eng.set_default_case(small_case_dir)
        monkeypatch.setattr(services, "_ENGINE", eng)
        header, rows = demo_rows()
        a = eng.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows[:1]))])
        folder_a = eng.entry(a.key).owned_dir
        b = eng.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows[1:2]))])
        assert a.ok and b.ok
        assert eng.entry(a.key) is None and not folder_a.exists()
        fallback = services.view({"session": a.session, "case": a.key}, None)
        assert fallback.key == eng.default_key and "no longer held" in fallback.notice


class TestKeptRefusal:
    """What a tab keeps of its last upload (the Case & assumptions page shows it again when it opens)."""

    @staticmethod
    def rows(severities: str) -> list[dict]:
        """Problem rows, one per letter: e an error, w a warning (row numbers 2, 3, ... as a spreadsheet counts)."""
        return [{"severity": {"e": "error", "w": "warning"}[s], "file": "assets.csv", "row": 2 + i, "column": "x",
                 "value": "1", "rule": "r", "hint": ""} for i, s in enumerate(severities)]

    def test_a_refusal_is_kept_as_listed_and_an_accepted_upload_keeps_nothing(self):
        refused = services.UploadOutcome(False, "s", None, "The upload was refused.", self.rows("we"))
        assert services.refusal_to_keep(refused) == {"message": "The upload was refused.", "problems": self.rows("we")}
        accepted = services.UploadOutcome(True, "s", "key", "Loaded 'x'.", self.rows("w"))
        assert services.refusal_to_keep(accepted) is None

    def test_beyond_the_limit_errors_come_first_and_the_message_says_so(self):
        refused = services.UploadOutcome(False, "s", None, "2 errors in the upload.", self.rows("wwewe"))
        kept = services.refusal_to_keep(refused, max_rows=3)
        assert [(r["severity"], r["row"]) for r in kept["problems"]] == [("error", 4), ("error", 6), ("warning", 2)]
        assert kept["message"] == ("2 errors in the upload. Kept for this tab: the first 3 problems of 5 (errors first); "
                                   "upload the files again to list them all.")

    @pytest.mark.parametrize("data", [None, "x", {}, {"message": 1, "problems": []}, {"message": "m", "problems": "p"},
                                      {"message": "m", "problems": [1]}])
    def test_anything_else_in_session_storage_is_nothing_kept(self, data):
        assert services.kept_refusal(data) is None

    def test_a_kept_refusal_reads_back(self):
        kept = {"message": "m", "problems": self.rows("e")}
        assert services.kept_refusal(kept) == kept


# ---------------------------------------------------------------------------------------------------
# Assumption edits
# ---------------------------------------------------------------------------------------------------
class TestEdits:
    def test_percent_fields_become_fractions(self, engine):
        base = engine.default_entry().case.finance
        a = services.assumptions_with_edits(base, {"discount_rate_pct": 6.5, "escalation_energy_pct": 2.0,
                                                   "horizon_yr": 20, "budget_per_yr": [1e5, 5e4]})
        assert a.discount_rate_frac == pytest.approx(0.065, abs=1e-12)  # 6.5 % = 0.065 by definition
        assert a.escalation_energy_frac == pytest.approx(0.02, abs=1e-12)
        assert a.horizon_yr == 20 and a.budget_per_yr == (1e5, 5e4)
        assert a.capacitor_cost_per_kvar == base.capacitor_cost_per_kvar  # untouched fields kept

    def test_form_round_trip(self, engine):
        base = engine.default_entry().case.finance
        form = services.assumption_form(base)
        assert services.assumptions_with_edits(base, form) == base

    @pytest.mark.parametrize("fields, words", [
        ({"horizon_yr": 0}, "Horizon: must be a whole number of years from 1 to 100"),
        ({"horizon_yr": 12.5}, "whole number"), ({"discount_rate_pct": None}, "Discount rate: enter a number"),
        # the form's ranges (services.FORM_RANGES, a design choice): the Monte Carlo's +/-2-point rate draws stay above -100 %
        ({"discount_rate_pct": -150}, "between -20 and 100 %/yr"), ({"discount_rate_pct": 1e9}, "between -20 and 100"),
        ({"discount_rate_pct": -99.9}, "between -20 and 100"), ({"escalation_energy_pct": 99}, "between -50 and 50"),
        ({"energy_price_level_pct": 0}, "Electricity price level: must lie between 1 and 10,000 %"),
        ({"energy_price_level_pct": 1e9}, "Electricity price level: must lie between 1 and 10,000 %"),
        ({"capital_cost_level_pct": -5}, "Capital cost level: must lie between 1 and 10,000 %"),
        ({"escalation_energy_pct": float("nan")}, "finite"),
    ])
    def test_refused_edits_say_why_in_the_forms_words(self, engine, fields, words):
        edits, message = services.edit_assumptions(engine.default_key, engine.default_entry().case.finance, None, **fields)
        assert edits is None and words.lower() in message.lower()
        assert "_frac" not in message and "_pct" not in message  # no code names on the page

    def test_a_negative_discount_rate_is_applied_with_a_caution(self, engine):
        edits, message = services.edit_assumptions(engine.default_key, engine.default_entry().case.finance, None,
                                                   discount_rate_pct=-5)
        assert edits is not None and message == ""
        assert "negative discount rate" in services.assumption_notes(edits)
        assert services.assumption_notes({"discount_rate_pct": 5}) == ""

    def test_a_budget_longer_than_the_horizon_is_named(self, engine):
        # three budgeted plan years over a one-year horizon: a project started in year 1 or 2 saves nothing
        # within the study (docs/finance.md: more budget years than horizon_yr is warned); either field may be
        # the edited one, the other the case's own (the small case: 15 years, three budget years)
        own = engine.default_entry().case.finance
        assert own.horizon_yr == 15 and len(own.budget_per_yr) == 3
        note = services.assumption_notes({"horizon_yr": 1}, own)
        assert note == ("The budget has 3 plan years, more than the 1 year of the horizon: a project started in a "
                        "later year has no year left to save in.")
        assert "more than the 2 years" in services.assumption_notes({"budget_per_yr": [1.0] * 4, "horizon_yr": 2})
        assert services.assumption_notes({"horizon_yr": 3}, own) == ""

    def test_a_rate_that_looks_typed_as_a_fraction_or_that_runs_away_is_named(self, engine):
        # "0.08" is 0.08 % in a percent field: applied, with the reading said and the likely meaning offered
        note = services.assumption_notes({"discount_rate_pct": 0.08})
        assert "Applied as 0.08 % a year. If you meant 8 %, type 8" in note
        # -20 %/yr over 100 years counts the last year's flows 0.8^-100 = 1.25^100 = 4.91e9 times (hand calculation)
        note = services.assumption_notes({"discount_rate_pct": -20, "horizon_yr": 100})
        assert "counts the last year's flows 4.91e+09 times" in note
        assert "grow without bound" not in services.assumption_notes({"discount_rate_pct": -1, "horizon_yr": 20})
        # a decimal comma is answered with the number it most likely is
        edits, message = services.edit_assumptions(engine.default_key, engine.default_entry().case.finance, None,
                                                   discount_rate_pct=services.typed_number("8,5", True))
        assert edits is None and "enter a number with a decimal point (8.5)" in message

    def test_view_reports_a_bad_stored_edit_and_keeps_the_case_values(self, engine):
        v = services.view(None, {"case": engine.default_key, "horizon_yr": -3})
        assert v.assumptions == engine.default_entry().case.finance and "not applied" in v.notice

    def test_edits_change(self, engine):
        v = services.view(None, None)
        assert not services.edits_change(v, {"case": v.key, **services.assumption_form(v.assumptions)})
        assert services.edits_change(v, {"case": v.key, "discount_rate_pct": 1.0})

    @pytest.mark.parametrize("values, budget, words", [
        ([None] * 6, [], ""),
        ([100, 200, None, None], [100.0, 200.0], ""),
        ([100, None, 50], None, "Year 1 is blank"),
        ([100, -1], None, "zero or more"),
        (["abc"], None, "not a number"),
        (["250,000", "1 500.5", ""], [250000.0, 1500.5], ""),   # thousands separators as people type them
        (["1,5"], None, "not a number"),                        # a decimal comma is ambiguous: refused
        # a point grouping thousands, as many write 250,000 in a EUR case, would read as 250: refused, both
        # readings named (user report: the budget fell a thousandfold without a word)
        (["250.000"], None, "'250.000' is ambiguous: a point grouping thousands would make it 250000, a decimal "
                            "point 250.00"),
        (["1.250.000"], None, "'1.250.000' groups thousands with points: write 1250000"),
        (["2.5", "250.5", "1000.000001"], [2.5, 250.5, 1000.000001], ""),  # decimal points otherwise as written
        (["inf"], None, "a finite amount"),
        ([0, "", 10], None, "Year 1"),
    ])
    def test_parse_budget(self, values, budget, words):
        got, message = services.parse_budget(values)
        assert got == budget and words in message

    @pytest.mark.parametrize("typed, words", [
        ("1e99", "Year 0 budget [EUR]: 1e99 is above the largest budget the form takes, EUR 1,000,000,000,000 a year"),
        ("1000000000001", "Year 0 budget [EUR]: 1000000000001 is above"),
        ("-0.5", "Year 0 budget [EUR]: -0.5 is below zero; the budget must be zero or more."),
        ("nan", "Year 0 budget [EUR]: 'nan' is not an amount; the budget must be a finite amount"),
        ("-inf", "Year 0 budget [EUR]: '-inf' is not an amount"),
    ])
    def test_parse_budget_names_the_field_the_value_and_the_rule(self, typed, words):
        got, message = services.parse_budget([typed], "EUR")
        assert got is None and message.startswith(words)

    def test_parse_budget_takes_up_to_the_bound(self):
        # the bound itself is a budget (MAX_BUDGET_PER_YR = 1e12, written out)
        assert services.parse_budget(["1,000,000,000,000", 0], "EUR") == ([1e12, 0.0], "")

    def test_hints_name_the_pages_template_button(self):
        hint = services.dashboard_hint("add sites.csv (or a sheet 'sites'); 'drivecase new' writes a template")
        assert hint == ("add sites.csv (or a sheet 'sites'); the 'Download a blank case workbook' button of the "
                        "Case & assumptions page gives a template (one sheet per table)")
        assert "drivecase new" not in services.dashboard_hint("start from the workbook written by 'drivecase new --workbook'")
        assert services.dashboard_hint("add the site or correct the id") == "add the site or correct the id"
        assert services.dashboard_hint(None) is None


# ---------------------------------------------------------------------------------------------------
# Page data
# ---------------------------------------------------------------------------------------------------
class TestPageData:
    def test_headline_adds_up_the_plan(self, engine):
        v = services.view(None, None)
        r = v.result()
        h = services.headline(r)
        # invariant: the cards are the plan's own totals
        assert h["plan_capital"] == pytest.approx(r.plan["capital"].sum(), rel=1e-12)
        assert h["plan_npv"] == pytest.approx(r.plan["npv_at_plan_start"].sum(), rel=1e-12)
        assert h["projects"] == len(r.plan)

    def test_ranked_assets_one_row_per_asset_best_first_and_filters(self, engine):
        v = services.view(None, None)
        r = v.result()
        table = services.ranked_assets(v, r)
        assert sorted(table["asset_id"]) == sorted(SMALL_IDS)
        assert list(table["npv"]) == sorted(table["npv"], reverse=True)
        assert list(table["rank"]) == list(range(1, len(table) + 1))
        only = services.ranked_assets(v, r, sites=["KGQ"], applications=["fan"])
        assert list(only["asset_id"]) == ["KGQ-F01"]
        # what the plan buys: its rows' capital adds up to the headline's plan capital
        assert table["plan_capital"].sum() == pytest.approx(services.headline(r)["plan_capital"], rel=1e-12)
        labels = r.results.drop_duplicates("option_id").set_index("option_id")["label"]
        for p in r.plan.itertuples():
            row = table.set_index("asset_id").loc[p.asset_id]
            assert row["plan_option"] == labels[p.option_id] and row["plan_year"] == p.start_yr
        # an asset the plan leaves out says why: its value taken by the plan's other projects, or the budget
        out_of_plan = table[table["plan_year"].isna()]
        status = r.plan_status or {}
        taken = set(status.get("withdrawn", ())) | set(status.get("set_aside", ()))
        for row in out_of_plan.itertuples():
            if f"{row.asset_id}/{row.option_id}" in taken:
                assert row.plan_option == "nothing: its value is taken by the plan's other projects"
            elif row.capital > 0 and row.npv > 0:
                assert row.plan_option == "nothing: outside the budget"
            else:
                assert row.plan_option == ""

    def test_ratings_in_hp_when_the_case_says_so(self):
        # 1 hp = 0.745699872 kW (NIST SP 811 (2008) Appendix B.9)
        assert services.rating_in_unit(0.745699872, "hp") == pytest.approx(1.0, rel=1e-12)
        assert services.rating_in_unit(75.0, "kW") == 75.0
        assert services.power_label("hp") == "hp" and services.power_label("kW") == "kW"

    def test_ranked_table_in_hp_for_a_hp_case(self, engine):
        from dataclasses import replace

        v = services.view(None, None)
        case_hp = replace(v.case, settings=replace(v.case.settings, power_unit="hp"))
        v_hp = services.View(replace(v.entry, case=case_hp), v.assumptions)
        kw = services.ranked_assets(v, v.result()).set_index("asset_id")["rating"]
        hp = services.ranked_assets(v_hp, v.result()).set_index("asset_id")["rating"]
        # demo HRW-P01 is rated 250 kW (data/demo/assets.csv); 250 / 0.745699872 = 335.25 hp (NIST SP 811 B.9)
        assert kw["HRW-P01"] == pytest.approx(250.0, rel=1e-12)
        assert hp["HRW-P01"] == pytest.approx(335.2555, rel=1e-6)  # hand calculation: 250 / 0.745699872
        assert v_hp.power_unit == "hp"

    def test_asset_views(self, engine):
        v = services.view(None, None)
        r = v.result()
        options = services.asset_options(v, r, "HRW-V01")
        assert {"lspm", "lspm_trim"} <= set(options["option_id"])  # the PM pair with and without trim
        # the options grid's payback cell says "then lost again" from the engine's discounted flag (PAYBACK_TEXT)
        own = r.results[r.results["asset_id"] == "HRW-V01"].set_index("option_id")["discounted_payback_lost_again"]
        assert options.set_index("option_id")["payback_lost_again"].to_dict() == own.reindex(options["option_id"]).to_dict()
        trim = options.set_index("option_id").loc["lspm_trim", "speed_remedy"]
        assert trim == "impeller trim or pulley"  # the remedy in words, not its code name
        assert "line-start PM motor" in set(options["technology"])
        curves = services.asset_cumulative_cash(v, r, "HRW-V01")
        assert curves.groupby("label")["year"].max().eq(r.assumptions.horizon_yr).all()
        hours, basis = services.asset_load_hours(v, "HRW-S01")
        # duty table of the demo: 1800 h at 85 % and 1400 h at 60 % (data/demo/duty.csv); 0 % is stopped
        assert hours["hours_per_yr"].sum() == pytest.approx(3200.0, rel=1e-9)
        assert "duty" in basis
        score, defaults, flags = services.asset_quality(v, r, "HRW-P01")
        assert 0 <= score <= 100 and set(defaults.columns) == {"field", "column", "value", "basis", "score_effect"}
        # each default's effect as models.defaults.QUALITY_PENALTY_PCT scores it (rated efficiency 25 points, the
        # kind of machine installed not scored), so a score of 100 % beside defaults is read rightly
        effect = dict(zip(defaults["column"], defaults["score_effect"]))
        assert all(e == "not scored" or e.endswith(" points") for e in effect.values())
        if "rated_efficiency_pct" in effect:
            assert effect["rated_efficiency_pct"] == "-25 points"
        if "machine_type" in effect:
            assert effect["machine_type"] == "not scored"
        numbers = [v for v in defaults["value"] if v.replace(".", "", 1).replace("-", "", 1).isdigit()]
        assert numbers and all(len(v.replace("-", "").replace(".", "")) <= 6 for v in numbers)  # 6 significant digits

    def test_site_views(self, engine):
        v = services.view(None, None)
        r = v.result()
        meters = services.site_meters(v, r)
        assert set(meters) == {"HRW", "KGQ"}
        week = services.week_slice(meters["HRW"], None)
        assert len(week["before"]) == 7 * 24  # hourly analysis year: 168 intervals in a week
        curve = services.pf_duration(meters["HRW"], 1.0)
        assert curve.groupby("scenario")["power_factor"].apply(lambda s: s.is_monotonic_increasing).all()
        # the leading hours are the meter's intervals with kVAr below zero (hourly: one hour each)
        for name, frame in meters["HRW"].items():
            led = curve.loc[curve["scenario"] == name, "leading_h"]
            assert (led == float((frame["q_kvar"] < 0).sum())).all()
        balance = services.reactive_balance(v, r, "KGQ", meters["KGQ"])
        net = balance.set_index(["scenario", "source"])["q_kvar"]
        parts = balance[balance["source"] != "Net at the meter"].groupby("scenario")["q_kvar"].sum()
        # invariant: the sources add up to the net at the meter
        assert parts["before"] == pytest.approx(net[("before", "Net at the meter")], rel=1e-9, abs=1e-6)
        assert (balance.loc[balance["source"] == "Capacitor banks", "q_kvar"] <= 0).all()  # banks lead
        bills = services.monthly_bills(r, "HRW")
        assert set(bills["scenario"]) == {"before", "after"} and bills["month"].nunique() == 12

    def test_plan_tables(self, engine):
        v = services.view(None, {"case": engine.default_key, "budget_per_yr": [20000.0, 10000.0]})
        t = services.plan_tables(v, v.result())
        exact = t["by_year"][t["by_year"]["plan"] == "exact"]
        assert (exact["capital"].to_numpy() <= exact["budget"].to_numpy() + 1e-6).all()

    def test_risk_rows_have_labels(self, engine):
        v = services.view(None, None)
        rows = services.risk_rows(v.result(with_risk=True))
        assert len(rows) and rows["label"].notna().all()
        assert list(rows["npv_p50"]) == sorted(rows["npv_p50"], reverse=True)

    def test_risk_summary_of_the_plan_names_its_percentiles(self, engine):
        v = services.view(None, None)
        r = v.result(with_risk=True)
        text = services.risk_summary_text(r, "plan", "EUR")
        # the P50 printed is the median of the plan's draws (numpy.median as reference), to three significant
        # figures as the chart labels it (a percentile of draws carries no more)
        assert f"P50 EUR {float(f'{np.median(r.plan_npv_draws):.3g}'):,.0f}" in text
        assert text.startswith(f"{len(r.plan)} projects of the capital plan")
        assert "P(NPV > 0)" in text and f"seed {r.assumptions.monte_carlo_seed}" in text
        assert services.npv_draws(r, "plan") is not None and len(services.npv_draws(r, "best")) == len(r.fleet_npv_draws)
        with pytest.raises(ValueError, match="unknown scope"):
            services.risk_rows(r, "everything")

    def test_risk_summary_of_an_empty_plan_says_so(self, engine):
        v = services.view(None, {"case": engine.default_key, "budget_per_yr": [0.0]})
        r = v.result(with_risk=True)
        assert r.plan.empty and r.plan_npv_draws.size == 0
        assert "holds no project under this budget" in services.risk_summary_text(r, "plan", "EUR")
        assert services.risk_rows(r, "plan").empty
        assert services.tornado_rows(r, "plan").empty

    def test_blank_template_is_a_workbook(self):
        from openpyxl import load_workbook

        data = services.blank_template_bytes()
        assert data[:2] == b"PK"
        book = load_workbook(io.BytesIO(data))
        assert {"assets", "sites", "case"} <= set(book.sheetnames)


# ---------------------------------------------------------------------------------------------------
# Server start-up
# ---------------------------------------------------------------------------------------------------
class TestServer:
    @pytest.mark.parametrize("host", ["127.0.0.1", "127.3.2.1", "::1", "[::1]", "localhost", "LOCALHOST"])
    def test_loopback_hosts_give_no_warning(self, host):
        assert server.is_loopback(host) and server.network_warning(host) is None

    @pytest.mark.parametrize("host", ["0.0.0.0", "::", "192.168.1.20", "10.0.0.5", "example.org", ""])
    def test_other_hosts_warn(self, host):
        text = server.network_warning(host)
        assert not server.is_loopback(host)
        assert text and "reachable from the network" in text and "no login" in text

    def test_url(self):
        assert server.url_for("127.0.0.1", 8050) == "http://127.0.0.1:8050"
        assert server.url_for("::1", 8050) == "http://[::1]:8050"

    def test_no_display_no_browser(self, monkeypatch):
        monkeypatch.setattr(server.sys, "platform", "linux")
        monkeypatch.delenv("DISPLAY", raising=False)
        monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
        assert not server.can_open_browser()

    def test_missing_case_prints_problems_and_returns_1(self, tmp_path, capsys, monkeypatch):
        monkeypatch.setattr(services, "_ENGINE", None)
        assert server.serve(tmp_path / "no-such-case", open_browser=False) == 1
        out = capsys.readouterr().out
        assert "cannot be opened" in out and "does not exist" in out and "Traceback" not in out

    def test_broken_case_prints_row_level_problems(self, tmp_path, capsys, monkeypatch):
        monkeypatch.setattr(services, "_ENGINE", None)
        case = write_small_case(tmp_path / "broken")
        header, rows = demo_rows()
        rows[0][header.index("rated_p_kw")] = "-5"
        (case / "assets.csv").write_bytes(csv_bytes(header, rows))
        assert server.serve(case, host="0.0.0.0", open_browser=False) == 1
        out = capsys.readouterr().out
        assert "row 2" in out and "rated_p_kw" in out

    def test_a_case_without_tariffs_is_not_served(self, tmp_path, capsys, monkeypatch):
        # casebuilder's small case has no tariffs/: it is read (with a warning) but no page could price it
        import casebuilder as cb

        monkeypatch.setattr(services, "_ENGINE", None)
        assert server.serve(cb.write_case(tmp_path / "c"), open_browser=False) == 1
        captured = capsys.readouterr()
        assert "cannot be priced: no tariff for site S1" in captured.err and "Dashboard on" not in captured.out

    def test_busy_port_returns_1_with_one_clear_message(self, small_case_dir, capsys, monkeypatch):
        import socket

        monkeypatch.setattr(services, "_ENGINE", None)
        with socket.socket() as busy:
            busy.bind(("127.0.0.1", 0))
            busy.listen(1)
            port = busy.getsockname()[1]
            assert server.serve(small_case_dir, port=port, open_browser=False) == 1
        captured = capsys.readouterr()
        # checked before the server starts: no "Dashboard on" line that would say it runs, one error naming the port
        assert "Dashboard on" not in captured.out
        assert "WARNING" not in captured.out  # loopback by default: no network warning
        assert f"cannot listen on http://127.0.0.1:{port}" in captured.err and "--port" in captured.err
        assert ": 1" not in captured.err
        assert server.port_in_use("127.0.0.1", port) is None  # free again once its holder closed it


    def test_an_address_that_is_not_this_computers_is_not_blamed_on_the_port(self, small_case_dir, capsys, monkeypatch):
        # 999.1.1.1 is no address at all: the message names the address, not another program on the port
        monkeypatch.setattr(services, "_ENGINE", None)
        assert server.serve(small_case_dir, host="999.1.1.1", port=8765, open_browser=False) == 1
        err = capsys.readouterr().err
        assert "the address '999.1.1.1' cannot be resolved" in err and "give --host an address of this computer" in err
        assert "Another program" not in err


@pytest.fixture(scope="module")
def demo_entry():
    """The demo case as the engine holds it: its key and case."""
    from models.case import load_case

    case, _ = load_case(Path(__file__).resolve().parents[1] / "data" / "demo")
    return types.SimpleNamespace(key="demo", case=case)


class TestWarmCase:
    """The analysis run ahead of the first page (dashboard.server.warm_case)."""

    def test_a_large_case_is_announced_with_its_estimate_and_its_end_said(self, demo_entry, capsys):
        demo = demo_entry
        asked = []
        fake = types.SimpleNamespace(physics=lambda key: asked.append(("physics", key)),
                                     result=lambda key, finance, **kw: asked.append(("result", key, kw)))
        server.warm_case(fake, demo, notice_s=0.0)  # every case counts as large
        out = capsys.readouterr().out.splitlines()
        assert out[0].startswith("Analysing the case in the background (82 assets x 11 options x 8,760 steps")
        assert out[0].endswith("its pages fill in when it is done.")
        assert re.fullmatch(r"Analysis done in \d+ s\.", out[1])
        # the physics, then the case's own result as the first page asks for it
        assert asked == [("physics", "demo"), ("result", "demo", {"with_risk": True, "precise": True})]

    def test_a_small_case_says_nothing_and_a_failure_is_said_once(self, demo_entry, capsys):
        demo = demo_entry
        fake = types.SimpleNamespace(physics=lambda key: None, result=lambda *a, **k: None)
        server.warm_case(fake, demo)  # the demo is estimated at a few seconds, below WARM_NOTICE_S
        assert capsys.readouterr().out == ""

        def broken(key):
            raise ValueError("no tariff")

        server.warm_case(types.SimpleNamespace(physics=broken, result=None), demo, notice_s=0.0)
        captured = capsys.readouterr()
        assert "drivecase serve: the analysis of the case failed: no tariff" in captured.err
        assert "Analysis done" not in captured.out


def test_pack_download_holds_the_workbook_report_and_records(engine):
    """The plan page's download: one zip with the workbook, the report and a decision record per project."""
    import zipfile

    view_ = services.view(None, None)
    data = services.pack_zip_bytes(view_)
    names = zipfile.ZipFile(io.BytesIO(data)).namelist()
    assert "capital-request.xlsx" in names and "capital-request.html" in names
    records = [n for n in names if n.startswith("decision-records/")]
    assert len(records) == len(view_.result(with_risk=True).plan)


def _plan_result(status, gap, settings):
    """A stand-in result carrying only the plan's solve status."""
    return types.SimpleNamespace(plan_status={"status": status, "message": "m", "gap_frac": gap, "settings": settings})


class TestPlanSolveText:
    result = staticmethod(_plan_result)

    def test_live_stop_says_it_was_a_live_edit_and_the_gap(self):
        text = services.plan_solve_text(self.result("time_limit", 0.0042, scenario.LIVE_PLAN))
        assert "live edit" in text and "0.42 %" in text and "Prove" in text

    def test_proven_and_optimal(self):
        assert "proven optimal" in services.plan_solve_text(self.result("optimal", 0.0, scenario.PRECISE_PLAN))
        text = services.plan_solve_text(self.result("optimal", 0.00009, scenario.PRECISE_PLAN))
        assert "0.009 %" in text and "live" not in text

    def test_a_plan_kept_from_before_a_live_edit_says_so_and_asks_for_the_proof(self):
        text = services.plan_solve_text(self.result("kept", float("nan"), scenario.LIVE_PLAN))
        assert "still fits every budget" in text and "so it is kept" in text and "Prove" in text
        assert services.plan_notice(self.result("kept", float("nan"), scenario.LIVE_PLAN)) != ""
        assert not services.plan_is_proven(self.result("kept", float("nan"), scenario.LIVE_PLAN))

    def test_unknown_bound_and_failure(self):
        assert "no bound" in services.plan_solve_text(self.result("optimal", float("nan"), scenario.PRECISE_PLAN))
        assert "rank-order plan stands" in services.plan_solve_text(self.result("failed", float("nan"), None))

    def test_withdrawn_reactive_projects_are_named_as_the_tables_name_them(self):
        # user report: the Capital plan page named a withdrawn project "HRW-A01/capacitor", the internal key; it
        # reads "HRW-A01: <the option's label in the catalogue>" (data/defaults/options.csv)
        result = self.result("optimal", 0.0, scenario.PRECISE_PLAN)
        result.plan_status.update(withdrawn=("HRW-A01/capacitor",), set_aside=("HRW-A02/capacitor",))
        result.results = pd.DataFrame({"asset_id": ["HRW-A01", "HRW-A02"], "option_id": ["capacitor", "capacitor"],
                                       "label": ["Motor-terminal capacitor"] * 2})
        text = services.plan_solve_text(result)
        assert "(HRW-A01: Motor-terminal capacitor)" in text and "/capacitor" not in text


class TestPlanNotice:
    result = staticmethod(_plan_result)

    def test_a_live_plan_short_of_the_full_gap_is_flagged(self):
        text = services.plan_notice(self.result("time_limit", 0.013, scenario.LIVE_PLAN))
        assert "1.3 %" in text and "Capital plan" in text
        assert "0.05 %" in services.plan_notice(self.result("optimal", 0.0005, scenario.LIVE_PLAN))

    def test_proven_plans_say_nothing(self):
        assert services.plan_notice(self.result("optimal", 0.00005, scenario.LIVE_PLAN)) == ""
        assert services.plan_notice(self.result("time_limit", 0.02, scenario.PRECISE_PLAN)) == ""
        assert services.plan_notice(types.SimpleNamespace(plan_status={})) == ""


def test_the_unedited_case_shows_the_plan_the_pack_gives(engine):
    # before any edit the dashboard's plan is the precisely solved one, as `drivecase report` and `run` give
    from models import scenario

    view = services.view(None, None)
    shown = view.result()
    entry = engine.default_entry()
    reference = scenario.economics(entry.case, engine.physics(engine.default_key), entry.case.finance,
                                   with_risk=False, plan_settings=scenario.PRECISE_PLAN)
    key = ["asset_id", "option_id"]
    assert shown.plan[key].sort_values(key).values.tolist() == reference.plan[key].sort_values(key).values.tolist()
    assert services.plan_notice(shown) == ""  # no "solved for a live edit" notice before any edit
    assert not services._live(shown.plan_status.get("settings"))  # solved with the full run's settings


def test_plan_bill_saving_alone_splits_the_plan_by_site(engine):
    # the per-site sums of the plan's projects priced alone add up to the plan's bill saving (engine table)
    view = services.view(None, None)
    result = view.result()
    sites = set(result.results["site_id"])
    total = sum(services.plan_bill_saving_alone(result, s) for s in sites)
    chosen = result.results.merge(result.plan[["asset_id", "option_id"]], on=["asset_id", "option_id"])
    assert total == pytest.approx(float(chosen["bill_saving_per_yr"].sum()), rel=1e-12)
    assert services.plan_bill_saving_alone(result, "no such site") == 0.0


def test_a_plan_whose_budget_years_pass_the_horizon_is_cautioned():
    # User report: a 1-year horizon with 3 budget years put 50 of 66 projects after the study period, with no
    # caution. The plan page's solve text and the Fleet notice say so; the case check warns (models.case).
    import types

    from models.finance import FinanceAssumptions

    short = types.SimpleNamespace(plan_status={"status": "optimal", "gap_frac": 0.0, "settings": scenario.PRECISE_PLAN},
                                  assumptions=FinanceAssumptions(horizon_yr=1, budget_per_yr=(1.0, 2.0, 3.0)))
    text = services.plan_solve_text(short)
    assert "The plan has 3 budget years but the study horizon is 1 year" in text
    assert "The plan has 3 budget years" in services.plan_notice(short)
    fine = types.SimpleNamespace(plan_status=short.plan_status,
                                 assumptions=FinanceAssumptions(horizon_yr=15, budget_per_yr=(1.0, 2.0, 3.0)))
    assert "budget years" not in services.plan_solve_text(fine) and services.plan_notice(fine) == ""


def test_a_motor_no_option_fits_is_explained_on_its_page_and_in_the_fleet_table(tmp_path):
    # User report: a 0.37 kW motor, below every catalogue option's range (data/defaults/options.csv starts at
    # 0.75 kW), showed "Keep as is" with NPV 0 and no word why. Its page and the Fleet table's "plan buys"
    # column now say no option applies, and why.
    import types

    import casebuilder as cb
    from models import scenario
    from models.case import load_case

    assets = [list(row) for row in cb.ASSETS]
    assets[1][4] = "0.37"  # F1: 0.37 kW
    assets[1][9] = "70"  # (a rated efficiency of its size)
    folder = cb.with_flat_tariff(cb.write_case(tmp_path / "case", assets=assets))
    case, problems = load_case(folder)
    assert case is not None, problems
    result = scenario.run(case, case.finance, with_risk=False)
    left_out = dict(scenario.options_left_out(result, "F1"))
    assert left_out.get("rating below the option's range", 0) >= 1
    assert scenario.options_left_out(result, "P1") == []
    text = services.no_option_text(result, "F1")
    assert text.startswith("No option of the catalogue applies to this motor, so it is kept as it is: rating below "
                           "the option's range (")
    assert services.no_option_text(result, "P1") == ""
    best = result.results[result.results["best_for_asset"].to_numpy(dtype=bool)].reset_index(drop=True)
    bought = np.array([""] * len(best), dtype=object)
    why = dict(zip(best["asset_id"], services._plan_buys(result, best, bought)))
    assert why["F1"] == "nothing: no option of the catalogue applies (see the asset's page)"
    assert why["P1"] != why["F1"]


def test_abatement_projects_are_named_by_their_option_s_label():
    # the abatement curve's frame has project_id ("asset/option") and asset_id, no option_id: its hover names the
    # option's label, not the raw ids; the option is read from the project id after the asset's id, so an asset id
    # with a "/" keeps its option
    from types import SimpleNamespace

    result = SimpleNamespace(results=pd.DataFrame({"option_id": ["pm_drive", "lspm"],
                                                   "label": ["PM motor on a drive", "Line-start PM motor"]}))
    frame = pd.DataFrame({"project_id": ["HRW-M01/pm_drive", "A/B/lspm"], "asset_id": ["HRW-M01", "A/B"]})
    got = services.with_option_labels(frame, result)
    assert got["label"].tolist() == ["PM motor on a drive", "Line-start PM motor"]


def test_the_site_page_sets_the_model_beside_an_uploaded_bill_history(engine):
    # a bill history uploaded with the case (docs/calibration.md): the Site meter page says each quantity's fit
    # in words; a site without bills says nothing. Two hand-written bills of HRW, energy only.
    data = b"site_id,month,energy_kwh\nHRW,2024-01,100000\nHRW,2024-02,90000\n"
    outcome = engine.accept_upload(None, engine.default_key, ["bill_history.csv"], [data_url(data)])
    assert outcome.ok, outcome.problems
    view = services.view({"session": outcome.session, "case": outcome.key}, None)
    assert len(view.case.bill_history) == 2
    lines = services.site_calibration_text(view, "HRW")
    # the statistics by their formulas (docs/calibration.md, ASHRAE Guideline 14-2014: errors billed - modelled,
    # n - p = 1 for two bills), from the months the page sets side by side
    months = services.site_bill_months(view, "HRW")
    assert months["billed"].tolist() == [100000.0, 90000.0]  # as uploaded
    err = months["billed"].to_numpy(dtype=float) - months["modelled"].to_numpy(dtype=float)
    mean = 95000.0
    nmbe, cv = err.sum() / (1 * mean) * 100.0, np.sqrt((err ** 2).sum() / 1) / mean * 100.0
    verdict = "within" if abs(nmbe) <= 5.0 and cv <= 15.0 else "outside"
    modelled = months["modelled"].sum()
    bias = 100.0 * (modelled - 190000.0) / 190000.0
    assert lines == [f"energy: the model reads {abs(bias):.1f} % {'above' if bias > 0 else 'below'} the bills over 2 "
                     f"months, {verdict} the criteria (mean error NMBE {nmbe:+.2f} %, month-to-month scatter CV(RMSE) "
                     f"{cv:.2f} %)"]
    assert services.site_calibration_text(view, "KGQ") == []
    # the default case (a copy of the demo, whose bill history gives energy, peak, kVArh and totals for HRW)
    assert len(services.site_calibration_text(services.view(None, None), "HRW")) == 4


def test_a_scenarios_file_uploads_beside_the_case_and_is_kept_with_other_uploads(tmp_path_factory):
    # scenarios.toml is a settings file of the case (not a tariff): an upload of it replaces the case's, and a table
    # uploaded later keeps it (keep the case's other files)
    eng = small_case_engine(tmp_path_factory, "scen")
    text = b'[[scenarios]]\nname = "Long view"\nhorizon_yr = 25\n'
    up = eng.accept_upload(None, eng.default_key, ["scenarios.toml"], [data_url(text, "text/plain")], keep_other_files=True)
    assert up.ok, up.message
    assert [n for n, _ in eng.entry(up.key).case.scenarios] == ["Long view"]
    header, rows = demo_rows(SMALL_IDS[:3])
    again = eng.accept_upload(up.session, up.key, ["assets.csv"], [data_url(csv_bytes(header, rows))], keep_other_files=True)
    assert again.ok, again.message
    assert [n for n, _ in eng.entry(again.key).case.scenarios] == ["Long view"]


def test_the_content_key_hashes_each_file_as_its_name_size_and_bytes(tmp_path):
    # read in blocks, the key is the one of the whole bytes: sha256 over name, NUL, size, NUL, bytes per file
    # (hashlib as reference), here for a file longer than one block
    import hashlib

    from dashboard import services

    folder = tmp_path / "case"
    folder.mkdir()
    data = bytes(range(256)) * 8192 + b"tail"  # 2 MiB and 4 bytes
    (folder / "profiles.parquet").write_bytes(data)
    (folder / "assets.csv").write_text("asset_id\nA1\n", encoding="utf-8")
    assert sorted(p.name for p in services.case_files(folder)) == ["assets.csv", "profiles.parquet"]
    digest = hashlib.sha256()
    for name in [p.name for p in services.case_files(folder)]:
        body = (folder / name).read_bytes()
        digest.update(name.encode() + b"\0" + str(len(body)).encode() + b"\0" + body)
    assert services.content_key(folder) == digest.hexdigest()[:32]


def test_the_dashboards_physics_keeps_within_the_free_memory(monkeypatch):
    # as drivecase run: the budgets of models.estimate.memory_plan where the defaults would not fit the machine's free
    # memory (the demo's defaults keep every option's per-interval power: about 0.74 GiB estimated, more than 80 % of
    # 1 GiB), the defaults where they fit (8 GiB free)
    from models import estimate
    from models.case import load_case

    case, _ = load_case(DEMO)
    given = []
    monkeypatch.setattr(scenario, "physics", lambda case, cost, budgets=None: given.append(budgets) or "physics")
    for free_gib in (1, 8):
        monkeypatch.setattr(estimate, "available_bytes", lambda: free_gib * 2**30)
        assert services.physics_within_free_memory(case, 40.0) == "physics"
    assert given[0] is not None and given[0] != estimate.default_budgets() and given[1] is None
    assert services.Engine()._physics_fn is services.physics_within_free_memory


def test_the_asset_page_says_the_best_option_alone_and_what_the_plan_buys(engine):
    # the owner of one motor reads the answer on its page, as the fleet table gives it
    v = services.view(None, None)
    r = v.result()
    best = r.results[r.results["best_for_asset"]].set_index("asset_id")
    planned = r.plan.set_index("asset_id")
    inside = next(a for a in best.index if a in planned.index)
    text = services.asset_choice_text(r, inside, v.currency)
    p = planned.loc[inside]
    label = r.results.set_index(["asset_id", "option_id"]).loc[(inside, p["option_id"]), "label"]
    assert f"The budgeted plan buys: {label}, in plan year {int(p['start_yr'])}" in text
    top = best.loc[inside]
    if top["technology"] != "existing":
        assert f"Best option priced alone: {top['label']} (NPV {v.currency} {top['npv']:,.0f})" in text
    outside = [a for a in best.index if a not in planned.index]
    for a in outside:
        assert "The budgeted plan buys nothing for it" in services.asset_choice_text(r, a, v.currency)
    assert services.asset_choice_text(r, "NO-SUCH-ASSET", v.currency) == ""


def test_the_asset_page_says_when_a_motor_replaced_at_failure_is_bought(demo_run_physics):
    # With replacement at failure a project enters the plan in one year and its motor is bought when today's
    # motor fails: the page names both years, as the plan page counts the capital in the second.
    from dataclasses import replace

    from models import scenario

    case, phys = demo_run_physics
    r = scenario.economics(case, phys, replace(case.finance, replacement_mode="replace_at_failure"), with_risk=False)
    spend = np.asarray(r.capital_spend_by_year)
    labels = scenario.project_labels(r.results).to_numpy(dtype=object)
    later = [(a, int(s), int(np.flatnonzero(spend[list(labels).index(f"{a}/{o}")] > 0.005)[0]))
             for a, o, s in zip(r.plan["asset_id"], r.plan["option_id"], r.plan["start_yr"])
             if np.flatnonzero(spend[list(labels).index(f"{a}/{o}")] > 0.005)[0] > 0]
    assert later  # the demo's plan holds such projects under this timing
    asset_id, start, wait = later[0]
    text = services.asset_choice_text(r, asset_id, "EUR")
    assert (f"entered in plan year {start} and bought when today's motor fails, expected in plan year "
            f"{start + wait}") in text
    # the Fleet table says the same: the plan year and the plan year it is bought, each project's first outlay
    # (read above from the capital by project year), and shows that column only when some purchase is later
    table = services.ranked_assets(types.SimpleNamespace(case=case, power_unit="kW"), r).set_index("asset_id")
    for a, s_, w in later:
        assert table.loc[a, "plan_year"] == s_ and table.loc[a, "plan_bought_yr"] == s_ + w
        assert table.loc[a, "plan_option"].endswith(f", bought when today's motor fails (plan year {s_ + w})")
    on_time = [a for a, s_ in zip(r.plan["asset_id"], r.plan["start_yr"]) if a not in {x[0] for x in later}]
    assert all(table.loc[a, "plan_bought_yr"] == table.loc[a, "plan_year"] for a in on_time)
    assert not any("bought when" in str(table.loc[a, "plan_option"]) for a in on_time)
