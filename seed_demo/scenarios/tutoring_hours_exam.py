"""Demo case 2: a randomized offer of peer tutoring, and a claim about the hours attended.

Invented data. A vocational college assigns students at random to three
groups: no offer, an offer of a peer-tutoring app, or the offer plus weekly
text reminders. The (fictional) manuscript's claim is not about the offer but
about the mediator it moves: each hour of tutoring attended raises the
end-of-term exam score. It estimates this by regressing the score on the
hours, holding the assigned group fixed.

The hours are measured, not assigned. Conscientious students attend more
tutoring and also score higher for other reasons (they revise, they attend
lectures): a shared cause that randomizing the offer does not remove. OLS of
the score on the hours overstates the effect. Using the two randomized
offers as instruments for the hours (2SLS) recovers it, under the extra
assumption that the offers change scores only through the hours attended;
here that holds, and with two offers the over-identification test has
nothing to object to.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

SLUG = "tutoring_hours_exam"
TITLE = "Peer-tutoring hours and exam scores after a randomized tutoring offer"
STORY = (
    "A vocational college randomly offered students a peer-tutoring app, alone or with weekly text reminders. "
    "The manuscript claims that each hour of tutoring attended raises the end-of-term exam score, estimated "
    "by regressing scores on hours while holding the assigned group fixed. Hours are measured, not assigned: "
    "conscientious students attend more tutoring and also score higher anyway, so the naive regression "
    "overstates the effect. The randomized offers, used as instruments for the hours, recover it - provided "
    "the offers raise scores only through the hours attended."
)
SEED = 731_902
TRUE_EFFECT = {
    "term": "tutoring_hours",
    "value": 0.38,
    "unit": "exam points (0-100 scale) per hour of peer tutoring attended",
    "recovered_by": "2SLS with offer_app and offer_app_reminders as instruments",
}
N_STUDENTS = 1_846
CONSCIENTIOUSNESS_ON_HOURS = 3.4
CONSCIENTIOUSNESS_ON_SCORE = 4.6


def generate(rng: np.random.Generator) -> pd.DataFrame:
    """Simulate the trial; conscientiousness is generated but not released."""
    n = N_STUDENTS
    group = rng.choice(3, size=n, p=[0.34, 0.33, 0.33])
    offer_app = (group == 1).astype(int)
    offer_app_reminders = (group == 2).astype(int)
    conscientiousness = rng.standard_normal(n)
    prior_gpa = np.clip(2.9 + 0.35 * conscientiousness + 0.45 * rng.standard_normal(n), 1.0, 4.0).round(2)
    age_years = rng.integers(18, 30, n)
    works_part_time = rng.binomial(1, 0.42, n)
    hours = np.clip(
        6.2
        + 4.1 * offer_app
        + 6.8 * offer_app_reminders
        + CONSCIENTIOUSNESS_ON_HOURS * conscientiousness
        - 1.9 * works_part_time
        + 3.0 * rng.standard_normal(n),
        0.0,
        None,
    ).round(1)
    score = np.clip(
        58.3
        + TRUE_EFFECT["value"] * hours
        + 7.9 * (prior_gpa - 2.9)
        + CONSCIENTIOUSNESS_ON_SCORE * conscientiousness
        - 0.25 * (age_years - 21)
        + 8.2 * rng.standard_normal(n),
        0.0,
        100.0,
    ).round(1)
    gpa_missing = rng.random(n) < 0.021
    return pd.DataFrame(
        {
            "student_id": np.arange(40_001, 40_001 + n),
            "offer_app": offer_app,
            "offer_app_reminders": offer_app_reminders,
            "tutoring_hours": hours,
            "exam_score": score,
            "prior_gpa": np.where(gpa_missing, np.nan, prior_gpa),
            "age_years": age_years,
            "works_part_time": works_part_time,
        }
    )


def claim() -> dict:
    """The model as the (fictional) manuscript states it, with its printed numbers."""
    return {
        "title": "Each hour of peer tutoring raises exam scores (OLS holding the assigned group fixed)",
        "design": "mediation",
        "outcome": "exam_score",
        "mediator": "tutoring_hours",
        "treatment": ["offer_app", "offer_app_reminders"],
        "controls": ["prior_gpa", "age_years", "works_part_time"],
        "benchmarks": ["prior_gpa"],
        "covariance": "robust",
        "claimed": {
            "estimator": "ols_with_treatment",
            "term": "tutoring_hours",
            "estimate": "0.95",
            "std_error": "0.053",
            "n_obs": 1807,
        },
    }
