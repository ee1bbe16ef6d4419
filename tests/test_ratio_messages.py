"""Numbers in messages stay sensible when a column's centre is about 0."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from prefit.api import check
from prefit.rule import meaningful_ratio


def test_a_gross_value_in_a_column_centred_on_0_is_not_printed_as_a_ratio_to_its_median() -> None:
    rng = np.random.default_rng(51)
    n = 300
    frame = pd.DataFrame({"drift": rng.normal(0, 1, n), "load": rng.uniform(50, 150, n)})
    frame.loc[7, "drift"] = 400.0  # a gross value in a column centred on 0
    frame["y"] = frame.load + rng.normal(0, 5, n)
    findings = [f for f in check(frame, target="y").findings if f.rule == "outliers.univariate" and "drift" in f.columns]
    assert findings, "the planted value must be reported"
    assert not re.search(r"[\d,.]+x the median", findings[0].message)


def test_meaningful_ratio_refuses_references_about_0_and_negative_ratios() -> None:
    assert meaningful_ratio(9.0, 3.0, 1.0) == 3.0
    assert meaningful_ratio(9_099.0, 0.001, 1.0) is None  # the median within one MAD of 0
    assert meaningful_ratio(-9.0, 3.0, 1.0) is None
    assert meaningful_ratio(9.0, 0.0, 0.0) is None


def test_skewed_target_near_0_names_its_range_instead_of_a_ratio() -> None:
    rng = np.random.default_rng(52)
    n = 400
    x = rng.uniform(0, 1, n)
    y = np.exp(rng.normal(0, 1.2, n) + x)
    y[0] = 1e-7  # strictly positive, smallest value about 0
    findings = [f for f in check(pd.DataFrame({"x": x, "y": y}), target="y").findings if f.rule == "target.skewed"]
    assert findings and "values from about 0" in findings[0].message and "times the smallest" not in findings[0].message
