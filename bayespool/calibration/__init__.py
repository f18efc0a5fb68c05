"""Calibration: fit the assay model (specificity and a sensitivity family) and say how sure the fit is.

Two sources of data:

- validation runs with known truth (``pool_size,positives,result``): :func:`calibrate_validation`,
  maximum likelihood per family with profile-likelihood (or Wald) intervals, Clopper-Pearson for
  the specificity, observed against fitted detection rates per cell with a goodness-of-fit test,
  and AIC across families;
- past routine runs with latent truth (layout and readouts, individual follow-up tests being pools
  of one): :func:`calibrate_runs`, prevalence and assay fitted jointly on the exact marginal
  likelihood, with a warning where the data cannot separate sensitivity from prevalence.

Both return a :class:`Calibration` whose ``assay`` is written as the assay file.
"""
from .families import FAMILIES
from .fit import calibrate_validation
from .latent import calibrate_runs
from .result import Calibration
from .validation import ValidationData

MODELS = FAMILIES + ("best",)


def calibrate(validation=None, run=None, *, model: str = "best", fixed: dict | None = None,
              level: float = 0.95, intervals: str = "profile", gof_draws: int = 0,
              seed=None) -> Calibration:
    """Fit the assay from validation data or from a past run (exactly one of them).

    Parameters
    ----------
    validation : str, path-like or ValidationData, optional
        ``pool_size,positives,result`` readouts of pools whose number of positives is known.
    run : Run, optional
        A past run (layout and readouts; individual follow-up tests are pools of one).
    model : {"constant", "dilution", "table", "best"}, keyword-only
        The sensitivity family; ``best`` takes the smallest AIC.
    fixed : dict, optional
        Parameters kept at given values, e.g. ``{"se_max": 1.0}``.
    level : float
        Confidence level of the intervals, in [0.5, 1).
    intervals : {"profile", "wald"}
        Interval method for fitted parameters.
    gof_draws : int
        Validation only: parametric bootstrap draws for the goodness-of-fit p-value (0: none).
    seed : int, numpy.random.Generator or None
        Random seed of the bootstrap.

    Returns
    -------
    Calibration

    Raises
    ------
    InputError
        Neither or both of ``validation`` and ``run``, a bad option (naming the parameter), or a
        bad file.

    References
    ----------
    Maximum likelihood with profile-likelihood intervals; Clopper & Pearson (1934), Biometrika 26
    (exact interval of the specificity); Hui & Walter (1980), Biometrics 36 (latent truth and its
    identifiability); Hwang (1976), Biometrika 63(3) (the dilution effect).

    Examples
    --------
    >>> import bayespool
    >>> fit = bayespool.calibrate("datasets/demo/invented_validation.csv", model="dilution")
    >>> fit.to_frame().index.tolist()
    ['specificity', 'se_max', 'r50', 'slope']
    """
    from ..errors import InputError
    if (validation is None) == (run is None):
        raise InputError("give either validation or run to calibrate from",
                         parameters=("validation", "run"))
    if validation is not None:
        data = validation if isinstance(validation, ValidationData) else \
            ValidationData.read(validation)
        return calibrate_validation(data, model, fixed, level=level, intervals=intervals,
                                    gof_draws=gof_draws, seed=seed)
    if gof_draws:
        raise InputError("gof_draws applies to validation data only", parameters=("gof_draws",))
    return calibrate_runs(run, model, fixed, level=level, intervals=intervals)


__all__ = ["Calibration", "ValidationData", "calibrate", "calibrate_validation", "calibrate_runs",
           "MODELS"]
