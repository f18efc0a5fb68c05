"""Can the data of past runs separate sensitivity, specificity and prevalence?

Without a gold standard the parameters of a latent-class model are identified only when the data
carry at least as many independent pieces of information as there are parameters, and even then
only away from degenerate directions (Hui, S. L. & Walter, S. D. (1980). Estimating the error rates
of diagnostic tests. Biometrics 36(1), 167-171). Two checks, each with its own plain message:

- design counts: when no specimen is read in two pools, each pool is an independent draw and all
  the data say is one positive rate per (pool size, number of readouts); fewer such rates than free
  parameters cannot identify them. Under the dilution model the curve also needs as many pool
  sizes as free sensitivity parameters, since at low prevalence almost every positive pool holds
  one positive and the pool size is the only dilution seen;
- curvature: a direction along which the observed information is (numerically) zero at the
  maximum is a ridge of equally good fits; its loadings name the parameters that trade off.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..result_protocol import spell
from .families import Family
from .space import Space

FLAT = 1e-7  # smallest / largest eigenvalue of the information below this is a ridge


@dataclass
class Identifiability:
    problem: bool = False     # the design or the curvature says the parameters are not identified
    flat: bool = False        # the information matrix has a ridge
    reasons: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    advice: str = ""          # what would identify the fit, for the data at hand

    def refusal(self) -> str:
        """One line: why the fit cannot become the assay, and what to do."""
        return ("the past runs do not identify the assay (Hui & Walter 1980): "
                + "; ".join(self.reasons) + "; the estimates along that direction are arbitrary, "
                "so no assay file was written. To fix: " + self.advice
                + f" ({spell('allow_unidentified')} writes the fit anyway, marked as not "
                "identified)")


def advice(run, read: np.ndarray, fam: Family, space: Space) -> str:
    """What would identify the fit, given what these runs already hold: individual tests are
    suggested only when there are none, another pool size only when one is missing."""
    sizes = run.pool_size[read]
    pooled = np.unique(sizes[sizes > 1])
    has_singles = bool((sizes == 1).any())
    free = [p.name for p in space.free_params]
    steps = []
    known = [n for n in ("specificity", "se_max") if n in free]
    if known:
        steps.append("fix a value known from elsewhere (" + " or ".join(
            spell(f'fixed["{n}"]') for n in known) + ")")
    steps.append(f"calibrate from a validation run with known positives ({spell('validation')})")
    if not has_singles:
        steps.append("add the individual follow-up tests of positive pools to the layout and "
                     "readouts")
    if fam.name == "dilution":
        curve = [n for n in ("se_max", "r50", "slope") if n in free]
        if len(pooled) + has_singles < len(curve):
            steps.append(f"add runs with another pool size (these hold only "
                         f"{', '.join(str(int(k)) for k in pooled) or 'none'}"
                         f"{' and individual tests' if has_singles else ''})")
        steps.append(f"or a simpler sensitivity model ({spell('model')} constant)")
    elif len(pooled) < 2 and not has_singles:
        steps.append("or add runs with another pool size")
    return "; ".join(steps)


def design_reasons(run, read: np.ndarray, fam: Family, space: Space) -> list[str]:
    """Reasons, from the design alone, why the free parameters cannot all be identified."""
    out = []
    sizes = run.pool_size[read]
    n_free = space.n_free
    owner = np.repeat(read, run.pool_size)
    reads_per_specimen = np.bincount(run.pool_members[owner], minlength=run.n_samples)
    if reads_per_specimen.max(initial=0) <= 1:
        reps = run.pool_reads[read]
        rates = sum(int(reps[sizes == k].max()) for k in np.unique(sizes))
        if rates < n_free:
            single = "no individual tests and " if not (sizes == 1).any() else ""
            out.append(f"{single}no specimen is read in two pools, so the data give only "
                       f"{rates} independent positive rate(s) (one per pool size and number of "
                       f"replicate readouts) for {n_free} free parameters")
    if fam.name == "dilution":
        sens_free = [p.name for p in space.free_params if p.name in ("se_max", "r50", "slope")]
        n_sizes = len(np.unique(sizes))
        if n_sizes < len(sens_free):
            out.append(f"the dilution curve has {len(sens_free)} free parameters "
                       f"({', '.join(sens_free)}) but the runs hold only {n_sizes} pool size(s) "
                       f"({', '.join(str(int(k)) for k in np.unique(sizes))}); most positive "
                       "pools hold a single positive, so each pool size shows one dilution")
    return out


def ridge(info: np.ndarray, held: np.ndarray, names: list[str]) -> list[str]:
    """Names of the parameters along the flattest direction, if it is flat."""
    keep = ~np.asarray(held, dtype=bool)
    if keep.sum() < 1:
        return []
    sub = info[np.ix_(keep, keep)]
    if not np.all(np.isfinite(sub)):
        return ["(the information could not be computed)"]
    w, v = np.linalg.eigh(0.5 * (sub + sub.T))
    top = max(abs(w[-1]), 1e-300)
    if w[0] > FLAT * top:
        return []
    load = np.abs(v[:, 0])
    kept = [n for n, k in zip(names, keep) if k]
    return [kept[i] for i in np.argsort(-load) if load[i] > 0.25]


def identifiability(run, read, fam: Family, space: Space, info, held, parameters) -> Identifiability:
    """Design and curvature checks, with one warning that says what to do."""
    out = Identifiability()
    out.reasons = design_reasons(run, read, fam, space)
    names = [p.name for p in space.free_params]
    flat = ridge(info, held, names) if space.n_free else []
    if flat:
        out.flat = True
        out.reasons.append("the likelihood is flat along a combination of " + ", ".join(flat))
    wide = []
    for row in parameters.itertuples(index=False):
        if not row.fixed and row.interval != "fixed":
            p = next(p for p in space.params if p.name == row.parameter)
            if p.scale == "logit" and row.lower <= 1e-6 and row.upper >= 1 - 1e-6:
                wide.append(row.parameter)
    if wide:
        out.reasons.append("the interval of " + ", ".join(wide) + " spans all of 0 to 1")
    out.problem = bool(out.reasons)
    if out.problem:
        out.advice = advice(run, read, fam, space)
        out.warnings.append("the data cannot separate sensitivity from prevalence and specificity "
                            "(Hui & Walter 1980): " + "; ".join(out.reasons)
                            + "; estimates along that direction are arbitrary: " + out.advice)
    return out
