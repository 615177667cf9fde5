"""Build the estimation design from a data frame and a claim.

The result is one float64 array ``data = [y, X, Z, W]`` (outcome, focal
regressors, excluded instruments, included exogenous regressors) on the
estimation sample: filters applied, categorical controls expanded, rows with
missing values in any used column deleted, fixed effects partialled out,
rows scaled by the square root of the analytic weights, and rows ordered by
the first cluster variable so that cluster sums are contiguous. Its
cross-product ``gram = data' data`` is computed once here and shared by every
estimator.

Everything the reviewer should know about the sample (rows dropped and why,
singletons, absorbed columns, collinearity) is recorded in
:class:`SampleReport`.
"""

from __future__ import annotations

import dataclasses
import difflib
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from app.data.collinearity import CONSTANT_TOLERANCE, SUMMED_SPREAD_TOLERANCE, check_columns
from app.data.filters import FilterStep, filter_mask
from app.data.fixed_effects import AbsorbedEffects, absorb, dof_nested_in_clusters, drop_singletons
from app.errors import DesignError
from app.spec import ClaimSpec

INTERCEPT = "(intercept)"
FEW_CLUSTERS = 50
FAR_FROM_ZERO = 8.0


@dataclass(frozen=True)
class CategoricalExpansion:
    """How one categorical control became indicator columns."""

    column: str
    reference: str
    levels: list[str]

    @property
    def names(self) -> list[str]:
        return [f"{self.column}={level}" for level in self.levels]


@dataclass(frozen=True)
class SampleReport:
    """How the estimation sample came about."""

    rows_read: int
    filter_steps: list[FilterStep]
    rows_after_filters: int
    missing_by_column: dict[str, int]
    rows_dropped_missing: int
    rows_dropped_zero_weight: int
    singletons_dropped: int
    n_obs: int
    categorical: list[CategoricalExpansion]
    absorbed_columns: list[str]
    warnings: list[str]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "rows_read": self.rows_read,
            "filters": [{"filter": s.description, "rows_removed": s.rows_removed} for s in self.filter_steps],
            "rows_after_filters": self.rows_after_filters,
            "missing_by_column": dict(self.missing_by_column),
            "rows_dropped_missing": self.rows_dropped_missing,
            "rows_dropped_zero_weight": self.rows_dropped_zero_weight,
            "singletons_dropped": self.singletons_dropped,
            "n_obs": self.n_obs,
            "categorical": [
                {"column": c.column, "reference": c.reference, "levels": c.levels} for c in self.categorical
            ],
            "absorbed_columns": list(self.absorbed_columns),
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class DesignMatrices:
    """The stacked estimation array and what its columns mean.

    Attributes
    ----------
    data
        ``n x (1 + p + q + k)`` array ``[y, X, Z, W]`` after every transformation.
    gram
        ``data' data``, computed once and shared by every estimator.
    rows
        Positions (in the input frame) of the rows of ``data``, in order.
    weights
        Analytic weights of those rows (None when unweighted).
    clusters
        Integer cluster codes aligned with ``data`` (one array per cluster column).
    absorbed
        What absorbing the fixed effects did (None without fixed effects).
    """

    outcome: str
    endogenous: list[str]
    instruments: list[str]
    exogenous: list[str]
    data: np.ndarray
    gram: np.ndarray
    rows: np.ndarray
    weights: np.ndarray | None
    clusters: list[np.ndarray]
    cluster_names: list[str]
    absorbed: AbsorbedEffects | None
    sample: SampleReport

    @property
    def n_obs(self) -> int:
        return self.data.shape[0]

    @property
    def absorbed_dof(self) -> int:
        return self.absorbed.dof if self.absorbed else 0

    @property
    def nested_dof(self) -> int:
        """Absorbed degrees of freedom nested within the (one-way) clusters; the cluster factor leaves them out of k."""
        return self.absorbed.nested_dof if self.absorbed else 0

    @property
    def columns(self) -> list[str]:
        """Names of the columns of ``data`` in order."""
        return [self.outcome, *self.endogenous, *self.instruments, *self.exogenous]


