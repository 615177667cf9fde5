"""Words the pages use for codes: refit states, verdicts, standings, roles, designs, diagnostics.

Only display text lives here; the codes themselves come from the services, the
claim spec and the review package.
"""

from __future__ import annotations

import re
from collections.abc import Iterable

from app.services.errors import Problem

REFIT_STATES = {
    "waiting": "Queued",
    "running": "Computing",
    "finished": "Done",
    "failed": "Stopped",
}

STANDINGS = {
    "sound": "Sound",
    "concern": "Concern",
    "serious": "Serious",
    "reviewer_judgement": "For the reviewer",
    "not_applicable": "Does not apply",
}

STANDING_MARKS = {
    "sound": "●",
    "concern": "▲",
    "serious": "■",
    "reviewer_judgement": "◆",
    "not_applicable": "○",
}
"""A shape per standing, so that a standing never depends on colour alone."""

JUDGEMENT_CHOICES = (
    ("", "None yet: the automatic standing counts"),
    ("sound", "Sound: nothing to ask"),
    ("concern", "Concern: ask the authors"),
    ("serious", "Serious: undermines the claim"),
)

REPORT_FORMATS = {
    "text": "Plain text",
    "markdown": "Markdown",
    "html": "Printable page",
    "json": "JSON",
    "script": "Reproduction script",
}
"""Button words for the report exports; a format not listed here shows its own name."""

VERDICTS = {
    "holds_up": "Holds up",
    "fragile": "Fragile",
    "not_supported": "Not supported",
    "not_reproduced": "Not reproduced",
    "undetermined": "Undetermined",
}
"""Short names for the verdict filter; pages print the verdict's own label where they have it."""

REPRODUCTION = {
    "reproduced": "Reproduced",
    "partly_reproduced": "Partly reproduced",
    "not_reproduced": "Not reproduced",
    "to_judge": "For the reviewer",
    "nothing_claimed": "No numbers claimed",
}

DESIGNS = {
    "iv": "Instrumental variables",
    "regression": "Regression without instruments",
    "mediation": "Randomized treatment acting through a mediator",
    "panel": "Panel: units observed over time",
    "selection": "Sample selection",
}

COVARIANCES = {
    "homoskedastic": "Classical (homoskedastic)",
    "robust": "Heteroskedasticity-robust",
    "cluster": "Cluster-robust",
}

ESTIMATORS = {
    "ols": "OLS",
    "2sls": "2SLS",
    "liml": "LIML",
    "fuller1": "Fuller (alpha = 1)",
    "fuller4": "Fuller (alpha = 4)",
    "gmm": "Two-step GMM",
    "pooled_ols": "Pooled OLS",
    "within": "Within (unit fixed effects)",
    "random_effects": "Random effects",
    "within_2sls": "Within 2SLS",
    "heckman_two_step": "Heckman two-step",
    "control_function": "Control function",
}

ROLES = {
    "": "not used",
    "outcome": "outcome",
    "endogenous": "focal regressor",
    "instrument": "instrument",
    "control": "control",
    "categorical": "categorical control",
    "treatment": "randomized treatment",
    "mediator": "mediator",
    "weights": "weights",
    "unit": "unit identifier",
    "time": "time identifier",
    "selected": "selection indicator",
}
"""The one main role a column can play in a claim (the claim form's select)."""

FLAGS = {
    "fixed_effect": "absorbed as fixed effects",
    "cluster": "cluster for standard errors",
    "benchmark": "benchmark for sensitivity",
    "pre_treatment": "pre-treatment covariate",
    "selection_covariate": "in the selection equation",
}
"""Further roles a column can play besides its main one (checkboxes in the claim form)."""

