"""Property: BP's results do not depend on the order of rows in the input files.

The sweep order is canonical (sorted pool IDs), so shuffling the layout, readouts or samples rows
leaves every probability unchanged up to rounding (common practice for a deterministic decoder:
the same data must give the same answer).
"""
import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from bayespool.assay import Assay, DilutionSensitivity
from bayespool.decoders import decode
from bayespool.run import Run

ASSAY = Assay(0.97, DilutionSensitivity(0.98, 5.0, 1.3))


def frames(rng, n=40, k=5, rounds=3):
    """A loopy design (every specimen in ``rounds`` pools) with readouts and per-specimen priors."""
    lay, reads = [], []
    truth = rng.random(n) < 0.15
    for r in range(rounds):
        perm = rng.permutation(n)
        for b in range(n // k):
            pool = f"R{r}-{b:02d}"
            members = perm[b * k:(b + 1) * k]
            lay += [{"pool": pool, "sample": f"id{i:03d}"} for i in members]
            d = int(truth[members].sum())
            for _ in range(int(rng.integers(1, 3))):
                pos = ASSAY.draw_readouts(np.array([k]), np.array([d]), rng)[0]
                reads.append({"pool": pool, "result": "positive" if pos else "negative"})
    samples = pd.DataFrame({"sample": [f"id{i:03d}" for i in range(n)],
                            "prior": rng.uniform(0.05, 0.3, n).round(4)})
    return pd.DataFrame(lay), pd.DataFrame(reads), samples


def by_id(post):
    return pd.Series(post.probability, index=post.sample_ids).sort_index()


@settings(max_examples=15, deadline=None)
@given(st.integers(0, 2**32 - 1), st.integers(0, 2**32 - 1))
def test_bp_probabilities_do_not_depend_on_row_order(design_seed, shuffle_seed):
    layout, readouts, samples = frames(np.random.default_rng(design_seed))
    rng = np.random.default_rng(shuffle_seed)
    base = decode(Run.from_frames(layout, readouts, samples), ASSAY, method="bp")
    shuffled = decode(Run.from_frames(layout.sample(frac=1, random_state=rng),
                                      readouts.sample(frac=1, random_state=rng),
                                      samples.sample(frac=1, random_state=rng)),
                      ASSAY, method="bp")
    assert base.diagnostics["converged"] and shuffled.diagnostics["converged"]
    a, b = by_id(base), by_id(shuffled)
    assert list(a.index) == list(b.index)
    np.testing.assert_allclose(a.to_numpy(), b.to_numpy(), rtol=0, atol=1e-12)