@dataclass(frozen=True)
class _Selection:
    rows: np.ndarray
    filter_steps: list[FilterStep]
    rows_after_filters: int
    missing_by_column: dict[str, int]
    rows_dropped_missing: int
    rows_dropped_zero_weight: int


def build_design(frame: pd.DataFrame, spec: ClaimSpec) -> DesignMatrices:
    """Turn a data frame and a claim into the stacked estimation array.

    Raises
    ------
    DesignError
        With a message naming the column or the problem: unknown column, text
        in a numeric role, infinite values, every row dropped, exact
        collinearity, fewer rows than parameters, a single cluster.
    """
    check_columns_exist(frame, spec.used_columns() + [f.column for f in spec.filters])
    numeric = {column: numeric_values(frame[column], column) for column in _numeric_roles(spec)}
    selection = _select_rows(frame, spec, numeric)
    rows = selection.rows

    fe_codes = [_codes(frame[c].to_numpy()[rows]) for c in spec.fixed_effects]
    singletons = 0
    if fe_codes:
        kept, singletons = drop_singletons(fe_codes)
        if not kept.any():
            raise DesignError("every row is a singleton group of the fixed effects; nothing is left to estimate")
        rows = rows[kept]
        fe_codes = [_codes(codes[kept]) for codes in fe_codes]

    cluster_codes = [_codes(frame[c].to_numpy()[rows]) for c in spec.cluster]
    if cluster_codes:
        order = np.argsort(cluster_codes[0], kind="stable")
        rows = rows[order]
        cluster_codes = [codes[order] for codes in cluster_codes]
        fe_codes = [codes[order] for codes in fe_codes]
    warnings = _cluster_warnings(spec.cluster, cluster_codes)

    categorical = [_expand_levels(frame[c.column].to_numpy()[rows], c.column, c.reference) for c in spec.categorical]
    use_intercept = spec.intercept and not spec.fixed_effects
    exogenous = ([INTERCEPT] if use_intercept else []) + list(spec.controls)
    exogenous += [name for expansion in categorical for name in expansion.names]
    endogenous, instruments = spec.focal, spec.excluded_instruments
    data = _assemble(frame, numeric, rows, [spec.outcome, *endogenous, *instruments], exogenous, categorical)

    weights = numeric[spec.weights][rows] if spec.weights else None
    unit = np.ones(rows.size) if weights is None else weights
    raw_scale = np.einsum("ij,ij,i->j", data, data, unit)
    absorbed = absorb(data, fe_codes, names=list(spec.fixed_effects), weights=weights) if fe_codes else None
    if absorbed is not None:
        absorbed = dataclasses.replace(absorbed, nested_dof=dof_nested_in_clusters(absorbed, fe_codes, cluster_codes))
    spread = _spread(data, unit, centre=use_intercept)
    if weights is not None:
        data *= np.sqrt(weights)[:, None]
    gram = data.T @ data

    absorbed_columns: list[str] = []
    kept_exog = _check_collinearity(
        gram,
        Spread(
            spread=spread,
            scale=raw_scale,
            tolerance=CONSTANT_TOLERANCE if absorbed is not None and absorbed.tolerance > 0 else SUMMED_SPREAD_TOLERANCE,
        ),
        names=[spec.outcome, *endogenous, *instruments, *exogenous],
        n_endog=len(endogenous),
        n_instr=len(instruments),
        intercept_at=1 + len(endogenous) + len(instruments) if use_intercept else None,
        has_fixed_effects=bool(fe_codes),
        warnings=warnings,
        absorbed_columns=absorbed_columns,
    )
    if absorbed_columns:
        keep = [*range(1 + len(endogenous) + len(instruments)), *kept_exog]
        data = np.asfortranarray(data[:, keep])
        gram = gram[np.ix_(keep, keep)]
        exogenous = [name for name in exogenous if name not in absorbed_columns]

    absorbed_dof = absorbed.dof if absorbed else 0
    n_parameters = max(len(endogenous), len(instruments)) + len(exogenous) + absorbed_dof
    if rows.size <= n_parameters:
        raise DesignError(
            f"{rows.size:,} rows for {n_parameters:,} parameters: the model needs more observations "
            "than coefficients (including absorbed fixed effects)"
        )

    sample = SampleReport(
        rows_read=len(frame),
        filter_steps=selection.filter_steps,
        rows_after_filters=selection.rows_after_filters,
        missing_by_column=selection.missing_by_column,
        rows_dropped_missing=selection.rows_dropped_missing,
        rows_dropped_zero_weight=selection.rows_dropped_zero_weight,
        singletons_dropped=singletons,
        n_obs=int(rows.size),
        categorical=categorical,
        absorbed_columns=absorbed_columns,
        warnings=warnings,
    )
    return DesignMatrices(
        outcome=spec.outcome,
        endogenous=list(endogenous),
        instruments=list(instruments),
        exogenous=exogenous,
        data=data,
        gram=gram,
        rows=rows,
        weights=weights,
        clusters=cluster_codes,
        cluster_names=list(spec.cluster),
        absorbed=absorbed,
        sample=sample,
    )