DIAGNOSTIC_GROUPS = (
    (
        "strength",
        "Instrument strength",
        (
            "first_stage",
            "effective_f",
            "stock_yogo",
            "cragg_donald_f",
            "kleibergen_paap_rk_f",
            "kleibergen_paap_rk_lm",
            "sanderson_windmeijer_f",
        ),
        "How strongly the excluded instruments move the focal regressor. With a weak first stage, 2SLS is "
        "pulled toward OLS and its usual interval is too narrow.",
    ),
    (
        "robust",
        "Intervals that stay valid with weak instruments",
        ("anderson_rubin", "kleibergen_k", "clr", "tf"),
        "Confidence sets for the focal coefficient that keep their coverage however weak the instruments are. "
        "A set much wider than the 2SLS interval, or unbounded, means the instruments cannot pin the effect down.",
    ),
    (
        "overid",
        "Do the instruments agree?",
        ("sargan", "basmann", "hansen_j", "c_statistic"),
        "With more instruments than focal regressors, each instrument gives its own estimate. A rejection says "
        "they disagree: at least one instrument is invalid, or they measure different effects. The per-instrument "
        "statistics point at a suspect but cannot prove which one is at fault.",
    ),
    (
        "validity",
        "Could the instruments act on the outcome directly?",
        ("instrument_balance", "plausibly_exogenous"),
        "No test can prove an instrument valid. These show whether covariates measured before treatment differ "
        "with the instruments, and how far the conclusion moves if an instrument has a small direct effect.",
    ),
    (
        "endogeneity",
        "Is the focal regressor endogenous?",
        ("durbin", "wu_hausman", "control_function", "residual_correlation", "disturbance_correlation"),
        "Compares the instrumented estimate with the naive one. A rejection says OLS is not to be trusted, "
        "provided the instruments are valid; no rejection does not prove the regressor exogenous.",
    ),
    (
        "omitted",
        "How strong would an omitted common cause have to be?",
        ("omitted_cause_sensitivity", "proportional_selection"),
        "How much of the outcome and the focal regressor an unmeasured common cause would have to explain to "
        "remove the effect, benchmarked against measured covariates.",
    ),
    (
        "panel",
        "Are the unit effects tied to the regressors?",
        ("variance_components", "mundlak", "hausman_fe_re"),
        "Random effects are consistent only if each unit's own level is unrelated to its regressors. A rejection "
        "says the within (fixed-effects) estimate is the one to read.",
    ),
    (
        "design",
        "The design's own assumptions",
        ("mediation", "selection"),
        "Checks specific to the claim's design: whether a mediator can carry the whole effect, or whether the "
        "observed sample is selected on the outcome.",
    ),
    (
        "clusters",
        "Inference with few clusters",
        ("wild_cluster_bootstrap",),
        "Cluster-robust tests over-reject when clusters are few; the wild cluster bootstrap gives a p-value that "
        "holds up better.",
    ),
    (
        "reduced_form",
        "Reduced form",
        ("reduced_form",),
        "Whether the instruments predict the outcome directly. If they are valid, they can only do so through "
        "the focal regressor.",
    ),
)
"""Results-page groups of diagnostics: (id, title, keys in ``findings["diagnostics"]``, plain meaning)."""

OTHER_DIAGNOSTICS = (
    "Further diagnostics",
    "Results the engine reports for this design; each names its null hypothesis and source.",
)

DISTRIBUTIONS = {"chi2": "χ²", "F": "F", "t": "t", "normal": "standard normal"}
"""Reference distributions of test statistics; an unlisted one shows the engine's own words."""

