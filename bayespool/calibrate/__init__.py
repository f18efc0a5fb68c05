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


def calibrate(validation=None, run=None, model: str = "best", **options) -> Calibration:
    """Calibrate from a validation file/data or from a past run (exactly one of them).

    ``validation`` is a path or :class:`ValidationData`; ``run`` a :class:`bayespool.run.Run`.
    Options are those of :func:`calibrate_validation` or :func:`calibrate_runs`.
    """
    from ..errors import InputError
    if (validation is None) == (run is None):
        raise InputError("give either validation data or a past run to calibrate from")
    if validation is not None:
        data = validation if isinstance(validation, ValidationData) else \
            ValidationData.read(validation)
        return calibrate_validation(data, model, **options)
    return calibrate_runs(run, model, **options)


__all__ = ["Calibration", "ValidationData", "calibrate", "calibrate_validation", "calibrate_runs",
           "MODELS"]
