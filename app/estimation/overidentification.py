"""Over-identification tests: Sargan, Basmann and Hansen's J.

With e the 2SLS residual and ``P`` the projection on all instruments ``Zf``:

* Sargan (1958): ``n e'Pe / e'e`` (the n R^2 of regressing e on Zf;
  Wooldridge 2020, sec. 15-5), chi-squared with q - p degrees of freedom.
* Basmann (1960): ``(n - L) e'Pe / e'M e``, chi-squared with q - p.
* Hansen (1982) J: ``g' S^{-1} g`` at the two-step GMM estimate, with S the
  robust or cluster covariance of the moments; valid without homoskedasticity.

The first two assume homoskedastic errors; the claim's variance estimator
decides which of the three is reported as applicable.

References
----------
Sargan, J. D. (1958). The estimation of economic relationships using
instrumental variables. Econometrica 26(3), 393-415.
Basmann, R. L. (1960). On finite sample distributions of generalized
classical linear identifiability test statistics. JASA 55(292), 650-659.
Hansen, L. P. (1982). Econometrica 50(4), 1029-1054.
Wooldridge, J. M. (2020). Introductory Econometrics, 7th ed., ch. 15.
"""

from __future__ import annotations

import dataclasses

from app.estimation.covariance import Homoskedastic, VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.gmm import GmmFit, hansen_j
from app.estimation.inference import chi2_p
from app.estimation.linalg import SingularMatrixError
from app.estimation.moments import Moments

NULL = "every instrument is uncorrelated with the structural error (the instruments are jointly valid)"
SOURCES = {
    "sargan": "Sargan (1958); Wooldridge (2020), sec. 15-5",
    "basmann": "Basmann (1960)",
    "hansen_j": "Hansen (1982)",
}
NAMES = {
    "sargan": "Sargan over-identification test",
    "basmann": "Basmann over-identification test",
    "hansen_j": "Hansen J over-identification test",
}


def overidentification_tests(
    moments: Moments, variance: VarianceEstimator, *, tsls: LinearFit, gmm: GmmFit | None
) -> dict[str, TestResult]:
    """Sargan, Basmann and Hansen J, each computed or marked not applicable."""
    layout = moments.layout
    degree = layout.n_instr - layout.n_endog
    if degree == 0:
        reason = (
            "the model is exactly identified (as many excluded instruments as focal regressors); "
            "over-identification cannot be tested, so instrument validity rests on argument alone"
        )
        return {key: TestResult.not_applicable(NAMES[key], reason, source=SOURCES[key], null_hypothesis=NULL) for key in NAMES}

    explained = moments.projected_ss(tsls.residual, layout.instruments)
    total = moments.quad(tsls.residual, tsls.residual)
    n = moments.n_obs
    n_instruments = len(layout.instruments) + moments.absorbed_dof
    sargan = n * explained / total
    basmann = (n - n_instruments) * explained / (total - explained)
    results = {
        "sargan": _chi2("sargan", sargan, degree),
        "basmann": _chi2("basmann", basmann, degree),
    }
    if isinstance(variance, Homoskedastic):
        for key in ("sargan", "basmann"):
            results[key] = _note(results[key], "assumes homoskedastic errors, as the claim does")
        results["hansen_j"] = TestResult.not_applicable(
            NAMES["hansen_j"],
            "the claim assumes homoskedastic errors; under that assumption Hansen's J equals Sargan's statistic",
            source=SOURCES["hansen_j"],
            null_hypothesis=NULL,
        )
        return results
    for key in ("sargan", "basmann"):
        results[key] = _note(results[key], "assumes homoskedastic errors; with the claim's variance estimator read hansen_j")
    try:
        if gmm is None:
            raise SingularMatrixError("no GMM weight")
        results["hansen_j"] = _chi2("hansen_j", hansen_j(gmm), degree)
    except SingularMatrixError:
        results["hansen_j"] = TestResult.undefined(
            NAMES["hansen_j"],
            "the covariance of the moment conditions is singular (e.g. fewer clusters than instruments)",
            source=SOURCES["hansen_j"],
            null_hypothesis=NULL,
        )
    return results


def _chi2(key: str, statistic: float, degree: int) -> TestResult:
    return TestResult(
        name=NAMES[key],
        statistic=statistic,
        p_value=chi2_p(statistic, degree),
        df=degree,
        distribution="chi2",
        null_hypothesis=NULL,
        source=SOURCES[key],
    )


def _note(result: TestResult, note: str) -> TestResult:
    return dataclasses.replace(result, details={"assumption": note})