DETAIL_FIELDS = {
    "alpha": ("Significance level α", "percent"),
    "beta_star": ("Bias-adjusted estimate β*", "number"),
    "beta_star_approximate": ("β* by the approximate formula", "number"),
    "bias_bound": ("Estimated bias bound B", "number"),
    "clusters": ("Clusters", "count"),
    "conditioning_statistic": ("Conditioning statistic (instrument strength)", "number"),
    "confidence_level": ("Confidence level", "percent"),
    "controlled_estimate": ("Estimate with the controls", "number"),
    "controlled_r2": ("R² with the controls", "number"),
    "critical_value": ("Critical value", "number"),
    "delta": ("Selection ratio δ assumed", "setting"),
    "delta_for_zero": ("Selection ratio δ that brings the estimate to zero", "number"),
    "delta_for_zero_approximate": ("δ for zero by the approximate formula", "number"),
    "df_between": ("Degrees of freedom between units", "count"),
    "df_within": ("Degrees of freedom within units", "count"),
    "direct_effect_bound": ("Largest direct effect examined", "setting"),
    "dof": ("Residual degrees of freedom", "count"),
    "estimate": ("Estimate", "number"),
    "first_stage_f": ("First-stage F", "number"),
    "harmonic_mean_rows_per_unit": ("Rows per unit (harmonic mean)", "number"),
    "inverse_mills_coefficient": ("Coefficient on the inverse Mills ratio", "number"),
    "inverse_mills_std_error_corrected": ("Its std. error, corrected for the estimated first step", "number"),
    "inverse_mills_std_error_test": ("Its std. error in the test", "number"),
    "j_all_instruments": ("J with every instrument", "number"),
    "j_without_suspects": ("J without the suspect instruments", "number"),
    "n_endog": ("Focal regressors", "count"),
    "n_instruments": ("Instruments", "count"),
    "n_obs": ("Observations", "count"),
    "naive_minus_2sls": ("OLS minus 2SLS", "number"),
    "partial_r2": ("Partial R²", "number"),
    "partial_r2_outcome": ("Partial R², focal regressor and outcome", "number"),
    "q": ("Share of the estimate to explain away (q)", "percent"),
    "r2_max": ("Highest attainable R² (R² max)", "number"),
    "replications": ("Bootstrap replications", "count"),
    "rho": ("Correlation ρ", "number"),
    "rk_wald_chi2": ("rk Wald χ²", "number"),
    "robustness_value": ("Robustness value: whole estimate", "number"),
    "robustness_value_alpha": ("Robustness value: whole estimate at level α", "number"),
    "robustness_value_q": ("Robustness value: share q", "number"),
    "robustness_value_q_alpha": ("Robustness value: share q at level α", "number"),
    "rows": ("Rows", "count"),
    "rows_without_covariates": ("Rows missing a covariate", "count"),
    "seed": ("Random seed", "plain"),
    "selected": ("Rows with the outcome observed", "count"),
    "selection_iterations": ("Probit iterations", "count"),
    "selection_log_likelihood": ("Probit log-likelihood", "number"),
    "shea_partial_r2": ("Shea partial R²", "number"),
    "sigma": ("Std. deviation σ of the outcome error", "number"),
    "sigma2_effects": ("Variance of the unit effects", "number"),
    "sigma2_idiosyncratic": ("Variance of the remaining error", "number"),
    "significance": ("Significance level", "percent"),
    "statistic_at_infinity": ("Statistic as the effect grows without bound", "number"),
    "statistic_chi2": ("Statistic on the χ² scale", "number"),
    "std_error": ("Std. error", "number"),
    "t_statistic": ("t statistic", "number"),
    "tested_value": ("Effect size tested", "number"),
    "unbounded_below_f": ("Set unbounded when the first-stage F is below", "setting"),
    "uncontrolled_estimate": ("Estimate without the controls", "number"),
    "uncontrolled_r2": ("R² without the controls", "number"),
    "wald_chi2": ("Wald χ²", "number"),
    "wald_chi2_p_value": ("p-value of the Wald χ²", "p_value"),
    "assumption": ("Assumes", "text"),
    "box": ("Direct effects examined", "text"),
    "compared_statistic": ("Statistic compared", "text"),
    "confidence_set_note": ("About the set", "text"),
    "decision_5pct": ("Decision at the 5% level", "text"),
    "distribution_note": ("Reference distribution", "text"),
    "drift_reading": ("If the treatment also acted directly", "text"),
    "estimator": ("Estimator", "text"),
    "identification_warning": ("About identification", "text"),
    "identified_set_excludes_zero": ("The bounds exclude zero", "text"),
    "inversion": ("How the set was found", "text"),
    "leverage_caution": ("Caution: one row dominates", "text"),
    "mediator": ("Mediator", "text"),
    "note": ("Note", "text"),
    "p_value_note": ("About the p-value", "text"),
    "r2_max_rule": ("How R² max was set", "text"),
    "reading": ("How to read it", "text"),
    "regressor": ("Focal regressor", "text"),
    "rho_note": ("About ρ", "text"),
    "root_rule": ("Which solution is used", "text"),
    "shape": ("Shape of the set", "text"),
    "shape_meaning": ("What the shape means", "text"),
    "shown": ("Critical value shown", "text"),
    "shown_note": ("About the critical value", "text"),
    "source_shea": ("Source of the Shea partial R²", "text"),
    "standard_error_kind": ("Std. error used", "text"),
    "statistic_kind": ("What the statistic is", "text"),
    "statistic_shown": ("Statistic shown", "text"),
    "test": ("Test used", "text"),
    "variance": ("Variance estimator", "text"),
    "variances": ("Variances used", "text"),
    "warning": ("Warning", "text"),
    "weights": ("Bootstrap weights", "text"),
    "coefficients": ("Coefficients", "table"),
    "residual_coefficients": ("Coefficients on the first-stage residuals", "table"),
    "selection_equation": ("Selection equation (probit)", "table"),
    "unit_mean_coefficients": ("Coefficients on the unit means", "table"),
}
"""Extra fields of a diagnostic result on the results page: (label, how the value is written).

Values are written as ``number`` (significant digits), ``count`` (a whole
number with thousands separators), ``percent`` (a share such as 0.05 as 5%),
``setting`` (a value chosen by a person or a fixed threshold, in its shortest
form), ``p_value``, ``plain`` (an identifier, as it is), ``text`` or ``table``
(rows of coefficients). The JSON twin keeps the engine's field names.
"""