def check_columns_exist(frame: pd.DataFrame, wanted: list[str]) -> None:
    """Raise a DesignError naming the first column the data file lacks, with close matches."""
    available = [str(c) for c in frame.columns]
    for column in dict.fromkeys(wanted):
        if column not in frame.columns:
            close = difflib.get_close_matches(column, available, n=3)
            hint = f"; similar columns: {', '.join(close)}" if close else ""
            raise DesignError(f"column '{column}' is not in the data file{hint}")


def numeric_values(series: pd.Series, column: str) -> np.ndarray:
    """The column as float64 (missing as NaN); a DesignError if it holds text."""
    if not (pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series)):
        sample = ", ".join(repr(v) for v in series.dropna().astype(str).head(3).tolist())
        raise DesignError(
            f"column '{column}' holds text (e.g. {sample}) but its role needs numbers; "
            "use it as a categorical control, or recode it"
        )
    return series.to_numpy(dtype=np.float64, na_value=np.nan)


def _select_rows(frame: pd.DataFrame, spec: ClaimSpec, numeric: dict[str, np.ndarray]) -> _Selection:
    """Apply the filters, refuse infinite values, delete rows with missing values or zero weight."""
    keep, filter_steps = filter_mask(frame, spec.filters)
    rows_after_filters = int(keep.sum())
    if rows_after_filters == 0:
        raise DesignError(
            "every row was dropped by the filters: "
            + "; ".join(f"'{s.description}' removed {s.rows_removed:,}" for s in filter_steps)
        )
    missing_by_column: dict[str, int] = {}
    complete = keep.copy()
    for column in _model_columns(spec):
        if column in numeric:
            values = numeric[column]
            infinite = int(np.count_nonzero(np.isinf(values) & keep))
            if infinite:
                raise DesignError(
                    f"column '{column}' holds {infinite:,} infinite value(s) in the rows used; "
                    "recode them as missing or remove them before refitting"
                )
            missing = np.isnan(values)
        else:
            missing = frame[column].isna().to_numpy()
        count = int(np.count_nonzero(missing & keep))
        if count:
            missing_by_column[column] = count
        complete &= ~missing
    rows_dropped_missing = rows_after_filters - int(complete.sum())

    zero_weight = 0
    if spec.weights:
        weight_values = numeric[spec.weights]
        if np.any(weight_values[complete] < 0):
            raise DesignError(f"weights column '{spec.weights}' holds negative values")
        zero_weight = int(np.count_nonzero(complete & (weight_values == 0)))
        complete &= weight_values != 0
    if not complete.any():
        worst = sorted(missing_by_column.items(), key=lambda item: -item[1])[:5]
        detail = ", ".join(f"{c} ({m:,} missing)" for c, m in worst) or "every weight is zero"
        raise DesignError(f"every row was dropped because of missing values: {detail}")
    return _Selection(
        rows=np.flatnonzero(complete),
        filter_steps=filter_steps,
        rows_after_filters=rows_after_filters,
        missing_by_column=missing_by_column,
        rows_dropped_missing=rows_dropped_missing,
        rows_dropped_zero_weight=zero_weight,
    )


