"""Leverage of new rows (range.extrapolation): prefit's triangular solve against two baselines, same process.

Prints the time ratios; simulated data, fixed seed. Run: python benchmarks/bench_scoring.py
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from timing import best_of

from prefit.stats.factor import DesignFactor
from prefit.stats.fit import PreliminaryFit

ROWS, NEW_ROWS, PREDICTORS, REPEATS = 100_000, 20_000, 12, 3


def main() -> None:
    rng = np.random.default_rng(20260601)
    X = np.column_stack([np.ones(ROWS), rng.normal(size=(ROWS, PREDICTORS))])
    y = X @ rng.normal(size=PREDICTORS + 1) + rng.normal(size=ROWS)
    new = np.column_stack([np.ones(NEW_ROWS), rng.normal(size=(NEW_ROWS, PREDICTORS))])

    fit = PreliminaryFit(DesignFactor.of(X, y), float(np.sum((y - y.mean()) ** 2)), True)
    fit.score_rows(new[:10], np.zeros(10))

    def prefit_leverage() -> np.ndarray:
        return fit.score_rows(new, np.zeros(NEW_ROWS)).hat

    def normal_equations() -> np.ndarray:
        inverse = np.linalg.inv(X.T @ X)
        return np.einsum("ij,jk,ik->i", new, inverse, new)

    ols = sm.OLS(y, X).fit()

    def statsmodels_prediction() -> np.ndarray:
        return ols.get_prediction(new).se_mean ** 2 / ols.scale

    agreement = np.max(np.abs(prefit_leverage() - statsmodels_prediction()) / statsmodels_prediction())
    ours = best_of(prefit_leverage, REPEATS)
    textbook = best_of(normal_equations, REPEATS)
    reference = best_of(statsmodels_prediction, REPEATS)
    print(f"{NEW_ROWS:,} new rows against a fit of {ROWS:,} x {PREDICTORS + 1}; best of {REPEATS}")
    print(f"prefit triangular solve (factor reused)      {ours * 1e3:8.1f} ms")
    print(f"normal equations (forms X'X, inverts it)  {textbook * 1e3:8.1f} ms   ratio prefit/this {ours / textbook:5.2f}")
    print(f"statsmodels get_prediction (fit reused)       {reference * 1e3:8.1f} ms   ratio prefit/this {ours / reference:5.2f}")
    print(f"largest relative difference from statsmodels  {agreement:.1e}")


if __name__ == "__main__":
    main()