DETAIL_FIELDS_BY_DIAGNOSTIC = {
    ("c_statistic", "note"): ("About the suspects", "text"),
    ("first_stage", "coefficients"): ("First-stage coefficients", "table"),
    ("instrument_balance", "n_obs"): ("Rows checked", "count"),
    ("mundlak", "clusters"): ("Clustered by", "text"),
    ("omitted_cause_sensitivity", "estimate"): ("OLS estimate", "number"),
    ("omitted_cause_sensitivity", "std_error"): ("Classical std. error", "number"),
    ("reduced_form", "coefficients"): ("Reduced-form coefficients", "table"),
    ("selection", "rho"): ("Correlation ρ of the selection and outcome errors", "number"),
    ("selection", "rows"): ("Rows in the selection equation", "count"),
    ("tf", "critical_value"): ("Critical |t| at this first-stage F", "number"),
    ("variance_components", "rho"): ("Share of the error variance from unit effects (ρ)", "number"),
}
"""Fields whose meaning depends on the diagnostic: (diagnostic key, field) to (label, how written)."""

DETAIL_VALUES = {
    "variance": COVARIANCES,
    "compared_statistic": {"cragg_donald_f": "Cragg-Donald F", "kleibergen_paap_rk_f": "Kleibergen-Paap rk Wald F"},
    "test": {"hansen_j": "Hansen J", "sargan": "Sargan"},
    "shown": {"generalized": "generalized (uses the estimated bias bound)", "simplified": "simplified (conservative)"},
}
"""Words for the coded values of some text fields; an unlisted value shows as the engine wrote it."""

