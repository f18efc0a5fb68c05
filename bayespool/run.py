"""One batch of pooled tests: specimens, pools, memberships and readouts as integer-coded arrays.

IDs are factorised once; the sample-pool graph is kept as CSR incidence in both directions
(pool -> members, sample -> pools) in int32, so memory is linear in the number of memberships and
nothing is dense. Replicate readouts of a pool are folded into counts of positive and negative reads.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace
from types import MappingProxyType

import numpy as np
import pandas as pd

from .csr import _COUNTING_SORT_FROM, CSR, CSRPart
from .defaults import PREVALENCE
from .io import CodedTable, FrameTable, Table, read_id_table, read_table
from .results import parse_results, skipped_note
from .validation import check_open_probability
from .samplesfile import check_samples

def _first_repeated_pair(rows, cols, n_rows: int, n_cols: int) -> int:
    """Row of the first (pool, sample) pair that repeats an earlier one, or -1."""
    if len(rows) < _COUNTING_SORT_FROM:
        pair = rows.astype(np.int64) * max(n_cols, 1) + cols
        dup = np.flatnonzero(pd.Series(pair).duplicated(keep="first").to_numpy())
        return int(dup[0]) if len(dup) else -1
    from .incidence import first_repeated_pair
    ptr = np.zeros(n_rows + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=n_rows), out=ptr[1:])
    return int(first_repeated_pair(rows, cols, ptr, n_cols))


class PoolIncidence:
    """Pools over specimens: ``sample_ids``, ``pool_ids`` and ``by_pool``, the :class:`CSR` of each
    pool's members (``pool_ptr``/``pool_members`` are its arrays); shared by a run, a design and a
    plan."""

    pool_ptr = CSRPart("by_pool", "ptr")
    pool_members = CSRPart("by_pool", "indices")

    @property
    def n_samples(self) -> int:
        return len(self.sample_ids)

    @property
    def n_pools(self) -> int:
        return len(self.pool_ids)

    @property
    def n_memberships(self) -> int:
        return len(self.pool_members)

    pool_size = CSRPart("by_pool", "sizes")  # members per pool (int64)

    def members(self, t: int) -> np.ndarray:
        return self.by_pool.row(t)


@dataclass(eq=False, frozen=True)
class Run(PoolIncidence):
    """Specimens, pools and readouts of one batch; immutable once built.

    ``by_pool``: members of each pool (:class:`CSR`; ``pool_ptr``/``pool_members`` are its arrays).
    ``by_sample``: pools of each sample (``sample_ptr``/``sample_pools``). ``n_positive``/``n_negative``:
    readouts of each pool (replicates folded). ``prior``: P(x_i = 1) before the readouts.
    ``sources`` (read-only mapping of input role -> file) and ``notes`` (tuple) describe where the
    run came from. A changed run is a new one: :meth:`with_prior`, :meth:`with_readouts`,
    :meth:`with_sources`, :meth:`with_notes` (or ``dataclasses.replace``).

    Examples
    --------
    >>> import bayespool
    >>> run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
    ...                          "datasets/demo/samples.csv")
    >>> run.n_samples, run.n_pools
    (288, 84)
    >>> [str(s) for s in run.sample_ids[run.members(0)]][:2]
    ['SW1-A1', 'SW1-B1']
    """

    sample_ids: np.ndarray
    pool_ids: np.ndarray
    prior: np.ndarray
    by_pool: CSR
    by_sample: CSR
    n_positive: np.ndarray
    n_negative: np.ndarray
    samples: pd.DataFrame | None = None  # the samples file as read (plate, well, ...), if any
    readout_ct: pd.DataFrame | None = None  # pool, result, ct of each readout with a ct column
    sources: MappingProxyType = field(default_factory=dict)
    notes: tuple = ()

    def __post_init__(self):
        # the only writes: freezing the descriptive fields a caller may hand in as dict or list
        object.__setattr__(self, "sources", MappingProxyType(dict(self.sources)))
        object.__setattr__(self, "notes", tuple(self.notes))

    @property
    def n_readouts(self) -> int:
        return int(self.n_positive.sum() + self.n_negative.sum())

    @property
    def pool_reads(self) -> np.ndarray:
        """Readouts of each pool, replicates counted (int32)."""
        return self.n_positive + self.n_negative

    @property
    def pool_read(self) -> np.ndarray:
        """Whether each pool has at least one readout (a pool never read adds no information)."""
        return self.pool_reads > 0

    sample_ptr = CSRPart("by_sample", "ptr")
    sample_pools = CSRPart("by_sample", "indices")

    def pools_of(self, i: int) -> np.ndarray:
        return self.by_sample.row(i)

    def log_likelihood(self, assay):
        """Per-pool log L_t[d] as (ptr, values); see :meth:`bayespool.assay.Assay.log_likelihood`."""
        if assay.ct is not None:  # Ct readouts: likelihoods integrated over individual Cts
            from .ct_evidence import PoolCtStats, pool_log_likelihood
            return pool_log_likelihood(assay, self.pool_size, PoolCtStats.from_run(self, assay.ct))
        assay.sensitivity.check_pool_sizes(self.pool_size[self.pool_read],
                                           self.sources.get("assay"))
        return assay.log_likelihood(self.pool_size, self.n_positive, self.n_negative)

    # ---- construction
    @classmethod
    def from_arrays(cls, pool_of_membership, sample_of_membership, n_samples: int, n_pools: int,
                    prior, readout_pool=None, readout_result=None, sample_ids=None, pool_ids=None,
                    *, samples: pd.DataFrame | None = None, readout_ct: pd.DataFrame | None = None,
                    sources=None, notes=()):
        """Build from integer codes (membership pairs; readouts as pool index and 0/1 result)."""
        pm = np.asarray(pool_of_membership, dtype=np.int64)
        sm = np.asarray(sample_of_membership, dtype=np.int64)
        by_pool = CSR.from_pairs(pm, sm, n_pools)
        by_sample = CSR.from_pairs(sm, pm, n_samples)
        npos = np.zeros(n_pools, dtype=np.int32)
        nneg = np.zeros(n_pools, dtype=np.int32)
        if readout_pool is not None:
            rp = np.asarray(readout_pool, dtype=np.int64)
            rr = np.asarray(readout_result, dtype=np.int64)
            npos = np.bincount(rp[rr == 1], minlength=n_pools).astype(np.int32)
            nneg = np.bincount(rp[rr == 0], minlength=n_pools).astype(np.int32)
        prior = np.broadcast_to(np.asarray(prior, dtype=float), (n_samples,)).copy()
        if sample_ids is None:
            sample_ids = np.array([f"S{i}" for i in range(n_samples)], dtype=object)
        if pool_ids is None:
            pool_ids = np.array([f"P{t}" for t in range(n_pools)], dtype=object)
        return cls(np.asarray(sample_ids, dtype=object), np.asarray(pool_ids, dtype=object), prior,
                   by_pool, by_sample, npos, nneg, samples,
                   readout_ct, sources or {}, notes)

    @classmethod
    def read(cls, layout, readouts=None, samples=None, *, prevalence: float = PREVALENCE,
             result_words: dict | None = None) -> "Run":
        """Read and validate the layout, readouts and samples files (interface.md).

        ``result_words`` adds a laboratory's own result words (word -> positive, negative or
        skip; see :func:`bayespool.results.result_words`).
        """
        lay = read_id_table(layout, ("pool", "sample"), "layout")
        rd = read_table(readouts, ["pool", "result"], "readouts") if readouts is not None else None
        sm = read_table(samples, ["sample"], "samples") if samples is not None else None
        return cls.from_tables(lay, rd, sm, prevalence, words=result_words,
                               sources=input_sources(layout, readouts, samples))

    @classmethod
    def from_frames(cls, layout: pd.DataFrame, readouts: pd.DataFrame | None = None,
                    samples: pd.DataFrame | None = None, prevalence: float = PREVALENCE, *,
                    result_words: dict | None = None) -> "Run":
        """Build from DataFrames with the columns of the files (values converted to strings;
        column names matched case-insensitively; errors name the 0-based row)."""
        tables = [None if df is None else FrameTable(df, f"<{name}>", cols, name)
                  for df, cols, name in ((layout, ["pool", "sample"], "layout"),
                                         (readouts, ["pool", "result"], "readouts"),
                                         (samples, ["sample"], "samples"))]
        return cls.from_tables(*tables, prevalence, words=result_words)

    @classmethod
    def from_tables(cls, lay: Table, rd: Table | None, sm: Table | None, prevalence, *,
                    words: dict | None = None, sources=None, notes=()) -> "Run":
        """Build from read tables; ``sources`` and ``notes`` (added after the reading's own
        notes) describe the run."""
        prevalence = check_open_probability(prevalence, "prevalence")
        # IDs are factorised once (a large plain file comes already coded); every later check
        # works on the integer codes
        if isinstance(lay, CodedTable):
            pool_codes, pool_ids = lay.codes["pool"], lay.ids["pool"]
            sample_codes, sample_ids = lay.codes["sample"], lay.ids["sample"]
        else:
            pool_codes, pool_ids = pd.factorize(lay.frame["pool"], sort=False)
            sample_codes, sample_ids = pd.factorize(lay.frame["sample"], sort=False)
        sample_ids = np.asarray(sample_ids, dtype=object)
        pool_ids = np.asarray(pool_ids, dtype=object)
        for col, codes, ids in (("pool", pool_codes, pool_ids),
                                ("sample", sample_codes, sample_ids)):
            blank = np.flatnonzero(ids == "")
            if len(blank):
                raise lay.error(f"empty {col} ID", int(np.argmax(codes == blank[0])), col)
        r = _first_repeated_pair(pool_codes, sample_codes, len(pool_ids), len(sample_ids))
        if r >= 0:
            raise lay.error(f"sample {sample_ids[sample_codes[r]]!r} appears twice in pool "
                            f"{pool_ids[pool_codes[r]]!r}", r, "sample")

        # samples file: priors and plate map; samples it adds to the layout are untested
        prior_values = None
        samples_frame = None
        if sm is not None:
            sf = sm.frame
            prior_column = check_samples(sm)
            extra = ~pd.Index(sf["sample"]).isin(pd.Index(sample_ids))
            if extra.any():
                sample_ids = np.concatenate([sample_ids, sf["sample"].to_numpy()[extra]])
            index = pd.Index(sample_ids)
            pos = index.get_indexer(sf["sample"])
            prior_values = np.full(len(sample_ids), prevalence)
            if prior_column is not None:
                vals, given = prior_column
                prior_values[pos[given]] = vals[given]
            samples_frame = sf.copy()
            samples_frame.index = pos
            if extra.any():
                n_extra = int(extra.sum())
        n = len(sample_ids)
        prior = prior_values if prior_values is not None else np.full(n, prevalence)

        readout_pool = readout_result = None
        ct_frame = None
        read_notes = []
        if sm is not None and extra.any():
            read_notes.append(f"{n_extra} sample(s) of the samples file are in no pool; "
                              "their probability stays at the prior")
        if rd is not None:
            rf = rd.frame
            res = parse_results(rd, words=words)
            pidx = pd.Index(pool_ids).get_indexer(rf["pool"])
            missing = pidx < 0
            if missing.any():
                r = int(np.flatnonzero(missing)[0])
                raise rd.error(f"pool {rf['pool'].iat[r]!r} has a readout but is not in the layout",
                               r, "pool")
            skipped = skipped_note(rd, res)
            if skipped:
                warnings.warn(skipped, stacklevel=2)
                read_notes.append(skipped)
            keep = res >= 0
            readout_pool, readout_result = pidx[keep], res[keep]
            if "ct" in rf.columns:
                vals, given = rd.numbers("ct")
                bad = given & ~(np.isfinite(vals) & (vals > 0))
                if bad.any():
                    r = int(np.flatnonzero(bad)[0])
                    raise rd.error(f"ct {rf['ct'].iat[r].strip()!r} must be a positive number or "
                                   "blank", r, "ct")
                odd = np.flatnonzero(given & (res == 0))
                if len(odd):
                    lines = ", ".join(map(str, rd.lines(odd[:10])))
                    more = f" and {len(odd) - 10} more" if len(odd) > 10 else ""
                    read_notes.append(
                        f"{rd.path}: {len(odd)} negative readout(s) carry a Ct value "
                        f"({rd.unit}{'s' if len(odd) > 1 else ''} {lines}{more}); they are "
                        "read as negative: check the result or the Ct")
                ct_frame = pd.DataFrame({"pool": pidx[keep], "result": res[keep],
                                         "ct": vals[keep]})
        return cls.from_arrays(pool_codes, sample_codes, n, len(pool_ids), prior, readout_pool,
                               readout_result, sample_ids, pool_ids, samples=samples_frame,
                               readout_ct=ct_frame, sources=sources, notes=read_notes + list(notes))

    # ---- changed copies (a Run is never modified in place)
    def with_readouts(self, readout_pool, readout_result, ct=None) -> "Run":
        """A copy with more readouts (pool indices, 0/1 results) folded in; ``ct`` (one value per
        readout, NaN for none) extends ``readout_ct``."""
        rp = np.asarray(readout_pool, dtype=np.int64)
        rr = np.asarray(readout_result, dtype=np.int64)
        npos = self.n_positive + np.bincount(rp[rr == 1], minlength=self.n_pools).astype(np.int32)
        nneg = self.n_negative + np.bincount(rp[rr == 0], minlength=self.n_pools).astype(np.int32)
        return replace(self, n_positive=npos, n_negative=nneg,
                       readout_ct=self.more_ct(rp, rr, ct))

    def more_ct(self, readout_pool, readout_result, ct) -> pd.DataFrame | None:
        """``readout_ct`` with these readouts (pool index, 0/1 result, Ct) appended; unchanged
        when ``ct`` is None."""
        if ct is None:
            return self.readout_ct
        new = pd.DataFrame({"pool": np.asarray(readout_pool, dtype=np.int64),
                            "result": np.asarray(readout_result, dtype=np.int64),
                            "ct": np.asarray(ct, dtype=float)})
        return new if self.readout_ct is None else pd.concat([self.readout_ct, new],
                                                             ignore_index=True)

    def with_prior(self, prior) -> "Run":
        """A copy whose specimens have the prior ``prior`` (one value or one per specimen)."""
        prior = np.broadcast_to(np.asarray(prior, dtype=float), (self.n_samples,)).copy()
        return replace(self, prior=prior)

    def with_sources(self, **sources) -> "Run":
        """A copy whose ``sources`` also name these inputs (role=path; None for none)."""
        return replace(self, sources={**self.sources, **sources})

    def with_notes(self, notes) -> "Run":
        """A copy with ``notes`` added after its own."""
        return replace(self, notes=self.notes + tuple(notes))

    def sample_column(self, name: str) -> np.ndarray | None:
        """A column of the samples file aligned with ``sample_ids`` (blank for specimens it does
        not list), or None when the file or the column is absent."""
        if self.samples is None or name not in self.samples.columns:
            return None
        out = np.full(self.n_samples, "", dtype=object)
        idx = self.samples.index.to_numpy()
        ok = (idx >= 0) & (idx < self.n_samples)
        out[idx[ok]] = self.samples[name].astype(str).str.strip().to_numpy()[ok]
        return out

    def layout_frame(self) -> pd.DataFrame:
        """The layout as a DataFrame (pool, sample), one row per membership."""
        owner = np.repeat(np.arange(self.n_pools), self.pool_size)
        return pd.DataFrame({"pool": self.pool_ids[owner], "sample": self.sample_ids[self.pool_members]})


def input_sources(layout, readouts=None, samples=None) -> dict:
    """The ``sources`` of a run read from these files (role -> path as given, None if absent)."""
    return {"layout": str(layout), "readouts": None if readouts is None else str(readouts),
            "samples": None if samples is None else str(samples)}


def read_run(layout, readouts=None, samples=None, *, prevalence: float = PREVALENCE,
             result_words: dict | None = None) -> Run:
    """Read a run from its files: the layout, the readouts and the optional samples file.

    Parameters
    ----------
    layout : str or path-like
        ``pool,sample`` memberships, one row each.
    readouts : str or path-like, optional
        ``pool,result[,ct]`` readouts; several rows of one pool are replicates. None (or a file
        with a header only) means nothing is read yet.
    samples : str or path-like, optional
        ``sample[,prior,plate,well,...]``; specimens of the layout missing here take
        ``prevalence``.
    prevalence : float, keyword-only
        Prior probability of specimens without a prior, strictly between 0 and 1.
    result_words : dict, optional
        A laboratory's own result words (word -> positive, negative or skip).

    Returns
    -------
    Run

    Raises
    ------
    InputError
        A bad file (naming file, line and column) or a bad ``prevalence``.

    References
    ----------
    The file formats: RFC 4180 (comma-separated values), with ``;`` or tab delimiters and
    ``.xlsx`` sheets accepted as well.

    Examples
    --------
    >>> import bayespool
    >>> run = bayespool.read_run("datasets/demo/layout.csv", "datasets/demo/readouts.csv",
    ...                          "datasets/demo/samples.csv")
    >>> run.n_samples, run.n_pools, run.n_readouts
    (288, 84, 84)
    """
    return Run.read(layout, readouts, samples, prevalence=prevalence, result_words=result_words)
