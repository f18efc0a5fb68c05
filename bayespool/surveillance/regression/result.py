"""The result of a group testing regression: coefficients with standard errors and intervals,
the fitted risk of every specimen, and the samples file with those risks as priors."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ...result_protocol import Result

COLUMNS = ["term", "estimate", "std_error", "lower", "upper"]


@dataclass(eq=False, repr=False)
class RegressionFit(Result):
    """Coefficients of individual risk on covariates fitted from pooled readouts.

    ``estimate`` and ``covariance`` are on the link scale, in the order of ``terms`` (the formula
    library's names, ``Intercept`` first). ``risk`` is the fitted risk of every specimen of the
    run (``sample_ids``), tested or not.
    """

    terms: list
    estimate: np.ndarray
    covariance: np.ndarray
    level: float
    link: str
    formula: str
    method: str
    log_likelihood: float | None
    iterations: int
    converged: bool
    sample_ids: np.ndarray
    risk: np.ndarray
    fitted_samples: int
    pools: int
    samples: pd.DataFrame | None = None
    notes: list = field(default_factory=list)
    monte_carlo: dict | None = None

    @property
    def std_error(self) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.diag(self.covariance))

    def coefficients(self) -> pd.DataFrame:
        """term, estimate, std_error, lower, upper (Wald intervals at ``level``)."""
        from scipy.stats import norm
        z = float(norm.ppf(0.5 + self.level / 2))
        se = self.std_error
        return pd.DataFrame({"term": self.terms, "estimate": self.estimate, "std_error": se,
                             "lower": self.estimate - z * se, "upper": self.estimate + z * se},
                            columns=COLUMNS)

    def to_frame(self) -> pd.DataFrame:
        """The coefficients indexed by term."""
        return self.coefficients().set_index("term")

    def risks(self) -> pd.DataFrame:
        """Fitted risk of every specimen, indexed by sample."""
        return pd.DataFrame({"sample": self.sample_ids, "risk": self.risk}).set_index("sample")

    def priors_frame(self) -> pd.DataFrame:
        """The samples file (its rows and columns as read) with ``prior`` = the fitted risk."""
        if self.samples is None:
            frame = pd.DataFrame({"sample": self.sample_ids})
            frame["prior"] = self.risk
            return frame
        frame = self.samples.copy()
        frame["prior"] = self.risk[frame.index.to_numpy()]
        return frame.reset_index(drop=True)

    def summary(self) -> dict:
        def num(v):
            v = float(v)
            return None if math.isnan(v) else v
        coefs = [{k: (num(v) if k != "term" else v) for k, v in row.items()}
                 for row in self.coefficients().to_dict("records")]
        out = {"coefficients": coefs, "formula": self.formula, "link": self.link,
               "method": self.method, "level": self.level,
               "log_likelihood": None if self.log_likelihood is None else
               float(self.log_likelihood),
               "iterations": self.iterations, "converged": self.converged,
               "samples": self.fitted_samples, "pools": self.pools,
               "risk": {"min": float(self.risk.min()), "mean": float(self.risk.mean()),
                        "max": float(self.risk.max())}}
        if self.monte_carlo:
            out["monte_carlo"] = dict(self.monte_carlo)
        if self.notes:
            out["notes"] = list(self.notes)
        return out

    def __str__(self) -> str:
        c = self.coefficients()
        lines = [f"Group testing regression, {self.link} link, risk ~ {self.formula}: "
                 f"{self.fitted_samples} specimens in {self.pools} read pools, fitted by "
                 f"{self.method} ({self.iterations} iterations"
                 + ("" if self.converged else ", NOT converged") + ")"]
        if self.log_likelihood is not None:
            lines.append(f"log-likelihood of the readouts: {self.log_likelihood:.6g}")
        pct = f"{self.level:.0%}"
        head = ["term", "estimate", "std. error", f"{pct} lower", f"{pct} upper"]
        rows = [[r.term] + [f"{v:.5g}" for v in (r.estimate, r.std_error, r.lower, r.upper)]
                for r in c.itertuples()]
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
        lines.append("  ".join(h.ljust(w) if i == 0 else h.rjust(w)
                               for i, (h, w) in enumerate(zip(head, widths))))
        for r in rows:
            lines.append("  ".join(v.ljust(w) if i == 0 else v.rjust(w)
                                   for i, (v, w) in enumerate(zip(r, widths))))
        lines.extend(f"note: {n}" for n in self.notes)
        return "\n".join(lines)

    def _brief(self) -> str:
        return (f"{len(self.terms)} terms, link={self.link!r}, "
                f"method={self.method!r}, samples={self.fitted_samples}")
