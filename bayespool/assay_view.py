"""What an assay file implies: its model and Se(k, d) for every pool size k and d = 1..k positive
members (``bayespool assay``)."""
from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from .assay import Assay, sensitivity_table
from .result_protocol import Result

SHOWN_POSITIVES = 8  # columns d = 1..8 in the printed table; --json and to_frame() hold all


@dataclass(eq=False, repr=False)
class AssayCurve(Result):
    """An assay and its sensitivity table.

    ``to_frame()`` holds Se(k, d) indexed by (``pool_size``, ``positives``); ``summary()`` is
    ``{"specificity", "sensitivity": [{"pool_size", "positives", "value"}, ...]}``; ``source`` is
    the file the assay was read from (shown first in ``str()``).

    Examples
    --------
    >>> import bayespool
    >>> curve = bayespool.assay_curve(bayespool.read_assay("datasets/demo/assay.toml"),
    ...                               pool_sizes=[1, 8])
    >>> curve.to_frame().index.names, len(curve.to_frame())
    (FrozenList(['pool_size', 'positives']), 9)
    """

    assay: Assay
    table: pd.DataFrame
    source: str | None = None

    def to_frame(self) -> pd.DataFrame:
        return self.table.set_index(["pool_size", "positives"])

    def summary(self) -> dict:
        return {"specificity": self.assay.specificity,
                "sensitivity": [{"pool_size": int(r.pool_size), "positives": int(r.positives),
                                 "value": float(r.value)} for r in self.table.itertuples()]}

    @property
    def pool_sizes(self) -> list[int]:
        return [int(k) for k in self.table["pool_size"].unique()]

    def __str__(self) -> str:
        sizes = self.pool_sizes
        shown = min(max(sizes), SHOWN_POSITIVES)
        head = f"{self.source}: " if self.source is not None else ""
        lines = [head + self.assay.describe(),
                 "Se(k, d): P(a readout amplifies | pool of k, d positive members)"
                 + (f"; d > {shown} in --json" if max(sizes) > shown else ""),
                 "     k " + "".join(f"{'d=' + str(d):>9}" for d in range(1, shown + 1))]
        for k in sizes:
            vals = self.table[self.table["pool_size"] == k].set_index("positives")["value"]
            lines.append(f"{k:>6} " + "".join(f"{vals[d]:>9.4f}" if d <= k else " " * 9
                                              for d in range(1, shown + 1)))
        lines.append(f"no positive member: P(amplifies) = 1 - Sp = {1 - self.assay.specificity:.4g}")
        return "\n".join(lines)

    def _brief(self) -> str:
        return (f"{self.assay.describe()}, pool sizes {self.pool_sizes[0]} to "
                f"{self.pool_sizes[-1]}")


def assay_curve(assay: Assay, *, pool_sizes=None, source: str | None = None) -> AssayCurve:
    """Se(k, d) of ``assay`` for every pool size in ``pool_sizes`` and d = 1..k.

    Parameters
    ----------
    assay : Assay
        The assay model (see :func:`bayespool.read_assay`).
    pool_sizes : sequence of int, optional
        Pool sizes to tabulate (default: 1, 2, 4, 8, 16, 32, or a table assay's own sizes).
    source : str, optional
        The file the assay came from, named in the printed text.

    Returns
    -------
    AssayCurve

    Raises
    ------
    InputError
        A pool size that is not a whole number >= 1 or that a table assay does not cover.

    References
    ----------
    Se(k, d) of the dilution model: Hwang, F. K. (1976), Group testing with a dilution effect,
    Biometrika 63(3); of a ``[ct]`` assay, integrated over the individual Cts of the positives (a
    1:k dilution raises Ct by about log2 k cycles, common practice).

    Examples
    --------
    >>> from bayespool import Assay, ConstantSensitivity, assay_curve
    >>> curve = assay_curve(Assay(0.99, ConstantSensitivity(0.95)), pool_sizes=[1, 4])
    >>> float(curve.to_frame().loc[(4, 2), "value"])
    0.95
    """
    return AssayCurve(assay, sensitivity_table(assay, pool_sizes), source)
