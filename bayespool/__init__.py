"""bayespool: per-specimen probabilities from pooled tests with an imperfect, dilution-prone assay.

Statistical decision support, not a diagnostic device. Names are imported lazily so that the command
line starts fast.
"""
from importlib import import_module

__version__ = "0.1.0"

_EXPORTS = {
    "Assay": "bayespool.assay", "ConstantSensitivity": "bayespool.assay",
    "DilutionSensitivity": "bayespool.assay", "TableSensitivity": "bayespool.assay",
    "read_assay": "bayespool.assay", "decode": "bayespool.decode",
    "Posterior": "bayespool.decode.posterior", "InputError": "bayespool.errors",
    "ImpossibleEvidenceError": "bayespool.errors", "Run": "bayespool.run",
    "estimate_prevalence": "bayespool.surveillance", "read_pools": "bayespool.surveillance",
    "fit_regression": "bayespool.surveillance.regression",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'bayespool' has no attribute {name!r}")
