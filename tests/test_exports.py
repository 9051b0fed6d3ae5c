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
