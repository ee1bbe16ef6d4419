"""Assumption previews against statsmodels' own tests on the same design, same process.

prefit reuses the preliminary fit's R factor for every auxiliary regression;
statsmodels refits each one from scratch. Prints the time ratio and the
largest relative disagreement; simulated data, fixed seed.
Run: python benchmarks/bench_assumptions.py
"""

from __future__ import annotations

import warnings

import numpy as np
import statsmodels.api as sm
from statsmodels.stats.diagnostic import (
    acorr_breusch_godfrey,
    het_breuschpagan,
    het_white,
    linear_reset,
)
from statsmodels.stats.stattools import jarque_bera
from timing import best_of

from prefit.stats import residual_tests as tests
from prefit.stats.factor import DesignFactor
from prefit.stats.fit import PreliminaryFit

ROWS, PREDICTORS, LAGS, REPEATS = 100_000, 8, 10, 3


def main() -> None:
    rng = np.random.default_rng(20260601)
    X = np.column_stack([np.ones(ROWS), rng.normal(size=(ROWS, PREDICTORS))])
    y = X @ rng.normal(size=PREDICTORS + 1) + rng.normal(size=ROWS) * (1 + 0.2 * np.abs(X[:, 1]))
    fit = PreliminaryFit(DesignFactor.of(X, y), float(np.sum((y - y.mean()) ** 2)), True)
    residual = fit.score_rows(X, y).residual

    def ours() -> list[float]:
        return [
            tests.breusch_pagan(fit.factor, X, residual, True).statistic,
            tests.white(fit.factor, X, residual, 0).statistic,
            tests.reset(fit.factor, X, residual, y - residual, True).statistic,
            tests.jarque_bera(residual)[0].statistic,
            tests.breusch_godfrey(fit.factor, X, residual, LAGS, True).statistic,
        ]

    ols = sm.OLS(y, X).fit()

    def theirs() -> list[float]:
        return [
            het_breuschpagan(ols.resid, X)[0],
            het_white(ols.resid, X)[0],
            float(linear_reset(ols, power=3, use_f=False).statistic),
            jarque_bera(ols.resid)[0],
            acorr_breusch_godfrey(ols, nlags=LAGS, result_object=True)[0],
        ]

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        disagreement = np.max(np.abs(np.array(ours()) - np.array(theirs())) / np.abs(np.array(theirs())))
        prefit_time, statsmodels_time = best_of(ours, REPEATS), best_of(theirs, REPEATS)
    print(f"{ROWS:,} rows, {PREDICTORS} predictors: Breusch-Pagan, White, RESET, Jarque-Bera, Breusch-Godfrey ({LAGS} lags)")
    print(f"largest relative disagreement with statsmodels: {disagreement:.1e}")
    print(f"prefit / statsmodels time: {prefit_time / statsmodels_time:.2f}")


if __name__ == "__main__":
    main()
