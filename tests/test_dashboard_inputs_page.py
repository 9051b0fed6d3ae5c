"""The Case & assumptions page: the scenario comparison's point in view, validation messages read whole, and a
save into the case asked about before it writes (the layout, the callback map and the callbacks called directly)."""

from __future__ import annotations

import pytest
from dash import dcc, no_update

from dashboard import app as shell
from dashboard import components as ui
from dashboard import services
from dashboard.pages import inputs
from test_dashboard_saving import case_dir, engine, finance_line, form  # noqa: F401  (fixtures and helpers)
from test_dashboard_services import SMALL_IDS, csv_bytes, data_url, demo_rows, small_case_engine


@pytest.fixture(scope="module")
def physics_engine(tmp_path_factory):
    return small_case_engine(tmp_path_factory, "small-inputs-page")


def _component(component_id: str):
    return next(c for c in inputs.layout()._traverse() if getattr(c, "id", None) == component_id)


def _callbacks() -> list[dict]:
    """Every callback declared (those still in Dash's global list and those the app has taken over)."""
    from dash._callback import GLOBAL_CALLBACK_LIST

    return list(GLOBAL_CALLBACK_LIST) + list(shell.app._callback_list)


# ---------------------------------------------------------------------------------------------------
# Scenarios side by side
# ---------------------------------------------------------------------------------------------------
def test_the_npv_change_and_the_project_count_are_pinned_after_the_name(physics_engine, monkeypatch):
    # the audit: at 1440 px the grid's columns took about 1,360 px in 1,184, and the NPV change and the
    # project count, the point of the panel, were off-screen to the right
    monkeypatch.setattr(services, "_ENGINE", physics_engine)
    rows, columns = inputs.scenarios(True, None, None)
    fields = [c["field"] for c in columns]
    assert fields[:3] == ["scenario", "plan_npv_change", "projects"]
    assert [c.get("pinned") for c in columns[:3]] == ["left"] * 3 and not any(c.get("pinned") for c in columns[3:])
    # every column of the comparison is still there, and each row has a value for the pinned ones
    assert sorted(fields) == sorted(c["field"] for c in ui.scenario_columns("EUR"))
    assert all(r["plan_npv_change"] is not None and r["projects"] is not None for r in rows)
    change, projects = columns[1], columns[2]
    assert change["headerName"] == "NPV change [EUR]" and "case as written" in change["headerTooltip"]
    assert projects["headerName"] == "Projects"
    # the pinned part leaves most of a 1024 px window to the columns that scroll beside it
    assert sum(c["minWidth"] for c in columns[:3]) <= 420
    for column in columns[1:3]:
        assert column["minWidth"] <= column["maxWidth"]


# ---------------------------------------------------------------------------------------------------
# Validation messages
# ---------------------------------------------------------------------------------------------------
def test_the_validation_messages_grow_with_their_rows():
    # the audit: a fixed 320 px showed about two wrapped rows, the text cut mid-sentence
    grid = _component(inputs.PROBLEMS)
    options = grid.dashGridOptions
    assert options["domLayout"] == "autoHeight" and grid.style["height"] == "auto"
    # a long list goes on over pages of a sensible length, the page size one the grid offers
    assert options["pagination"] is True and 5 <= options["paginationPageSize"] <= 25
    assert options["paginationPageSize"] in options["paginationPageSizeSelector"]
    wrapped = [c for c in grid.columnDefs if c.get("wrapText")]
    assert {c["field"] for c in wrapped} >= {"value", "rule", "hint"} and all(c["autoHeight"] for c in wrapped)


# ---------------------------------------------------------------------------------------------------
# Saving into the case: asked first
# ---------------------------------------------------------------------------------------------------
def test_the_save_button_asks_before_anything_is_written():
    # the button opens the confirmation; the save runs on its OK, not on the button
    assert isinstance(_component(inputs.SAVE_CONFIRM), dcc.ConfirmDialog)
    button = f"{inputs.SAVE_BUTTON}.n_clicks"
    triggered = {spec["output"] for spec in _callbacks()
                 if any(f"{i['id']}.{i['property']}" == button for i in spec["inputs"])}
    assert len(triggered) == 1 and f"{inputs.SAVE_CONFIRM}.displayed" in next(iter(triggered))
    save = next(spec for spec in _callbacks() if f"{inputs.SAVE_DOWNLOAD}.data" in spec["output"])
    assert [f"{i['id']}.{i['property']}" for i in save["inputs"]] == [f"{inputs.SAVE_CONFIRM}.submit_n_clicks"]


