"""What every pooling design is: specimens, pools as CSR membership lists, and their properties.

A design is non-adaptive: it says which specimens go into which pool before anything is read. The
result is data: :attr:`Design.layout` is the ``pool,sample`` table that ``bayespool decode`` reads,
:attr:`Design.properties` the numbers a laboratory checks before adopting the design (pools, pool
sizes, pools per specimen, the largest overlap of two specimens and the disjunctness it guarantees).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import InputError
from ..result_protocol import Result, membership_index
from ..csr import CSR
from ..run import PoolIncidence
from ..validation import check_count


def check_max_pool_size(value) -> int | None:
    return None if value is None else check_count(value, "max_pool_size")


def guaranteed_disjunct(max_overlap: int, min_weight: int, n_samples: int) -> int:
    """Largest d for which a design is d-disjunct by the overlap argument.

    If every specimen is in at least ``w`` pools and two specimens share at most ``lam`` pools, the
    union of ``d`` other specimens' pools covers at most ``d * lam`` of a specimen's pools, so with
    ``d * lam < w`` some pool of it stays uncovered: the design is ``floor((w - 1) / lam)``-disjunct
    (Kautz & Singleton 1964, the argument behind their Reed-Solomon construction). With no overlap at
    all every specimen has pools of its own and any number of positives is identified.
    """
    if n_samples <= 1:
        return max(n_samples - 1, 0)
    if min_weight <= 0:
        return 0
    if max_overlap <= 0:
        return n_samples - 1
    return min((min_weight - 1) // max_overlap, n_samples - 1)


def max_overlap(pool_ptr: np.ndarray, pool_members: np.ndarray, n_samples: int) -> int:
    """The largest number of pools two distinct specimens share (sparse product, no dense matrix)."""
    from scipy import sparse
    sizes = np.diff(pool_ptr)
    if n_samples < 2 or len(pool_members) == 0:
        return 0
    rows = np.repeat(np.arange(len(sizes)), sizes)
    a = sparse.csr_matrix((np.ones(len(pool_members), dtype=np.int32), (rows, pool_members)),
                          shape=(len(sizes), n_samples))
    gram = (a.T @ a).tocoo()
    off = gram.row != gram.col
    return int(gram.data[off].max()) if off.any() else 0


@dataclass(repr=False)
class DesignProperties(Result):
    """The numbers that describe a design; ``disjunct`` is the guaranteed d (None if unknown).

    ``to_frame()`` has one row per property (index ``property``) with its ``value``.

    Examples
    --------
    >>> import bayespool
    >>> props = bayespool.make_design("array", 24, rows=4, cols=6).properties
    >>> props.to_frame().loc["pools", "value"]
    10
    """

    scheme: str
    n_samples: int
    n_pools: int
    n_memberships: int
    pool_size_min: int
    pool_size_max: int
    pool_size_mean: float
    pools_per_sample_min: int
    pools_per_sample_max: int
    max_overlap: int | None
    disjunct: int | None
    parameters: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    def summary(self) -> dict:
        return {"scheme": self.scheme, "samples": self.n_samples, "pools": self.n_pools,
                "memberships": self.n_memberships,
                "pool_size": {"min": self.pool_size_min, "max": self.pool_size_max,
                              "mean": self.pool_size_mean},
                "pools_per_sample": {"min": self.pools_per_sample_min,
                                     "max": self.pools_per_sample_max},
                "max_overlap": self.max_overlap, "disjunct": self.disjunct,
                "parameters": dict(self.parameters), "notes": list(self.notes)}

    def to_frame(self) -> pd.DataFrame:
        rows = {"scheme": self.scheme, "samples": self.n_samples, "pools": self.n_pools,
                "memberships": self.n_memberships, "pool_size_min": self.pool_size_min,
                "pool_size_max": self.pool_size_max, "pool_size_mean": self.pool_size_mean,
                "pools_per_sample_min": self.pools_per_sample_min,
                "pools_per_sample_max": self.pools_per_sample_max,
                "max_overlap": self.max_overlap, "disjunct": self.disjunct}
        return pd.DataFrame({"value": list(rows.values())},
                            index=pd.Index(list(rows), name="property"))

    def _brief(self) -> str:
        return (f"{self.scheme!r}, {self.n_samples} specimens, {self.n_pools} pools, "
                f"disjunct={self.disjunct}")

    def __str__(self) -> str:
        return "\n".join(self._lines())

    def _lines(self) -> list[str]:
        """Human-readable description, one fact per line."""
        def span(lo, hi, mean=None):
            if lo == hi:
                return f"{lo}"
            return f"{lo} to {hi}" + (f" (mean {mean:.2f})" if mean is not None else "")
        params = ", ".join(f"{k} = {v}" for k, v in self.parameters.items())
        out = [f"design: {self.scheme}" + (f" ({params})" if params else ""),
               f"  specimens: {self.n_samples}, pools: {self.n_pools}, "
               f"memberships: {self.n_memberships}",
               f"  pool size: {span(self.pool_size_min, self.pool_size_max, self.pool_size_mean)}",
               f"  pools per specimen: {span(self.pools_per_sample_min, self.pools_per_sample_max)}"]
        if self.max_overlap is not None:
            out.append(f"  two specimens share at most {self.max_overlap} pool"
                       f"{'' if self.max_overlap == 1 else 's'}")
        if self.disjunct is None:
            out.append("  disjunctness: not guaranteed")
        elif self.disjunct == 0:
            out.append("  disjunctness: none (one round cannot single out even one positive; "
                       "positives need follow-up tests)")
        else:
            out.append(f"  guaranteed {self.disjunct}-disjunct: without test error one round "
                       f"identifies every positive when there are at most {self.disjunct}")
        out += [f"  note: {n}" for n in self.notes]
        return out


@dataclass(eq=False, repr=False)
class Design(PoolIncidence, Result):
    """A pooling design: ``by_pool`` (a :class:`~bayespool.csr.CSR`) lists each pool's specimens;
    pool ``t`` holds ``pool_members[pool_ptr[t]:pool_ptr[t+1]]``.

    ``to_frame()`` is the layout (``pool, sample``, one row per membership, index
    ``membership``); ``summary()`` and ``str()`` describe its properties, and ``str()`` lists the
    pools of a small code design (at most 64 specimens) as ``bayespool design`` prints them.

    References
    ----------
    Dorfman (1943); Kautz & Singleton (1964), IEEE Trans. Inf. Theory 10(4).

    Examples
    --------
    >>> import bayespool
    >>> design = bayespool.make_design("dorfman", 8, pool_size=4)
    >>> print(design)
    design: dorfman (pool_size = 4)
      specimens: 8, pools: 2, memberships: 8
      pool size: 4
      pools per specimen: 1
      two specimens share at most 1 pool
      disjunctness: none (one round cannot single out even one positive; positives need follow-up tests)
    """

    sample_ids: np.ndarray
    pool_ids: np.ndarray
    by_pool: CSR
    properties: DesignProperties

    @property
    def pools_per_sample(self) -> np.ndarray:
        return np.bincount(self.pool_members, minlength=self.n_samples)

    def sample_pools(self):
        """CSR (ptr, pools) from specimen to the pools it is in."""
        by_sample = self.by_pool.transpose(self.n_samples)
        return by_sample.ptr, by_sample.indices

    def to_frame(self) -> pd.DataFrame:
        return self.layout.set_axis(membership_index(len(self.pool_members)))

    def summary(self) -> dict:
        return self.properties.summary()

    def pool_lines(self) -> list[str]:
        """The pools with their members, listed for a small code design (else nothing)."""
        if self.properties.scheme != "code" or self.n_samples > 64:
            return []
        return [f"  pool {self.pool_ids[t]}: " + " ".join(map(str, self.sample_ids[self.members(t)]))
                for t in range(self.n_pools)]

    def __str__(self) -> str:
        return "\n".join([str(self.properties)] + self.pool_lines())

    def _brief(self) -> str:
        return self.properties._brief()

    @property
    def layout(self) -> pd.DataFrame:
        """The layout table, ``pool,sample``, one row per membership."""
        owner = np.repeat(np.arange(self.n_pools), self.pool_size)
        return pd.DataFrame({"pool": self.pool_ids[owner],
                             "sample": self.sample_ids[self.pool_members]})


def build_design(scheme: str, sample_ids, pool_ids, pool_ptr, pool_members, *,
                 parameters: dict | None = None, notes: list | None = None,
                 overlap: int | None = None, disjunct: int | None = None,
                 compute_overlap: bool = False, max_pool_size: int | None = None) -> Design:
    """Assemble a Design and its properties from CSR pools; drops pools left empty.

    ``overlap`` and ``disjunct`` are given by schemes that know them from their construction;
    ``compute_overlap`` measures the overlap instead (random designs).
    """
    sample_ids = np.asarray(sample_ids, dtype=object)
    pool_ids = np.asarray(pool_ids, dtype=object)
    pool_ptr = np.asarray(pool_ptr, dtype=np.int64)
    pool_members = np.asarray(pool_members, dtype=np.int32)
    sizes = np.diff(pool_ptr)
    if (sizes == 0).any():
        keep = sizes > 0
        pool_ids = pool_ids[keep]
        pool_ptr = np.concatenate([[0], np.cumsum(sizes[keep])]).astype(np.int64)
        sizes = sizes[keep]
    n = len(sample_ids)
    if max_pool_size is not None and len(sizes) and sizes.max() > max_pool_size:
        raise InputError(f"the {scheme} design has pools of {int(sizes.max())} specimens, above "
                         f"max_pool_size {max_pool_size}", parameters=("max_pool_size",))
    weight = np.bincount(pool_members, minlength=n)
    if compute_overlap:
        overlap = max_overlap(pool_ptr, pool_members, n)
        disjunct = guaranteed_disjunct(overlap, int(weight.min()) if n else 0, n)
    props = DesignProperties(
        scheme=scheme, n_samples=n, n_pools=len(pool_ids), n_memberships=len(pool_members),
        pool_size_min=int(sizes.min()) if len(sizes) else 0,
        pool_size_max=int(sizes.max()) if len(sizes) else 0,
        pool_size_mean=float(sizes.mean()) if len(sizes) else 0.0,
        pools_per_sample_min=int(weight.min()) if n else 0,
        pools_per_sample_max=int(weight.max()) if n else 0,
        max_overlap=overlap, disjunct=disjunct,
        parameters=dict(parameters or {}), notes=list(notes or []))
    return Design(sample_ids, pool_ids, CSR(pool_ptr, pool_members), props)


def pool_labels(prefix: str, count: int, start: int = 1) -> np.ndarray:
    """Zero-padded pool IDs ``prefix001`` ... wide enough for ``count``."""
    width = max(3, len(str(start + count - 1)))
    return np.array([f"{prefix}{i:0{width}d}" for i in range(start, start + count)], dtype=object)
