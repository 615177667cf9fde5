"""The reproduction script: a short Python file that recomputes the review's key numbers.

The script uses only pandas, numpy and linearmodels, so authors and editors
can check the review without SecondStage. It rebuilds the estimation sample
exactly as the engine does, written out as plain pandas code: the claim's
filters in order (a row whose filter column is missing fails the filter; text
columns are compared as text), deletion of rows with a missing value in any
model column, zero weights, indicators for categorical controls (reference
level left out), singleton groups of the fixed effects, then the fixed effects
partialled out. It prints ``key = value`` lines with the same keys the
findings use, e.g. ``2sls.estimate[educ] = 0.0614``.

Every literal taken from the claim (column names, filter values, file name)
is written with :func:`repr`, so no text from the claim can become code.

Scope: the ``iv``, ``regression`` and ``mediation`` designs (OLS, 2SLS,
LIML, Fuller, two-step GMM, the naive fit holding the randomized arms fixed,
first-stage F, Sargan or Hansen J) and the ``panel`` design (pooled OLS,
within, random effects as linearmodels computes them, and the Mundlak and
classical Hausman tests that drive the panel item, when the claim has no
weights, extra fixed effects or two-way clusters). For the ``selection``
design the script recomputes the OLS fit on the selected rows; the Heckman
correction is not rewritten. Two-step GMM and Hansen J are left out under
two-way clustering, which linearmodels' GMM weight does not support.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Mapping
from typing import Any

from app.review.checklist import Checklist
from app.review.renderers.common import CAUTION
from app.review.view import FindingsView

INTERCEPT = "(intercept)"
COVARIANCE_OPTIONS = {
    "homoskedastic": ("unadjusted", "unadjusted"),
    "robust": ("robust", "robust"),
    "cluster": ("clustered", "clustered"),
}
"""Claim covariance -> (linearmodels cov_type, IVGMM weight_type)."""

SCRIPTED_DESIGNS = ("iv", "regression", "mediation", "panel")
"""Designs whose every estimator the script rewrites."""

FILTER_OPERATORS = ("==", "!=", "<", "<=", ">", ">=", "in")
"""The claim's filter operators; each is written into the script as the same Python operator."""

HEADER = '''#!/usr/bin/env python3
"""Recompute the key numbers of a SecondStage review from the replication data.

Usage: python <this file> [DATA_FILE]    (default: the original file name below)

Needs pandas, numpy and linearmodels (which brings scipy). The steps mirror how
SecondStage built the estimation sample; the script prints the key numbers as
"key = value" lines that can be compared with the review (for the tests that
decide an item, the review's own value is printed beside the recomputed one).

{caution}

The replication data are confidential: run this where the data may be kept and
do not send the data outside the editorial process.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd
from linearmodels.iv import IV2SLS, IVGMM, IVLIML
{panel_import}
CLAIM_TITLE = {title}
DATA_FILE = Path(sys.argv[1] if len(sys.argv) > 1 else {data_file})
'''

READ_HELPER = '''

def read_data(path: Path) -> pd.DataFrame:
    """Read the data file with pandas, by its extension."""
    suffix = path.suffix.lower()
    if suffix in (".tsv", ".tab"):
        return pd.read_csv(path, sep="\\t")
    if suffix == ".txt":
        return pd.read_csv(path, sep=None, engine="python")
    if suffix == ".dta":
        return pd.read_stata(path, convert_categoricals=False)
    if suffix in (".sav", ".zsav"):
        return pd.read_spss(path, convert_categoricals=False)
    if suffix in (".sas7bdat", ".xpt"):
        return pd.read_sas(path)
    if suffix in (".xlsx", ".xls"):
        return pd.read_excel(path)
    if suffix == ".parquet":
        return pd.read_parquet(path)
    return pd.read_csv(path)
'''

FILTER_HELPER = '''

def comparable(series: pd.Series, value):
    """Numbers are compared as numbers; any other column as text, as SecondStage does."""
    if pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
        return series, value
    text = series.astype("str").where(series.notna())
    return text, [str(v) for v in value] if isinstance(value, list) else str(value)
'''