CLAIM_FIELDS = {
    "title": ("Title", "title"),
    "design": ("Study design", "design"),
    "outcome": ("Outcome", "roles"),
    "endogenous": ("Focal regressors", "roles"),
    "instruments": ("Instruments", "roles"),
    "controls": ("Controls", "roles"),
    "categorical": ("Categorical controls", "roles"),
    "treatment": ("Randomized treatment", "roles"),
    "mediator": ("Mediator", "roles"),
    "weights": ("Weights", "roles"),
    "unit": ("Unit identifier", "roles"),
    "time": ("Time identifier", "roles"),
    "selected": ("Selection indicator", "roles"),
    "fixed_effects": ("Absorbed as fixed effects", "roles"),
    "cluster": ("Clusters for standard errors", "roles"),
    "benchmarks": ("Benchmarks for sensitivity", "roles"),
    "pre_treatment": ("Pre-treatment covariates", "roles"),
    "selection_covariates": ("In the selection equation", "roles"),
    "covariance": ("Standard errors", "covariance"),
    "intercept": ("Intercept", "intercept"),
    "filters": ("Row filters", "filters"),
    "claimed": ("The manuscript's numbers", "claimed-estimate"),
    "claimed.estimator": ("Estimator it reports", "claimed-estimator"),
    "claimed.term": ("Coefficient of", "claimed-term"),
    "claimed.estimate": ("Estimate", "claimed-estimate"),
    "claimed.std_error": ("Standard error", "claimed-std_error"),
    "claimed.n_obs": ("Observations", "claimed-n_obs"),
    "claimed.first_stage_f": ("First-stage F", "claimed-first_stage_f"),
    "references": ("Reference levels of categorical controls", "references"),
    "instrument_subsets": ("Instrument subsets to refit with", "instrument_subsets"),
    "direct_effect_bound": ("Bound on an instrument's direct effect", "direct_effect_bound"),
    "bootstrap.replications": ("Bootstrap replications", "bootstrap-replications"),
    "bootstrap.seed": ("Bootstrap seed", "bootstrap-seed"),
    "sensitivity.q": ("Sensitivity: share of the estimate (q)", "sensitivity-q"),
    "sensitivity.alpha": ("Sensitivity: significance level", "sensitivity-alpha"),
    "sensitivity.delta": ("Proportional selection: delta", "sensitivity-delta"),
    "sensitivity.r2_max_factor": ("R² max as a multiple of R²", "sensitivity-r2_max_factor"),
    "sensitivity.r2_max": ("R² max (overrides the multiple)", "sensitivity-r2_max"),
    "sensitivity.multipliers": ("Benchmark multiples", "sensitivity-multipliers"),
    "change_note": ("What changed, and why", "change_note"),
}
"""Claim spec fields (dotted paths, as in problems and comparisons): the claim form's label and the id of its control.

Fields set by role in the variables table point at that table (``roles``).
"""

ACCOUNT_FIELDS = {
    "name": ("Name to sign in with", "name"),
    "full_name": ("Full name", "full_name"),
    "role": ("Role", "role"),
    "password": ("Password", "password"),
    "repeat": ("The same password again", "repeat"),
}
"""Fields of the first-run and people forms: label and control id."""

CLAIM_VALUE_WORDS = {"design": DESIGNS, "covariance": COVARIANCES, "claimed.estimator": ESTIMATORS}
"""Claim fields whose coded values have words of their own."""


def claim_field(field: str) -> str:
    """A claim field's label on the claim form (the dotted path itself when the form has none)."""
    return CLAIM_FIELDS.get(field, (field, ""))[0]


def claim_value(field: str, value: object) -> str:
    """A claim field's value in plain words: codes named, filters and reference levels written out, lists joined."""
    if value is None:
        return "not set"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, list):
        separator = ", " if all(isinstance(item, str) for item in value) else "; "
        return separator.join(_claim_list_item(item) for item in value) if value else "none"
    return CLAIM_VALUE_WORDS.get(field, {}).get(str(value), str(value))


def _claim_list_item(item: object) -> str:
    if isinstance(item, dict) and {"column", "op", "value"} <= item.keys():
        return f"{item['column']} {item['op']} {_claim_list_item(item['value'])}"
    if isinstance(item, dict) and "column" in item:
        reference = item.get("reference")
        return str(item["column"]) + ("" if reference is None else f" (reference level {reference})")
    if isinstance(item, list):
        return ", ".join(str(part) for part in item)
    return str(item)


PERSON_FIELDS = {"password": "New password", "confirm": "Confirm the removal"}
"""Fields of the forms beside each person on the people page; their control id is ``<field>-<user id>``."""

_PERSON_CONTROL = re.compile(r"(password|confirm)-(\d+)")


def person_field(field: str, user_id: int) -> str:
    """The problem field of a form beside one person on the people page: its control id."""
    return f"{field}-{user_id}"