def test_the_question_names_the_file_and_the_kept_version(engine, case_dir):
    original = (case_dir / "finance.toml").read_bytes()
    assert inputs.ask_to_save(None, *form(discount=6.0)[:-1], 0) == (no_update,) * 3  # the page mounting is no click
    displayed, question, confirmed = inputs.ask_to_save(1, *form(discount=6.0)[:-1], 0)
    assert displayed is True and confirmed is no_update
    assert f"into {case_dir / 'finance.toml'}?" in question
    assert f"kept as {case_dir / '.versions' / 'finance-<UTC time>.toml'}" in question
    # asking writes nothing
    assert (case_dir / "finance.toml").read_bytes() == original and not (case_dir / ".versions").exists()
    # Cancel writes nothing and says so; OK runs the save as before
    status, look = inputs.save_cancelled(1)
    assert status.startswith("Not saved") and "nothing was written" in status and look == "form-message"
    assert inputs.save_cancelled(0) == (no_update, no_update)
    assert (case_dir / "finance.toml").read_bytes() == original
    assert inputs.save(1, *form(discount=6.0))[2].startswith("Saved 1 value into finance.toml")
    assert finance_line(case_dir / "finance.toml", "discount_rate_frac") == "discount_rate_frac = 0.06"


def test_a_save_that_would_write_nothing_is_not_asked_about(engine, case_dir):
    # a refused field: no question, straight to the save (its confirmation count goes up), which says why
    displayed, question, confirmed = inputs.ask_to_save(1, *form(horizon=0)[:-1], 2)
    assert displayed is False and question is no_update and confirmed == 3
    assert inputs.save(confirmed, *form(horizon=0))[2].startswith("Not saved: Horizon")
    # a tab's upload no longer held: the save says so, nothing is asked about another case's file
    dropped = {"session": "gone", "case": "f" * 32}
    assert inputs.ask_to_save(1, *form(session=dropped)[:-1], None)[::2] == (False, 1)
    assert not (case_dir / ".versions").exists()


def test_an_upload_s_question_names_no_server_folder(engine):
    header, rows = demo_rows(SMALL_IDS[:2])
    up = engine.accept_upload(None, None, ["assets.csv"], [data_url(csv_bytes(header, rows))])
    session = {"session": up.session, "case": up.key}
    displayed, question, _ = inputs.ask_to_save(1, *form(horizon=9, session=session)[:-1], 0)
    folder = str(engine.entry(up.key).files)
    assert displayed is True and folder not in question
    assert question.startswith("Save the assumptions in the form into finance.toml (the server's copy of your upload")
    assert "download" in question
    book = inputs.save_question("/srv/uploads/a1/plant.xlsx", uploaded=True)
    assert "the finance sheet of plant.xlsx (the server's copy" in book and "/srv" not in book
    assert "kept as plant.xlsx.versions/plant-<UTC time>.xlsx" in book
    assert "finance sheet of /cases/plant.xlsx?" in inputs.save_question("/cases/plant.xlsx", uploaded=False)


def test_the_question_names_the_file_the_save_writes(tmp_path):
    # a case whose finance file is headed Finance.toml: the save writes that file (models.io.save_target, names
    # matched without regard to case), and the question names it, not a finance.toml beside it
    import shutil

    from models.io import DEMO_DIR

    case = tmp_path / "plant"
    shutil.copytree(DEMO_DIR, case)
    (case / "finance.toml").rename(case / "Finance.toml")
    question = inputs.save_question(case, uploaded=False)
    assert f"into {case.resolve() / 'Finance.toml'}?" in question
    assert f"kept as {case.resolve() / '.versions' / 'Finance-<UTC time>.toml'}" in question
