"""The Asset page's end-of-life section: one asset's strategies in words and numbers, and the fleet's policy.

The frames are written out here in the columns of ``ScenarioResult.end_of_life`` and ``fleet_rules``, so
every expected number is an input, or a difference of two inputs worked out on the line.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from dashboard import services


def eol_frame(**overrides) -> pd.DataFrame:
    """Two assets in the columns of ``ScenarioResult.end_of_life``."""
    frame = pd.DataFrame({
        "asset_id": ["P1", "F2"], "age_yr": [29.0, 12.0], "new_option_id": ["ie3", "ie4"],
        "failure_probability_in_horizon_frac": [0.9664, 0.25], "mean_residual_life_yr": [5.06, 14.2],
        "cost_replace_now": [1000.0, 5000.0], "cost_replace_at_failure": [900.0, 4990.0],
        "cost_rewind_at_failure": [950.0, 6000.0],
        "best_strategy": ["replace_at_failure", "replace_at_failure"], "advantage_over_next": [50.0, 10.0]})
    return frame.assign(**overrides)


LABELS = {"ie3": "New IE3 induction motor", "ie4": "New IE4 induction motor"}


class TestSummary:
    def test_cheapest_and_margin_from_the_costs(self):
        s = services.end_of_life_summary(eol_frame(), "P1", "EUR", 15, LABELS)
        assert s.message == "" and s.cheapest == "replace_at_failure"
        assert s.margin_pv == 50.0  # 950 (rewind at failure, the next) - 900 (replace at failure)
        assert s.strategies["strategy"].tolist() == ["replace_now", "replace_at_failure", "rewind_at_failure"]
        assert s.strategies["label"].tolist() == ["Replace now", "Replace at failure", "Rewind at failure"]
        assert s.strategies["cost_pv"].tolist() == [1000.0, 900.0, 950.0]
        assert s.strategies["cheapest"].tolist() == [False, True, False]

    def test_the_text_says_what_how_much_age_and_probability(self):
        s = services.end_of_life_summary(eol_frame(), "P1", "EUR", 15, LABELS)
        assert "the cheapest end-of-life strategy is to replace at failure" in s.text
        assert "expected present cost of EUR 900," in s.text
        # 50 / 900 = 5.6 %: a real gap, not called level
        assert "EUR 50 less than the next cheapest (rewind at failure)." in s.text
        assert "29 years old" in s.text and "within the 15-year horizon is 97 %" in s.text  # 0.9664 -> 97 %
        assert "mean residual life 5.1 yr" in s.text and "New IE3 induction motor" in s.text
        assert "not a forecast" in s.caution

    def test_a_failed_motor_is_replaced_or_rewound_now(self):
        # the engine's frame for a motor that has failed (asset register's `failed`): replacing now and at failure
        # are one cost (the failure is now), so the page offers two ways back into service, not three
        frame = eol_frame(failed=[True, False], cost_replace_now=[1200.0, 5000.0],
                          cost_replace_at_failure=[1200.0, 4990.0], cost_rewind_at_failure=[1100.0, 6000.0],
                          failure_probability_in_horizon_frac=[1.0, 0.25], mean_residual_life_yr=[0.0, 14.2])
        s = services.end_of_life_summary(frame, "P1", "EUR", 15, LABELS)
        assert s.strategies["label"].tolist() == ["Replace it now", "Rewind it now"]
        assert s.strategies["cost_pv"].tolist() == [1200.0, 1100.0]
        assert s.cheapest == "rewind_at_failure" and s.margin_pv == 100.0  # 1,200 - 1,100
        assert s.text.startswith("P1 has failed (asset register): the cheaper way back into service is to rewind it "
                                 "now, a present cost of EUR 1,100")
        assert "EUR 100 less than the next cheapest (replace it now)" in s.text
        assert "counted against the least that puts it back in service" in s.text and "probability" not in s.text
        # the running motor beside it keeps its three strategies
        assert len(services.end_of_life_summary(frame, "F2", "EUR", 15, LABELS).strategies) == 3

    def test_a_close_call_is_called_level(self):
        # F2: 4,990 (replace at failure) vs 5,000 (replace now): 10 apart, 0.2 % of 4,990 < 1 %
        s = services.end_of_life_summary(eol_frame(), "F2", "USD", 20, LABELS)
        assert s.cheapest == "replace_at_failure" and s.margin_pv == 10.0
        assert "USD 10 less than the next cheapest (replace now): under 1 % apart" in s.text
        assert "within the 20-year horizon is 25 %" in s.text

    def test_a_tie_goes_to_the_first_strategy(self):
        frame = eol_frame(cost_replace_now=[700.0, 1.0], cost_replace_at_failure=[700.0, 1.0],
                          cost_rewind_at_failure=[800.0, 1.0])
        s = services.end_of_life_summary(frame, "P1", "EUR", 15)
        assert s.cheapest == "replace_now" and s.margin_pv == 0.0  # 700 - 700
        assert "level with the next cheapest (replace at failure)" in s.text
        assert "New motor compared: ie3." in s.text  # no labels given: the option id

    def test_a_defaulted_outage_cost_is_named_as_a_placeholder(self):
        # the engine prices each failure's outage and says where the figure comes from (end_of_life.csv,
        # docs/outputs.md); a criticality default can carry the answer, so the text says so
        frame = eol_frame().assign(downtime_cost_per_h=[2000.0, 150.0],
                                   downtime_cost_basis=["default for a high-criticality motor", "asset register"],
                                   new_lead_time_h=[72.0, 24.0], rewind_lead_time_h=[168.0, 72.0])
        p1 = services.end_of_life_summary(frame, "P1", "EUR", 15).text
        assert "priced at EUR 2,000/h: the default for a high-criticality motor, a placeholder" in p1
        assert "(72 h to a new motor, 168 h to a rewound one: by its size)" in p1  # the frame's hours, no basis: size
        f2 = services.end_of_life_summary(frame, "F2", "EUR", 15).text
        assert "priced at EUR 150/h (asset register)." in f2 and "placeholder" not in f2

    def test_the_outage_hours_say_where_they_come_from(self):
        # the frame's lead_time_basis (docs/outputs.md): the register's own hours, the size class's, a spare's
        # fitting, or a mix of two when the register gives one of the two hours
        frame = eol_frame().assign(downtime_cost_per_h=[150.0, 150.0], downtime_cost_basis="asset register",
                                   new_lead_time_h=[500.0, 8.0], rewind_lead_time_h=[168.0, 8.0],
                                   lead_time_basis=["asset register (new), size class (rewound)", "spare on hand"])
        p1 = services.end_of_life_summary(frame, "P1", "EUR", 15).text
        assert ("(500 h to a new motor, 168 h to a rewound one: as the asset register gives them (new), "
                "by its size (rewound))") in p1
        f2 = services.end_of_life_summary(frame, "F2", "EUR", 15).text
        assert "(8 h to a new motor, 8 h to a rewound one: a spare's fitting, the register saying one is on hand)" in f2

    def test_an_assumed_age_is_said(self):
        s = services.end_of_life_summary(eol_frame(), "P1", "EUR", 15, age_known=False)
        assert "29 years old (assumed: the case gives no installation year)" in s.text

    def test_past_rewinds_are_said(self):
        # hand calculation: one rewind keeps 0.9 of the life (common practice 10 %), so 10 % shorter; none says nothing
        once = services.end_of_life_summary(eol_frame(), "P1", "EUR", 15, rewind_count=1).text
        assert "Rewound once: its failure law counts a life 10 % shorter than a motor never rewound." in once
        assert "Rewound" not in services.end_of_life_summary(eol_frame(), "P1", "EUR", 15).text

    def test_the_caution_gives_the_size_classes_in_the_cases_unit(self):
        # 7.5 and 75 kW are 10.1 and 100.6 hp (1 hp = 0.745699872 kW, NIST SP 811 B.9). The lives are the mean
        # lives of models.end_of_life.DEFAULT_LIFE_CLASSES (common practice, not data): Weibull shape 2.5 and
        # characteristic lives 14, 20 and 28 yr; mean eta x Gamma(1 + 1/2.5), Gamma(1.4) = 0.887264 (Abramowitz &
        # Stegun table 6.1): 14 x 0.887264 = 12.42, 20 x 0.887264 = 17.75, 28 x 0.887264 = 24.84 yr
        s = services.end_of_life_summary(eol_frame(), "P1", "USD", 15, power_unit="hp")
        assert "up to 10.1 hp 12.4 yr, 10.1-100.6 hp 17.7 yr, above 100.6 hp 24.8 yr" in s.caution
        assert " kW" not in s.caution

    def test_only_the_costs_give_only_the_first_sentence(self):
        frame = eol_frame()[["asset_id", "cost_replace_now", "cost_replace_at_failure", "cost_rewind_at_failure"]]
        s = services.end_of_life_summary(frame, "P1", "EUR", 15)
        assert s.cheapest == "replace_at_failure" and s.text.endswith("(rewind at failure).")
        assert "years old" not in s.text and "probability" not in s.text

    @pytest.mark.parametrize("frame", [pd.DataFrame(), None, eol_frame().iloc[0:0]])
    def test_no_frame_says_the_catalogue_lacks_an_option(self, frame):
        s = services.end_of_life_summary(frame, "P1", "EUR", 15)
        assert s.message == services.END_OF_LIFE_UNAVAILABLE and s.strategies.empty and s.text == ""
        assert "rewind option and a new induction motor option" in s.message

    def test_an_asset_without_a_row_is_said(self):
        s = services.end_of_life_summary(eol_frame(), "X9", "EUR", 15)
        assert s.message == "No end-of-life comparison for X9." and s.strategies.empty

    def test_costs_that_are_not_numbers_are_said(self):
        s = services.end_of_life_summary(eol_frame(cost_rewind_at_failure=[np.nan, 1.0]), "P1", "EUR", 15)
        assert "could not be computed" in s.message and s.strategies.empty


class TestFleetRules:
    def test_decisions_in_words_and_no_threshold_left_blank(self):
        rules = pd.DataFrame({"min_rated_p_kw": [0.75, 5.5, 200.0], "max_rated_p_kw": [2.2, 132.0, 315.0],
                              "min_hours_to_replace_h_per_yr": [0.0, 4000.0, math.inf],
                              "decision": ["replace", "replace_above_hours", "rewind"],
                              "rule": ["a", "b", "c"]})
        rows = services.fleet_rule_rows(SimpleNamespace(fleet_rules=rules))
        assert rows["decision"].tolist() == ["replace", "replace from the hours shown, rewind below", "rewind"]
        assert rows["min_hours_to_replace_h_per_yr"].iloc[:2].tolist() == [0.0, 4000.0]
        assert math.isnan(rows["min_hours_to_replace_h_per_yr"].iloc[2])  # inf: rewind at every hours
        assert rows["from_rating"].tolist() == [0.75, 5.5, 200.0] and rows["rule"].tolist() == ["a", "b", "c"]

    def test_ratings_in_the_cases_unit(self):
        # 7.457 kW and 74.57 kW are 10 and 100 hp (1 hp = 0.745699872 kW, NIST SP 811 B.9)
        rules = pd.DataFrame({"min_rated_p_kw": [7.45699872], "max_rated_p_kw": [74.5699872],
                              "min_hours_to_replace_h_per_yr": [0.0], "decision": ["replace"], "rule": ["a"]})
        rows = services.fleet_rule_rows(SimpleNamespace(fleet_rules=rules), "hp")
        assert rows["from_rating"].tolist() == [10.0] and rows["to_rating"].tolist() == [100.0]
        result = SimpleNamespace(fleet_rules=rules, assumptions=SimpleNamespace(downtime_cost_per_h=0.0))
        text = services.fleet_rules_scope_text(result, [7.0, 74.5699872, 80.0], "USD", "hp")
        assert text.startswith("It covers standard ratings from 10 to 100 hp; 1 motor of the case is larger")

    def test_no_policy_gives_no_rows(self):
        rows = services.fleet_rule_rows(SimpleNamespace(fleet_rules=pd.DataFrame()))
        assert rows.empty and "rule" in rows.columns



def test_the_policys_scope_names_its_sizes_the_larger_motors_and_its_outage_price():
    # hand-made result: a policy over 0.75-315 kW, a case with two motors above 315 kW, no downtime cost set
    from types import SimpleNamespace

    rules = pd.DataFrame({"min_rated_p_kw": [0.75, 11.0], "max_rated_p_kw": [7.5, 315.0],
                          "min_hours_to_replace_h_per_yr": [2000.0, 6000.0], "decision": ["a", "b"], "rule": ["", ""]})
    result = SimpleNamespace(fleet_rules=rules, assumptions=SimpleNamespace(downtime_cost_per_h=0.0))
    text = services.fleet_rules_scope_text(result, [45.0, 355.0, 710.0], "EUR")
    assert text.startswith("It covers standard ratings from 0.75 to 315 kW; 2 motors of the case are larger")
    assert "(none set, so outages count nothing)" in text
    one = services.fleet_rules_scope_text(SimpleNamespace(fleet_rules=rules, assumptions=SimpleNamespace(
        downtime_cost_per_h=500.0)), [45.0, 400.0], "EUR")
    assert "1 motor of the case is larger and is left to its own comparison" in one and "(EUR 500 per hour)" in one
    assert services.fleet_rules_scope_text(SimpleNamespace(fleet_rules=pd.DataFrame()), [1.0], "EUR") == ""
    # a larger motor the asset comparison leaves out too because no new motor of the catalogue fits it is said so,
    # not sent to a comparison that is not there (the reason as models.scenario.end_of_life_left_out gives it; an
    # idle motor, left out for another reason, is not counted)
    ops = SimpleNamespace(operation=SimpleNamespace(asset_ids=np.array(["A", "B", "C", "D"], dtype=object)))
    why = {"A": "", "B": "", "C": "no_new_motor", "D": "idle"}
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(services.scenario, "end_of_life_left_out", lambda result, asset_id: why[asset_id])
        partly = services.fleet_rules_scope_text(SimpleNamespace(
            fleet_rules=rules, physics=ops, assumptions=SimpleNamespace(downtime_cost_per_h=0.0)),
            [45.0, 355.0, 710.0, 800.0], "EUR")
        alone = services.fleet_rules_scope_text(SimpleNamespace(
            fleet_rules=rules, physics=ops, assumptions=SimpleNamespace(downtime_cost_per_h=0.0)),
            [45.0, 46.0, 710.0, 47.0], "EUR")
    assert "3 motors of the case are larger and are left to their own comparison above (1 without one: no new motor" in partly
    assert "1 motor of the case is larger and is left to its own comparison above (none is made: no new motor" in alone
    # a size of four digits is written as the policy's grid writes it, with its thousands separator
    wide = rules.assign(max_rated_p_kw=[7.5, 1000.0])
    assert services.fleet_rules_scope_text(SimpleNamespace(fleet_rules=wide, assumptions=SimpleNamespace(
        downtime_cost_per_h=0.0)), [45.0], "EUR").startswith("It covers standard ratings from 0.75 to 1,000 kW.")
