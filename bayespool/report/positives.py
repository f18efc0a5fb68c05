"""The posterior number of positive specimens in the run: expectation, interval and distribution.

The distribution is the decoder's ``count_distribution`` when it has one (exact: the convolution of
the components' count distributions); otherwise, when the decoder kept joint draws, the histogram of
positives per draw; otherwise only the expectation, which is always the sum of the probabilities.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from . import formatting as fmt
from .escape import text
from .markup import el, facts, frame_table, section
from .plots import count_chart, count_support

TABLE_FROM = 5e-4  # counts with a smaller probability are left out of the printed table


def count_distribution(posterior) -> tuple[np.ndarray | None, str]:
    """(P(count = c) for c = 0..n, where it comes from), or (None, reason)."""
    if posterior.count_distribution is not None:
        dist = np.asarray(posterior.count_distribution, dtype=float)
        if "gibbs" in str(posterior.method).split("+"):
            return dist, ("Gibbs sampler: the share of recorded sweeps with each count (Monte "
                          "Carlo, approximate)")
        if "bp" in str(posterior.method).split("+"):
            return dist, ("exact for the groups decoded exactly; groups decoded by belief "
                          "propagation enter through their probabilities (approximate)")
        return dist, "exact enumeration of every joint state"
    draws = posterior.draws
    if draws is not None and len(draws):
        per_draw = np.asarray(draws, dtype=np.int64).sum(axis=1)
        dist = np.bincount(per_draw, minlength=posterior.n_samples + 1).astype(float)
        return dist / dist.sum(), f"from {len(draws)} posterior draws"
    return None, "the decoder gives no joint distribution"


def interval(dist: np.ndarray, level: float = 0.95) -> tuple[int, int]:
    """Equal-tailed interval of counts (the same rule as Posterior.positives_summary)."""
    cdf = np.cumsum(dist)
    tail = (1 - level) / 2
    return int(np.searchsorted(cdf, tail)), int(np.searchsorted(cdf, 1 - tail))


def positives_section(posterior) -> str:
    expected = float(np.sum(posterior.probability))
    dist, source = count_distribution(posterior)
    items = [("Expected", el("span", text(f"{expected:.3f}"), id="expected-positives",
                             data_value=fmt.exact(expected)))]
    body = ""
    if dist is not None:
        lo, hi = interval(dist)
        items += [("Most probable", text(str(int(np.argmax(dist))))),
                  ("95% interval", text(f"{lo} to {hi}")),
                  ("Source", text(source))]
        body = el("figure", count_chart(dist, expected), class_="figure")
        a, b = count_support(dist)
        c = np.arange(a, b + 1)
        keep = dist[a:b + 1] >= TABLE_FROM
        table = pd.DataFrame({"positives": c[keep], "probability": dist[a:b + 1][keep]})
        body += el("details", el("summary", "The distribution as numbers") +
                   frame_table(table, formats={"probability": fmt.prob_long}), class_="counts")
    else:
        items.append(("Distribution", text(source)))
    return section("positives", "Number of positive specimens", facts(items) + body,
                   "How many specimens of the run are positive, given the readouts.")
