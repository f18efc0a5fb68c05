"""The report's matplotlib figures: the assay's sensitivity against dilution, and the posterior
distribution of the number of positive specimens. Each returns inline SVG (see :mod:`.svg`)."""
from __future__ import annotations

import numpy as np

from .palette import hex_of, rgb_at
from .svg import drawing, to_svg

LINE = "#1f3b73"       # dark blue for curves
MARK = "#b5522b"       # burnt orange for this run's pools / observed points (differs in lightness)
FALSE_POS = "#6b6b6b"


def _hex(t: float) -> str:
    return hex_of(rgb_at(t))


def dilution_range(assay, pool_sizes=None, observed=None) -> float:
    """The largest dilution factor k/d worth drawing."""
    top = 64.0
    if pool_sizes is not None and len(pool_sizes):
        top = max(top, float(np.max(pool_sizes)) * 1.5)
    s = assay.sensitivity
    if s.model == "dilution":
        top = max(top, min(s.r50 * 4.0, 1e5))
    elif s.model == "table":
        top = max(top, max(e[0] for e in s.entries) * 1.5)
    if observed is not None and len(observed):
        top = max(top, float(observed["dilution"].max()) * 1.5)
    return top


def sensitivity_curve(assay, pool_sizes=None, observed=None, png_to=None) -> str:
    """Se against the dilution factor k/d for the assay's family, with 1 - Sp for reference.

    ``pool_sizes``: the run's pool sizes, marked where a lone positive (d = 1) sits. ``observed``: a
    frame with ``dilution``, ``rate``, ``low``, ``high`` (a calibration's observed detection with
    Clopper-Pearson intervals), drawn as points with bars. ``png_to``: a binary file to write a
    PNG picture to instead of returning SVG.
    """
    s = assay.sensitivity
    top = dilution_range(assay, pool_sizes, observed)
    with drawing("assay-curve", 6.6, 3.5) as fig:
        ax = fig.add_subplot()
        ax.set_xscale("log")
        if s.model == "table":
            sizes = sorted({e[0] for e in s.entries})
            for j, k in enumerate(sizes):
                d = np.arange(1, k + 1)
                colour = _hex(0.45 + 0.5 * j / max(len(sizes) - 1, 1))
                ax.plot(k / d, s(np.full(k, k), d), "-", color=colour, lw=1.0, alpha=0.8)
                entries = [e for e in s.entries if e[0] == k]
                ax.plot([e[0] / e[1] for e in entries], [e[2] for e in entries], "o",
                        color=colour, ms=5, label=f"table, pool size {k}" if len(sizes) <= 8
                        else None)
        elif s.model == "ct":  # the load model's Se(k, d) depends on k and d, not on k/d alone
            r = np.geomspace(1.0, top, 200)
            for j, d in enumerate((1, 2, 4)):
                ax.plot(r, s(r * d, np.full(len(r), d)), "-", color=_hex(0.95 - 0.25 * j),
                        lw=2 if d == 1 else 1.2, label=f"Se implied by the Ct model, d = {d}")
        else:
            r = np.geomspace(1.0, top, 300)
            se = s(r, np.ones_like(r))  # Se(k, d) depends on k/d only in these families
            ax.plot(r, se, "-", color=LINE, lw=2, label=f"Se ({s.model})")
            if s.model == "dilution":
                ax.axvline(s.r50, color=LINE, lw=0.8, ls=":")
                ax.annotate(f"r50 = {s.r50:g}", (s.r50, s.se_max / 2), textcoords="offset points",
                            xytext=(4, 4), fontsize=8.5, color=LINE)
        ax.axhline(1.0 - assay.specificity, color=FALSE_POS, lw=1, ls="--",
                   label=f"1 \u2212 Sp = {1.0 - assay.specificity:.3g} (no positive member)")
        if pool_sizes is not None and len(pool_sizes):
            ks = np.unique(np.asarray(pool_sizes, dtype=np.int64))
            ks = ks[ks >= 1]
            ok = covered(s, ks)
            ks = ks[ok]
            if len(ks):
                ax.plot(ks, s(ks, np.ones_like(ks)), "D", color=MARK, ms=5, mfc="white", mew=1.5,
                        label="this run: one positive in a pool of k", zorder=5)
                if len(ks) <= 6:
                    for k in ks:
                        ax.annotate(f"k={k}", (k, float(s(np.array([k]), np.array([1]))[0])),
                                    textcoords="offset points", xytext=(6, 4), fontsize=8,
                                    color=MARK)
        if observed is not None and len(observed):
            rate = observed["rate"].to_numpy(float)
            err = np.vstack([rate - observed["low"].to_numpy(float),
                             observed["high"].to_numpy(float) - rate])
            ax.errorbar(observed["dilution"], rate, yerr=err, fmt="s", color=MARK, ms=4,
                        capsize=2, lw=1, label="calibration: observed, 95% Clopper-Pearson")
        ax.set_xlim(0.9, top)
        ticks = 2.0 ** np.arange(0, int(np.floor(np.log2(top))) + 1)
        if len(ticks) > 12:
            ticks = ticks[::2]
        ax.set_xticks(ticks, [f"{t:g}" for t in ticks])
        ax.minorticks_off()
        ax.set_ylim(-0.02, 1.04)
        ax.set_xlabel("dilution factor k/d (pool size / positive members)")
        ax.set_ylabel("P(pool reads positive)")
        ax.legend(loc="lower left", fontsize=8, frameon=False)
        if png_to is not None:  # a standalone picture instead of the report's inline SVG
            fig.savefig(png_to, format="png", dpi=150)
            return ""
        return to_svg(fig, "assay-curve", "Sensitivity of the assay against the dilution factor")


