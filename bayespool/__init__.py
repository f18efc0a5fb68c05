"""bayespool: per-specimen probabilities from pooled tests with an imperfect, dilution-prone assay.

Statistical decision support, not a diagnostic device. Names are imported lazily so that the command
line starts fast.
"""
from importlib import import_module

__version__ = "0.1.0"

_EXPORTS = {
    # functions
    "read_run": "bayespool.run", "read_assay": "bayespool.assay", "decode": "bayespool.decoders",
    "plan": "bayespool.planning", "calibrate": "bayespool.calibration",
    "make_design": "bayespool.design", "optimal_dorfman": "bayespool.design",
    "simulate": "bayespool.simulation", "sweep": "bayespool.simulation",
    "write_report": "bayespool.report", "assay_curve": "bayespool.assay_view",
    # data and result types
    "Run": "bayespool.run", "Assay": "bayespool.assay",
    "ConstantSensitivity": "bayespool.assay", "DilutionSensitivity": "bayespool.assay",
    "TableSensitivity": "bayespool.assay", "AssayCurve": "bayespool.assay_view", "Posterior": "bayespool.decoders.posterior",
    "Plan": "bayespool.planning", "Calibration": "bayespool.calibration",
    "ValidationData": "bayespool.calibration", "Design": "bayespool.design",
    "DesignProperties": "bayespool.design", "DorfmanOptimum": "bayespool.design",
    "Simulation": "bayespool.simulation", "Sweep": "bayespool.simulation",
    "estimate_prevalence": "bayespool.surveillance", "read_pools": "bayespool.surveillance",
    "fit_regression": "bayespool.surveillance.regression",
    # errors
    "InputError": "bayespool.errors", "ImpossibleEvidenceError": "bayespool.errors",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'bayespool' has no attribute {name!r}")
