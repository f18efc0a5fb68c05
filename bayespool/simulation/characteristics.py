"""Operating characteristics of a protocol from simulated runs, with Monte Carlo standard errors.

Each run is summarised by counts (positives, true and false positive calls, tests, rounds, draws).
Proportions pooled over runs (sensitivity = all true positive calls / all positives, and likewise
specificity, PPV, NPV) are ratio estimators; their standard error is the linearised one with runs as
independent clusters, because specimens of one run share pools and are not independent:
``se(R) = sqrt(sum_r (a_r - R b_r)^2 / (runs (runs - 1))) / mean(b)`` (Cochran 1977, Sampling
Techniques, ch. 6). Means per specimen (tests, draws) and rounds use the sample standard deviation
over runs divided by sqrt(runs).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

SUMMARY_COLUMNS = ("specimens", "positives", "true_positive", "false_positive", "true_negative",
                   "false_negative", "tests", "rounds", "draws", "max_draws")

# name -> (numerator column, denominator column); denominators of None mean "per run"
RATIOS = {
    "sensitivity": ("true_positive", "positives"),
    "specificity": ("true_negative", "negatives"),
    "ppv": ("true_positive", "called_positive"),
    "npv": ("true_negative", "called_negative"),
}
PER_SPECIMEN = {"tests_per_sample": "tests", "draws_per_sample": "draws"}
ORDER = ("tests_per_sample", "sensitivity", "specificity", "ppv", "npv", "rounds",
         "draws_per_sample")


def summarise_runs(truth: np.ndarray, calls: np.ndarray, tests, rounds, draws) -> pd.DataFrame:
    """Per-run counts from bool (runs, n) truth and calls, tests and rounds (runs,), draws (runs, n)."""
    truth = np.atleast_2d(np.asarray(truth, dtype=bool))
    calls = np.atleast_2d(np.asarray(calls, dtype=bool))
    draws = np.atleast_2d(np.asarray(draws))
    return pd.DataFrame({
        "specimens": np.full(len(truth), truth.shape[1], dtype=np.int64),
        "positives": truth.sum(axis=1),
        "true_positive": (truth & calls).sum(axis=1),
        "false_positive": (~truth & calls).sum(axis=1),
        "true_negative": (~truth & ~calls).sum(axis=1),
        "false_negative": (truth & ~calls).sum(axis=1),
        "tests": np.asarray(tests, dtype=np.int64).reshape(-1),
        "rounds": np.asarray(rounds, dtype=np.int64).reshape(-1),
        "draws": draws.sum(axis=1),
        "max_draws": draws.max(axis=1) if draws.shape[1] else np.zeros(len(truth), np.int64),
    })


def ratio_estimate(a: np.ndarray, b: np.ndarray) -> tuple[float | None, float | None]:
    """sum(a) / sum(b) and its linearised standard error over runs (None where undefined)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    total = b.sum()
    if total <= 0:
        return None, None
    r = a.sum() / total
    runs = len(a)
    if runs < 2:
        return float(r), None
    resid = a - r * b
    se = math.sqrt(float(np.sum(resid ** 2)) / (runs * (runs - 1))) / (total / runs)
    return float(r), float(se)


def mean_estimate(x: np.ndarray) -> tuple[float, float | None]:
    x = np.asarray(x, dtype=float)
    if len(x) < 2:
        return float(x.mean()), None
    return float(x.mean()), float(x.std(ddof=1) / math.sqrt(len(x)))


@dataclass
class OperatingCharacteristics:
    """Estimates and Monte Carlo standard errors of a protocol's operating characteristics."""

    estimate: dict          # name -> value (None where undefined, e.g. PPV with no positive call)
    mcse: dict              # name -> standard error (None with a single run)
    runs: int
    specimens: int
    max_draws: int
    mean_positives: float

    @classmethod
    def from_runs(cls, frame: pd.DataFrame) -> "OperatingCharacteristics":
        f = frame.copy()
        f["negatives"] = f["specimens"] - f["positives"]
        f["called_positive"] = f["true_positive"] + f["false_positive"]
        f["called_negative"] = f["true_negative"] + f["false_negative"]
        est, se = {}, {}
        for name, column in PER_SPECIMEN.items():
            est[name], se[name] = mean_estimate(f[column] / f["specimens"])
        for name, (num, den) in RATIOS.items():
            est[name], se[name] = ratio_estimate(f[num], f[den])
        est["rounds"], se["rounds"] = mean_estimate(f["rounds"])
        return cls({k: est[k] for k in ORDER}, {k: se[k] for k in ORDER}, len(f),
                   int(f["specimens"].iloc[0]) if len(f) else 0,
                   int(f["max_draws"].max()) if len(f) else 0, float(f["positives"].mean()))

    def to_dict(self) -> dict:
        """Flat: ``name`` and ``name_se`` for each characteristic, plus counts."""
        out = {}
        for k in ORDER:
            out[k] = self.estimate[k]
            out[f"{k}_se"] = self.mcse[k]
        out.update({"runs": self.runs, "samples": self.specimens, "max_draws": self.max_draws,
                    "mean_positives": self.mean_positives})
        return out

    def table(self) -> pd.DataFrame:
        """One row per characteristic: estimate and Monte Carlo standard error."""
        return pd.DataFrame({"characteristic": list(ORDER),
                             "estimate": [self.estimate[k] for k in ORDER],
                             "mcse": [self.mcse[k] for k in ORDER]})
