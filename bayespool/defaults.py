"""Defaults shared by the library and the command line (kept import-light for fast start-up)."""

NEGATIVE_BELOW = 0.01   # call negative when P(positive) < this
POSITIVE_ABOVE = 0.99   # call positive when P(positive) > this
PREVALENCE = 0.01       # prior for samples without one
METHODS = ("auto", "exact", "bp", "gibbs")

# belief propagation (bayespool.decoders.bp)
BP_MAX_SWEEPS = 200     # iteration cap
BP_DAMPING = 0.0        # fraction of the old message kept (log-odds); 0 = plain sum-product
BP_TOLERANCE = 1e-8     # converged when no message (log-odds) moves by this much in a sweep
LOOPY_SAMPLER_LIMIT = 500  # auto: specimens of loopy BP groups re-decoded by the sampler

# prevalence intervals (bayespool.surveillance.intervals) and regression links
PREVALENCE_INTERVALS = ("skew-score", "score", "likelihood", "exact", "bayes")
REGRESSION_LINKS = ("logit", "cloglog")
