"""Bounded, thinned storage of what the chains record: batch means for diagnostics, kept draws.

Two buffers per chain, each of fixed capacity: batch means of the watched specimens (float32; for
each, the mean of its conditional probabilities over ``bm_stride`` sweeps, the Rao-Blackwell
column, and the mean of its sampled status, the indicator column, m columns apart) and joint draws of
the statuses (uint8, every ``dr_stride`` sweeps) with the shared prevalence. When a buffer is full it
is halved (adjacent batch means averaged, every other draw dropped) and its stride doubled, so memory
stays bounded however long the run and the rows always cover the whole recording window evenly:
row r of a buffer with stride s holds sweeps up to (r + 1) s. A specimen followed later (``extend``)
has batch means from its ``first_row`` on.
"""
from __future__ import annotations

import numpy as np


class Trace:
    """Recording buffers of one sampling run after warm-up."""

    def __init__(self, n_chains: int, n_sampled: int, watched: np.ndarray, batch_capacity: int,
                 draw_capacity: int):
        self.n_chains = n_chains
        self.watched = np.asarray(watched, dtype=np.int64)  # sampled specimens followed
        self.first_row = np.zeros(len(self.watched), dtype=np.int64)  # first valid row of each
        self.watch = np.full(n_sampled, -1, dtype=np.int32)
        self.watch[self.watched] = np.arange(len(self.watched), dtype=np.int32)
        self.batch_capacity = max(8, batch_capacity + batch_capacity % 2)
        self.draw_capacity = max(2, draw_capacity + draw_capacity % 2)
        m = len(self.watched)
        self.n_sampled = n_sampled
        self.rb = np.zeros((n_chains, n_sampled))
        self.hist = np.zeros((n_chains, n_sampled + 1), dtype=np.int64)
        self.batch = np.zeros((n_chains, 2 * m))  # Rao-Blackwell columns, then indicator columns
        self.bm_buf = np.zeros((n_chains, self.batch_capacity, 2 * m), dtype=np.float32)
        self.bm_count = np.zeros(n_chains, dtype=np.int64)
        self.bm_stride = 1
        self.dr_x = np.zeros((n_chains, self.draw_capacity, n_sampled), dtype=np.uint8)
        self.dr_prev = np.zeros((n_chains, self.draw_capacity))
        self.dr_count = np.zeros(n_chains, dtype=np.int64)
        self.dr_stride = 1
        self.sweeps = 0  # sweeps recorded in this window

    def room(self) -> int:
        """Sweeps that can run before a buffer must be halved."""
        return min(self.batch_capacity * self.bm_stride, self.draw_capacity * self.dr_stride) \
            - self.sweeps

    def extend(self, more: np.ndarray):
        """Follow more specimens from now on: their rows start after the batch in progress."""
        more = np.asarray(more, dtype=np.int64)
        m0, m1 = len(self.watched), len(self.watched) + len(more)
        buf = np.zeros((self.n_chains, self.batch_capacity, 2 * m1), dtype=np.float32)
        buf[:, :, :m0] = self.bm_buf[:, :, :m0]
        buf[:, :, m1:m1 + m0] = self.bm_buf[:, :, m0:]
        batch = np.zeros((self.n_chains, 2 * m1))
        batch[:, :m0] = self.batch[:, :m0]
        batch[:, m1:m1 + m0] = self.batch[:, m0:]
        self.bm_buf, self.batch = buf, batch
        self.first_row = np.concatenate([self.first_row,
                                         np.full(len(more), int(self.bm_count[0]) + 1)])
        self.watch[more] = np.arange(m0, m1, dtype=np.int32)
        self.watched = np.concatenate([self.watched, more])

    def compact(self):
        """Halve whichever buffer is full."""
        if self.bm_count[0] == self.batch_capacity:
            half = self.batch_capacity // 2
            self.bm_buf[:, :half] = 0.5 * (self.bm_buf[:, 0::2] + self.bm_buf[:, 1::2])
            self.bm_count[:] = half
            self.bm_stride *= 2
            self.first_row = (self.first_row + 1) // 2  # a merged row is valid when both were
        if self.dr_count[0] == self.draw_capacity:
            half = self.draw_capacity // 2
            self.dr_x[:, :half] = self.dr_x[:, 1::2]
            self.dr_prev[:, :half] = self.dr_prev[:, 1::2]
            self.dr_count[:] = half
            self.dr_stride *= 2

    # ---- views
    def batch_means(self) -> np.ndarray:
        """(chains, rows, watched) Rao-Blackwell batch means recorded so far."""
        return self.bm_buf[:, :int(self.bm_count[0]), :len(self.watched)]

    def indicator_means(self) -> np.ndarray:
        """(chains, rows, watched) batch means of the sampled statuses."""
        return self.bm_buf[:, :int(self.bm_count[0]), len(self.watched):]

    def draws(self) -> np.ndarray:
        """(chains, rows, sampled) kept joint draws."""
        return self.dr_x[:, :int(self.dr_count[0])]

    def prevalence_draws(self) -> np.ndarray:
        return self.dr_prev[:, :int(self.dr_count[0])]