STATISTIC_HELPERS = '''

def wald_f(fit, names: list[str], *, dof_scale: float = 1.0) -> float:
    """Wald statistic that the coefficients ``names`` are zero, divided by their number."""
    estimate = fit.params[names].to_numpy()
    covariance = fit.cov.loc[names, names].to_numpy() * dof_scale
    return float(estimate @ np.linalg.solve(covariance, estimate)) / len(names)


def show(key: str, value, review=None) -> None:
    """Print one key number at full precision, and the review's value beside it when given."""
    number = value if isinstance(value, int) else float(value)
    beside = "" if review is None else f"  (in the review: {review!r})"
    print(f"{key} = {number!r}{beside}")
'''

DEMEAN_HELPERS = '''

def demean(frame: pd.DataFrame, columns: list[str], groups: list[str], weights) -> pd.DataFrame:
    """Subtract (weighted) group means; with two groupings, alternate until nothing changes."""
    weights = pd.Series(1.0, index=frame.index) if weights is None else weights
    data = frame[columns].astype(float)
    for _ in range(10_000):
        before = data.copy()
        for group in groups:
            means = (data.mul(weights, axis=0).groupby(frame[group]).transform("sum")).div(
                weights.groupby(frame[group]).transform("sum"), axis=0
            )
            data = data - means
        if len(groups) == 1 or ((data - before).abs().max() <= 1e-13 * frame[columns].abs().max().clip(lower=1)).all():
            return data
    raise RuntimeError("the fixed effects did not converge")


def drop_singletons(frame: pd.DataFrame, groups: list[str]) -> pd.DataFrame:
    """Drop rows alone in their group, repeatedly, as they carry no information about the slopes."""
    while True:
        single = np.zeros(len(frame), dtype=bool)
        for group in groups:
            single |= (frame.groupby(group)[group].transform("size") == 1).to_numpy()
        if not single.any():
            return frame
        frame = frame[~single]


def absorbed_dof(frame: pd.DataFrame, groups: list[str]) -> int:
    """Levels of the fixed effects, less one per connected component of two groupings."""
    levels = sum(frame[group].nunique() for group in groups)
    if len(groups) == 1:
        return levels
    first, second = groups
    component = pd.Series(pd.factorize(frame[first])[0], index=frame.index)
    while True:
        spread = component.groupby(frame[second]).transform("min").groupby(frame[first]).transform("min")
        if spread.equals(component):
            return levels - component.nunique()
        component = spread
'''


