"""Does the planner lose anything by scoring candidate pools with the binary readout model on a Ct
assay? Binary information against a Ct-aware information, side by side on the same candidates.

The planner scores a candidate pool by the information its readout carries about the statuses,
I(Y; x) = H(Y) - E_x H(Y | x), with Y positive/negative and P(positive | k, d) the sensitivity the
Ct model implies (:class:`bayespool.ct.CtSensitivity`). A Ct readout says more: Y is "no
amplification" or a Ct value. Here the Ct-aware information uses the same posterior draws of the
statuses; for each draw, the positive members' individual Cts are drawn from the assay's mixture
(``--ct-draws`` per status draw), the pool's Ct follows the load model, and Y is binned (no
amplification, then bins of ``--bin`` cycles below the cutoff; binning can only lose information,
so this is a lower bound of the Ct readout's information that tightens as the bins shrink).
Caveat: the positives' Cts come from the prior mixture, not from what the run's earlier Cts say
about them; the script states the Ct-aware score as an approximation for that reason.

Scenario (invented, the demo's assay): first-stage pools of ``--pool-size`` at ``--prevalence``,
decoded with Ct; the planner's candidates for the undecided specimens; both scores per candidate;
the top ``--tests`` candidates by each score, and how much Ct-aware information the binary picks
carry against the Ct-aware picks (the loss from planning with the binary model).

    python scripts/bench_plan_ct.py [--runs 5] [--samples 480] [--pool-size 16] ...
"""
from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd
from scipy.special import ndtr
from scipy.stats import spearmanr


def ct_information(xt, members, assay, rng, ct_draws: int, bin_width: float) -> float:
    """Lower bound (binned Y) of I(Y_ct; x) in bits for one pool; ``xt`` is specimens x draws."""
    m = assay.ct
    k = len(members)
    d = xt[members].sum(axis=0).astype(np.int64)
    n = xt.shape[1]
    edges = np.arange(m.cutoff, 0.0, -bin_width)[::-1]
    edges = np.append(edges, m.cutoff)
    lik = np.zeros((n, len(edges)))  # column 0: no amplification; then the Ct bins
    neg = d == 0
    inside = (edges[:-1] >= m.false_positive_low)
    width = np.diff(edges)
    fp_bins = np.where(inside, width / (m.cutoff - m.false_positive_low), 0.0) * \
        (1.0 - assay.specificity)
    lik[neg, 0] = assay.specificity
    lik[neg, 1:] = fp_bins
    pos = np.flatnonzero(~neg)
    if len(pos):
        dd = d[pos]
        top = int(dd.max())
        c = m.draw_individual_ct(len(pos) * ct_draws * top, rng).reshape(len(pos), ct_draws, top)
        amount = np.where(np.arange(top)[None, None, :] < dd[:, None, None],
                          np.exp2(-c / m.cycles_per_doubling), 0.0).sum(axis=2)
        pool_ct = m.cycles_per_doubling * (np.log2(k) - np.log2(amount))  # (draws, ct_draws)
        z = (edges[None, None, :] - pool_ct[:, :, None]) / m.noise_sd
        cdf = ndtr(z)
        bins = m.detection_max * np.diff(cdf, axis=2)           # P(y in each bin)
        hit = bins.sum(axis=2)
        lik[pos, 1:] = bins.mean(axis=1)
        lik[pos, 0] = 1.0 - hit.mean(axis=1)
    lik = np.clip(lik, 0.0, 1.0)
    lik /= lik.sum(axis=1, keepdims=True)
    p_y = lik.mean(axis=0)

    def ent(p):
        p = p[p > 0]
        return -np.sum(p * np.log2(p))
    cond = np.mean([ent(row) for row in lik])
    return float(ent(p_y) - cond)


