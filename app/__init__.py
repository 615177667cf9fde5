"""SecondStage: re-check a manuscript's causal claim with endogeneity-robust estimators."""

__version__ = "0.1.0"
