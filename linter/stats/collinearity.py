"""Collinearity diagnostics from the design's R factor: (generalised) VIFs, correlations, condition indices.

Everything here is computed from the p x p R factor that :class:`DesignFactor`
already holds, with no further pass over the rows: re-triangularising ``R``
with the intercept first gives, in its trailing block, the Cholesky factor of
the centred cross-products (the Frisch-Waugh-Lovell theorem: projecting out
the intercept is centring), so the predictor correlation matrix and its
inverse come from orthogonal transformations, never from ``X'X``.

Columns in an exact linear dependency are left out first (the
``collinearity.exact`` rule reports those), so every statistic here describes
the estimable design and stays finite.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable

import numpy as np
import scipy.linalg

from ..design import INTERCEPT, Design
from .factor import EPS, DesignFactor
from .factor import condition_number as condition_of

DOMINANT_PROPORTION = 0.5
MAX_BALANCED_RELATIONS = 50
RELIABLE_ERROR = 0.1
#: A screen by singular values alone clears a condition-index limit only when the condition number stays this far
#: (relatively) below it.
SCREEN_MARGIN = 1e-6
CANCELLATION_LIMIT = 1.0 / np.sqrt(EPS)


def dependent_columns(factor: DesignFactor, names: tuple[str, ...]) -> tuple[int, ...]:
    """Design columns to leave out so that the rest has full rank, one per exact dependency.

    In each dependency the column carrying the most weight (``|coefficient| *
    column norm``, so a total rather than one of its parts) is left out, never
    the intercept; when those choices do not restore full rank, the columns
    the pivoted QR placed beyond the rank are used instead. Beyond
    :data:`MAX_BALANCED_RELATIONS` dependencies (a design with more columns
    than rows has a null space as wide as the shortage) the pivoted QR's
    choice is taken at once: weighing every relation would cost O(p^3) in
    Python and the relations alone O(p^2) memory.
    """
    if factor.p - factor.rank > MAX_BALANCED_RELATIONS:
        return tuple(sorted(int(j) for j in factor.perm[factor.rank :]))
    relations = factor.relations()
    if not relations:
        return ()
    p = factor.p
    vectors = np.zeros((len(relations), p))
    for row, relation in enumerate(relations):
        vectors[row, relation.left] = 1.0
        vectors[row, list(relation.right)] = -np.asarray(relation.coefficients)
    weights = np.abs(vectors) * factor.scales[None, :]
    chosen: list[int] = []
    for row in range(len(relations)):
        order = sorted(range(p), key=lambda j: (-weights[row, j], j))
        candidates = [j for j in order if weights[row, j] > 0 and j not in chosen and names[j] != INTERCEPT]
        if not candidates:
            break
        chosen.append(candidates[0])
    usable = bool(np.all(np.isfinite(vectors[:, chosen]))) if chosen else False
    if usable and len(chosen) == len(relations) and np.linalg.matrix_rank(vectors[:, chosen]) == len(relations):
        return tuple(sorted(chosen))
    return tuple(sorted(int(j) for j in factor.perm[factor.rank :]))


def _unpivoted(factor: DesignFactor, columns: list[int]) -> np.ndarray:
    """The R factor of the unit-length-scaled design restricted to ``columns``, in that order."""
    position = np.empty(factor.p, dtype=int)
    position[factor.perm] = np.arange(factor.p)
    block = factor.r[:, position[columns]]
    return scipy.linalg.qr(block, mode="r", check_finite=False)[0][: len(columns)]


def _last_diagonal(factor: np.ndarray, columns: list[int], last: list[int]) -> np.ndarray:
    """Diagonal of the R factor of ``factor[:, columns + last]`` at the ``last`` columns."""
    r = scipy.linalg.qr(factor[:, columns + last], mode="r", check_finite=False)[0]
    return np.abs(np.diag(r)[len(columns) :])


def _generalised_vif(factor: np.ndarray, inside: list[int]) -> float:
    """Fox & Monette's ``det(C_JJ) det(C^-1_JJ)`` for the columns ``inside`` of ``C = factor' factor``, by QR alone.

    For one column this is its VIF, ``1 / r_jj^2`` with the column ordered last.

    ``det(C_JJ)`` is the squared product of the diagonal of the R factor of
    ``factor[:, J]``; ordering ``J`` last, ``C^-1_JJ`` is the inverse of the
    trailing block's cross-product, so ``det(C^-1_JJ)`` is one over its
    squared diagonal product. Both are squares, so the result is never
    negative, as a difference of determinants of inverses can be in round-off.
    """
    others = [i for i in range(factor.shape[1]) if i not in inside]
    alone = _last_diagonal(factor, [], inside)
    after = _last_diagonal(factor, others, inside)
    with np.errstate(divide="ignore", over="ignore"):
        return float(np.prod((alone / after) ** 2))


def _determinant(symmetric: np.ndarray) -> float:
    """Determinant of a positive semi-definite matrix: the product of its eigenvalues, round-off below zero clipped to zero."""
    with np.errstate(over="ignore"):
        return float(np.prod(np.clip(np.linalg.eigvalsh(symmetric), 0.0, None)))


def _solve_semidefinite(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``a^+ b`` for a symmetric positive semi-definite ``a``, from its eigen-decomposition.

    Eigenvalues at or below ``size * eps`` times the largest count as zero
    (the pseudo-inverse), so a numerically singular ``a`` neither raises nor
    warns.
    """
    values, vectors = np.linalg.eigh(a)
    kept = values > values[-1] * a.shape[0] * EPS if values.size else values > 0
    basis = vectors[:, kept]
    return np.asarray(basis @ ((basis.T @ b) / values[kept, None]))


