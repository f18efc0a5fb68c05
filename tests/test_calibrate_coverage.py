"""Coverage of the calibration intervals over simulated validation sets.

Source: a 95% confidence interval covers the true value in about 95% of repeated experiments
(Neyman 1937); profile-likelihood intervals do so asymptotically (Wilks 1938) and Clopper-Pearson
intervals at least nominally (Clopper & Pearson 1934). With 300 sets the binomial standard error of
a 95% coverage is 1.3 points, so 92% to 98% is a band of more than two standard errors each side.
"""
import numpy as np

from bayespool.assay import Assay, ConstantSensitivity, DilutionSensitivity
from bayespool.calibration import calibrate_validation
from bayespool.calibration.validation import ValidationData

N_SETS = 300


def coverage(assay, k, d, model, truth, seed, intervals="profile"):
    rng = np.random.default_rng(seed)
    hits = dict.fromkeys(truth, 0)
    for _ in range(N_SETS):
        y = assay.draw_readouts(k, d, rng)
        res = calibrate_validation(ValidationData.from_arrays(k, d, y), model,
                                   intervals=intervals, compare=False)
        for name, value in truth.items():
            lo, hi = res.interval(name)
            hits[name] += lo <= value <= hi
    return {name: h / N_SETS for name, h in hits.items()}


def test_dilution_profile_intervals_cover_95_percent():
    truth = {"specificity": 0.98, "se_max": 0.95, "r50": 20.0, "slope": 1.5}
    assay = Assay(truth["specificity"], DilutionSensitivity(0.95, 20.0, 1.5))
    # 30 readouts at each of six dilutions with one positive, 200 pools without positives
    k = np.concatenate([np.repeat([1, 4, 8, 16, 32, 64], 30), np.full(200, 8)])
    d = np.concatenate([np.ones(180, int), np.zeros(200, int)])
    cov = coverage(assay, k, d, "dilution", truth, seed=11)
    for name, c in cov.items():
        assert 0.92 <= c <= 0.98, (name, c, cov)


def exact_clopper_pearson_coverage(p, n, level=0.95):
    """Exact coverage of the Clopper-Pearson interval at true rate p: the sum of the binomial
    probabilities of the counts whose interval holds p (scipy.stats)."""
    from scipy.stats import beta, binom
    x = np.arange(n + 1)
    a = (1 - level) / 2
    lo = np.where(x > 0, beta.ppf(a, x, n - x + 1), 0.0)
    hi = np.where(x < n, beta.ppf(1 - a, x + 1, n - x), 1.0)
    return float(binom.pmf(x, n, p)[(lo <= p) & (p <= hi)].sum())


def test_constant_profile_interval_covers_95_percent():
    truth = {"specificity": 0.995, "sensitivity": 0.9}
    assay = Assay(0.995, ConstantSensitivity(0.9))
    k = np.concatenate([np.repeat([4, 8, 16], 20), np.full(400, 8)])
    d = np.concatenate([np.ones(60, int), np.zeros(400, int)])
    cov = coverage(assay, k, d, "constant", truth, seed=12)
    assert 0.92 <= cov["sensitivity"] <= 0.98, cov
    # with 2 expected false positives the exact interval is conservative (about 99%): the
    # simulated coverage must match its exact coverage, computed from the binomial distribution
    exact = exact_clopper_pearson_coverage(0.995, 400)
    assert exact >= 0.95
    assert abs(cov["specificity"] - exact) <= 3 * np.sqrt(exact * (1 - exact) / N_SETS), (cov, exact)
