"""Gibbs sampler over specimen statuses: marginals with Monte Carlo errors and joint answers.

Layout (one idea per module): ``model`` (arrays the kernels read), ``state`` (chains),
``single_site`` / ``pool_swap`` / ``prevalence`` (the moves), ``blocks`` (the parallel loop over
chains), ``backend`` (bounded thinned traces), ``diagnostics`` (R-hat, ESS, MCSE), ``joint``
(number of positives, ambiguity groups), ``sampler`` (the driver), ``decode`` (Posterior objects).
References: Knill, Schliep & Torney (1996), J. Comput. Biol. 3(3) (MCMC for pooling designs);
Vehtari et al. (2021), Bayesian Analysis 16(2) (diagnostics).
"""
from .decode import Fallback, decode_gibbs, fallback, run_sampler, sample_components
from .diagnostics import ess, ess_mean, mcse, rhat
from .pool_swap import PoolSwapMove
from .prevalence import PrevalenceMove
from .sampler import GibbsResult, GibbsSampler
from .single_site import SingleSiteMove

__all__ = ["GibbsSampler", "GibbsResult", "SingleSiteMove", "PoolSwapMove", "PrevalenceMove",
           "decode_gibbs", "fallback", "Fallback", "run_sampler", "sample_components", "rhat", "ess", "ess_mean", "mcse"]
