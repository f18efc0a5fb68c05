"""The jitted loop that runs every chain for a block of sweeps, in parallel over chains.

A sweep is: single-site updates of every sampled specimen, then pool swaps, then the shared
prevalence when it is unknown. While recording, each sweep adds to the Rao-Blackwell sums and the
histogram of the number of positives, and every ``bm_stride`` / ``dr_stride`` sweeps a row goes into
the trace buffers (see backend.py; the driver compacts them before
they fill, and a full buffer is never written past). Chains own their random streams, so results do not depend on the
thread that runs a chain. Each move's kernel (``site_sweep``, ``swap_sweep``, ``draw_prevalence``)
lives in the move's module and is called here by name: a parallel, cached numba loop cannot take
kernels as arguments without compiling anew for each.
"""
from __future__ import annotations

from numba import njit, prange

from .pool_swap import swap_sweep
from .prevalence import draw_prevalence
from .single_site import site_sweep


@njit(parallel=True, cache=True)
def run_block(n_sweeps, sweep0, record,
              pool_ptr, pool_members, sample_ptr, sample_pools, lik_ptr, delta, base_logit,
              swap_pools, swap_rounds, use_prevalence, prior_a, prior_b,
              x, d, cur, total, shift, prevalence, rng, tally,
              rb, hist, watch, batch, bm_buf, bm_count, bm_stride, dr_x, dr_prev, dr_count,
              dr_stride):
    n_chains, n_order = x.shape
    for c in prange(n_chains):
        for s in range(n_sweeps):
            total[c] += site_sweep(sample_ptr, sample_pools, lik_ptr, delta, base_logit,
                                   shift[c], x[c], d[c], cur[c], rng[c], record, rb[c], watch,
                                   batch[c])
            if swap_rounds > 0:
                swap_sweep(swap_pools, swap_rounds, pool_ptr, pool_members, sample_ptr,
                           sample_pools, lik_ptr, delta, base_logit, x[c], d[c], cur[c], rng[c],
                           tally[c])
            if use_prevalence:
                prevalence[c], shift[c] = draw_prevalence(rng[c], prior_a, prior_b, total[c],
                                                          n_order)
            if not record:
                continue
            hist[c, total[c]] += 1
            g = sweep0 + s + 1
            if g % bm_stride == 0 and bm_count[c] < bm_buf.shape[1]:
                row = bm_count[c]
                for w in range(batch.shape[1]):
                    bm_buf[c, row, w] = batch[c, w] / bm_stride
                    batch[c, w] = 0.0
                bm_count[c] = row + 1
            if g % dr_stride == 0 and dr_count[c] < dr_x.shape[1]:
                row = dr_count[c]
                for a in range(n_order):
                    dr_x[c, row, a] = x[c, a]
                dr_prev[c, row] = prevalence[c]
                dr_count[c] = row + 1
