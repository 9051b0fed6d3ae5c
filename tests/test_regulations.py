"""Minimum-efficiency rules for new motors by region and date, and the case's purchase date.

Sources: Regulation (EU) 2019/1781 Annex I (IE3 0.75-1000 kW from 1 July 2021, IE4 75-200 kW 2/4/6-pole from
1 July 2023); 10 CFR 431.25 (premium, about IE3, 1-500 hp since 1 June 2016) as amended by 88 FR 36066,
compliance from 1 June 2027 (88 FR 72347; its scope, 100-250 hp to about IE4, is from memory).
"""

from __future__ import annotations

import datetime

import numpy as np
import pytest

import casebuilder as cb
from models.case import load_case
from models.operation import operate
from models.regulations import minimum_class, rules_taking_effect


def test_eu_rules_by_size_and_poles():
    # Regulation (EU) 2019/1781 Annex I: 15 kW IE3, 110 kW 4-pole IE4, 110 kW 8-pole IE3 (IE4 covers 2/4/6 poles),
    # 1,600 kW outside the rules
    got = minimum_class("EU", [15.0, 110.0, 110.0, 1600.0], [4, 4, 8, 4], "2026-12-01")
    assert got.tolist() == ["IE3", "IE4", "IE3", "none"]
    # before 1 July 2023 the 75-200 kW band was IE3
    assert minimum_class("EU", [110.0], [4], "2023-06-30").tolist() == ["IE3"]


def test_a_past_purchase_date_is_judged_by_the_rules_of_its_day():
    # Regulation (EC) 640/2009 Annex I (tier dates and scope from memory, as data/reference/minimum_efficiency_
    # rules.csv says): nothing before 16 June 2011; IE2 from then; IE3 at 7.5-375 kW from 1 January 2015 and at
    # 0.75-375 kW from 1 January 2017; 2/4/6 poles only, so an 8-pole motor waits for 2019/1781 (1 July 2021)
    ratings, poles = [1.5, 15.0, 160.0, 300.0], [4, 4, 4, 8]
    assert minimum_class("EU", ratings, poles, "2011-06-15").tolist() == ["none"] * 4
    assert minimum_class("EU", ratings, poles, "2011-06-16").tolist() == ["IE2", "IE2", "IE2", "none"]
    assert minimum_class("EU", ratings, poles, "2015-01-01").tolist() == ["IE2", "IE3", "IE3", "none"]
    assert minimum_class("EU", ratings, poles, "2017-01-01").tolist() == ["IE3", "IE3", "IE3", "none"]
    assert minimum_class("EU", ratings, poles, "2021-07-01").tolist() == ["IE3", "IE3", "IE3", "IE3"]
    # US (dates from memory): EPAct 1992 levels (IE2) at 1-200 hp from 24 October 1997; EISA 2007 from 19 December
    # 2010, premium (IE3) at 1-200 hp and EPAct levels at 201-500 hp; the 2016 levels widen premium to 500 hp.
    # 160 kW is 214.6 hp, 300 kW is 402 hp (at 0.745699872 kW/hp)
    ratings, poles = [1.5, 15.0, 160.0, 300.0], [4, 4, 4, 4]
    assert minimum_class("US", ratings, poles, "1997-10-23").tolist() == ["none"] * 4
    assert minimum_class("US", ratings, poles, "1997-10-24").tolist() == ["IE2", "IE2", "none", "none"]
    assert minimum_class("US", ratings, poles, "2010-12-19").tolist() == ["IE3", "IE3", "IE2", "IE2"]
    assert minimum_class("US", ratings, poles, "2016-06-01").tolist() == ["IE3", "IE3", "IE3", "IE3"]


def test_us_rule_of_june_2027_applies_from_its_date():
    # 110 kW (147.5 hp) 4-pole: premium (IE3) until 31 May 2027, about IE4 from 1 June 2027; 400 kW (536 hp) is
    # outside the 2016 scope (1-500 hp) and inside the widened one (501-750 hp, premium) from 1 June 2027
    assert minimum_class("US", [110.0, 400.0], [4, 4], "2027-05-31").tolist() == ["IE3", "none"]
    assert minimum_class("US", [110.0, 400.0], [4, 4], "2027-06-01").tolist() == ["IE4", "IE3"]


