"""A randomized experiment whose claim is about a measured mediator.

The treatment T is assigned at random; the claim is about the effect of a
mediator M on the outcome y. Regressing y on M (with or without T) is biased
whenever M and y share a cause, which randomizing T does not remove. Using
the randomized arms as instruments for M (2SLS) removes that bias under one
extra assumption that randomization cannot deliver: **the treatment moves the
outcome only through the mediator** (no direct effect, no other pathway).
With several arms the assumption is testable by over-identification (Sargan
or Hansen's J, according to the claim's variance estimator); with one arm it
rests on argument alone.

If arm j had a direct effect ``gamma_j`` on y, 2SLS would converge to
``beta + w' gamma`` with ``w = (Pi' S Pi)^{-1} Pi' S``, ``Pi`` the first-stage
coefficients of the arms and ``S = Z' M_W Z`` their cross-product after the
controls (exact in the sample). With one arm, ``w = 1 / pi``: a weak effect
of the treatment on the mediator magnifies any direct effect. The findings
report ``w`` as the drift per unit of direct effect.

References
----------
Angrist, J. D., Imbens, G. W. and Rubin, D. B. (1996). Identification of
causal effects using instrumental variables. JASA 91(434), 444-455.
Bullock, J. G., Green, D. P. and Ha, S. E. (2010). Yes, but what's the
mechanism? (Don't expect an easy answer). Journal of Personality and Social
Psychology 98(4), 550-558.
Imai, K., Keele, L., Tingley, D. and Yamamoto, T. (2011). Unpacking the black
box of causality. American Political Science Review 105(4), 765-789.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

from app.estimation.covariance import Homoskedastic, VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.linalg import inverse_pd
from app.estimation.moments import Moments

ESTIMATORS: dict[str, tuple[str, str, str]] = {
    "ols_with_treatment": (
        "OLS with the treatment held fixed",
        "OLS of the outcome on the mediator and the randomized arms: still biased when the mediator shares a "
        "cause with the outcome (conditioning on a mediator does not make it random).",
        "Baron & Kenny (1986); Bullock, Green & Ha (2010)",
    ),
}
ASSUMPTION = (
    "The randomized treatment changes the outcome only through the mediator: no direct effect and no other "
    "pathway. Random assignment makes the treatment independent of the causes the mediator shares with the "
    "outcome, but it cannot show this; the 2SLS estimate of the mediator's effect holds only if it is true."
)
NAME = "Mediator claim: the treatment acts on the outcome only through the mediator"
SOURCE = "Angrist, Imbens & Rubin (1996); Bullock, Green & Ha (2010)"


def treatment_adjusted_ols(moments: Moments, *, terms: list[str]) -> LinearFit:
    """OLS of y on the mediator, the randomized arms and the controls (all of ``V = [X, Z, W]``)."""
    layout = moments.layout
    score_map = np.eye(layout.width - 1)
    params, bread = moments.regress(moments.column(0), score_map)
    return LinearFit(
        code="ols_with_treatment",
        terms=terms,
        params=params,
        bread=bread,
        score_map=score_map,
        residual=moments.residual_vector(moments.column(0), score_map, params),
        n_params=layout.width - 1 + moments.absorbed_dof,
    )


def drift_per_direct_effect(moments: Moments) -> np.ndarray:
    """``w = (Pi' S Pi)^{-1} Pi' S``: how far 2SLS moves per unit of direct effect of each arm."""
    layout = moments.layout
    gram = moments.gram
    instr, exog, mediator = layout.instr, layout.exog, layout.endog[0]
    partialled = gram[np.ix_(instr, instr)]
    cross = gram[instr, mediator]
    if exog:
        projection = gram[np.ix_(instr, exog)] @ inverse_pd(gram[np.ix_(exog, exog)])
        partialled = partialled - projection @ gram[np.ix_(exog, instr)]
        cross = cross - projection @ gram[exog, mediator]
    first_stage = inverse_pd(partialled) @ cross
    weighted = first_stage @ partialled
    return weighted / float(weighted @ first_stage)


def mediation_reading(
    moments: Moments,
    variance: VarianceEstimator,
    *,
    fits: dict[str, LinearFit],
    diagnostics: dict[str, Any],
    mediator: str,
    arms: list[str],
) -> TestResult:
    """The extra assumption in words, its test with several arms, and what the naive fits miss."""
    test_key = "sargan" if isinstance(variance, Homoskedastic) else "hansen_j"
    estimates = {code: float(fits[code].params[0]) for code in ("ols", "ols_with_treatment", "2sls") if code in fits}
    details: dict[str, Any] = {
        "mediator": mediator,
        "arms": arms,
        "assumption": ASSUMPTION,
        "estimates": estimates,
        "naive_minus_2sls": estimates["ols"] - estimates["2sls"],
        "drift_per_unit_direct_effect": [
            {"arm": arm, "drift": float(w)} for arm, w in zip(arms, drift_per_direct_effect(moments))
        ],
        "drift_reading": (
            "if an arm changed the outcome directly by g (not through the mediator), the 2SLS estimate would be "
            "off by drift x g"
        ),
        "test": test_key,
    }
    test = diagnostics.get(test_key)
    if len(arms) < 2:
        result = TestResult.not_applicable(
            NAME,
            "one randomized arm exactly identifies the mediator's effect: the assumption cannot be tested and "
            "rests on argument alone",
            source=SOURCE,
            null_hypothesis=ASSUMPTION,
        )
        return dataclasses.replace(result, details=details)
    if test is None or test.statistic is None:
        reason = test.reason if test is not None else f"the {test_key} statistic is not available"
        return dataclasses.replace(
            TestResult.undefined(NAME, reason or "", source=SOURCE, null_hypothesis=ASSUMPTION), details=details
        )
    return TestResult(
        name=NAME,
        statistic=test.statistic,
        p_value=test.p_value,
        df=test.df,
        distribution=test.distribution,
        null_hypothesis=ASSUMPTION,
        source=f"{SOURCE}; over-identification test: {test.source}",
        details=details,
    )