def _assemble(
    frame: pd.DataFrame,
    numeric: dict[str, np.ndarray],
    rows: np.ndarray,
    leading: list[str],
    exogenous: list[str],
    categorical: list[CategoricalExpansion],
) -> np.ndarray:
    """Stack ``[y, X, Z, W]`` for the selected rows; W holds the intercept, controls and indicators.

    Column-major order: filling a column is then a contiguous write, which
    makes gathering rows in cluster order several times faster.
    """
    data = np.empty((rows.size, len(leading) + len(exogenous)), dtype=np.float64, order="F")
    indicators = {name: (expansion, level) for expansion in categorical for name, level in zip(expansion.names, expansion.levels)}
    labels = {e.column: frame[e.column].to_numpy()[rows].astype(str) for e in categorical}
    for j, name in enumerate([*leading, *exogenous]):
        if name == INTERCEPT:
            data[:, j] = 1.0
        elif name in indicators:
            expansion, level = indicators[name]
            data[:, j] = labels[expansion.column] == level
        else:
            np.take(numeric[name], rows, out=data[:, j])
    return data


def _cluster_warnings(names: list[str], codes: list[np.ndarray]) -> list[str]:
    warnings = []
    for name, column in zip(names, codes):
        n_clusters = int(column.max()) + 1
        if n_clusters < 2:
            raise DesignError(
                f"cluster column '{name}' has a single cluster in the estimation sample; "
                "cluster-robust standard errors need at least two (in practice many more)"
            )
        if n_clusters < FEW_CLUSTERS:
            warnings.append(
                f"only {n_clusters} clusters in '{name}': cluster-robust tests can over-reject with fewer "
                f"than about {FEW_CLUSTERS} clusters (common practice; Cameron & Miller 2015)"
            )
    return warnings


def _model_columns(spec: ClaimSpec) -> list[str]:
    """Columns whose missing values remove a row from the estimation sample."""
    names = [spec.outcome, *spec.focal, *spec.excluded_instruments, *spec.controls]
    names += [c.column for c in spec.categorical]
    names += [*spec.fixed_effects, *spec.cluster]
    names += [spec.weights] if spec.weights else []
    names += [n for n in (spec.unit, spec.time) if n]
    return list(dict.fromkeys(names))


def _numeric_roles(spec: ClaimSpec) -> list[str]:
    names = [spec.outcome, *spec.focal, *spec.excluded_instruments, *spec.controls]
    names += [spec.weights] if spec.weights else []
    return list(dict.fromkeys(names))


def _codes(values: np.ndarray) -> np.ndarray:
    codes, _ = pd.factorize(values, sort=True)
    return codes.astype(np.int64, copy=False)


def _expand_levels(values: np.ndarray, column: str, reference: Any) -> CategoricalExpansion:
    text = pd.Series(values).astype(str).to_numpy()
    levels = sorted(set(text.tolist()), key=_level_sort_key)
    reference_text = levels[0] if reference is None else str(reference)
    if reference_text not in levels:
        raise DesignError(
            f"reference level {reference!r} of categorical control '{column}' does not occur in the "
            f"estimation sample; levels are {', '.join(levels[:10])}"
        )
    return CategoricalExpansion(
        column=column, reference=reference_text, levels=[lv for lv in levels if lv != reference_text]
    )


def _level_sort_key(level: str) -> tuple[int, float | str]:
    try:
        return (0, float(level))
    except ValueError:
        return (1, level)


@dataclass(frozen=True)
class Spread:
    """Each column's variation in the model and the rounding it is known to.

    Attributes
    ----------
    spread
        Sum of squares around the model's baseline, summed over the rows (two
        passes: no cancellation).
    scale
        Raw sum of squares before any centring or absorption.
    tolerance
        ``spread / scale`` at or below which a column counts as constant: the
        rounding of exact centring or one-way absorption, or (two-way) what
        the alternating projections leave of a column the effects absorb.
    """

    spread: np.ndarray
    scale: np.ndarray
    tolerance: float


def _spread(data: np.ndarray, weights: np.ndarray, *, centre: bool) -> np.ndarray:
    """Weighted sum of squares of each column, around its weighted mean when ``centre`` (the model has an intercept).

    Summed from the centred rows, column by column, so that a column such as
    an amount near 1e6 that varies by units keeps its spread, which
    ``x'x - (1'x)^2 / n`` from the cross-products would lose to rounding.
    """
    total = float(weights.sum())
    spread = np.empty(data.shape[1])
    for j in range(data.shape[1]):
        column = data[:, j]
        deviation = column - float(weights @ column) / total if centre else column
        spread[j] = float(np.einsum("i,i,i->", deviation, deviation, weights))
    return spread


