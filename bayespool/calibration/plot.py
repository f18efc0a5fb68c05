"""The fitted sensitivity curve against dilution, with the observed rates, as PNG and SVG.

x: dilution factor k / d (log scale); y: probability that a pool with d positives among k reads
positive. Points: observed detection rate per (pool size, positives) cell with its Clopper-Pearson
interval, one marker colour per pool size; line and band: the fitted curve and its pointwise band.
Drawn with matplotlib's object interface on the Agg canvas (no display, no global state).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..io import atomic_output, check_output_path
from .result import Calibration

CAUTION = "Statistical decision support, not a diagnostic device."


def plot_paths(assay_path) -> dict:
    """The PNG and SVG files written beside an assay file: ``<stem>-curve.png`` / ``.svg``."""
    p = Path(assay_path)
    return {"png": p.with_name(p.stem + "-curve.png"), "svg": p.with_name(p.stem + "-curve.svg")}


def figure(result: Calibration):
    """A matplotlib Figure of the calibration's sensitivity against dilution."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.0, 4.6), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    cells = result.cells
    pct = f"{100 * result.level:g}%"
    has_obs = "positives" in cells.columns
    sens = cells[cells["positives"] > 0] if has_obs else cells.iloc[0:0]
    if len(sens):
        r_obs = sens["dilution"].to_numpy(float)
        lo_r, hi_r = r_obs.min(), r_obs.max()
    else:
        sizes = cells["pool_size"].to_numpy(float) if len(cells) else np.array([1.0, 32.0])
        lo_r, hi_r = max(sizes.min(), 1.0), max(sizes.max(), 2.0)
    grid = np.geomspace(max(lo_r / 1.6, 0.5), hi_r * 1.6, 200)
    if result.curve_model is not None:
        curve = result.sensitivity_curve(grid)
        ax.fill_between(curve["dilution"], curve["lower"], curve["upper"], color="#9ecae1",
                        alpha=0.45, linewidth=0, label=f"{pct} band (normal approximation)")
        ax.plot(curve["dilution"], curve["sensitivity"], color="#08519c", linewidth=2.0,
                label=f"fitted ({result.model})")
        if result.model == "dilution":
            r50 = result.estimate("r50")
            if lo_r / 1.6 <= r50 <= hi_r * 1.6:
                ax.axvline(r50, color="#08519c", linestyle=":", linewidth=1.0)
                ax.annotate(f"r50 = {r50:.3g}", (r50, 0.04), xytext=(4, 0),
                            textcoords="offset points", fontsize=8, color="#08519c")
    colours = ["#d94801", "#238b45", "#6a51a3", "#cb181d", "#525252", "#8c6d31", "#0570b0",
               "#ce1256"]
    for n, (size, group) in enumerate(sens.groupby("pool_size")):
        yerr = np.vstack([group["observed_rate"] - group["observed_lower"],
                          group["observed_upper"] - group["observed_rate"]])
        ax.errorbar(group["dilution"], group["observed_rate"], yerr=yerr, fmt="o",
                    color=colours[n % len(colours)], markersize=5, capsize=3, linewidth=1.0,
                    label=f"observed, pool size {int(size)}")
        if result.curve_model is None and "fitted_rate" in group:
            ax.plot(group["dilution"], group["fitted_rate"], marker="_", linestyle="none",
                    markersize=14, color=colours[n % len(colours)],
                    label=f"fitted ({result.model})" if n == 0 else None)
    if result.kind == "runs" and result.model == "table":
        # latent truth: the fitted entries (one per pool size) with their intervals
        rows = result.parameters[result.parameters["parameter"].str.startswith("se[")]
        sizes = rows["parameter"].str.extract(r"se\[(\d+),")[0].astype(float).to_numpy()
        est = rows["estimate"].to_numpy(float)
        yerr = np.vstack([est - rows["lower"].to_numpy(float), rows["upper"].to_numpy(float) - est])
        ax.errorbar(sizes, est, yerr=yerr, fmt="s", color="#08519c", capsize=3,
                    label=f"fitted per pool size ({pct} intervals)")
    ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.04)
    ax.set_xlabel("dilution k / d (pool size / positive members)")
    ax.set_ylabel("probability of a positive readout")
    kind = "validation runs" if result.kind == "validation" else "past runs (latent truth)"
    title = f"Sensitivity against dilution: {result.model} model from {kind}"
    if result.identifiable is False:  # written only on request (--allow-unidentified)
        title += "\nnot identified by the data: the curve is one of many that fit equally well"
    ax.set_title(title, fontsize=10,
                 **({"color": "#b00000"} if result.identifiable is False else {}))
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=7, loc="lower left", framealpha=0.85)
    sp = result.assay.specificity
    notes = [f"specificity {sp:.4g}"]
    if len(sens):
        notes.append(f"bars: {pct} Clopper-Pearson intervals of the observed rates")
    elif result.kind == "runs":
        notes.append("truth latent: no observed rates per dilution")
    fig.text(0.01, 0.01, "; ".join(notes) + ". " + CAUTION, fontsize=6.5, color="#555555")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    return fig


def write_plots(result: Calibration, assay_path, fig=None) -> dict:
    """Write the PNG and SVG beside ``assay_path`` (atomically); return their paths."""
    paths = plot_paths(assay_path)
    for p in paths.values():
        check_output_path(p)
    fig = figure(result) if fig is None else fig
    for fmt, path in paths.items():
        with atomic_output(path, "wb") as fh:
            fig.savefig(fh, format=fmt, metadata={"Date": None} if fmt == "svg" else None)
    return paths
