"""The hook through which ``auto`` hands components on which BP did not converge to the sampler.

The sampler module is replaced here by a stand-in with the same ``fallback`` function that answers
by exact enumeration, so the check is that the hook routes exactly the unconverged components and
merges the answer (the sampler's own accuracy is tested with the sampler).
"""
import importlib.machinery
import sys
import types

import numpy as np
import pytest

from bayespool.decoders import decode
from bayespool.decoders.exact import decode_exact
from bayespool.decoders.gibbs.decode import Fallback  # the result type the real sampler returns

from .test_bp import ASSAYS, loopy_run


@pytest.fixture
def sampler_module(monkeypatch):
    calls = []

    def fallback(run, lik_ptr, loglik, comps, selected, why, seed=None, negative_below=0.01,
                 positive_above=0.99, options=None, start=None):
        calls.append((np.array(selected), why, seed, negative_below, positive_above))
        prob, _, count_ptr, counts = decode_exact(run, lik_ptr, loglik, comps, selected)
        specimens = np.concatenate([comps.samples_of(int(c)) for c in selected])
        dist = counts[count_ptr[selected[0]]:count_ptr[selected[0] + 1]]
        return Fallback(specimens, prob[specimens], np.full(len(specimens), 1e-3),
                       np.ones(len(specimens)), np.full(len(specimens), 400.0), dist,
                       f"{why}: stand-in sampler", {"gibbs": {"chains": 4, "converged": True}})

    name = "bayespool.decoders.gibbs"
    module = types.ModuleType(name)
    module.__spec__ = importlib.machinery.ModuleSpec(name, None)
    module.fallback = fallback
    monkeypatch.setitem(sys.modules, name, module)
    return calls


def test_auto_hands_unconverged_bp_groups_to_the_sampler(sampler_module):
    assay = ASSAYS["constant"]
    run = loopy_run(np.random.default_rng(2), assay, n=16, k=4, prevalence=0.2)
    post = decode(run, assay, method="auto", exact_limit=4, max_sweeps=1, seed=7,
                  negative_below=0.02, positive_above=0.98)
    (selected, why, seed, lo, hi), = sampler_module
    assert list(selected) == [0] and "did not converge" in why
    assert (seed, lo, hi) == (7, 0.02, 0.98)
    exact = decode(run, assay, method="exact")
    np.testing.assert_allclose(post.probability, exact.probability, atol=1e-12)
    assert set(post.sample_method) == {"gibbs"} and post.method == "gibbs"
    assert np.all(post.mcse == 1e-3)
    assert any("re-decoded by gibbs" in w for w in post.warnings)
    assert any("stand-in sampler" in w for w in post.warnings)
    # the final answer converged (the sampler's verdict); BP's own verdict stays on record
    assert post.diagnostics["converged"] is True
    assert post.diagnostics["bp"]["converged"] is False


def test_no_fallback_for_an_explicit_bp_or_a_converged_run(sampler_module):
    assay = ASSAYS["constant"]
    run = loopy_run(np.random.default_rng(2), assay, n=16, k=4, prevalence=0.2)
    post = decode(run, assay, method="bp", max_sweeps=1)
    assert not sampler_module and set(post.sample_method) == {"bp"}
    assert any(w.startswith("WARNING: belief propagation did not converge")
               for w in post.warnings)
    post = decode(run, assay, method="auto", exact_limit=4, loopy_sampler_limit=0)
    assert not sampler_module and post.diagnostics["converged"]
    # by default a converged loopy group is still re-decoded by the sampler, from BP's answer
    post = decode(run, assay, method="auto", exact_limit=4)
    (selected, why, *_), = sampler_module
    assert "where belief propagation is approximate" in why and "converge" not in why
    assert set(post.sample_method) == {"gibbs"} and "loopy_check" in post.diagnostics


def test_without_the_sampler_there_is_no_fallback_and_a_loud_warning(monkeypatch):
    import bayespool.decoders as decode_module
    monkeypatch.setattr(decode_module, "fallback_decoder", lambda method, part: None)
    assay = ASSAYS["constant"]
    run = loopy_run(np.random.default_rng(2), assay, n=16, k=4, prevalence=0.2)
    post = decode(run, assay, method="auto", exact_limit=4, max_sweeps=1)
    assert set(post.sample_method) == {"bp-loopy"}  # loopy groups left to BP are marked
    assert any(w.startswith("WARNING: belief propagation did not converge") and
               "their probabilities are unreliable" in w for w in post.warnings)
