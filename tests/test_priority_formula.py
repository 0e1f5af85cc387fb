"""One priority formula (issue 12): the text written in the workbook's Method sheet, the
report's Method section and the header note reproduces every score by hand."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd


def _written_formula(demo_out) -> str:
    method = pd.read_excel(demo_out / "deficiencies.xlsx", sheet_name="Method", header=None)
    line = method.loc[method[0] == "Priority score", 1].iloc[0]
    return line.split(";")[0]


def test_every_score_recomputed_from_the_written_formula(demo_out):
    """pandas.eval (the reference evaluator) of the Method sheet's formula over the factor
    columns gives every priority_score (to the written rounding: factors 0.001, score 0.1)."""
    formula = _written_formula(demo_out)
    assert formula.startswith("priority_score = ")
    d = pd.read_csv(demo_out / "deficiencies.csv")
    frame = d[["f_shortfall", "f_speed", "f_exposure"]].assign(hidden=(d["hidden_hazard"] != "none").astype(float))
    got = pd.eval(formula.split("=", 1)[1], local_dict={c: frame[c].to_numpy() for c in frame.columns})
    np.testing.assert_allclose(got, d["priority_score"], atol=0.2)
    assert (d["hidden_hazard"] != "none").any()  # the hazard term is exercised


def test_formula_shown_the_same_everywhere(demo_out):
    import openpyxl

    formula = _written_formula(demo_out)
    html = (demo_out / "report.html").read_text()
    assert formula in html.replace("&#x27;", "'")
    wb = openpyxl.load_workbook(demo_out / "deficiencies.xlsx")
    ws = wb["Deficiencies"]
    header = {c.value: c for c in ws[1]}
    note = header["priority_score"].comment.text
    assert formula in note
    assert not re.search(r"\b0-100\b(?!, plus)", note)