def problem_field(field: str | None) -> tuple[str, str] | None:
    """The label and control id of a problem's field, from the claim form, the account forms or the people page."""
    if field is None:
        return None
    if person := _PERSON_CONTROL.fullmatch(field):
        return PERSON_FIELDS[person.group(1)], field
    return CLAIM_FIELDS.get(field) or ACCOUNT_FIELDS.get(field)


def problem_text(field: str | None, message: str) -> str:
    """A problem as a page shows it: the field's label in place of its path (``Observations: ...``)."""
    found = problem_field(field)
    if found is None or field is None:
        return message
    return f"{found[0]}: {message.removeprefix(f'{field}: ')}"


def problems_at(problems: Iterable[Problem], control: str) -> list[str]:
    """The problems (as pages show them) that belong to one form control."""
    return [
        problem_text(problem.field, problem.message)
        for problem in problems
        if (found := problem_field(problem.field)) is not None and found[1] == control
    ]


NESTED_FIELDS = {
    "anderson_rubin": ("Bootstrap Anderson-Rubin test", "record"),
    "arms": ("Treatment arms", "plain"),
    "benchmark_bounds": ("An omitted cause as strong as a measured covariate", "table"),
    "by_covariate": ("Balance, covariate by covariate", "table"),
    "by_regressor": ("By focal regressor", "table"),
    "conditioning": ("Each balance regression also includes", "plain"),
    "contour": ("Adjusted estimate over a grid of omitted-cause strengths", "grid"),
    "criteria": ("Critical values, criterion by criterion", "table"),
    "critical_values": ("Critical values by the largest bias allowed", "table"),
    "difference": ("Fixed minus random effects, term by term", "indexed"),
    "disturbance_covariance": ("Covariance of the system's disturbances", "indexed"),
    "drift_per_unit_direct_effect": ("How far 2SLS moves per unit of direct effect, arm by arm", "table"),
    "equations": ("Equations", "plain"),
    "estimates": ("The mediator's effect under each estimator", "record"),
    "identified_set": ("Identified set (from the controlled to the bias-adjusted estimate)", "interval"),
    "instruments": ("Instruments", "plain"),
    "notes": ("Notes", "text"),
    "roots": ("Solutions for the bias-adjusted estimate", "table"),
    "skipped": ("Covariates left out", "table"),
    "terms": ("Terms", "plain"),
    "theta": ("Share θ of each unit's mean taken out (0 pooled OLS, 1 within), across units", "record"),
    "unit_means_dropped_as_collinear": ("Unit means dropped as collinear", "plain"),
    "wald": ("Bootstrap t-test of the 2SLS coefficient", "record"),
    "warnings": ("Warnings", "text"),
}
"""Fields of a result that hold a list or a record: (label, how shown), after :data:`DETAIL_FIELDS`.

Shown as ``plain`` or ``text`` (the items in a line), ``interval`` (a pair as
``[low, high]``), ``table`` (a list of records: one row each), ``record``
(one label and value a row), ``indexed`` (values beside the names listed in
:data:`app.web.presenters.INDEXED_BY`) or ``grid`` (the omitted-cause grid, thinned).
"""

NESTED_FIELDS_BY_DIAGNOSTIC = {
    ("c_statistic", "instruments"): ("Instruments under suspicion", "plain"),
    ("disturbance_correlation", "by_regressor"): ("Correlation of the disturbances, by focal regressor", "table"),
    ("plausibly_exogenous", "by_regressor"): ("Direct effect that overturns the claim, by focal regressor", "table"),
    ("residual_correlation", "by_regressor"): ("Correlation of first-stage and structural residuals", "table"),
}
"""Nested fields whose meaning depends on the diagnostic: (diagnostic key, field) to (label, how shown)."""

