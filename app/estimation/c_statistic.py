"""The C statistic (difference-in-Sargan/Hansen): which instruments does the over-identification test blame?

For a suspect set of s excluded instruments, refit the efficient GMM
estimator without them and compare the over-identification statistics:

    C = J(all instruments) - J(without the suspects),   chi2(s) under the null
    that the suspects are valid given that the others are.

Both J statistics use the same moment covariance S (the full model's, at the
2SLS residuals, as the two-step GMM fit does), with the restricted model
using the sub-matrix of S for the instruments it keeps; this makes C
non-negative (Hayashi 2000, sec. 3.6). With homoskedastic errors S is
``sigma^2 [Z, W]'[Z, W]`` with ``sigma^2 = e'e / n`` from the full 2SLS fit, so C
is the difference of two Sargan statistics with a common error variance.
Everything is computed from the moment matrix; nothing is refitted on the data.

The restricted model must still be identified: at least as many remaining
excluded instruments as focal regressors.

References
----------
Eichenbaum, M. S., Hansen, L. P. and Singleton, K. J. (1988). A time series
analysis of representative agent models of consumption and leisure choice
under uncertainty. Quarterly Journal of Economics 103(1), 51-78.
Hayashi, F. (2000). Econometrics, sec. 3.6. Princeton University Press.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from app.estimation.findings import TestResult
from app.estimation.gmm import GmmFit, j_statistic
from app.estimation.inference import chi2_p
from app.estimation.linalg import SingularMatrixError
from app.estimation.moments import Moments

SOURCE = "Eichenbaum, Hansen & Singleton (1988); Hayashi (2000), sec. 3.6"


def c_statistics(
    moments: Moments, *, gmm: GmmFit | None, instruments: list[str], subsets: list[list[str]]
) -> list[TestResult]:
    """One C statistic per excluded instrument, then one per reviewer-named subset."""
    suspects: list[list[str]] = [[name] for name in instruments]
    for subset in subsets:
        if sorted(subset) not in [sorted(existing) for existing in suspects]:
            suspects.append(list(subset))
    return [c_statistic(moments, gmm=gmm, instruments=instruments, suspects=subset) for subset in suspects]


def c_statistic(moments: Moments, *, gmm: GmmFit | None, instruments: list[str], suspects: list[str]) -> TestResult:
    """C statistic for one suspect set of excluded instruments."""
    name = f"C statistic for {', '.join(suspects)}"
    verb = "is" if len(suspects) == 1 else "are"
    null = f"{', '.join(suspects)} {verb} uncorrelated with the structural error, given that the other instruments are"
    unknown = [s for s in suspects if s not in instruments]
    if unknown:
        return _entry(
            TestResult.not_applicable(
                name,
                f"{', '.join(repr(u) for u in unknown)} is not one of the claim's instruments ({', '.join(instruments)})",
                source=SOURCE,
                null_hypothesis=null,
            ),
            suspects,
        )
    layout = moments.layout
    kept_excluded = [layout.instr[j] for j, label in enumerate(instruments) if label not in suspects]
    if len(kept_excluded) < layout.n_endog:
        return _entry(
            TestResult.not_applicable(
                name,
                f"without {', '.join(suspects)} fewer instruments than focal regressors remain, so the model "
                "would not be identified and the suspects cannot be tested against the others",
                source=SOURCE,
                null_hypothesis=null,
            ),
            suspects,
        )
    if gmm is None:
        return _entry(
            TestResult.undefined(
                name,
                "the covariance of the moment conditions is singular, so no over-identification statistic exists",
                source=SOURCE,
                null_hypothesis=null,
            ),
            suspects,
        )
    # in GMM's conditioned basis, whose instrument columns span the same spaces ([Z_kept, W] too)
    all_instruments = layout.instruments
    kept = kept_excluded + layout.exog
    positions = [all_instruments.index(column) for column in kept]
    covariance = gmm.moment_covariance
    try:
        full = j_statistic(gmm.moments, all_instruments, covariance)
        restricted = j_statistic(gmm.moments, kept, covariance[np.ix_(positions, positions)])
    except SingularMatrixError:
        return _entry(
            TestResult.undefined(name, "the covariance of the moment conditions is singular", source=SOURCE, null_hypothesis=null),
            suspects,
        )
    statistic = max(full - restricted, 0.0)
    details: dict[str, object] = {"j_all_instruments": full, "j_without_suspects": restricted}
    if len(kept_excluded) == layout.n_endog:
        details["note"] = (
            "without the suspects the model is exactly identified, so C equals the overall over-identification "
            "statistic: it cannot tell these instruments apart from the remaining ones"
        )
    return _entry(
        TestResult(
            name=name,
            statistic=statistic,
            p_value=chi2_p(statistic, len(suspects)),
            df=len(suspects),
            distribution="chi2",
            null_hypothesis=null,
            source=SOURCE,
            details=details,
        ),
        suspects,
    )


def _entry(result: TestResult, suspects: list[str]) -> TestResult:
    return dataclasses.replace(result, details={"instruments": list(suspects), **result.details})