def test_rules_ahead_name_what_they_raise():
    ahead = rules_taking_effect("US", [110.0, 15.0, 400.0], [4, 4, 4], "2026-12-01")
    assert [(r["effective_from"], r["min_class"], r["n_motors"]) for r in ahead] == [
        ("2027-06-01", "IE4", 1), ("2027-06-01", "IE3", 1)]
    assert rules_taking_effect("US", [110.0], [4], "2027-06-01") == []  # in force already
    assert rules_taking_effect("US", [110.0], [4], "2023-01-01", within_yr=3.0) == []  # more than 3 years ahead
    assert rules_taking_effect("EU", [110.0], [4], "2026-12-01") == []


def _us_case(folder, purchase_line=""):
    toml = cb.CASE_TOML + 'region = "US"\n' + purchase_line
    return cb.write_case(folder, case_toml=toml)  # its C1 is a 75 kW 2-pole compressor


def test_purchase_date_defaults_to_the_day_of_the_run_and_warns_of_a_rule_ahead(tmp_path):
    case, problems = load_case(_us_case(tmp_path / "a"), today=datetime.date(2026, 12, 3))
    assert case.settings.purchase_date == "2026-12-03"
    ahead = [p for p in problems if p.column == "purchase_date"]
    assert len(ahead) == 1 and ahead[0].severity == "warning"
    assert "a US rule from 2027-06-01 asks IE4 of new motors of 74.57-186.4 kW: 1 motor of this case" in ahead[0].rule
    assert "purchase_date = 2027-06-01" in ahead[0].hint


def test_a_purchase_after_the_rule_offers_only_the_motors_it_allows(tmp_path):
    before, _ = load_case(_us_case(tmp_path / "b", "purchase_date = 2027-05-31\n"))
    after, problems = load_case(_us_case(tmp_path / "c", "purchase_date = 2027-06-01\n"))
    assert after.settings.purchase_date == "2027-06-01" and not [p for p in problems if p.column == "purchase_date"]
    r_before, r_after = operate(before), operate(after)
    c1 = r_before.asset_position("C1")
    ie3 = r_before.option_position("ie3")
    assert r_before.applies[c1, ie3] and not r_after.applies[c1, ie3]  # the 75 kW motor needs IE4 from June 2027
    p1 = r_before.asset_position("P1")
    assert r_before.applies[p1, ie3] and r_after.applies[p1, ie3]  # 15 kW stays IE3


@pytest.mark.parametrize("written", ['"July 2027"', '"2027-7-1"', '"2027-06-01T10:00"'])
def test_a_purchase_date_not_written_as_a_date_is_an_error(tmp_path, written):
    case, problems = load_case(_us_case(tmp_path / "d", f"purchase_date = {written}\n"))
    bad = [p for p in problems if p.column == "purchase_date" and p.severity == "error"]
    assert len(bad) == 1 and "YYYY-MM-DD" in bad[0].rule, [str(p) for p in problems]
    assert np.all([p.file == "case.toml" for p in bad])


def test_ratings_in_horsepower_meet_the_rules_own_bounds():
    # 10 CFR 431.25 sets its scopes in hp: 1-500 hp premium (2016), 100-250 hp IE4-level and 501-750 hp premium
    # (from 1 June 2027). A rating given in hp becomes kW at 0.745699872 kW/hp (NIST SP 811, B.8, from memory): 1 hp =
    # 0.7457 kW and 100 hp = 74.57 kW, just below the 0.75 and 75 kW "standard kilowatt equivalents"
    # (hand calculation): each must still fall inside its own rule.
    hp = 0.745699872
    ratings = [1 * hp, 100 * hp, 250 * hp, 500 * hp, 501 * hp, 750 * hp, 75.0, 0.75]
    before = minimum_class("US", ratings, [4] * 8, "2027-05-31").tolist()
    after = minimum_class("US", ratings, [4] * 8, "2027-06-01").tolist()
    assert before == ["IE3", "IE3", "IE3", "IE3", "none", "none", "IE3", "IE3"]
    assert after == ["IE3", "IE4", "IE4", "IE3", "IE3", "IE3", "IE4", "IE3"]