RECORD_FIELDS = {
    "adjusted_ci_high": ("Adjusted interval, upper end", "number"),
    "adjusted_ci_low": ("Adjusted interval, lower end", "number"),
    "adjusted_estimate": ("Adjusted estimate", "number"),
    "adjusted_std_error": ("Adjusted std. error", "number"),
    "adjusted_t": ("Adjusted t", "number"),
    "admissible": ("Admissible (both variances positive)", "text"),
    "arm": ("Treatment arm", "plain"),
    "available": ("Possible", "text"),
    "benchmark": ("Benchmark covariate", "plain"),
    "benchmark_partial_r2_focal": ("Benchmark's partial R² with the focal regressor", "number"),
    "benchmark_partial_r2_outcome": ("Benchmark's partial R² with the outcome", "number"),
    "bias": ("Bias", "number"),
    "bounds": ("Bound on each instrument's direct effect", "number"),
    "boxes": ("Union of intervals as the direct effect grows", "table"),
    "break_even_delta": ("Direct effect at which the interval reaches zero", "number"),
    "break_even_share_of_reduced_form": ("The same, as a share of the reduced form", "percent"),
    "ci_high": ("Interval, upper end", "number"),
    "ci_low": ("Interval, lower end", "number"),
    "coefficients": ("Coefficients on the instruments", "table"),
    "correlation": ("Correlation", "number"),
    "covariate": ("Covariate", "plain"),
    "criterion": ("Criterion", "text"),
    "critical_t": ("Critical |t|", "number"),
    "critical_value": ("Critical value", "number"),
    "critical_values": ("Critical values", "table"),
    "delta": ("Direct effect up to", "setting"),
    "df": ("Degrees of freedom", "df"),
    "drift": ("Shift of 2SLS per unit of direct effect", "number"),
    "estimate": ("Estimate", "number"),
    "exceeds": ("Statistic above it", "text"),
    "excludes_zero": ("Excludes zero", "text"),
    "generalized": ("Generalized critical value", "number"),
    "generalized_k_eff": ("Effective number of instruments, generalized", "number"),
    "instrument": ("Instrument", "plain"),
    "interval": ("Union of the intervals", "interval"),
    "interval_without_direct_effect": ("Interval without a direct effect", "interval"),
    "meaning": ("What it limits", "text"),
    "method": ("Method", "text"),
    "multiplier": ("Times as strong as the benchmark", "setting"),
    "null_hypothesis": ("Null hypothesis", "text"),
    "observed_index_variance": ("Variance of the index of observed causes", "number"),
    "p_value": ("p-value", "p_value"),
    "r2dz_x": ("Omitted cause's partial R² with the focal regressor", "number"),
    "r2yz_dx": ("Omitted cause's partial R² with the outcome", "number"),
    "r2yz_dx_capped": ("Outcome share capped at 1", "text"),
    "reason": ("Why", "text"),
    "regressor": ("Focal regressor", "plain"),
    "share_of_reduced_form": ("Direct effect up to this share of the reduced form", "percent"),
    "simplified": ("Simplified critical value", "number"),
    "simplified_k_eff": ("Effective number of instruments, simplified", "number"),
    "statistic": ("Statistic", "number"),
    "std_error": ("Std. error", "number"),
    "tabulated": ("Tabulated", "text"),
    "tau": ("Largest bias allowed (τ, share of the benchmark)", "percent"),
    "threshold": ("Largest value tolerated", "percent"),
    "unobserved_index_variance": ("Variance of the index of unobserved causes", "number"),
}
"""Fields inside a nested list or record: (label, how written)."""

RECORD_FIELDS_BY_PARENT = {
    ("estimates", "2sls"): ("2SLS with the arms as instruments", "number"),
    ("estimates", "ols"): ("OLS of the outcome on the mediator", "number"),
    ("estimates", "ols_with_treatment"): ("OLS with the arms held fixed", "number"),
    ("theta", "max"): ("Largest", "number"),
    ("theta", "median"): ("Median", "number"),
    ("theta", "min"): ("Smallest", "number"),
}
"""Keys inside a record whose meaning depends on the field holding it: (field, key) to (label, how written)."""

RECORD_VALUES = {
    "criterion": {
        "tsls_relative_bias": "Bias of 2SLS relative to OLS",
        "tsls_size": "Size of the 2SLS Wald test",
        "liml_size": "Size of the LIML Wald test",
    },
}
"""Words for coded values inside nested records; an unlisted value shows as the engine wrote it."""
