"""Demo case 3: budgeting-app use and credit-card debt, identified by a weak instrument.

Invented data. A credit union's research team reports that members who log
in to its budgeting app more often run up less credit-card debt. Logins are
chosen by the members: conscientious members both use the app more and
borrow less for other reasons, so an omitted common cause (conscientiousness,
not in the data) makes OLS overstate the benefit. The authors instrument
weekly logins with ``sms_invitation``: a randomly chosen 40% of members got a
text message inviting them to try the app. The draw is fair, but few members
act on a text message, so the invitation moves logins only a little: the
instrument is weak. Balances are correlated within branches, so the authors
cluster by branch (38 branches).

What the demo shows: 2SLS is pulled toward the biased OLS estimate and its
cluster-robust interval excludes zero, while the weak-instrument-robust
Anderson-Rubin set is the union of two rays that contains zero, and the K,
CLR and tF sets contain zero too; the true effect is close to nothing. The
balance check on the pre-treatment covariates passes (the invitation was
drawn at random), and with fewer than 50 branches the wild cluster bootstrap
is reported.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

SLUG = "budgeting_app_card_debt"
TITLE = "Budgeting-app logins and credit-card debt among credit-union members"
STORY = (
    "A credit union reports that members who log in to its budgeting app more often run up less credit-card "
    "debt over six months. Members choose how often to log in, and conscientious members both use the app "
    "more and borrow less for other reasons, so ordinary regression overstates the benefit. The authors use a "
    "randomly sent text-message invitation to try the app as an instrument. The draw is fair, but few members "
    "act on a text message, so it barely changes how often they log in: the instrument is weak, and the usual "
    "2SLS interval is far too narrow."
)
SEED = 260_070
TRUE_EFFECT = {
    "term": "weekly_app_logins",
    "value": -2.7,
    "unit": "US dollars of six-month change in credit-card balance per weekly login",
    "recovered_by": "no point estimate is reliable here; the Anderson-Rubin set contains the true value and zero",
}
N_BRANCHES = 38
MEMBERS_PER_BRANCH = (41, 69)
INVITED_SHARE = 0.4
LOGINS_PER_INVITATION = 0.11
"""Extra weekly logins an invitation brings on average: few members act on it (the weak first stage)."""


def generate(rng: np.random.Generator) -> pd.DataFrame:
    """Simulate the members; conscientiousness is generated but not released."""
    sizes = rng.integers(MEMBERS_PER_BRANCH[0], MEMBERS_PER_BRANCH[1] + 1, N_BRANCHES)
    branch = np.repeat(np.arange(N_BRANCHES), sizes)
    n = branch.size
    branch_habits = rng.normal(0.0, 0.3, N_BRANCHES)
    branch_economy = rng.normal(0.0, 35.0, N_BRANCHES)
    conscientiousness = rng.standard_normal(n)
    age = rng.integers(21, 75, n)
    prior_balance_k = np.round(rng.lognormal(1.1, 0.7, n), 2)
    invited = rng.binomial(1, INVITED_SHARE, n)
    logins = (
        1.6
        + LOGINS_PER_INVITATION * invited
        + branch_habits[branch]
        + 1.05 * conscientiousness
        - 0.008 * (age - 45)
        + 0.45 * rng.standard_normal(n)
    )
    logins = np.round(np.clip(logins, 0.0, None), 2)
    balance_change = (
        150.0
        + TRUE_EFFECT["value"] * logins
        - 95.0 * conscientiousness
        + 21.0 * prior_balance_k
        - 1.9 * (age - 45)
        + branch_economy[branch]
        + 60.0 * rng.standard_normal(n)
    )
    return pd.DataFrame(
        {
            "member_id": np.arange(700_001, 700_001 + n),
            "branch": [f"B{code:02d}" for code in branch],
            "sms_invitation": invited,
            "weekly_app_logins": logins,
            "card_balance_change_usd": np.round(balance_change),
            "age": age,
            "prior_balance_k": prior_balance_k,
        }
    )


def claim() -> dict:
    """The model as the (fictional) manuscript states it, with its printed numbers."""
    return {
        "title": "Each weekly login to the budgeting app lowers credit-card debt (2SLS, SMS invitation as instrument)",
        "design": "iv",
        "outcome": "card_balance_change_usd",
        "endogenous": ["weekly_app_logins"],
        "instruments": ["sms_invitation"],
        "controls": ["age", "prior_balance_k"],
        "covariance": "cluster",
        "cluster": ["branch"],
        "pre_treatment": ["age", "prior_balance_k"],
        "direct_effect_bound": 5.0,
        "claimed": {
            "estimator": "2sls",
            "term": "weekly_app_logins",
            "estimate": "-73.9",
            "std_error": "32.2",
            "n_obs": 2093,
            "first_stage_f": "5.48",
        },
    }
