"""The built-in demonstration: an invented two-stage screening run, decoded end to end.

All data here is invented for the demonstration (see datasets/demo/README.md); it is not a check of
anything. Three plates of 96 specimens at an invented prevalence of 3% are pooled in eights on an
assay whose sensitivity falls with dilution; positive pools are followed by individual tests.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .assay import Assay, DilutionSensitivity
from .decoders import decode
from .decoders.posterior import Posterior
from .io import write_frame
from .result_protocol import CAUTION, Result, file_frame
from .run import Run

DEMO_SEED = 20261201
DEMO_ASSAY = Assay(0.995, DilutionSensitivity(se_max=0.97, r50=40.0, slope=1.2))
PLATES, ROWS, COLS = 3, "ABCDEFGH", 12
POOL_SIZE = 8
PREVALENCE = 0.03


def invented_run(seed: int = DEMO_SEED):
    """Invented layout, readouts, samples and truth frames for the demo."""
    rng = np.random.default_rng(seed)
    wells = [(p + 1, f"{r}{c}") for p in range(PLATES) for c in range(1, COLS + 1) for r in ROWS]
    n = len(wells)
    ids = [f"SW{p}-{w}" for p, w in wells]
    truth = rng.random(n) < PREVALENCE
    load = np.where(truth, rng.normal(5.0, 1.3, n), 0.0)  # invented log10 copies per mL
    samples = pd.DataFrame({"sample": ids, "plate": [f"plate{p}" for p, _ in wells],
                            "well": [w for _, w in wells], "prior": PREVALENCE})
    lay_rows, read_rows = [], []

    def read(pool, members, replicates=1):
        k, dpos = len(members), int(truth[members].sum())
        p_pos = DEMO_ASSAY.positive_probability(np.array([k]), np.array([dpos]))[0]
        conc = np.log10(max(np.sum(10.0 ** load[members][truth[members]]), 1.0) / k)
        any_pos = False
        for _ in range(replicates):
            pos = bool(rng.random() < p_pos)
            any_pos |= pos
            ct = float(np.clip(44.0 - 3.32 * conc + rng.normal(0, 0.6), 14, 40)) if pos else None
            read_rows.append({"pool": pool, "result": "positive" if pos else "negative",
                              "ct": "" if ct is None else f"{ct:.1f}"})
        return any_pos

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
                                                                          "negative")})
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

    1. The statistician fits the assay from an invented validation set (the family by AIC) and
       writes ``assay.toml`` with its sensitivity plot.
    2. The assay scientist decodes the invented two-stage screening run with that assay.
    3. The planner picks the next tests for the specimens left inconclusive.
    4. One offline report shows the run, the calls, the plan and the calibration.
    """
    from .calibration import calibrate_validation
    from .calibration.plot import write_plots
    from .calibration.validation import ValidationData
    from .planning import plan
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
    calibration = calibrate_validation(ValidationData.read(files["validation"]), "best")
    calibration.assay.write(files["assay"])
    for kind, path in write_plots(calibration, files["assay"]).items():
        files[f"curve_{kind}"] = Path(path)
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
    DEMO_ASSAY: ``pool_size,positives,result``. Invented for the demonstration, not real data."""
    rng = np.random.default_rng(seed + 1)
    cells = [(1, 1, 24), (4, 1, 24), (8, 1, 24), (16, 1, 24), (32, 1, 24), (64, 1, 24),
             (32, 2, 24), (16, 2, 24), (8, 0, 300), (32, 0, 300)]
    k = np.concatenate([np.full(n, size) for size, _, n in cells])
    d = np.concatenate([np.full(n, pos) for _, pos, n in cells])
    y = DEMO_ASSAY.draw_readouts(k, d, rng)
    return pd.DataFrame({"pool_size": k, "positives": d,
                         "result": np.where(y, "positive", "negative")})
