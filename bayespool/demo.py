"""The built-in demonstration: an invented two-stage screening run, decoded end to end.

All data here is invented for the demonstration (see datasets/demo/README.md); it is not a check of
anything. Three plates of 96 specimens at an invented prevalence of 3% are pooled in eights and read
by an invented qPCR assay that reports a cycle threshold (Ct) for every readout that amplifies;
positive pools are followed by individual tests. The readouts follow the Ct load model of
:mod:`bayespool.ct` (a positive specimen's invented individual Ct, shared by its pools, diluted
log2 8 = 3 cycles in its pool), so the demo fits that model from an invented validation set with
Cts and decodes the run with it.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .assay import Assay
from .ct import CtModel, CtSensitivity
from .decoders import decode
from .decoders.posterior import Posterior
from .io import write_frame
from .result_protocol import CAUTION, Result, file_frame
from .run import Run

DEMO_SEED = 20261201
# the invented assay: individual Ct of a positive ~ 0.65 N(29, 3^2) + 0.35 N(23, 2^2), 100 %
# efficiency (1 cycle per doubling), readout noise sd 0.5 cycles, 2 % of readouts of a pool with
# target fail to amplify, cutoff 40, false amplifications between Ct 33 and 40
DEMO_CT = CtModel(cutoff=40.0, cycles_per_doubling=1.0, noise_sd=0.5, false_positive_low=33.0,
                  weights=(0.65, 0.35), means=(29.0, 23.0), sds=(3.0, 2.0), detection_max=0.98)
DEMO_ASSAY = Assay(0.995, CtSensitivity(DEMO_CT))
PLATES, ROWS, COLS = 3, "ABCDEFGH", 12
POOL_SIZE = 8
PREVALENCE = 0.03


def read_pool(members, truth, ct, rng, replicates: int = 1) -> list:
    """Invented readouts of one pool through DEMO_ASSAY: ``(result, ct text)`` per readout (the
    Ct load model: the positives' amounts add up and the pool dilutes them k-fold)."""
    k = len(members)
    positive = members[truth[members]]
    out = []
    for _ in range(replicates):
        if len(positive):
            s = DEMO_CT.cycles_per_doubling
            pool_ct = s * np.log2(k) - s * np.log2(np.sum(np.exp2(-ct[positive] / s)))
            y = float(DEMO_CT.draw_readout_ct(np.array([pool_ct]), rng)[0])
        elif rng.random() < 1.0 - DEMO_ASSAY.specificity:
            y = float(rng.uniform(DEMO_CT.false_positive_low, DEMO_CT.cutoff))
        else:
            y = float("nan")
        out.append(("positive", f"{y:.1f}") if np.isfinite(y) else ("negative", ""))
    return out


def invented_run(seed: int = DEMO_SEED):
    """Invented layout, readouts (with Cts), samples and truth frames for the demo."""
    rng = np.random.default_rng(seed)
    wells = [(p + 1, f"{r}{c}") for p in range(PLATES) for c in range(1, COLS + 1) for r in ROWS]
    n = len(wells)
    ids = [f"SW{p}-{w}" for p, w in wells]
    truth = rng.random(n) < PREVALENCE
    ct = np.where(truth, DEMO_CT.draw_individual_ct(n, rng), np.nan)  # invented individual Cts
    samples = pd.DataFrame({"sample": ids, "plate": [f"plate{p}" for p, _ in wells],
                            "well": [w for _, w in wells], "prior": PREVALENCE})
    lay_rows, read_rows = [], []

    def read(pool, members):
        got = read_pool(members, truth, ct, rng)
        read_rows.extend({"pool": pool, "result": r, "ct": c} for r, c in got)
        return any(r == "positive" for r, _ in got)

    for b in range(n // POOL_SIZE):
        members = np.arange(b * POOL_SIZE, (b + 1) * POOL_SIZE)
        pool = f"D{b + 1:03d}"
        lay_rows += [{"pool": pool, "sample": ids[i]} for i in members]
        if read(pool, members):
            for i in members:  # follow-up: each member alone, read once
                alone = f"I-{ids[i]}"
                lay_rows.append({"pool": alone, "sample": ids[i]})
                read(alone, np.array([i]))
    layout = pd.DataFrame(lay_rows)
    readouts = pd.DataFrame(read_rows)
    truth_frame = pd.DataFrame({"sample": ids, "invented_truth": np.where(truth, "positive",
                                                                          "negative"),
                                "invented_individual_ct": np.round(ct, 2)})
    return layout, readouts, samples, truth_frame


@dataclass(repr=False)
class DemoResult(Result):
    """What the demo did: the posterior, the calibration and the plan, and the files it wrote.

    ``to_frame()`` lists the files (index ``file``: validation, assay, layout, ...);
    ``str()`` is what ``bayespool demo`` prints.
    """

    folder: Path
    posterior: Posterior
    files: dict = field(default_factory=dict)
    truth: pd.DataFrame | None = None
    calibration: object = None
    plan: object = None

    def agreement(self) -> dict:
        calls = pd.Series(self.posterior.calls(), index=self.posterior.sample_ids)
        truth = self.truth.set_index("sample")["invented_truth"].reindex(calls.index)
        decided = calls != "inconclusive"
        return {"decided": int(decided.sum()),
                "correct": int((calls[decided] == truth[decided]).sum())}

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"path": [str(p) for p in self.files.values()]},
                            index=pd.Index(list(self.files), name="file"))

    def summary(self) -> dict:
        return {"folder": str(self.folder), "files": {k: str(v) for k, v in self.files.items()},
                "posterior": self.posterior.summary(), "agreement": self.agreement(),
                "next_tests": self.plan.n_tests if self.plan is not None else 0}

    def __str__(self) -> str:
        post, cal, nxt = self.posterior, self.calibration, self.plan
        c = post.counts()
        agree = self.agreement()
        lines = ["bayespool demo: the whole job on an invented screening run (not real data)",
                 f"  1. calibrated the assay from {cal.summary()['readouts']} invented validation "
                 f"readouts: {cal.assay.describe()}",
                 f"  2. decoded {post.n_samples} specimens by {post.method}: {c['positive']} "
                 f"positive, {c['negative']} negative, {c['inconclusive']} inconclusive "
                 f"(decided calls matching the invented truth: {agree['correct']} of "
                 f"{agree['decided']})",
                 f"  3. planned {nxt.n_tests} next test(s) for the inconclusive specimens",
                 f"  4. wrote the report {self.files['report']}",
                 f"  files in {self.folder}/:"]
        lines += [f"    {name:<11} {path}" for name, path in self.files.items()]
        return "\n".join(lines + ["  " + CAUTION])

    def _brief(self) -> str:
        return f"folder={str(self.folder)!r}, {len(self.files)} files"


