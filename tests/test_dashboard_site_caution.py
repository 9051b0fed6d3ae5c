"""The Site meter page repeats the case check's demand-window caution beside the peaks it concerns."""

from __future__ import annotations

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
