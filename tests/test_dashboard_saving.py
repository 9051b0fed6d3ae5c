"""Saving a tab's assumptions into its case from the dashboard (services and the page callback).

Each test gets its own copy of a slice of the invented demo case in a temporary folder (the repository's
demo is never written) and its own engine. Saving needs no machine run, so most tests never compute one;
the carry-over test runs the slice's physics once (about a second).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import zipfile
from pathlib import Path

import pytest
from dash import no_update

from dashboard import app as _shell  # noqa: F401  (the app must exist before pages register)
from dashboard import services
from dashboard.pages import inputs
from models import scenario
from models.case import load_case
from test_dashboard_services import SMALL_IDS, Counting, csv_bytes, data_url, demo_rows, write_small_case

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"
NOW = dt.datetime(2026, 12, 1, 19, 30, tzinfo=dt.timezone.utc)
STAMP = "20261201T193000Z"  # NOW in the kept version's name (UTC)


@pytest.fixture
def case_dir(tmp_path) -> Path:
    return write_small_case(tmp_path / "small")


@pytest.fixture
def engine(case_dir, tmp_path, monkeypatch):
    """A fresh engine on the copy, installed as the process engine for one test."""
    physics = Counting(scenario.physics)
    eng = services.Engine(physics_fn=physics, upload_root=tmp_path / "uploads")
    entry, problems = eng.set_default_case(case_dir)
    assert entry is not None, problems
    eng.physics_calls = physics
    monkeypatch.setattr(services, "_ENGINE", eng)
    return eng


def edits_for(key: str, **fields) -> dict:
    return {"case": key, **fields}


def finance_line(path: Path, key: str) -> str:
    return next(line for line in path.read_text(encoding="utf-8").splitlines() if line.startswith(f"{key} ="))


def quarry_workbook() -> bytes:
    """A two-motor quarry case as one workbook (the demo's KGQ site, its tariff and capacitor bank)."""
    from openpyxl import Workbook

    def rows(name):
        with open(DEMO / name, newline="", encoding="utf-8") as handle:
            return list(csv.reader(handle))

    def cell(v):
        try:
            return float(v) if "." in v else int(v)
        except ValueError:
            return v if v != "" else None

    book = Workbook()
    book.active.title = "case"
    for row in (["key", "value"], ["name", "Quarry pumps"], ["currency", "EUR"], ["time_zone", "Europe/Berlin"]):
        book["case"].append(row)
    for name, keep in (("assets", ("KGQ-WP01", "KGQ-AUX1")), ("sites", ("KGQ",)), ("capacitors", ("KGQ",))):
        table = rows(f"{name}.csv")
        sheet = book.create_sheet(name)
        sheet.append(table[0])
        for row in table[1:]:
            if row[0] in keep:
                sheet.append([cell(v) for v in row])
    tariff = book.create_sheet("tariff example_kva_demand.toml")
    for line in (DEMO / "tariffs" / "example_kva_demand.toml").read_text(encoding="utf-8").splitlines():
        tariff.append([line or None])
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def test_the_demo_in_the_repository_is_never_written_by_these_tests():
    assert not (DEMO / ".versions").exists()


# ---------------------------------------------------------------------------------------------------
# The case the server was started with
# ---------------------------------------------------------------------------------------------------
class TestServerCase:
    def test_save_writes_the_file_and_the_tab_follows_the_saved_case(self, engine, case_dir):
        old_key = engine.default_key
        out = services.save_tab_assumptions({}, edits_for(old_key, discount_rate_pct=5.0), now=NOW)
        assert out.ok and out.session is None and out.download is None
        assert finance_line(case_dir / "finance.toml", "discount_rate_frac") == "discount_rate_frac = 0.05"
        assert (case_dir / ".versions" / f"finance-{STAMP}.toml").read_bytes() == (DEMO / "finance.toml").read_bytes()
        assert "finance.toml" in out.message and f".versions/finance-{STAMP}.toml" in out.message
        assert str(case_dir) in out.message
        # the server's case is now the saved one: a new content key, the old one dropped
        assert engine.default_key == services.content_key(case_dir) != old_key
        assert engine.entry(old_key) is None
        view = services.view({}, None)  # no edits pending
        assert view.assumptions.discount_rate_frac == pytest.approx(0.05, rel=1e-15)  # read back as written
        assert view.entry.origin == "default"

    def test_machine_results_are_carried_over_not_rerun(self, engine):
        old_key = engine.default_key
        phys = engine.physics(old_key)
        calls = engine.physics_calls.calls
        out = services.save_tab_assumptions({}, edits_for(old_key, horizon_yr=12), now=NOW)
        assert out.ok
        assert engine.physics(engine.default_key) is phys  # only finance changed: same machines and bills
        assert engine.physics_calls.calls == calls
        result = services.view({}, None).result()
        assert result.assumptions.horizon_yr == 12

    def test_nothing_to_save(self, engine, case_dir):
        original = (case_dir / "finance.toml").read_bytes()
        out = services.save_tab_assumptions({}, None, now=NOW)
        assert out.ok and out.message.startswith("Nothing to save")
        assert (case_dir / "finance.toml").read_bytes() == original and not (case_dir / ".versions").exists()

    def test_files_changed_on_disk_are_not_overwritten(self, engine, case_dir):
        (case_dir / "finance.toml").write_text("discount_rate_frac = 0.07\n", encoding="utf-8")  # another program
        out = services.save_tab_assumptions({}, edits_for(engine.default_key, discount_rate_pct=5.0), now=NOW)
        assert not out.ok and "changed on disk" in out.message
        assert (case_dir / "finance.toml").read_text(encoding="utf-8") == "discount_rate_frac = 0.07\n"

    def test_read_only_case_is_refused_with_a_message(self, engine, case_dir):
        original = (case_dir / "finance.toml").read_bytes()
        case_dir.chmod(0o555)
        try:
            out = services.save_tab_assumptions({}, edits_for(engine.default_key, discount_rate_pct=5.0), now=NOW)
        finally:
            case_dir.chmod(0o755)
        assert not out.ok
        assert out.message.startswith(f"Not saved ({case_dir}: the case folder is read-only")
        assert "edits stay in force" in out.message
        assert (case_dir / "finance.toml").read_bytes() == original

    def test_invalid_edits_are_not_saved(self, engine, case_dir):
        out = services.save_tab_assumptions({}, edits_for(engine.default_key, horizon_yr=0), now=NOW)
        assert not out.ok and "not valid" in out.message and "horizon_yr" in out.message
        assert not (case_dir / ".versions").exists()

    def test_the_versions_folder_is_not_part_of_the_content_key(self, engine, case_dir):
        services.save_tab_assumptions({}, edits_for(engine.default_key, horizon_yr=12), now=NOW)
        key = services.content_key(case_dir)
        (case_dir / ".versions" / "finance-later.toml").write_text("horizon_yr = 3\n", encoding="utf-8")
        assert services.content_key(case_dir) == key
        assert not any(".versions" in p.parts for p in services.case_files(case_dir))


# ---------------------------------------------------------------------------------------------------
# Uploaded cases: saved in the server's copy, offered as a download
# ---------------------------------------------------------------------------------------------------
class TestUploadedCase:
    def test_folder_upload_is_saved_and_offered_as_a_zip(self, engine, case_dir):
        header, rows = demo_rows(SMALL_IDS[:2])
        up = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        assert up.ok, up.problems
        session = {"session": up.session, "case": up.key}
        out = services.save_tab_assumptions(session, edits_for(up.key, discount_rate_pct=4.5, horizon_yr=20), now=NOW)
        assert out.ok, out.message
        new_key = out.session["case"]
        assert out.session["session"] == up.session and new_key != up.key
        entry = engine.entry(new_key)
        assert entry.origin == "upload" and services.content_key(entry.files) == new_key
        assert engine.entry(up.key) is None
        assert (entry.files / ".versions" / f"finance-{STAMP}.toml").is_file()
        assert "keep the download" in out.message
        # the download: a zip of the case files as the reader reads them, with the saved finance.toml
        with zipfile.ZipFile(io.BytesIO(out.download)) as archive:
            names = sorted(archive.namelist())
            saved = archive.read("finance.toml").decode("utf-8")
        assert out.download_name.endswith(".zip")
        assert "discount_rate_frac = 0.045" in saved.splitlines() and "horizon_yr = 20" in saved.splitlines()
        assert names == sorted(p.relative_to(entry.files).as_posix() for p in services.case_files(entry.files))
        assert not any(n.startswith(".versions") for n in names)
        # the server's own case is untouched
        assert (case_dir / "finance.toml").read_bytes() == (DEMO / "finance.toml").read_bytes()
        view = services.view(out.session, None)
        assert (view.assumptions.horizon_yr, len(view.case.assets)) == (20, 2)

    def test_unpacked_download_is_a_case_that_loads_with_the_saved_values(self, engine, tmp_path):
        header, rows = demo_rows(SMALL_IDS[:2])
        up = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        out = services.save_tab_assumptions({"session": up.session, "case": up.key},
                                            edits_for(up.key, discount_rate_pct=4.5), now=NOW)
        with zipfile.ZipFile(io.BytesIO(out.download)) as archive:
            archive.extractall(tmp_path / "kept")
        case, problems = load_case(tmp_path / "kept")
        assert case is not None, problems
        assert case.finance.discount_rate_frac == pytest.approx(0.045, rel=1e-15)
        assert services.content_key(tmp_path / "kept") == out.session["case"]

    def test_workbook_upload_is_saved_and_offered_as_the_workbook(self, engine, tmp_path):
        from openpyxl import load_workbook

        mime = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
        up = engine.accept_upload(None, None, ["quarry.xlsx"], [data_url(quarry_workbook(), mime)])
        assert up.ok, up.problems
        out = services.save_tab_assumptions({"session": up.session, "case": up.key},
                                            edits_for(up.key, escalation_energy_pct=2.0), now=NOW)
        assert out.ok, out.message
        assert out.download_name == "quarry.xlsx"
        book = load_workbook(io.BytesIO(out.download))
        assert [list(r) for r in book["finance"].iter_rows(values_only=True)] == [["key", "value"],
                                                                                 ["escalation_energy_frac", 0.02]]
        entry = engine.entry(out.session["case"])
        assert entry.files.read_bytes() == out.download
        assert (entry.files.parent / "quarry.xlsx.versions" / f"quarry-{STAMP}.xlsx").is_file()
        assert "quarry.xlsx.versions/" in out.message

    def test_a_dropped_upload_is_not_saved_into_the_server_case(self, engine, case_dir):
        out = services.save_tab_assumptions({"session": "0" * 32, "case": "f" * 32}, None, now=NOW)
        assert not out.ok and "no longer held" in out.message
        assert not (case_dir / ".versions").exists()


# ---------------------------------------------------------------------------------------------------
# The page callback, called directly
# ---------------------------------------------------------------------------------------------------
def form(discount=8.0, escalation=1.0, horizon=15, price=100.0, capital=100.0,
         budget=(250000.0, 250000.0, 150000.0), edits=None, session=None, kept=None) -> tuple:
    """The save callback's form states in order (the demo's finance.toml values by default), then the tab's
    kept scenarios."""
    years = list(budget) + [None] * (len(inputs.BUDGET_IDS) - len(budget))
    return (discount, escalation, horizon, price, capital, *years, edits, session, kept)


class TestSaveCallback:
    def test_a_typed_value_not_yet_applied_is_saved(self, engine, case_dir):
        assert inputs.save(None, *form(discount=6.0)) == (no_update,) * 6  # the page mounting is no click
        session_out, edits_out, status, download, _, _ = inputs.save(1, *form(discount=6.0))
        assert status.startswith("Saved 1 value into finance.toml (discount_rate_frac 0.08 -> 0.06)")
        assert "previous version is kept as .versions/finance-" in status
        assert finance_line(case_dir / "finance.toml", "discount_rate_frac") == "discount_rate_frac = 0.06"
        assert session_out is no_update and edits_out is None and download is no_update

    def test_a_form_error_saves_nothing(self, engine, case_dir):
        assert inputs.save(1, *form(horizon=0))[2].startswith("Not saved: Horizon: must be a whole number")
        refused = inputs.save(1, *form(budget=("250000", "", "1")))[2]
        assert refused.startswith("Not saved: Year 1 is blank") and "applied" not in refused
        assert not (case_dir / ".versions").exists()

    def test_a_refused_save_looks_apart_from_a_saved_one(self, engine, case_dir):
        # warning colours and a bar for "Not saved", the accent for a save; the words say which either way
        refused = inputs.save(1, *form(horizon=0))
        assert refused[2].startswith("Not saved: ") and refused[4] == "form-message refused"
        saved = inputs.save(1, *form(discount=6.0))
        assert saved[2].startswith("Saved 1 value") and saved[4] == "form-message accepted"
        (case_dir / "finance.toml").write_text("discount_rate_frac = 0.07\n", encoding="utf-8")  # another program
        changed = inputs.save(1, *form(discount=5.0))  # refused by the service, not by the form
        assert changed[2].startswith("Not saved: the case's files changed on disk") and changed[4] == "form-message refused"

    def test_upload_gets_a_new_session_key_and_a_download(self, engine):
        header, rows = demo_rows(SMALL_IDS[:2])
        up = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
        session = {"session": up.session, "case": up.key}
        kept = [{"name": "Long view", "edits": {"case": up.key, "horizon_yr": 20}},
                {"name": "Other case", "edits": {"case": "f" * 32, "horizon_yr": 5}}]
        session_out, edits_out, status, download, _, kept_out = inputs.save(1, *form(horizon=9, session=session, kept=kept))
        assert session_out["case"] != up.key and engine.entry(session_out["case"]) is not None
        # the tab's kept scenarios of the saved case follow it to its new key (another case's are left as they were)
        assert kept_out == [{"name": "Long view", "edits": {"case": session_out["case"], "horizon_yr": 20}}, kept[1]]
        assert edits_out is None and "keep the download" in status
        assert download["filename"].endswith(".zip") and download["base64"]