DEMO_NEXT_TESTS = 24  # a quarter plate of follow-up tests


def run_demo(folder: str | Path = "bayespool-demo", seed: int = DEMO_SEED) -> DemoResult:
    """The whole job on invented data, every file written into ``folder``.

    1. The statistician fits the Ct load model from an invented validation set with Cts
       (:func:`bayespool.calibration.ct_fit.calibrate_ct`) and writes ``assay.toml`` (a ``[ct]``
       assay with its ``[fit]`` table) and the implied sensitivity curve.
    2. The assay scientist decodes the invented two-stage screening run with that assay, reading
       the Cts.
    3. The planner picks the next tests for the specimens left inconclusive.
    4. One offline report shows the run, the calls, the plan and the calibration.
    """
    from .calibration.ct_fit import calibrate_ct
    from .io import read_table
    from .planning import plan
    from .report.plots import write_sensitivity_plot
    from .report import write_report
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    layout, readouts, samples, truth = invented_run(seed)
    files = {"validation": folder / "invented_validation.csv", "assay": folder / "assay.toml",
             "layout": folder / "layout.csv", "readouts": folder / "readouts.csv",
             "samples": folder / "samples.csv", "truth": folder / "invented_truth.csv",
             "posterior": folder / "posterior.csv", "next_pools": folder / "next_pools.csv",
             "report": folder / "report.html"}
    write_frame(invented_validation(seed), files["validation"])
    table = read_table(files["validation"], ["pool_size", "positives", "result"], "validation")
    calibration = calibrate_ct(table, cutoff=DEMO_CT.cutoff)
    calibration.assay.write(files["assay"])
    for kind in ("png", "svg"):
        files[f"curve_{kind}"] = folder / f"assay-curve.{kind}"
        write_sensitivity_plot(calibration.assay, files[f"curve_{kind}"], [1, POOL_SIZE])
    write_frame(layout, files["layout"])
    write_frame(readouts, files["readouts"])
    write_frame(samples, files["samples"])
    write_frame(truth, files["truth"])
    run = Run.read(files["layout"], files["readouts"], files["samples"], prevalence=PREVALENCE)
    assay = Assay.read(files["assay"])
    posterior = decode(run, assay, method="auto")
    write_frame(file_frame(posterior.to_frame()), files["posterior"])
    next_tests = plan(run, assay, posterior=posterior, tests=DEMO_NEXT_TESTS, seed=seed)
    write_frame(file_frame(next_tests.to_frame()), files["next_pools"])
    write_report(files["report"], run=run, assay=assay, posterior=posterior,
                 plan=next_tests, calibration=calibration,
                 title="bayespool demo run (invented data)",
                 notes=["All data of this run is invented for the demonstration; it is not real "
                        "and checks nothing."])
    return DemoResult(folder, posterior, files, truth, calibration, next_tests)


# ---- the invented validation set behind the demo's calibration
def invented_validation(seed: int = DEMO_SEED) -> pd.DataFrame:
    """An invented validation set (spiked pools with a known number of positives) read through
    DEMO_ASSAY: ``pool_size,positives,result,ct,individual_ct`` (``individual_ct``: the spiked
    specimen's invented Ct read alone, on pools with one positive). Invented for the
    demonstration, not real data."""
    rng = np.random.default_rng(seed + 1)
    cells = [(1, 1, 24), (4, 1, 24), (8, 1, 24), (16, 1, 24), (32, 1, 24), (64, 1, 24),
             (32, 2, 24), (16, 2, 24), (8, 0, 300), (32, 0, 300)]
    rows = []
    for size, pos, n in cells:
        for _ in range(n):
            truth = np.zeros(size, dtype=bool)
            truth[:pos] = True
            ct = np.where(truth, DEMO_CT.draw_individual_ct(size, rng), np.nan)
            (result, value), = read_pool(np.arange(size), truth, ct, rng)
            rows.append({"pool_size": size, "positives": pos, "result": result, "ct": value,
                         "individual_ct": f"{ct[0]:.1f}" if pos == 1 else ""})
    return pd.DataFrame(rows)