def _far_from_zero_warnings(variation: Spread, names: list[str], *, skip: int) -> list[str]:
    """Columns whose variation is tiny against their size: cross-products around the intercept lose digits for them.

    Centring inside ``x'x - (1'x)^2 / n`` loses about ``log10(scale / spread)``
    of the 16 significant digits of double precision (Higham 2002, sec. 1.9).
    Beyond :data:`FAR_FROM_ZERO` (8 digits lost) printed estimates may be
    wrong beyond the digits kept; subtracting a constant from the column
    changes only the intercept.
    """
    warnings = []
    for j, name in enumerate(names):
        if j == skip or variation.spread[j] <= 0:
            continue
        lost = float(np.log10(variation.scale[j] / variation.spread[j]))
        if lost > FAR_FROM_ZERO:
            warnings.append(
                f"'{name}' varies little relative to its size (its spread is about 1e-{lost / 2:.0f} of its "
                f"magnitude): computed from cross-products, estimates keep only about {16 - lost:.0f} of 16 "
                "significant digits; subtract a constant from it (e.g. its mean), which changes only the intercept"
            )
    return warnings


def _check_collinearity(
    gram: np.ndarray,
    variation: Spread,
    *,
    names: list[str],
    n_endog: int,
    n_instr: int,
    intercept_at: int | None,
    has_fixed_effects: bool,
    warnings: list[str],
    absorbed_columns: list[str],
) -> list[int]:
    """Name exactly collinear columns (error) and nearly collinear ones (warning).

    Controls are checked against earlier controls, each focal regressor
    against the controls and earlier focal regressors, each instrument against
    the controls and earlier instruments. Controls that the fixed effects
    absorb are dropped and reported; every other exact collinearity is an
    error, because the claim cannot be refitted as stated. Returns the
    positions of the controls kept.
    """
    exog = list(range(1 + n_endog + n_instr, len(names)))
    endog = list(range(1, 1 + n_endog))
    instr = list(range(1 + n_endog, 1 + n_endog + n_instr))
    spread = variation.spread.copy()
    if intercept_at is not None:
        spread[intercept_at] = gram[intercept_at, intercept_at]

    def check(base: list[int], candidates: list[int]):
        return check_columns(
            gram,
            names,
            base=base,
            candidates=candidates,
            spread=spread,
            scale=variation.scale,
            constant_tolerance=variation.tolerance,
        )

    controls = check([], exog)
    for problem in controls.exact:
        if problem.constant and has_fixed_effects:
            absorbed_columns.append(problem.name)
        elif problem.constant:
            raise DesignError(f"control '{problem.name}' is constant in the estimation sample; it cannot be estimated")
        else:
            raise DesignError(f"control '{problem.name}' is an exact linear combination of {', '.join(problem.partners)}")
    reports = [("focal regressor", check(controls.kept, endog)), ("instrument", check(controls.kept, instr))]
    if intercept_at is not None:
        warnings.extend(_far_from_zero_warnings(variation, names, skip=intercept_at))
    for problem in controls.near + [p for _, report in reports for p in report.near]:
        warnings.append(
            f"'{problem.name}' is nearly collinear with {', '.join(problem.partners)} "
            f"(R-squared {problem.r_squared:.7f}); its estimate is numerically fragile"
        )
    for role, report in reports:
        for problem in report.exact:
            if problem.constant:
                after = " after absorbing the fixed effects" if has_fixed_effects else ""
                raise DesignError(f"{role} '{problem.name}' does not vary in the estimation sample{after}")
            partners = ", ".join(problem.partners)
            if role == "instrument":
                raise DesignError(
                    f"instrument '{problem.name}' is collinear with {partners}: it adds no variation "
                    "beyond the controls and the other instruments"
                )
            raise DesignError(f"{role} '{problem.name}' is an exact linear combination of {partners}")
    return controls.kept