def render_script(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """The reproduction script as Python source text (``checklist`` is not needed: the script recomputes)."""
    view = FindingsView(findings)
    parts = [
        HEADER.format(
            caution=textwrap.fill(CAUTION[0], width=80),
            title=repr(view.title),
            data_file=repr(data_file_name),
            panel_import=(
                "from linearmodels.panel import RandomEffects\nfrom scipy import stats\n" if view.design == "panel" else ""
            ),
        ),
        READ_HELPER,
    ]
    if view.claim_entries("filters"):
        parts.append(FILTER_HELPER)
    parts.append(STATISTIC_HELPERS)
    if view.claim_names("fixed_effects"):
        parts.append(DEMEAN_HELPERS)
    parts.append(_main(view))
    parts.append('\n\nif __name__ == "__main__":\n    main()\n')
    return "".join(parts)


def _main(view: FindingsView) -> str:
    outcome = view.outcome
    focal = view.design_columns("endogenous") or view.focal_terms
    instruments = view.instruments
    exogenous = view.design_columns("exogenous") or _exogenous_from_claim(view)
    controls = view.claim_names("controls")
    fixed_effects = view.claim_names("fixed_effects")
    clusters = view.claim_names("cluster")
    weights = view.claim_name("weights")
    kind = view.variance_kind or "robust"
    cov_type, weight_type = COVARIANCE_OPTIONS.get(kind, COVARIANCE_OPTIONS["robust"])

    body = ["", "", "def main() -> None:"]
    if view.design not in SCRIPTED_DESIGNS:
        body += [
            f"    # The claim's design ({view.design!r}) has its own estimators, which this script does not rewrite;",
            "    # it recomputes the pooled regression and instrumental-variable numbers only.",
        ]
    body += ["    print(f'# Key numbers for: {CLAIM_TITLE}')", "    frame = read_data(DATA_FILE)"]
    body += _filters(view)
    body += _listwise(view, outcome=outcome, focal=focal, instruments=instruments)
    if weights:
        body += ["", "    # Rows with zero weight carry no information.", f"    frame = frame[frame[{weights!r}] != 0]"]
    body += _categorical(view)
    numeric = list(dict.fromkeys([outcome, *focal, *instruments, *controls]))
    body += [
        "",
        "    # Model columns as numbers.",
        f"    for name in {numeric!r}:",
        "        frame[name] = frame[name].astype(float)",
        f"    weights = frame[{weights!r}].astype(float)" if weights else "    weights = None",
    ]
    if fixed_effects:
        model_columns = list(dict.fromkeys([outcome, *focal, *instruments, *exogenous]))
        body += [
            "",
            "    # Fixed effects: drop singleton groups, then partial the effects out of every model column.",
            f"    frame = drop_singletons(frame, {fixed_effects!r})",
            "    weights = weights.loc[frame.index] if weights is not None else None",
            f"    data = demean(frame, {model_columns!r}, {fixed_effects!r}, weights)",
            f"    absorbed = absorbed_dof(frame, {fixed_effects!r})",
        ]
    else:
        body += ["", "    data = frame", "    absorbed = 0"]
        if INTERCEPT in exogenous:
            body.append(f"    data[{INTERCEPT!r}] = 1.0")
    body += [
        "",
        f"    outcome = data[{outcome!r}]",
        f"    focal = data[{focal!r}]",
        f"    exogenous = data[{exogenous!r}]" if exogenous else "    exogenous = None",
        f"    instruments = data[{instruments!r}]" if instruments else "    instruments = None",
        "    n_obs = len(outcome)",
    ]
    body += _fit_options(clusters, cov_type=cov_type)
    if view.design == "panel" and instruments:
        body.append("    # Fixed effects with instruments (within 2SLS) is not rewritten here.")
        instruments = []
    body += _fits(
        view=view, focal=focal, instruments=instruments, exogenous=exogenous, weight_type=weight_type,
        clusters=clusters, kind=kind,
    )
    return "\n".join(body) + "\n"


def _exogenous_from_claim(view: FindingsView) -> list[str]:
    """The included regressors as the engine names them, for findings that do not record the design's columns."""
    intercept = view.claim.get("intercept", True) is not False and not view.claim_names("fixed_effects")
    indicators = [
        f"{expansion.get('column')}={level}"
        for expansion in view.sample_entries("categorical")
        for level in expansion.get("levels") or []
    ]
    return [INTERCEPT] * intercept + view.claim_names("controls") + indicators


def _filters(view: FindingsView) -> list[str]:
    filters = view.claim_entries("filters")
    if not filters:
        return []
    lines = ["", "    # The claim's sample filters, in order; a row whose filter column is missing fails the filter."]
    for row_filter in filters:
        column, op, value = str(row_filter.get("column")), str(row_filter.get("op")), row_filter.get("value")
        if op not in FILTER_OPERATORS:
            lines.append(f"    raise SystemExit({f'the filter on {column!r} uses an operator this script does not know: {op!r}'!r})")
            continue
        lines.append(f"    column, value = comparable(frame[{column!r}], {value!r})")
        test = "column.isin(value)" if op == "in" else f"(column {op} value)"
        lines.append(f"    frame = frame[column.notna() & {test}]")
    return lines


def _listwise(view: FindingsView, *, outcome: str, focal: list[str], instruments: list[str]) -> list[str]:
    used = [outcome, *focal, *instruments, *view.claim_names("controls")]
    used += [str(c.get("column")) for c in view.claim_entries("categorical")]
    used += [*view.claim_names("fixed_effects"), *view.claim_names("cluster")]
    used += [view.claim_name("weights")] if view.claim_name("weights") else []
    return [
        "",
        "    # Listwise deletion: drop rows with a missing value in any column the model uses.",
        f"    frame = frame.dropna(subset={list(dict.fromkeys(used))!r}).copy()",
    ]


def _categorical(view: FindingsView) -> list[str]:
    expansions = view.sample_entries("categorical")
    lines = []
    for expansion in expansions:
        column = str(expansion.get("column"))
        levels = [str(level) for level in expansion.get("levels") or []]
        lines += [
            "",
            f"    # {column!r}: one indicator per level; the reference level {str(expansion.get('reference'))!r} is left out.",
            f"    labels = frame[{column!r}].astype(str)",
            f"    for level in {levels!r}:",
            f"        frame[{column!r} + '=' + level] = (labels == level).astype(float)",
        ]
    return lines


def _fit_options(clusters: list[str], *, cov_type: str) -> list[str]:
    if not clusters:
        return ["", f"    options = dict(cov_type={cov_type!r}, debiased=True)"]
    lines = [
        "",
        f"    clusters = pd.DataFrame({{name: pd.factorize(frame[name])[0] for name in {clusters!r}}}, index=frame.index)",
        f"    options = dict(cov_type={cov_type!r}, clusters=clusters, debiased=True)",
    ]
    if len(clusters) == 1:
        lines.append(f"    weight_options = dict(weight_type={cov_type!r}, clusters=clusters)")
    return lines


def _fits(
    *, view: FindingsView, focal: list[str], instruments: list[str], exogenous: list[str], weight_type: str,
    clusters: list[str], kind: str,
) -> list[str]:
    two_way = len(clusters) == 2
    naive = "pooled_ols" if view.design == "panel" else "ols"
    k = len(focal) + len(exogenous)
    lines = [
        "",
        "    # linearmodels does not count absorbed fixed effects among the parameters; SecondStage does (as a",
        "    # regression with the indicators would), so each variance is rescaled by (n - k) / (n - k - absorbed).",
        "    fits, scales = {}, {}",
        "    show('n_obs', n_obs)",
        "    regressors = pd.concat([exogenous, focal], axis=1) if exogenous is not None else focal",
        f"    fits[{naive!r}] = IV2SLS(outcome, regressors, None, None, weights=weights).fit(**options)",
        f"    scales[{naive!r}] = (n_obs - {k}) / (n_obs - {k} - absorbed)",
    ]
    if view.design == "mediation":
        lines += [
            "    # The naive regression that holds the randomized arms fixed.",
            "    with_arms = pd.concat([regressors, instruments], axis=1)",
            "    fits['ols_with_treatment'] = IV2SLS(outcome, with_arms, None, None, weights=weights).fit(**options)",
            f"    scales['ols_with_treatment'] = (n_obs - {k + len(instruments)}) / (n_obs - {k + len(instruments)} - absorbed)",
        ]
    if instruments:
        weight_options = "**weight_options" if kind == "cluster" else f"weight_type={weight_type!r}"
        lines += [
            "    fits['2sls'] = IV2SLS(outcome, exogenous, focal, instruments, weights=weights).fit(**options)",
            "    liml = IVLIML(outcome, exogenous, focal, instruments, weights=weights).fit(**options)",
            "    fits['liml'] = liml",
            "    # Fuller (1977): kappa = LIML kappa - alpha / (n - L), L counting all instruments and absorbed effects.",
            f"    n_instruments = {len(instruments) + len(exogenous)} + absorbed",
            "    for code, alpha in (('fuller1', 1.0), ('fuller4', 4.0)):",
            "        kappa = liml.kappa - alpha / (n_obs - n_instruments)",
            "        fits[code] = IVLIML(outcome, exogenous, focal, instruments, weights=weights, kappa=kappa).fit(**options)",
        ]
        if two_way:
            lines.append("    # Two-step GMM is left out: linearmodels' GMM weight does not support two-way clustering.")
        else:
            lines += [
                f"    gmm = IVGMM(outcome, exogenous, focal, instruments, weights=weights, {weight_options}).fit(**options)",
                "    fits['gmm'] = gmm",
            ]
        lines += [
            "    for code in ('2sls', 'liml', 'fuller1', 'fuller4', 'gmm'):",
            f"        scales[code] = (n_obs - {k}) / (n_obs - {k} - absorbed)",
        ]
    panel_rewritten = view.design == "panel" and _panel_rewritable(view, clusters)
    if view.design == "panel":
        lines += _panel_fits(view, focal=focal, exogenous=exogenous, clusters=clusters, kind=kind)
    lines += [
        "    for code, fit in fits.items():",
        f"        for term in {focal!r}:",
        "            show(f'{code}.estimate[{term}]', fit.params[term])",
        "            show(f'{code}.std_error[{term}]', fit.std_errors[term] * scales[code] ** 0.5)",
    ]
    if panel_rewritten:
        lines += _mundlak(view, focal=focal, kind=kind) + _hausman(view, focal=focal)
    if not instruments:
        return lines
    lines += [
        "",
        "    # First stage of each focal regressor: Wald F of the excluded instruments, with the claim's covariance.",
        "    first_stage_regressors = pd.concat([instruments, exogenous], axis=1) if exogenous is not None else instruments",
        f"    first_stage_params = {len(instruments) + len(exogenous)}",
        "    first_stage_scale = (n_obs - first_stage_params) / (n_obs - first_stage_params - absorbed)",
        f"    for term in {focal!r}:",
        "        first_stage = IV2SLS(focal[term], first_stage_regressors, None, None, weights=weights).fit(**options)",
        "        show(f'first_stage_f[{term}]', wald_f(first_stage, list(instruments.columns), dof_scale=first_stage_scale))",
    ]
    if len(instruments) > len(focal):
        lines += ["", "    # Over-identification: Sargan with classical errors, Hansen J otherwise."]
        if kind == "homoskedastic":
            lines += ["    show('sargan', fits['2sls'].sargan.stat)", "    show('sargan.p_value', fits['2sls'].sargan.pval)"]
        elif two_way:
            lines.append("    # Hansen J is left out with two-way clustering (see above).")
        else:
            lines += ["    show('hansen_j', gmm.j_stat.stat)", "    show('hansen_j.p_value', gmm.j_stat.pval)"]
    return lines


def _panel_rewritable(view: FindingsView, clusters: list[str]) -> bool:
    """Whether the script rewrites the panel fits: a unit is named, without weights, extra fixed effects or two-way clusters."""
    return (
        view.claim_name("unit") is not None
        and not view.claim_name("weights")
        and not view.claim_names("fixed_effects")
        and len(clusters) < 2
    )


def _panel_fits(view: FindingsView, *, focal: list[str], exogenous: list[str], clusters: list[str], kind: str) -> list[str]:
    """Within and random-effects fits of the panel design (without weights, fixed effects or two-way clusters)."""
    if not _panel_rewritable(view, clusters):
        return ["    # The within and random-effects fits are not rewritten for weights, extra fixed effects or two-way clusters."]
    unit, time = view.claim_name("unit"), view.claim_name("time")
    within = view.design_columns("within") or focal
    outcome = view.outcome
    columns = [outcome, *within]
    lines = [
        "",
        "    # Within (fixed effects): subtract each unit's means. The unit effects count among the parameters,",
        "    # except with standard errors clustered on groups that contain whole units.",
        f"    unit = frame[{unit!r}]",
        f"    demeaned = data[{columns!r}] - data[{columns!r}].groupby(unit).transform('mean')",
    ]
    if kind == "cluster":
        lines.append(f"    nested = bool((frame.groupby({unit!r})[{clusters[0]!r}].nunique() == 1).all())")
    else:
        lines.append("    nested = False")
    lines += [
        "    unit_effects = 0 if nested else unit.nunique()",
        f"    fits['within'] = IV2SLS(demeaned[{outcome!r}], demeaned[{within!r}], None, None).fit(**options)",
        f"    scales['within'] = (n_obs - {len(within)}) / (n_obs - {len(within)} - unit_effects)",
        "",
        "    # Random effects (Swamy-Arora), as linearmodels computes them; with clustered errors its",
        "    # group small-sample factor G/(G-1) matches SecondStage's.",
    ]
    period = f"frame[{time!r}]" if time else f"frame.groupby({unit!r}).cumcount()"
    lines += [
        f"    panel = data.set_index([unit, {period}])",
        "    panel_options = dict(options)",
    ]
    if kind == "cluster":
        lines += [
            "    panel_options.update(clusters=pd.DataFrame(clusters.to_numpy(), index=panel.index), group_debias=True)",
        ]
    lines += [
        f"    random_columns = {exogenous[:1] + focal + exogenous[1:]!r}",
        f"    fits['random_effects'] = RandomEffects(panel[{outcome!r}], panel[random_columns]).fit(**panel_options)",
        "    scales['random_effects'] = 1.0",
    ]
    return lines


def _mundlak(view: FindingsView, *, focal: list[str], kind: str) -> list[str]:
    """The Mundlak test as the engine computes it (app/estimation/panel.py, ``mundlak_test``).

    Pooled OLS of the outcome on the regressors and the unit means of the
    time-varying ones, errors clustered by unit (by the claim's clusters when
    these contain whole units); the Wald statistic of the means divided by
    their number, against F(m, G - 1). Mundlak (1978); Wooldridge (2010),
    sec. 10.7.3.
    """
    found = view.lookup("mundlak")
    if not found.usable:
        return ["", "    # The review has no Mundlak test for this claim (its findings say why), so none is recomputed."]
    test = found.value
    dropped = {str(name) for name in test.get("unit_means_dropped_as_collinear") or []}
    varying = [column for column in view.design_columns("within") or focal if f"unit mean of {column}" not in dropped]
    if kind == "cluster":
        clusters = "clusters if nested else pd.DataFrame({'unit': pd.factorize(unit)[0]}, index=frame.index)"
    else:
        clusters = "pd.DataFrame({'unit': pd.factorize(unit)[0]}, index=frame.index)"
    lines = [
        "",
        "    # Mundlak (1978) test of random against fixed effects: pooled OLS with the unit means of the",
        "    # time-varying regressors added, errors clustered by unit (by the claim's clusters when they contain",
        "    # whole units); Wald test that the means' coefficients are zero, divided by their number m, against",
        "    # F(m, G - 1). A small p-value says the unit effects correlate with the regressors.",
    ]
    if dropped:
        lines.append(f"    # Left out as in the review, collinear with the regressors: {sorted(dropped)!r}.")
    lines += [
        f"    unit_means = data[{varying!r}].groupby(unit).transform('mean').add_prefix('unit mean of ')",
        f"    mundlak_clusters = {clusters}",
        "    mundlak_fit = IV2SLS(outcome, pd.concat([regressors, unit_means], axis=1), None, None).fit(",
        "        cov_type='clustered', clusters=mundlak_clusters, debiased=True",
        "    )",
        "    mundlak = wald_f(mundlak_fit, list(unit_means.columns))",
        "    mundlak_df = (unit_means.shape[1], mundlak_clusters.iloc[:, 0].nunique() - 1)",
        f"    show('mundlak', mundlak, review={_reported(test.get('statistic'))})",
        f"    show('mundlak.p_value', stats.f.sf(mundlak, *mundlak_df), review={_reported(test.get('p_value'))})",
    ]
    return lines


def _hausman(view: FindingsView, *, focal: list[str]) -> list[str]:
    """The classical Hausman test as the engine computes it (app/estimation/panel.py, ``hausman_test``).

    ``H = d' [V_FE - V_RE]^+ d`` over the within coefficients, ``d`` the
    difference of the within and random-effects estimates, both variances
    classical, the unit effects counted in the within fit's k; when the
    variance difference is not positive definite only its positive
    eigenvalues are used, and the degrees of freedom are their number.
    Hausman (1978); Wooldridge (2010), sec. 10.7.3.
    """
    found = view.lookup("hausman_fe_re")
    if not found.usable:
        return ["", "    # The review has no Hausman test for this claim (its findings say why), so none is recomputed."]
    test = found.value
    within = view.design_columns("within") or focal
    outcome = view.outcome
    return [
        "",
        "    # Hausman (1978) test of fixed against random effects: the difference of the within and random-effects",
        "    # coefficients over the difference of their classical variances (unit effects counted in the within k).",
        "    # When that difference is not positive definite, only its positive eigenvalues are used.",
        f"    common = {within!r}",
        f"    within_classical = IV2SLS(demeaned[{outcome!r}], demeaned[common], None, None).fit(cov_type='unadjusted', debiased=True)",
        f"    random_classical = RandomEffects(panel[{outcome!r}], panel[random_columns]).fit(cov_type='unadjusted', debiased=True)",
        "    difference = (within_classical.params[common] - random_classical.params[common]).to_numpy()",
        "    k = len(common)",
        "    within_variance = within_classical.cov.loc[common, common].to_numpy() * (n_obs - k) / (n_obs - k - unit.nunique())",
        "    variance = within_variance - random_classical.cov.loc[common, common].to_numpy()",
        "    values, vectors = np.linalg.eigh((variance + variance.T) / 2)",
        "    positive = values > 1e-10 * np.abs(values).max()",
        "    hausman = float(np.sum((vectors[:, positive].T @ difference) ** 2 / values[positive]))",
        "    hausman_df = int(positive.sum())",
        f"    show('hausman_fe_re', hausman, review={_reported(test.get('statistic'))})",
        f"    show('hausman_fe_re.df', hausman_df, review={_reported(test.get('df'))})",
        f"    show('hausman_fe_re.p_value', stats.chi2.sf(hausman, hausman_df), review={_reported(test.get('p_value'))})",
    ]


def _reported(value: object) -> str:
    """A number from the findings as a Python literal; ``None`` when the findings hold none."""
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return "None"
    return repr(value)
