"""Words the pages use for codes: refit states, verdicts, standings, roles, designs, diagnostics.

Only display text lives here; the codes themselves come from the services, the
claim spec and the review package.
"""

from __future__ import annotations

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