@dataclass(frozen=True)
class TermInflation:
    """How much collinearity inflates the variance of one term's coefficients.

    For a term of one column, ``gvif`` is the ordinary VIF, ``1 / (1 - R^2)``
    of the auxiliary regression of that column on the other predictors. For a
    term of ``df`` dummy columns it is the generalised VIF of Fox & Monette
    (1992), ``det(C_JJ) det(C^-1_JJ)`` on the predictor correlation matrix C;
    its ``auxiliary_r_squared`` is the R^2 equivalent ``1 - GVIF^(-1/df)``.
    ``indices`` locate the term's columns among the kept predictors.

    References
    ----------
    Fox, J., Monette, G. (1992). Generalized collinearity diagnostics. JASA 87(417), 178-183.
    """

    term: str
    columns: tuple[str, ...]
    indices: tuple[int, ...]
    gvif: float

    @property
    def df(self) -> int:
        """Design columns of the term."""
        return len(self.columns)

    @property
    def vif_scale(self) -> float:
        """GVIF^(1/df): comparable with the VIF thresholds whatever the df."""
        return float(self.gvif ** (1.0 / self.df))

    @property
    def se_inflation(self) -> float:
        """GVIF^(1/(2 df)): the factor by which collinearity widens confidence intervals (sqrt(VIF) for one column)."""
        return float(self.gvif ** (0.5 / self.df))

    @property
    def auxiliary_r_squared(self) -> float:
        """R^2 of the term's columns regressed on the other predictors (its equivalent for several columns)."""
        return 1.0 - 1.0 / self.vif_scale


@dataclass(frozen=True)
class NearDependency:
    """A near linear dependency: a large condition index and the columns whose variance it dominates."""

    index: float
    proportions: tuple[tuple[str, float], ...]