def covered(sens, ks) -> np.ndarray:
    """Which pool sizes ``ks`` the sensitivity model gives a value for a lone positive."""
    if sens.model != "table":
        return np.ones(len(ks), bool)
    sizes = {e[0] for e in sens.entries if e[1] == 1}
    return np.array([int(k) in sizes for k in ks], bool)


def count_support(dist: np.ndarray, mass: float = 0.9999) -> tuple[int, int]:
    """The smallest range of counts [lo, hi] outside which at most 1 - ``mass`` lies (both tails)."""
    cdf = np.cumsum(dist)
    tail = (1.0 - mass) / 2
    lo = int(np.searchsorted(cdf, tail, side="left"))
    hi = int(np.searchsorted(cdf, 1.0 - tail, side="left"))
    return lo, min(hi, len(dist) - 1)


def count_chart(dist: np.ndarray, expected: float) -> str:
    """Bars of P(number of positive specimens = c) over the range that holds nearly all the mass."""
    lo, hi = count_support(dist)
    lo, hi = max(0, lo - 1), min(len(dist) - 1, hi + 1)
    c = np.arange(lo, hi + 1)
    with drawing("count-chart", 6.6, 3.0) as fig:
        ax = fig.add_subplot()
        ax.bar(c, dist[lo:hi + 1], width=0.8, color=_hex(0.62), edgecolor=_hex(0.95), lw=0.6)
        ax.axvline(expected, color=MARK, lw=1.5, ls="--", label=f"expected {expected:.2f}")
        ax.set_xlabel("number of positive specimens in the run")
        ax.set_ylabel("posterior probability")
        if hi - lo <= 30:
            ax.set_xticks(c)
        ax.legend(loc="upper right", fontsize=8, frameon=False)
        return to_svg(fig, "count-chart", "Posterior distribution of the number of positive specimens")



def write_sensitivity_plot(assay, path, pool_sizes=None) -> None:
    """The sensitivity curve of :func:`sensitivity_curve` as a standalone SVG or PNG file."""
    from ..io import atomic_output
    png = str(path).lower().endswith(".png")
    with atomic_output(path, "wb" if png else "w") as fh:
        out = sensitivity_curve(assay, pool_sizes, png_to=fh if png else None)
        if not png:
            fh.write(out)
