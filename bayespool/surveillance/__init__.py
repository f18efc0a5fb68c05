"""Surveillance: prevalence from pooled readouts, and individual risk from covariates.

- :func:`estimate_prevalence`: prevalence by group (site, week, ...) from pools of unequal sizes
  read by a perfect or an imperfect, dilution-prone assay, with bias-corrected estimates,
  score, likelihood, exact and Bayesian intervals, and a two-group difference.
"""
from .pools import PooledData, pools_from_frame, pools_from_run, read_pools
from .prevalence import GroupEstimate, PrevalenceEstimates, estimate_prevalence

__all__ = ["PooledData", "read_pools", "pools_from_frame", "pools_from_run",
           "estimate_prevalence", "PrevalenceEstimates", "GroupEstimate"]
