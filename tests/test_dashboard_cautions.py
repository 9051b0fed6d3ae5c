"""Cautions shown beside the figures they concern: the Site meter page's demand windows, the plan's data quality."""

from __future__ import annotations

import re

import pytest

from dashboard import app  # noqa: F401  (the pages register themselves with the app)
from dashboard import services
from dashboard.pages import site
from test_dashboard_services import small_case_engine


@pytest.fixture(scope="module")
def small_engine(tmp_path_factory):
    return small_case_engine(tmp_path_factory, "small-site-caution")


def _text(children) -> str:
    """All text of a list of html components (strings and their children)."""
    out = []
    for c in children:
        child = getattr(c, "children", c)
        if isinstance(child, str):
            out.append(child)
    return " ".join(out)


def test_site_meter_says_when_hourly_profiles_meet_a_shorter_demand_window(small_engine, monkeypatch):
    """The demo's sites bill demand on 15-min (HRW) and 30-min (KGQ) windows while their motors' profiles are
    hourly (data/demo: tariff files and profiles.csv): the case check warns on Case & assumptions, and the
    Site meter page, whose peak demand it concerns, says the same (user report: the caution was on one page
    only)."""
    monkeypatch.setattr(services, "_ENGINE", small_engine)
    summary = site.update("KGQ", None, None, None)[4]
    text = _text(summary)
    assert "Caution: the tariff's demand charge takes 30-min windows" in text
    assert "60-min profiles" in text and "understates the demand peak and its savings" in text


def test_plan_page_says_how_much_of_the_plan_rests_on_low_data_quality(small_engine, monkeypatch):
    """The chosen projects carry their asset's data-quality score, and the summary says how many projects, and
    what share of the plan's NPV, rest on scores below 70 % (the pack's risk register uses the same bound);
    the share is checked against the table itself (sum of NPV at plan start of those rows over all rows)."""
    from dashboard.pages import plan

    monkeypatch.setattr(services, "_ENGINE", small_engine)
    out = plan.update(True, None, None)
    rows, columns, summary = out[2], out[3], out[6]
    assert any(c["field"] == "data_quality_pct" for c in columns)
    low = [r for r in rows if r["data_quality_pct"] < 70.0]
    text = _text(summary)
    assert low  # the demo's plan buys drives for pumps of unknown class (data quality 55 %, data/demo/assets.csv)
    npv = [max(r["npv_at_plan_start"], 0.0) for r in rows]
    share = sum(max(r["npv_at_plan_start"], 0.0) for r in low) / sum(npv)
    assert f"Caution: {len(low)} project" in text and f"({share:.0%} of its NPV)" in text
    assert "below 70 %" in text


def test_site_meter_says_when_the_plan_makes_the_site_lead_where_its_tariff_bans_it(tmp_path_factory, monkeypatch):
    # the case of tests/test_cli.py (a pump beside a 40 kVAr fixed bank on the tariff that bans night leading
    # kVArh): the plan's PM motor on a drive draws almost no kVAr, so the bank makes the site lead at night
    from test_cli import _leading_banned_case

    eng = services.Engine(upload_root=tmp_path_factory.mktemp("uploads"))
    entry, problems = eng.set_default_case(_leading_banned_case(tmp_path_factory.mktemp("cases") / "banned"))
    assert entry is not None, problems
    monkeypatch.setattr(services, "_ENGINE", eng)
    text = _text(site.update("S1", None, None, None)[4])
    assert "Caution: With the plan in place, site S1 is billed" in text and "where its tariff bans them" in text


def test_site_meter_sets_the_model_beside_the_sites_bills(small_engine, monkeypatch):
    # a bill history uploaded with the case (docs/calibration.md): the Site meter page's summary says the fit
    from test_dashboard_services import data_url

    monkeypatch.setattr(services, "_ENGINE", small_engine)
    data = b"site_id,month,energy_kwh\nKGQ,2024-03,100000\nKGQ,2024-04,90000\nKGQ,2024-05,95000\n"
    outcome = small_engine.accept_upload(None, small_engine.default_key, ["bill_history.csv"], [data_url(data)])
    assert outcome.ok, outcome.problems
    session = {"session": outcome.session, "case": outcome.key}
    text = _text(site.update("KGQ", None, session, None)[4])
    assert "Today's fleet as modelled against the site's bills (bill history; monthly criteria" in text
    # the page says the statistics the services give for the site (their values are checked by hand in
    # tests/test_dashboard_services.py and tests/test_calibration.py)
    view = services.view(session, None)
    said = services.site_calibration_text(view, "KGQ")
    assert len(said) == 1 and said[0].startswith("energy: the model reads ") and " over 3 months, " in said[0]
    assert said[0] in text
    assert "against the site's bills" not in _text(site.update("HRW", None, session, None)[4])


def test_plan_page_says_the_plan_s_financing(tmp_path_factory, monkeypatch):
    """A case whose finance.toml finances the plan with a loan: the Capital plan page says the owner's NPV and
    the lowest point of its running total, financed and in cash, in the words of models.financing.financing_text (the
    figures are models.financing's, tested in tests/test_financing.py); a case paid in cash says nothing."""
    from dashboard.pages import plan
    from test_dashboard_services import write_small_case

    folder = write_small_case(tmp_path_factory.mktemp("cases") / "loan")
    finance = folder / "finance.toml"
    finance.write_text(finance.read_text(encoding="utf-8") + 'financing = "loan"\nloan_share_frac = 0.8\n'
                       'loan_rate_frac = 0.05\nloan_term_yr = 6\n', encoding="utf-8")
    eng = services.Engine(upload_root=tmp_path_factory.mktemp("uploads"))
    entry, problems = eng.set_default_case(folder)
    assert entry is not None, problems
    monkeypatch.setattr(services, "_ENGINE", eng)
    text = _text(plan.update(True, None, None)[6])
    assert "With 80 % of the capital borrowed at 5 % a year (nominal) and repaid over 6 years, the owner's NPV" in text
    assert "(paid in cash: EUR " in text and "on the cash basis" in text
    cash = services.Engine(upload_root=tmp_path_factory.mktemp("uploads2"))
    entry, problems = cash.set_default_case(write_small_case(tmp_path_factory.mktemp("cases") / "cash"))
    monkeypatch.setattr(services, "_ENGINE", cash)
    assert "borrowed" not in _text(plan.update(True, None, None)[6])


def test_site_meter_shows_the_harmonic_screen_with_its_caution(small_engine, monkeypatch):
    """The Site meter page carries the site's harmonic screen (models.harmonics.site_screen, the same rows as
    harmonic_screen.csv), today and with the plan, beside the caution that it is a screen and not a study."""
    from models.harmonics import SCREEN_CAUTION, site_screen

    monkeypatch.setattr(services, "_ENGINE", small_engine)
    rows = site.update("HRW", None, None, None)[7]
    assert [r["scenario"] for r in rows] == ["today", "plan"]
    view = services.view(None, None)
    result = view.result()
    expected = site_screen(view.case, view.physics().operation, result.plan)
    expected = expected[expected["site_id"] == "HRW"].reset_index(drop=True)
    for got, want in zip(rows, expected.to_dict("records")):
        assert got["finding"] == want["finding"]
        assert got["drive_kva"] == pytest.approx(want["drive_kva"], rel=1e-12)
    layout = str(site.layout())
    assert "Harmonic screen" in layout and SCREEN_CAUTION[:60] in layout