def one_run(seed, args):
    from bayespool.decoders import decode
    from bayespool.demo import DEMO_ASSAY, DEMO_CT, read_pool
    from bayespool.planning.candidates import generate
    from bayespool.planning.draws import posterior_draws
    from bayespool.planning.information import pool_information
    from bayespool.decoders.graph import components
    from bayespool.run import Run
    rng = np.random.default_rng(seed)
    n, k = args.samples, args.pool_size
    truth = rng.random(n) < args.prevalence
    ct = np.where(truth, DEMO_CT.draw_individual_ct(n, rng), np.nan)
    lay, rd = [], []
    for b in range(n // k):
        members = np.arange(b * k, (b + 1) * k)
        lay += [(f"P{b}", f"S{i}") for i in members]
        rd += [(f"P{b}", r, c) for r, c in read_pool(members, truth, ct, rng)]
    run = Run.from_frames(pd.DataFrame(lay, columns=["pool", "sample"]),
                          pd.DataFrame(rd, columns=["pool", "result", "ct"]),
                          prevalence=args.prevalence)
    post = decode(run, DEMO_ASSAY, expectations=False, model_check=False)
    draws = posterior_draws(run, DEMO_ASSAY, post, args.draws, rng)
    undecided = post.undecided()
    if not len(undecided):
        return None
    allowed = np.ones(args.max_pool_size + 1, dtype=bool)
    allowed[0] = False
    cands = generate(run, post.probability, undecided, components(run), args.max_pool_size,
                     allowed)
    xt = np.ascontiguousarray(draws.T)
    rows = []
    t0 = time.perf_counter()
    for c in range(len(cands)):
        members = cands.members_of(c)
        rows.append({"size": len(members),
                     "binary": pool_information(draws, members, DEMO_ASSAY)[1]})
    t_bin = time.perf_counter() - t0
    t0 = time.perf_counter()
    for c, row in enumerate(rows):
        row["ct"] = ct_information(xt, cands.members_of(c), DEMO_ASSAY, rng, args.ct_draws,
                                   args.bin)
    t_ct = time.perf_counter() - t0
    return pd.DataFrame(rows), t_bin, t_ct


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--runs", type=int, default=5)
    p.add_argument("--samples", type=int, default=480)
    p.add_argument("--pool-size", type=int, default=16)
    p.add_argument("--prevalence", type=float, default=0.02)
    p.add_argument("--max-pool-size", type=int, default=16)
    p.add_argument("--tests", type=int, default=24)
    p.add_argument("--draws", type=int, default=1000)
    p.add_argument("--ct-draws", type=int, default=32)
    p.add_argument("--bin", type=float, default=0.25)
    p.add_argument("--seed", type=int, default=1)
    args = p.parse_args(argv)
    lines = []
    for r in range(args.runs):
        out = one_run(args.seed + r, args)
        if out is None:
            print(f"run {r}: nothing undecided")
            continue
        frame, t_bin, t_ct = out
        top = min(args.tests, len(frame))
        by_bin = frame.sort_values("binary", ascending=False, kind="stable").head(top)
        by_ct = frame.sort_values("ct", ascending=False, kind="stable").head(top)
        rho = spearmanr(frame["binary"], frame["ct"]).statistic if len(frame) > 2 else np.nan
        lines.append({
            "run": r, "candidates": len(frame),
            "binary_bits_mean": frame["binary"].mean(), "ct_bits_mean": frame["ct"].mean(),
            "ct_over_binary": frame["ct"].sum() / max(frame["binary"].sum(), 1e-12),
            "spearman": rho,
            "top_overlap": len(set(by_bin.index) & set(by_ct.index)) / top,
            # Ct-aware information of the binary score's top picks against the Ct score's own
            # (single-pool sums; 1 = planning with the binary model loses nothing)
            "binary_picks_ct_share": by_bin["ct"].sum() / by_ct["ct"].sum(),
            "binary_s": t_bin, "ct_s": t_ct})
    table = pd.DataFrame(lines)
    with pd.option_context("display.width", 160, "display.precision", 3):
        print(table.to_string(index=False))
    if len(table):
        print(f"\nmean over runs: Ct-aware / binary information {table['ct_over_binary'].mean():.3f}; "
              f"rank correlation {table['spearman'].mean():.3f}; top-{args.tests} overlap "
              f"{table['top_overlap'].mean():.3f}; the binary picks carry "
              f"{table['binary_picks_ct_share'].mean():.3f} of the Ct-aware picks' information; "
              f"scoring time Ct-aware / binary {table['ct_s'].sum() / table['binary_s'].sum():.0f}x")


if __name__ == "__main__":
    main()