@dataclass(frozen=True)
class Collinearity:
    """Collinearity diagnostics of the estimable design.

    ``columns`` are the design columns kept (intercept first when there is
    one), ``r_scaled`` their R factor with unit-length columns, ``scales``
    their Euclidean norms, ``predictors`` the kept non-intercept columns and
    ``correlation_factor`` the upper-triangular ``R_c`` with ``R_c' R_c`` the
    predictor correlation matrix (uncentred without an intercept);
    ``centring_loss`` is the largest ratio of a kept predictor's length to its
    length after centring (1 without an intercept), the factor by which
    centring magnified its round-off.
    """

    design_names: tuple[str, ...]
    sources: tuple[str, ...]
    columns: tuple[int, ...]
    left_out: tuple[int, ...]
    r_scaled: np.ndarray
    scales: np.ndarray
    predictors: tuple[int, ...]
    correlation_factor: np.ndarray
    centred: bool
    centring_loss: float
    screen_values: Callable[[], np.ndarray] | None = field(default=None, repr=False, compare=False)

    @classmethod
    def of(cls, design: Design, factor: DesignFactor) -> "Collinearity":
        """Diagnostics from the design's pivoted R factor (O(p^3), no pass over the rows)."""
        names = design.column_names
        left_out = dependent_columns(factor, names) if factor.n else tuple(range(factor.p))
        kept = [j for j in range(factor.p) if j not in left_out]
        intercept = [j for j in kept if names[j] == INTERCEPT]
        ordered = intercept + [j for j in kept if names[j] != INTERCEPT]
        r = _unpivoted(factor, ordered) if ordered else np.zeros((0, 0))
        skip = len(intercept)
        block = r[skip:, skip:]
        norms = np.sqrt(np.einsum("ij,ij->j", block, block)) if block.size else np.zeros(0)
        varying = norms > 0
        predictors = tuple(j for j, keep in zip(ordered[skip:], varying) if keep)
        inner = block[:, varying]
        corr_factor = scipy.linalg.qr(inner / norms[varying], mode="r", check_finite=False)[0][: inner.shape[1]] if inner.size else np.zeros((0, 0))
        return cls(
            design_names=names,
            sources=design.column_sources,
            columns=tuple(ordered),
            left_out=tuple(left_out),
            r_scaled=r,
            scales=factor.scales[ordered],
            predictors=predictors,
            correlation_factor=corr_factor,
            centred=bool(skip),
            centring_loss=float(1.0 / norms[varying].min()) if np.any(varying) else 1.0,
            # every column kept: the factor's own singular values serve the screen (the same matrix but for rounding)
            screen_values=(lambda: factor.singular_values_scaled) if not left_out and factor.n >= factor.p else None,
        )

    @cached_property
    def correlation(self) -> np.ndarray:
        """Correlation matrix of the kept predictors (cosines of the raw columns without an intercept)."""
        c = self.correlation_factor.T @ self.correlation_factor
        d = np.sqrt(np.diag(c))
        return np.clip(c / np.outer(d, d), -1.0, 1.0) if c.size else c

    @cached_property
    def precision(self) -> np.ndarray:
        """Inverse of the correlation matrix, ``R_c^-1 R_c^-T``."""
        k = self.correlation_factor.shape[0]
        if k == 0:
            return np.zeros((0, 0))
        inverse = scipy.linalg.solve_triangular(self.correlation_factor, np.eye(k), check_finite=False)
        return inverse @ inverse.T

    @cached_property
    def vif(self) -> np.ndarray:
        """Variance inflation factor of each kept predictor column (diagonal of the inverse correlation matrix)."""
        return np.diag(self.precision).copy()

    def predictor_names(self) -> tuple[str, ...]:
        """Design-column names of the kept predictors, in the order of :attr:`vif`."""
        return tuple(self.design_names[j] for j in self.predictors)

    @cached_property
    def terms(self) -> tuple[TermInflation, ...]:
        """Inflation of every term with at least one kept predictor column, in design order."""
        sources = [self.sources[j] for j in self.predictors]
        names = self.predictor_names()
        out: list[TermInflation] = []
        positions: dict[str, list[int]] = {}
        for i, source in enumerate(sources):
            positions.setdefault(source, []).append(i)
        for term, inside in positions.items():
            if len(inside) == 1:
                gvif = float(self.precision[inside[0], inside[0]])
            else:
                gvif = _generalised_vif(self.correlation_factor, inside)
            out.append(TermInflation(term, tuple(names[i] for i in inside), tuple(inside), max(gvif, 1.0)))
        return tuple(out)

    @cached_property
    def relative_error(self) -> float:
        """First-order bound on the relative error of the VIFs and condition indices computed here.

        Inverting the correlation factor ``R_c`` magnifies its relative
        round-off by its condition number (Higham 2002, sec. 14.1), and
        centring a column that barely varies about its mean has already
        magnified that round-off by the ratio of its length to its centred
        length. A condition index ``s_max / s_k`` is as uncertain as
        ``eps * s_max / s_k`` (singular values are perturbed by about
        ``eps * s_max``). Beyond about 0.1 even the leading digit is noise.

        References
        ----------
        Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., sec. 14.1 and 19.3. SIAM.
        """
        k = self.correlation_factor.shape[0]
        if k == 0:
            return 0.0
        kappa = condition_of(scipy.linalg.svdvals(self.correlation_factor, check_finite=False))
        with np.errstate(over="ignore"):
            return float(EPS * max(kappa * self.centring_loss, self.condition_number))

    @property
    def reliable(self) -> bool:
        """Whether the VIFs keep at least their leading digit (:attr:`relative_error` below :data:`RELIABLE_ERROR`)."""
        return self.relative_error < RELIABLE_ERROR

    @cached_property
    def _reliefs(self) -> dict[str, tuple[tuple[str, float], ...]]:
        return {}

    def relief(self, inflation: TermInflation) -> tuple[tuple[str, float], ...]:
        """For every other term, the term's GVIF^(1/df) if that other term were dropped; most relief first.

        Dropping term T leaves the inverse correlation matrix of the rest as
        the Schur complement ``P_JJ - P_JT P_TT^-1 P_TJ`` of the full one, so
        each answer costs O(df^2 |T| + |T|^3) and no new factorisation.
        Computed once per term and kept.
        """
        if inflation.term not in self._reliefs:
            self._reliefs[inflation.term] = self._relief(inflation)
        return self._reliefs[inflation.term]

    def _relief(self, inflation: TermInflation) -> tuple[tuple[str, float], ...]:
        P, J = self.precision, list(inflation.indices)
        kept_j = _determinant(self.correlation[np.ix_(J, J)]) if len(J) > 1 else 1.0
        others = [term for term in self.terms if term.term != inflation.term]
        singles = [term for term in others if term.df == 1]
        out: list[tuple[str, float]] = []
        if singles and len(J) == 1:
            t = np.array([term.indices[0] for term in singles])
            j = J[0]
            with np.errstate(over="ignore", invalid="ignore"):
                without = np.maximum(P[j, j] - P[j, t] ** 2 / P[t, t], 1.0)
            out += [(term.term, self._checked_relief(inflation, term, float(v))) for term, v in zip(singles, without)]
            others = [term for term in others if term.df > 1]
        for other in others:
            T = list(other.indices)
            schur = P[np.ix_(J, J)] - P[np.ix_(J, T)] @ _solve_semidefinite(P[np.ix_(T, T)], P[np.ix_(T, J)])
            gvif = max(kept_j * _determinant(schur), 1.0)
            out.append((other.term, self._checked_relief(inflation, other, gvif ** (1.0 / len(J)))))
        return tuple(sorted(out, key=lambda item: (item[1], item[0])))

    def _checked_relief(self, inflation: TermInflation, other: TermInflation, downdated: float) -> float:
        """``downdated`` (GVIF^(1/df) without ``other``, from the inverse), or refactored when the downdate cancelled.

        Subtracting from the inverse loses the digits by which the relief
        shrinks the inflation; beyond half of double precision's digits the
        answer is recomputed from the R factor without ``other``'s columns.
        """
        if not downdated * CANCELLATION_LIMIT < inflation.vif_scale:
            return downdated
        rest = [i for i in range(self.correlation_factor.shape[1]) if i not in other.indices]
        inside = [rest.index(i) for i in inflation.indices]
        return float(max(_generalised_vif(self.correlation_factor[:, rest], inside), 1.0) ** (1.0 / inflation.df))

    @cached_property
    def _svd(self) -> tuple[np.ndarray, np.ndarray]:
        if self.r_scaled.size == 0:
            return np.zeros(0), np.zeros((0, 0))
        _, s, vt = scipy.linalg.svd(self.r_scaled, check_finite=False)
        return s, vt.T

    @property
    def singular_values(self) -> np.ndarray:
        """Singular values of the kept, unit-length-scaled design (intercept kept, not centred), largest first."""
        return self._svd[0]

    @cached_property
    def _screen_values(self) -> np.ndarray:
        if self.r_scaled.size == 0:
            return np.zeros(0)
        if self.screen_values is not None:
            return self.screen_values()
        return scipy.linalg.svdvals(self.r_scaled, check_finite=False)

    def index_may_reach(self, index_limit: float) -> bool:
        """Whether some condition index may reach ``index_limit``; False only when clearly below it.

        Screened with the singular values alone (no singular vectors: a third of the full decomposition's cost
        on a wide design): the condition number, the largest index, must stay below the limit by
        :data:`SCREEN_MARGIN`, far beyond the two routes' rounding differences.
        """
        if "_svd" in self.__dict__:
            return bool(np.any(self.condition_indices >= index_limit))
        s = self._screen_values
        if s.size == 0:
            return False
        return not (s[-1] > 0 and s[0] / s[-1] * (1.0 + SCREEN_MARGIN) < index_limit)

    @cached_property
    def condition_indices(self) -> np.ndarray:
        """Condition indices ``s_max / s_k`` (Belsley, Kuh & Welsch 1980), in the order of :attr:`singular_values`."""
        s = self.singular_values
        if s.size == 0:
            return s
        with np.errstate(divide="ignore"):
            return np.where(s > 0, s[0] / s, np.inf)

    @property
    def condition_number(self) -> float:
        """The largest condition index: the 2-norm condition number of the kept, unit-length-scaled design."""
        return float(self.condition_indices.max()) if self.condition_indices.size else 1.0

    @cached_property
    def variance_proportions(self) -> np.ndarray:
        """Variance-decomposition proportions ``pi[k, j]``: the share of var(b_j) tied to singular value k.

        References
        ----------
        Belsley, D. A., Kuh, E., Welsch, R. E. (1980). Regression Diagnostics, ch. 3. Wiley.
        """
        s, v = self._svd
        if s.size == 0 or s[-1] <= 0:
            return np.full((s.size, s.size), np.nan)
        phi = (v / s[None, :]) ** 2
        return (phi / phi.sum(axis=1, keepdims=True)).T

    def column_names(self) -> tuple[str, ...]:
        """Names of the kept design columns, in the order of the proportions' columns."""
        return tuple(self.design_names[j] for j in self.columns)

    def near_dependencies(self, index_limit: float, proportion_limit: float = DOMINANT_PROPORTION) -> tuple[NearDependency, ...]:
        """Condition indices at or above ``index_limit`` with two or more proportions above ``proportion_limit``, largest first."""
        if not self.index_may_reach(index_limit):
            return ()
        names = self.column_names()
        out: list[NearDependency] = []
        for index, row in zip(self.condition_indices, self.variance_proportions):
            if not index >= index_limit:
                continue
            involved = [(names[j], float(row[j])) for j in np.flatnonzero(row > proportion_limit).tolist()]
            if len(involved) >= 2:
                out.append(NearDependency(float(index), tuple(involved)))
        return tuple(sorted(out, key=lambda d: -d.index))

    @cached_property
    def condition_raw(self) -> float:
        """2-norm condition number of the kept design in its own units (not scaled)."""
        if self.r_scaled.size == 0:
            return 1.0
        raw = self._raw_factor()
        if raw is None:
            return float("nan")
        s = scipy.linalg.svdvals(raw, check_finite=False)
        return float(s[0] / s[-1]) if s[-1] > 0 else float("inf")

    def _raw_factor(self) -> np.ndarray | None:
        """The R factor in the columns' own units; None when a column's magnitude overflows it (NaN results)."""
        with np.errstate(over="ignore", invalid="ignore"):
            raw = self.r_scaled * self.scales[None, :]
        return raw if np.all(np.isfinite(raw)) else None

    def raw_dependency(self) -> NearDependency:
        """The raw (unscaled) design's worst direction: its condition number and every column's variance proportion.

        The proportions are those of Belsley, Kuh & Welsch computed on the
        columns in their own units, at the smallest singular value: the
        columns with large proportions are the ones the lost digits belong to.
        """
        names = self.column_names()
        if self.r_scaled.size == 0:
            return NearDependency(1.0, ())
        raw = self._raw_factor()
        if raw is None:
            return NearDependency(float("nan"), tuple((name, float("nan")) for name in names))
        _, s, vt = scipy.linalg.svd(raw, check_finite=False)
        if s[-1] <= 0:
            return NearDependency(float("inf"), tuple((name, float("nan")) for name in names))
        phi = (vt.T / s[None, :]) ** 2
        share = phi[:, -1] / phi.sum(axis=1)
        index = float(s[0] / s[-1])
        return NearDependency(index, tuple((names[j], float(share[j])) for j in range(len(names))))
