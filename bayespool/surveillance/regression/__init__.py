"""Group testing regression: individual risk on covariates from pooled readouts, by EM over the
latent statuses on the exact marginal likelihood (or Monte Carlo EM with the Gibbs sampler for
large linked groups); the fitted risks are per-specimen priors for decode, plan and design."""
from .fit import METHODS, fit_regression
from .result import RegressionFit

__all__ = ["fit_regression", "RegressionFit", "METHODS"]
